package restore

import (
	"fmt"

	"tessera/learn"
	"tessera/patches"
)

// The Kodak protocol, so that every figure in the project means the same:
// gray is BT.601 luma rounded half up; noise is N(0, σ²) added in float64
// with a seed derived from (seed, image name, σ), without clipping or
// rounding, as the denoising literature does.

// AddNoise returns img plus white Gaussian noise of standard deviation
// sigma (image units), seeded by (seed, name, sigma); no clipping, no
// rounding.
func AddNoise(img *patches.Image, sigma float64, seed uint64, name string) *patches.Image {
	r := learn.NewRand(learn.SubSeed(seed, name, fmt.Sprintf("sigma=%g", sigma)))
	out := img.Clone()
	for i, v := range out.Pix {
		out.Pix[i] = float32(float64(v) + sigma*r.NormFloat64())
	}
	return out
}
