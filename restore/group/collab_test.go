package group

import (
	"math"
	"testing"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
)

// The separable spectra are T·x·Tᵀ of each patch and channel computed
// naively (even and odd sides, two channels), and the adjoint puts back
// Tᵀ·s·T of each spectrum at its place.
func TestCollabTransforms(t *testing.T) {
	r := learn.NewRand(5)
	for _, p := range []int{8, 9} {
		const W, H, C, ya, rows = 21, 19, 2, 3, 5
		img := patches.New(W, H, C, 8)
		for i := range img.Pix {
			img.Pix[i] = float32(r.NormFloat64())
		}
		T := learn.DCTBasis(p)
		sp := newSpectra(p, W, H, C, 3)
		PW, n := W-p+1, C*p*p
		used := make([]bool, rows*PW)
		for i := range used {
			used[i] = i%3 != 1
		}
		R := make([]float64, C*(rows+p-1)*PW*p)
		spec := make([]float32, rows*PW*n)
		sp.forward(img, ya, rows, used, spec, R)
		x := make([]float64, n)
		for i, u := range used {
			if !u {
				continue
			}
			patches.Extract(img, i%PW, ya+i/PW, p, x, false)
			for c := 0; c < C; c++ {
				for k := 0; k < p; k++ {
					for l := 0; l < p; l++ {
						want := 0.0
						for a := 0; a < p; a++ {
							for b := 0; b < p; b++ {
								want += T[k][a] * x[c*p*p+a*p+b] * T[l][b]
							}
						}
						if got := float64(spec[i*n+(c*p+k)*p+l]); math.Abs(got-want) > 1e-5 {
							t.Fatalf("p %d position %d channel %d (%d,%d): %g, want %g", p, i, c, k, l, got, want)
						}
					}
				}
			}
		}
		w := make([]float64, len(used))
		for i, u := range used {
			if u {
				w[i] = 1
			}
		}
		sum := make([]float64, C*W*H)
		sp.adjoint(spec, w, ya, rows, sum, R)
		want := make([]float64, C*W*H)
		for i, u := range used {
			if !u {
				continue
			}
			x0, y0 := i%PW, ya+i/PW
			for c := 0; c < C; c++ {
				for a := 0; a < p; a++ {
					for b := 0; b < p; b++ {
						v := 0.0
						for k := 0; k < p; k++ {
							for l := 0; l < p; l++ {
								v += T[k][a] * float64(spec[i*n+(c*p+k)*p+l]) * T[l][b]
							}
						}
						want[c*W*H+(y0+a)*W+x0+b] += v
					}
				}
			}
		}
		for i, v := range sum {
			if math.Abs(v-want[i]) > 1e-9 {
				t.Fatalf("p %d: put back sample %d: %g, want %g", p, i, v, want[i])
			}
		}
	}
	// Four rows of three: twice the transform is 4× the block.
	const k, n = 4, 3
	x := make([]float64, k*n)
	e0 := 0.0
	for i := range x {
		x[i] = r.NormFloat64()
		e0 += x[i] * x[i]
	}
	a := append([]float64(nil), x...)
	whtRows(a, k, n)
	e1 := 0.0
	for _, v := range a {
		e1 += v * v
	}
	if math.Abs(e1-k*e0) > 1e-9 {
		t.Errorf("WHT energy %g, want %d × %g", e1, k, e0)
	}
	// Column 0 against the 4-point Hadamard matrix.
	h := [k][k]float64{{1, 1, 1, 1}, {1, -1, 1, -1}, {1, 1, -1, -1}, {1, -1, -1, 1}}
	for f := 0; f < k; f++ {
		v := 0.0
		for i := 0; i < k; i++ {
			v += h[f][i] * x[i*n]
		}
		if math.Abs(a[f*n]-v) > 1e-12 {
			t.Errorf("WHT row %d: %g, want %g", f, a[f*n], v)
		}
	}
	whtRows(a, k, n)
	for i := range a {
		if math.Abs(a[i]-k*x[i]) > 1e-12 {
			t.Fatalf("WHT twice, sample %d: %g, want %g", i, a[i], k*x[i])
		}
	}
}

// A noiseless pilot equal to the clean image makes the Wiener stage
// nearly ideal: on a smooth noisy image it removes most of the noise.
func TestCollabWithCleanPilot(t *testing.T) {
	const sigma = 20
	clean := patches.New(64, 64, 1, 8)
	for y := 0; y < 64; y++ {
		for x := 0; x < 64; x++ {
			clean.Pix[y*64+x] = float32(128 + 60*math.Sin(float64(x)/7)*math.Cos(float64(y)/9))
		}
	}
	noisy := restore.AddNoise(clean, sigma, 1, "collab")
	g := match(clean, matchParams{p: 8, step: 3, radius: 10, size: 16, maxDist: 1e9}, 1)
	out := collab(collabIn{noisy: noisy, pilot: clean, g: g, sigma: sigma, p: 8, workers: 2})
	ss := 0.0
	for i, v := range out.Pix {
		d := float64(v - clean.Pix[i])
		ss += d * d
	}
	rmse := math.Sqrt(ss / float64(len(out.Pix)))
	t.Logf("RMSE %.3f (σ %d)", rmse, sigma)
	if rmse > 0.25*sigma {
		t.Errorf("RMSE %.3f, want ≤ %.1f", rmse, 0.25*sigma)
	}
}

// The stage gives the same image whatever the worker count, and the same
// to rounding however the references are cut into stripes (the stripes
// depend on the image size alone).
func TestCollabIndependentOfWorkersAndStripes(t *testing.T) {
	clean := centreCrop(kodakGray(t, "kodim19.png"), 96, 80)
	noisy := restore.AddNoise(clean, 25, 1, "stripes")
	g := match(clean, matchParams{p: 8, step: 3, radius: 9, size: 16, maxDist: 1e9}, 1)
	whole := collab(collabIn{noisy: noisy, pilot: clean, g: g, sigma: 25, p: 8, workers: 1})
	old := stripeFloats
	defer func() { stripeFloats = old }()
	stripeFloats = 20 * 89 * 64 // about 20 rows of positions
	one := collab(collabIn{noisy: noisy, pilot: clean, g: g, sigma: 25, p: 8, workers: 1})
	three := collab(collabIn{noisy: noisy, pilot: clean, g: g, sigma: 25, p: 8, workers: 3})
	for i, v := range three.Pix {
		if v != one.Pix[i] {
			t.Fatalf("sample %d: %g with 3 workers, %g with 1", i, v, one.Pix[i])
		}
		if math.Abs(float64(v-whole.Pix[i])) > 1e-3 {
			t.Fatalf("sample %d: %g in stripes, %g whole", i, v, whole.Pix[i])
		}
	}
}
