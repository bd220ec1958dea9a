package restore

import (
	"errors"
	"math"
	"testing"

	"tessera/patches"
	"tessera/restore/internal/testkit"
	"tessera/restore/quality"
)

// The noisy input of the protocol at σ = 25 has PSNR 20·log10(255/25) =
// 20.17 dB (standard formula), here on a whole 768×512 Kodak image.
func TestProtocolNoisyPSNR(t *testing.T) {
	clean := kodakGray(t, "kodim03.png")
	noisy := AddNoise(clean, 25, 1, "kodim03.png")
	v, err := quality.PSNR(clean, noisy)
	if err != nil {
		t.Fatal(err)
	}
	if want := 20 * math.Log10(255.0/25); math.Abs(v-want) > 0.05 {
		t.Errorf("noisy PSNR %.3f dB, want %.3f ± 0.05", v, want)
	}
}

// On 256×256 centre crops at σ = 25 the restored image gains at least 7 dB
// (the published method gains 9–13 dB on these whole images, measured
// outside the project), and the learned dictionary beats the fixed DCT
// with the same coding (the finding of Elad & Aharon 2006).
func TestDenoiseKodakCrops(t *testing.T) {
	for _, name := range []string{"kodim03.png", "kodim19.png", "kodim23.png"} {
		clean := centreCrop(kodakGray(t, name), 256, 256)
		noisy := AddNoise(clean, 25, 1, name)
		opt := Defaults(25)
		out, res, err := Denoise(noisy, 25, opt)
		if err != nil {
			t.Fatal(err)
		}
		opt.Rounds = 0
		fixed, _, err := Denoise(noisy, 25, opt)
		if err != nil {
			t.Fatal(err)
		}
		pn, pl, pd := psnr(t, clean, noisy), psnr(t, clean, out), psnr(t, clean, fixed)
		t.Logf("%s: noisy %.2f dB, learned %.2f dB (%.2f atoms/patch), fixed DCT %.2f dB", name, pn, pl, res.MeanAtoms, pd)
		if pl < pn+7 {
			t.Errorf("%s: restored %.2f dB, want ≥ noisy %.2f + 7", name, pl, pn)
		}
		if pl <= pd {
			t.Errorf("%s: learned %.2f dB does not beat the fixed DCT %.2f dB", name, pl, pd)
		}
	}
}

// A 16-bit copy (8-bit ×257, σ ×257) restores to the same PSNR within 0.05 dB.
func TestDenoise16BitMatches8Bit(t *testing.T) {
	clean := centreCrop(kodakGray(t, "kodim23.png"), 128, 128)
	noisy := AddNoise(clean, 25, 1, "kodim23.png")
	opt := Defaults(25)
	opt.Train = 4000
	opt.Rounds = 3
	testkit.SameAt16Bits(t, clean, noisy, 25, func(img *patches.Image, sigma float64) (*patches.Image, error) {
		out, _, err := Denoise(img, sigma, opt)
		return out, err
	})
}

func TestDenoiseSameBitsWhateverWorkers(t *testing.T) {
	img := patches.New(64, 48, 3, 8)
	r := newTestRand()
	for i := range img.Pix {
		img.Pix[i] = float32(128 + 40*math.Sin(float64(i%64)/5) + 20*r.NormFloat64())
	}
	for _, mode := range []ColorMode{ColorJoint, ColorSeparate} {
		opt := Defaults(20)
		opt.Train, opt.Rounds, opt.Atoms, opt.Color = 800, 2, 64, mode
		opt.Workers = 1
		a, _, err := Denoise(img, 20, opt)
		if err != nil {
			t.Fatal(err)
		}
		opt.Workers = 4
		b, _, _ := Denoise(img, 20, opt)
		for i := range a.Pix {
			if a.Pix[i] != b.Pix[i] {
				t.Fatalf("color mode %d: sample %d differs between 1 and 4 workers", mode, i)
			}
		}
	}
}

func TestDenoiseRejectsBadOptions(t *testing.T) {
	img := patches.New(6, 6, 1, 8)
	var oe *OptionError
	if _, _, err := Denoise(img, 10, Defaults(10)); !errors.As(err, &oe) || oe.Field != "patch" {
		t.Errorf("image smaller than a patch: %v", err)
	}
	big := patches.New(32, 32, 1, 8)
	for _, s := range []float64{0, -1, math.NaN(), math.Inf(1)} {
		if _, _, err := Denoise(big, s, Defaults(10)); !errors.As(err, &oe) || oe.Field != "sigma" {
			t.Errorf("sigma %g: %v", s, err)
		}
	}
}

// The opponent transform is orthonormal: it keeps white noise white with
// the same σ, and inverts exactly.
func TestOpponentRoundTrip(t *testing.T) {
	img := patches.New(5, 4, 3, 8)
	for i := range img.Pix {
		img.Pix[i] = float32(i * 7 % 255)
	}
	back := FromOpponent(ToOpponent(img))
	for i := range img.Pix {
		if math.Abs(float64(back.Pix[i]-img.Pix[i])) > 1e-3 {
			t.Fatalf("sample %d: %g → %g", i, img.Pix[i], back.Pix[i])
		}
	}
}
