package restore

import (
	"fmt"
	"os"
	"strconv"
	"testing"

	"tessera/restore/internal/testkit"
)

// BenchmarkKodakProtocol runs the project's Kodak protocol (see
// protocol.go) and prints per-image and mean PSNR, SSIM and seconds:
//
//	go test ./restore -run x -bench KodakProtocol -benchtime 1x
//
// TESSERA_BENCH_SIGMAS (default "15,25,50"), TESSERA_BENCH_LIMIT (the first
// n images) or TESSERA_BENCH_IMAGES (numbers, "3,19"), TESSERA_BENCH_CROP
// (centre crops of that side), TESSERA_BENCH_COLOR=1 (RGB instead of
// gray) and TESSERA_BENCH_TRAIN /
// TESSERA_BENCH_ROUNDS / TESSERA_BENCH_STRIDE (option overrides) narrow or vary a run.
func BenchmarkKodakProtocol(b *testing.B) {
	sigmas := testkit.BenchSigmas(b)
	color := os.Getenv("TESSERA_BENCH_COLOR") == "1"
	names, clean := testkit.BenchKodak(b)
	var imgs []BenchImage
	for i, name := range names {
		imgs = append(imgs, BenchImage{Name: name, Clean: clean[i]})
	}
	b.ResetTimer()
	for it := 0; it < b.N; it++ {
		for _, s := range sigmas {
			opt := Defaults(s)
			if v := os.Getenv("TESSERA_BENCH_TRAIN"); v != "" {
				opt.Train, _ = strconv.Atoi(v)
			}
			if v := os.Getenv("TESSERA_BENCH_ROUNDS"); v != "" {
				opt.Rounds, _ = strconv.Atoi(v)
			}
			if v := os.Getenv("TESSERA_BENCH_STRIDE"); v != "" {
				opt.Stride, _ = strconv.Atoi(v)
			}
			if os.Getenv("TESSERA_BENCH_SEPARATE") == "1" {
				opt.Color = ColorSeparate
			}
			var sp, ss, st float64
			for _, img := range imgs {
				r, _, _, err := BenchCase(img, s, 1, opt, false)
				if err != nil {
					b.Fatal(err)
				}
				fmt.Printf("%-12s σ %3g  noisy %6.2f  psnr %6.2f  ssim %.4f  %6.2f s\n", r.Image, s, r.PSNRNoisy, r.PSNR, r.SSIM, r.Seconds)
				sp += r.PSNR
				ss += r.SSIM
				st += r.Seconds
			}
			k := float64(len(imgs))
			fmt.Printf("MEAN σ %g color %v train %d rounds %d: psnr %.2f ssim %.4f %.2f s/image\n", s, color, opt.Train, opt.Rounds, sp/k, ss/k, st/k)
		}
	}
}
