package group

import (
	"fmt"
	"os"
	"reflect"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"tessera/restore"
	"tessera/restore/internal/testkit"
	"tessera/restore/quality"
)

// BenchmarkGroupKodak runs the Kodak protocol (restore/protocol.go) with
// the group method and with the default K-SVD method side by side, and
// prints per image and per σ the PSNR, SSIM and seconds of both and their
// ratios (with the process's CPU seconds beside the wall seconds, which a
// shared machine inflates):
//
//	go test ./restore/group -run '^$' -bench GroupKodak -benchtime 1x
//
// TESSERA_BENCH_SIGMAS (default "15,25,50"), TESSERA_BENCH_LIMIT (the first
// n images) or TESSERA_BENCH_IMAGES (numbers, "3,19"), TESSERA_BENCH_CROP
// (centre crops of that side), TESSERA_BENCH_COLOR=1 (RGB), and
// TESSERA_BENCH_KSVD=0 (group method only) narrow a run;
// TESSERA_GROUP_PARAMS ("Window=15,Group=32") overrides DefaultParams and
// TESSERA_BENCH_OPTS ("Bound=1.1") overrides restore.Defaults for both.
func BenchmarkGroupKodak(b *testing.B) {
	sigmas := testkit.BenchSigmas(b)
	crop, _ := strconv.Atoi(os.Getenv("TESSERA_BENCH_CROP"))
	color := os.Getenv("TESSERA_BENCH_COLOR") == "1"
	withKSVD := os.Getenv("TESSERA_BENCH_KSVD") != "0"
	names, clean := testkit.BenchKodak(b)
	var imgs []restore.BenchImage
	for i, name := range names {
		imgs = append(imgs, restore.BenchImage{Name: name, Clean: clean[i]})
	}
	b.ResetTimer()
	for it := 0; it < b.N; it++ {
		for _, s := range sigmas {
			opt := restore.Defaults(s)
			if err := setFields(&opt, os.Getenv("TESSERA_BENCH_OPTS")); err != nil {
				b.Fatal(err)
			}
			pr := DefaultParams(s)
			if err := setFields(&pr, os.Getenv("TESSERA_GROUP_PARAMS")); err != nil {
				b.Fatal(err)
			}
			var gp, gs, gt, gc, kp, ks, kt, kc float64
			for _, img := range imgs {
				c0 := cpuSeconds()
				g, err := benchGroup(img, s, opt, pr)
				if err != nil {
					b.Fatal(err)
				}
				c1 := cpuSeconds()
				gp, gs, gt, gc = gp+g.PSNR, gs+g.SSIM, gt+g.Seconds, gc+c1-c0
				line := fmt.Sprintf("%-12s σ %3g  group %6.2f dB %.4f %6.2f s (cpu %6.2f)", img.Name, s, g.PSNR, g.SSIM, g.Seconds, c1-c0)
				if withKSVD {
					k, _, _, err := restore.BenchCase(img, s, 1, opt, false)
					if err != nil {
						b.Fatal(err)
					}
					c2 := cpuSeconds()
					kp, ks, kt, kc = kp+k.PSNR, ks+k.SSIM, kt+k.Seconds, kc+c2-c1
					line += fmt.Sprintf("  ksvd %6.2f dB %.4f %6.2f s (cpu %6.2f)  gain %+.2f dB  time ×%.2f", k.PSNR, k.SSIM, k.Seconds, c2-c1, g.PSNR-k.PSNR, g.Seconds/k.Seconds)
				}
				fmt.Println(line)
			}
			n := float64(len(imgs))
			line := fmt.Sprintf("MEAN σ %g (%d images, color %v, mode %d, crop %d): group %.2f dB %.4f %.2f s (cpu %.2f)", s, len(imgs), color, opt.Color, crop, gp/n, gs/n, gt/n, gc/n)
			if withKSVD {
				line += fmt.Sprintf("; ksvd %.2f dB %.4f %.2f s (cpu %.2f); gain %+.2f dB, SSIM %+.4f, time ×%.2f (cpu ×%.2f)",
					kp/n, ks/n, kt/n, kc/n, (gp-kp)/n, (gs-ks)/n, gt/kt, gc/kc)
			}
			fmt.Println(line)
		}
	}
}

// cpuSeconds is the process's user and system time so far: on a shared
// machine it shows the work apart from the waiting.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}

// benchGroup is restore.BenchCase for the group method: the same noise,
// scored after rounding and clipping; seconds time the restoration alone.
func benchGroup(img restore.BenchImage, sigma float64, opt restore.Options, pr Params) (restore.BenchRun, error) {
	noisy := restore.AddNoise(img.Clean, sigma, 1, img.Name)
	t0 := time.Now()
	out, _, err := DenoiseParams(noisy, sigma, opt, pr)
	dt := time.Since(t0).Seconds()
	if err != nil {
		return restore.BenchRun{}, fmt.Errorf("%s: %w", img.Name, err)
	}
	out.Quantize()
	p, err := quality.PSNR(img.Clean, out)
	if err != nil {
		return restore.BenchRun{}, err
	}
	s, err := quality.SSIM(img.Clean, out)
	if err != nil {
		return restore.BenchRun{}, err
	}
	return restore.BenchRun{Image: img.Name, Method: "group", Sigma: sigma, PSNR: p, SSIM: s, Seconds: dt}, nil
}

// setFields applies "Field=value,..." to the numeric and boolean fields of
// the struct that ptr points to.
func setFields(ptr any, spec string) error {
	if spec == "" {
		return nil
	}
	v := reflect.ValueOf(ptr).Elem()
	for _, kv := range strings.Split(spec, ",") {
		name, val, ok := strings.Cut(kv, "=")
		f := v.FieldByName(strings.TrimSpace(name))
		if !ok || !f.IsValid() {
			return fmt.Errorf("bad parameter %q", kv)
		}
		switch f.Kind() {
		case reflect.Int, reflect.Uint64:
			if f.Kind() == reflect.Uint64 {
				x, err := strconv.ParseUint(val, 10, 64)
				if err != nil {
					return err
				}
				f.SetUint(x)
				continue
			}
			x, err := strconv.Atoi(val)
			if err != nil {
				return err
			}
			f.SetInt(int64(x))
		case reflect.Float64:
			x, err := strconv.ParseFloat(val, 64)
			if err != nil {
				return err
			}
			f.SetFloat(x)
		case reflect.Bool:
			x, err := strconv.ParseBool(val)
			if err != nil {
				return err
			}
			f.SetBool(x)
		default:
			return fmt.Errorf("parameter %s cannot be set", name)
		}
	}
	return nil
}
