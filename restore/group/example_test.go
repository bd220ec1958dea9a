package group_test

import (
	"fmt"
	"math"

	"tessera/patches"
	"tessera/restore"
	"tessera/restore/group"
	"tessera/restore/quality"
)

func ExampleDenoise() {
	// A smooth 64×64 gray image with white noise of σ = 20.
	clean := patches.New(64, 64, 1, 8)
	for y := 0; y < 64; y++ {
		for x := 0; x < 64; x++ {
			clean.Pix[y*64+x] = float32(128 + 60*math.Sin(float64(x)/7)*math.Cos(float64(y)/9))
		}
	}
	noisy := restore.AddNoise(clean, 20, 1, "example")
	opt := restore.Defaults(20)
	opt.Train, opt.Rounds = 2000, 3
	out, _, err := group.Denoise(noisy, 20, opt)
	if err != nil {
		fmt.Println(err)
		return
	}
	out.Quantize()
	before, _ := quality.PSNR(clean, noisy)
	after, _ := quality.PSNR(clean, out)
	fmt.Println("gain above 8 dB:", after-before > 8)
	// Output: gain above 8 dB: true
}
