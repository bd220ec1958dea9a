package restore

import (
	"math/rand/v2"
	"testing"

	"tessera/patches"
)

// boxMean is a 3×3 mean (edges clamped): a denoiser whose output at a
// pixel depends on its neighbours only, so any tiling with a margin of 1
// must reproduce the whole result exactly.
func boxMean(img *patches.Image, _ float64, _ Options) (*patches.Image, *Result, error) {
	out := patches.New(img.W, img.H, img.C, img.Depth)
	for c := 0; c < img.C; c++ {
		src, dst := img.Plane(c), out.Plane(c)
		for y := 0; y < img.H; y++ {
			for x := 0; x < img.W; x++ {
				s := float32(0)
				for dy := -1; dy <= 1; dy++ {
					for dx := -1; dx <= 1; dx++ {
						xx, yy := min(max(x+dx, 0), img.W-1), min(max(y+dy, 0), img.H-1)
						s += src[yy*img.W+xx]
					}
				}
				dst[y*img.W+x] = s / 9
			}
		}
	}
	return out, &Result{MeanAtoms: 1}, nil
}

func TestDenoiseOverlappedStitches(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	img := patches.New(203, 150, 3, 8)
	for i := range img.Pix {
		img.Pix[i] = float32(r.IntN(256))
	}
	whole, _, _ := boxMean(img, 1, Defaults(10))
	for _, tile := range []int{16, 50, 64, 202} {
		got, res, err := DenoiseOverlapped(img, 1, tile, 1, Defaults(10), boxMean)
		if err != nil {
			t.Fatal(err)
		}
		for i := range whole.Pix {
			if got.Pix[i] != whole.Pix[i] {
				t.Fatalf("tile %d: sample %d is %g, whole run %g", tile, i, got.Pix[i], whole.Pix[i])
			}
		}
		if res.MeanAtoms != 1 {
			t.Errorf("tile %d: mean atoms %g, want 1", tile, res.MeanAtoms)
		}
	}
	if _, _, err := DenoiseOverlapped(img, 1, 15, 1, Defaults(10), boxMean); err == nil {
		t.Error("a tile under twice the patch side must be refused")
	}
}
