package noise

import (
	"math"
	"math/rand/v2"
	"testing"

	"tessera/patches"
)

// smallScene is a w×w frame, flat or with shading and 12-pixel checks
// (texture that leaves few weak-texture patches in a small frame), plus
// white Gaussian noise of σ = 10.
func smallScene(w int, textured bool, seed uint64) *patches.Image {
	rng := rand.New(rand.NewPCG(seed, 5))
	img := patches.New(w, w, 1, 8)
	for y := 0; y < w; y++ {
		for x := 0; x < w; x++ {
			v := 100.0
			if textured {
				v = 128 + 60*math.Sin(2*math.Pi*float64(x)/float64(w)) + 40*math.Cos(4*math.Pi*float64(y)/float64(w))
				if (x/12+y/12)%2 == 0 {
					v -= 30
				}
			}
			img.Pix[y*w+x] = float32(v + 10*rng.NormFloat64())
		}
	}
	return img
}

// Small frames: without the Marchenko–Pastur correction the smallest
// eigenvalue reads about 17 % low on a flat 48×48 frame (the lower edge
// (1−√(n/k))² of Marchenko & Pastur 1967 with n = 49, k = 42²), and the
// textured 48×48 and 64×64 frames read about half the truth. The 5 % (mean
// of 8 frames) and 20 % (each frame) tolerances are the project's.
func TestEstimateSmallFrames(t *testing.T) {
	for _, tc := range []struct {
		w        int
		textured bool
	}{{48, false}, {64, false}, {48, true}, {64, true}, {32, true}, {96, true}} {
		const frames = 8
		var mean float64
		for seed := range uint64(frames) {
			s := PCA(smallScene(tc.w, tc.textured, seed), 0)
			if math.Abs(s-10) > 2 {
				t.Errorf("%d×%d textured=%v seed %d: PCA %.2f, true σ 10", tc.w, tc.w, tc.textured, seed, s)
			}
			mean += s / frames
		}
		t.Logf("%d×%d textured=%v: mean PCA estimate %.3f (true 10)", tc.w, tc.w, tc.textured, mean)
		if math.Abs(mean-10) > 0.5 {
			t.Errorf("%d×%d textured=%v: mean PCA estimate %.3f, true σ 10", tc.w, tc.w, tc.textured, mean)
		}
	}
	// Under 8n = 392 patch positions (24×24 has 324) PCA is Wavelet.
	img := smallScene(24, false, 1)
	if p, w := PCA(img, 0), Wavelet(img, 0); p != w {
		t.Errorf("24×24: PCA %v, want the Wavelet fallback %v", p, w)
	}
}
