package restore

import (
	"fmt"
	"time"

	"tessera/patches"
	"tessera/restore/quality"
)

// BenchImage is one clean image of a test set.
type BenchImage struct {
	Name  string
	Clean *patches.Image
}

// BenchRun is the outcome of one image at one σ.
type BenchRun struct {
	Image     string  `json:"image"`
	Method    string  `json:"method"`
	Sigma     float64 `json:"sigma"`
	Color     bool    `json:"color"`
	PSNRNoisy float64 `json:"psnr_noisy"`
	PSNR      float64 `json:"psnr"`
	SSIM      float64 `json:"ssim"`
	Seconds   float64 `json:"seconds"`
}

// BenchCase runs the protocol on one image: seeded noise of σ (0–255 units)
// added without clipping, restored with opt (or the fixed DCT when fixed is
// set), scored after rounding and clipping as a file would be stored.
// Seconds time the restoration alone.
func BenchCase(img BenchImage, sigma float64, seed uint64, opt Options, fixed bool) (BenchRun, *patches.Image, *patches.Image, error) {
	noisy := AddNoise(img.Clean, sigma, seed, img.Name)
	method := "ksvd"
	if fixed {
		opt.Rounds = 0
		opt.Dict = nil
		method = "dct"
	}
	t0 := time.Now()
	out, _, err := Denoise(noisy, sigma, opt)
	dt := time.Since(t0).Seconds()
	if err != nil {
		return BenchRun{}, nil, nil, fmt.Errorf("%s: %w", img.Name, err)
	}
	out.Quantize()
	pn, _ := quality.PSNR(img.Clean, noisy)
	p, err := quality.PSNR(img.Clean, out)
	if err != nil {
		return BenchRun{}, nil, nil, err
	}
	s, err := quality.SSIM(img.Clean, out)
	if err != nil {
		return BenchRun{}, nil, nil, err
	}
	return BenchRun{Image: img.Name, Method: method, Sigma: sigma, Color: img.Clean.C > 1,
		PSNRNoisy: pn, PSNR: p, SSIM: s, Seconds: dt}, noisy, out, nil
}
