package restore

import (
	"fmt"
	"math"
	"slices"

	"tessera/patches"
	"tessera/restore/noise"
)

// DenoisePhoton restores an image degraded by photon-limited noise,
// z = α·Poisson(y/α) + N(0, σ²), with gain alpha (image units per photon)
// and read noise sigma (image units). Every sample is stabilised with the
// generalized Anscombe transform (noise ≈ unit Gaussian), denoised with
// Denoise at σ = 1 in those units, and mapped back with the closed-form
// exact unbiased inverse (Mäkitalo & Foi 2011, 2013; see package noise).
// The result is in the image's units, clipped to 0 … Peak, not rounded.
// opt is used as by Denoise; a bad alpha or sigma is an *OptionError with
// Field "gain" or "read-noise".
func DenoisePhoton(img *patches.Image, alpha, sigma float64, opt Options) (*patches.Image, *Result, error) {
	return DenoisePhotonWith(img, alpha, sigma, opt, Denoise)
}

// Denoiser restores an image degraded by white Gaussian noise of standard
// deviation sigma in the image's units, as Denoise does.
type Denoiser func(img *patches.Image, sigma float64, opt Options) (*patches.Image, *Result, error)

// DenoisePhotonWith is DenoisePhoton with another Gaussian denoiser in the
// stabilised domain (the group method, for one).
func DenoisePhotonWith(img *patches.Image, alpha, sigma float64, opt Options, den Denoiser) (*patches.Image, *Result, error) {
	switch {
	case !(alpha > 0) || math.IsInf(alpha, 0):
		return nil, nil, &OptionError{"gain", fmt.Sprintf("the gain α must be a positive number of image units per photon, got %g", alpha)}
	case !(sigma >= 0) || math.IsInf(sigma, 0):
		return nil, nil, &OptionError{"read-noise", fmt.Sprintf("the read noise σ must be a number ≥ 0 in image units, got %g", sigma)}
	}
	if err := opt.check(img, 1); err != nil {
		return nil, nil, err
	}
	d := noise.GATImage(img, alpha, sigma)
	// Denoise works on the 0–255 scale of its image's depth, where the
	// published settings (λ = 30/σ) hold: the stabilised range is stretched
	// to 0 … 255 like an 8-bit frame, so its unit noise becomes σ = s. The
	// range is taken between the 0.1 % and 99.9 % quantiles, so that a few
	// hot or dead pixels do not shrink it; a range under one noise
	// deviation is as good as flat.
	lo, hi := robustRange(d.Pix)
	s := 255 / math.Max(hi-lo, 1)
	work := patches.New(img.W, img.H, img.C, 8)
	for i, v := range d.Pix {
		work.Pix[i] = float32((float64(v) - lo) * s)
	}
	out, res, err := den(work, s, opt)
	if err != nil {
		return nil, nil, err
	}
	for i, v := range out.Pix {
		out.Pix[i] = float32(float64(v)/s + lo)
	}
	back := noise.InverseGATImage(out, alpha, sigma)
	back.Depth = img.Depth
	peak := float32(img.Peak())
	for i, v := range back.Pix {
		back.Pix[i] = min(max(v, 0), peak)
	}
	return back, res, nil
}

// robustRange returns the 0.1 % and 99.9 % quantiles of v, from a regular
// subsample of at most 1<<17 values.
func robustRange(v []float32) (lo, hi float64) {
	step := max(1, len(v)>>17)
	sub := make([]float32, 0, len(v)/step+1)
	for i := 0; i < len(v); i += step {
		sub = append(sub, v[i])
	}
	slices.Sort(sub)
	q := func(p float64) float64 { return float64(sub[int(p*float64(len(sub)-1))]) }
	return q(0.001), q(0.999)
}
