package quality

import (
	"fmt"
	"math"

	"tessera/patches"
)

// SizeError reports two images that cannot be compared: different sizes or
// channel counts, or (for SSIM) an image smaller than the window.
type SizeError struct {
	RefW, RefH, RefC    int
	TestW, TestH, TestC int
	Reason              string
}

func (e *SizeError) Error() string {
	return fmt.Sprintf("quality: cannot compare %dx%dx%d with %dx%dx%d: %s",
		e.RefW, e.RefH, e.RefC, e.TestW, e.TestH, e.TestC, e.Reason)
}

func sizeError(ref, test *patches.Image, reason string) error {
	return &SizeError{ref.W, ref.H, ref.C, test.W, test.H, test.C, reason}
}

func sameSize(ref, test *patches.Image) error {
	if ref.W != test.W || ref.H != test.H || ref.C != test.C {
		return sizeError(ref, test, "sizes differ")
	}
	if len(ref.Pix) != ref.W*ref.H*ref.C || len(test.Pix) != test.W*test.H*test.C {
		return sizeError(ref, test, "pixel buffer does not match the size")
	}
	return nil
}

// MSE is the mean squared difference over all pixels and channels.
func MSE(ref, test *patches.Image) (float64, error) {
	if err := sameSize(ref, test); err != nil {
		return 0, err
	}
	var s float64
	for i, r := range ref.Pix {
		d := float64(r) - float64(test.Pix[i])
		s += d * d
	}
	return s / float64(len(ref.Pix)), nil
}

// PSNR is the peak signal-to-noise ratio in dB, with the peak of the
// reference's bit depth; it is +Inf for identical images.
func PSNR(ref, test *patches.Image) (float64, error) {
	mse, err := MSE(ref, test)
	if err != nil {
		return 0, err
	}
	if mse == 0 {
		return math.Inf(1), nil
	}
	p := ref.Peak()
	return 10 * math.Log10(p*p/mse), nil
}

// BT.601 luma weights.
const (
	wR = 0.299
	wG = 0.587
	wB = 0.114
)

// Luma returns the BT.601 luma of a three-channel image as one channel; with
// round set, each value is rounded half up (as an 8- or 16-bit gray file
// would store it). A one-channel image is returned as a copy (rounded if
// asked). Luma panics for any other channel count.
func Luma(img *patches.Image, round bool) *patches.Image {
	var out *patches.Image
	switch img.C {
	case 1:
		out = img.Clone()
	case 3:
		out = patches.New(img.W, img.H, 1, img.Depth)
		r, g, b := img.Plane(0), img.Plane(1), img.Plane(2)
		for i := range out.Pix {
			v := luma(float64(r[i]), float64(g[i]), float64(b[i]))
			if round {
				// Rounded in float64: a float32 luma may already sit on a half.
				v = math.Floor(v + 0.5)
			}
			out.Pix[i] = float32(v)
		}
		return out
	default:
		panic(fmt.Sprintf("quality: Luma of a %d-channel image", img.C))
	}
	if round {
		for i, v := range out.Pix {
			out.Pix[i] = float32(math.Floor(float64(v) + 0.5))
		}
	}
	return out
}

func luma(r, g, b float64) float64 { return wR*r + wG*g + wB*b }
