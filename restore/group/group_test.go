package group

import (
	"errors"
	"math"
	"testing"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
	"tessera/restore/internal/testkit"
)

// The acceptance check: on two Kodak crops at σ = 25 the group
// method beats the default K-SVD method on PSNR (LSSC, Mairal et al. 2009,
// report gains of this kind over K-SVD on natural images; the check asks
// only for a gain).
func TestGroupBeatsKSVDOnKodakCrops(t *testing.T) {
	for _, name := range []string{"kodim03.png", "kodim19.png"} {
		clean := centreCrop(kodakGray(t, name), 192, 192)
		noisy := restore.AddNoise(clean, 25, 1, name)
		opt := restore.Defaults(25)
		ks, _, err := restore.Denoise(noisy, 25, opt)
		if err != nil {
			t.Fatal(err)
		}
		gr, res, err := Denoise(noisy, 25, opt)
		if err != nil {
			t.Fatal(err)
		}
		pn, pk, pg := psnr(t, clean, noisy), psnr(t, clean, ks), psnr(t, clean, gr)
		t.Logf("%s: noisy %.2f dB, K-SVD %.2f dB, group %.2f dB (%.2f atoms/patch)", name, pn, pk, pg, res.MeanAtoms)
		if pg <= pk {
			t.Errorf("%s: group %.2f dB does not beat K-SVD %.2f dB", name, pg, pk)
		}
	}
}

// Pure flat gray plus noise comes back flat: the residual standard
// deviation about the true level is at most 0.2σ (the bound).
func TestFlatGrayStaysFlat(t *testing.T) {
	const sigma = 25
	clean := patches.New(128, 128, 1, 8)
	for i := range clean.Pix {
		clean.Pix[i] = 128
	}
	noisy := restore.AddNoise(clean, sigma, 1, "flat")
	out, _, err := Denoise(noisy, sigma, restore.Defaults(sigma))
	if err != nil {
		t.Fatal(err)
	}
	ss := 0.0
	for _, v := range out.Pix {
		d := float64(v) - 128
		ss += d * d
	}
	sd := math.Sqrt(ss / float64(len(out.Pix)))
	t.Logf("residual standard deviation %.3f (σ = %d)", sd, sigma)
	if sd > 0.2*sigma {
		t.Errorf("residual standard deviation %.3f, want ≤ %.1f", sd, 0.2*sigma)
	}
}

// A 16-bit copy (8-bit ×257, σ ×257) restores to the same PSNR within
// 0.05 dB: the method works on the 0–255 scale whatever the depth.
func TestGroup16BitMatches8Bit(t *testing.T) {
	clean := centreCrop(kodakGray(t, "kodim23.png"), 128, 128)
	noisy := restore.AddNoise(clean, 25, 1, "kodim23.png")
	opt := restore.Defaults(25)
	opt.Train, opt.Rounds = 4000, 3
	testkit.SameAt16Bits(t, clean, noisy, 25, func(img *patches.Image, sigma float64) (*patches.Image, error) {
		out, _, err := Denoise(img, sigma, opt)
		return out, err
	})
}

// Colour, coded jointly (Mairal, Elad & Sapiro 2008) or per opponent
// channel: both restore a Kodak crop by at least 7 dB over the noisy input
// at σ = 25, the margin restore's own test asks of K-SVD on gray crops.
func TestGroupColour(t *testing.T) {
	clean := centreCrop(loadPNG(t, sharedPath(t, "kodak", "kodim23.png")), 96, 96)
	noisy := restore.AddNoise(clean, 25, 1, "kodim23.png")
	for _, mode := range []restore.ColorMode{restore.ColorJoint, restore.ColorSeparate} {
		opt := restore.Defaults(25)
		opt.Train, opt.Rounds, opt.Color = 3000, 3, mode
		out, res, err := Denoise(noisy, 25, opt)
		if err != nil {
			t.Fatal(err)
		}
		pn, po := psnr(t, clean, noisy), psnr(t, clean, out)
		t.Logf("colour mode %d: noisy %.2f dB, restored %.2f dB, atoms of length %d", mode, pn, po, res.Dict.N)
		if po < pn+7 {
			t.Errorf("colour mode %d: %.2f dB, want ≥ noisy %.2f + 7", mode, po, pn)
		}
		// The first pass's dictionary, on its own patch side.
		q := DefaultParams(25).Patch
		if want := map[restore.ColorMode]int{restore.ColorJoint: 3 * q * q, restore.ColorSeparate: q * q}[mode]; res.Dict.N != want {
			t.Errorf("colour mode %d: atoms of length %d, want %d", mode, res.Dict.N, want)
		}
	}
}

func TestGroupSameBitsWhateverWorkers(t *testing.T) {
	img := patches.New(64, 48, 3, 8)
	r := learn.NewRand(99)
	for i := range img.Pix {
		img.Pix[i] = float32(128 + 40*math.Sin(float64(i%64)/5) + 20*r.NormFloat64())
	}
	for _, second := range []Second{SecondNone, SecondWiener, SecondCollab} {
		for _, mode := range []restore.ColorMode{restore.ColorJoint, restore.ColorSeparate} {
			opt := restore.Defaults(20)
			opt.Train, opt.Rounds, opt.Atoms, opt.Color = 800, 2, 64, mode
			pr := DefaultParams(20)
			pr.Second = second
			opt.Workers = 1
			a, _, err := DenoiseParams(img, 20, opt, pr)
			if err != nil {
				t.Fatal(err)
			}
			opt.Workers = 3
			b, _, _ := DenoiseParams(img, 20, opt, pr)
			for i := range a.Pix {
				if a.Pix[i] != b.Pix[i] {
					t.Fatalf("second pass %d, colour mode %d: sample %d differs between 1 and 3 workers", second, mode, i)
				}
			}
		}
	}
}

// Every second pass runs, reports its stages in order and improves on the
// noisy input.
func TestSecondPasses(t *testing.T) {
	clean := centreCrop(kodakGray(t, "kodim19.png"), 96, 96)
	noisy := restore.AddNoise(clean, 25, 1, "kodim19.png")
	for _, second := range []Second{SecondGuided, SecondIterative, SecondWiener, SecondCollab} {
		opt := restore.Defaults(25)
		opt.Train, opt.Rounds = 2000, 2
		var stages []restore.Stage
		opt.Progress = func(s restore.Stage) { stages = append(stages, s) }
		pr := DefaultParams(25)
		pr.Second, pr.Rounds2 = second, 1
		out, _, err := DenoiseParams(noisy, 25, opt, pr)
		if err != nil {
			t.Fatal(err)
		}
		pn, po := psnr(t, clean, noisy), psnr(t, clean, out)
		t.Logf("second pass %d: noisy %.2f dB, restored %.2f dB", second, pn, po)
		if po < pn+5 {
			t.Errorf("second pass %d: %.2f dB, want ≥ noisy %.2f + 5", second, po, pn)
		}
		rounds := 3 // SecondCollab trains no second dictionary
		if second == SecondCollab {
			rounds = 2
		}
		trained, coded := 0, 0
		for _, s := range stages {
			switch s.Name {
			case "train":
				trained++
				if s.Round != trained || s.Rounds != rounds {
					t.Errorf("second pass %d: train stage %d/%d, want %d/%d", second, s.Round, s.Rounds, trained, rounds)
				}
			case "code":
				coded++
				if s.Done != coded || s.Done > s.Total {
					t.Errorf("second pass %d: code stage %d/%d out of order", second, s.Done, s.Total)
				}
			}
		}
		if trained != rounds || coded == 0 || stages[len(stages)-1].Done != stages[len(stages)-1].Total {
			t.Errorf("second pass %d: %d train and %d code stages, last %+v", second, trained, coded, stages[len(stages)-1])
		}
	}
}

func TestGroupRejectsBadOptions(t *testing.T) {
	var oe *restore.OptionError
	if _, _, err := Denoise(patches.New(6, 6, 1, 8), 10, restore.Defaults(10)); !errors.As(err, &oe) || oe.Field != "patch" {
		t.Errorf("image smaller than a patch: %v", err)
	}
	big := patches.New(32, 32, 1, 8)
	for _, s := range []float64{0, -1, math.NaN(), math.Inf(1)} {
		if _, _, err := Denoise(big, s, restore.Defaults(10)); !errors.As(err, &oe) || oe.Field != "sigma" {
			t.Errorf("sigma %g: %v", s, err)
		}
	}
	var pe *ParamError
	pr := DefaultParams(10)
	pr.Group = 0
	if _, _, err := DenoiseParams(big, 10, restore.Defaults(10), pr); !errors.As(err, &pe) || pe.Field != "group" {
		t.Errorf("group size 0: %v", err)
	}
}

// Images of one patch, odd sizes and two channels restore without error
// and stay finite.
func TestGroupSmallAndOddImages(t *testing.T) {
	for _, sz := range [][3]int{{8, 8, 1}, {9, 13, 1}, {23, 11, 2}, {17, 9, 3}} {
		img := patches.New(sz[0], sz[1], sz[2], 8)
		r := learn.NewRand(uint64(sz[0]))
		for i := range img.Pix {
			img.Pix[i] = float32(100 + 20*r.NormFloat64())
		}
		for _, mode := range []restore.ColorMode{restore.ColorJoint, restore.ColorSeparate} {
			opt := restore.Defaults(20)
			opt.Train, opt.Atoms, opt.Rounds, opt.Color = 64, 64, 1, mode
			out, _, err := Denoise(img, 20, opt)
			if err != nil {
				t.Fatalf("%v mode %d: %v", sz, mode, err)
			}
			for i, v := range out.Pix {
				if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
					t.Fatalf("%v mode %d: sample %d is %g", sz, mode, i, v)
				}
			}
		}
	}
}
