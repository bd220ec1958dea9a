package group

import (
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"

	"tessera/patches"
	"tessera/restore"
	"tessera/restore/internal/testkit"
)

// fillParams are DefaultFillParams with TESSERA_FILL_PARAMS
// ("Iters=10,THi=30") applied.
func fillParams(t testing.TB) FillParams {
	fp := DefaultFillParams()
	if err := setFields(&fp, os.Getenv("TESSERA_FILL_PARAMS")); err != nil {
		t.Fatal(err)
	}
	return fp
}

func dctFill(t testing.TB, img *patches.Image, miss []bool) *patches.Image {
	opt := restore.InpaintDefaults(0)
	opt.Fill = restore.FillTransform
	out, _, err := restore.Inpaint(img, miss, 0, opt)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func checkKnown(t testing.TB, img, out *patches.Image, miss []bool) {
	t.Helper()
	for i, m := range miss {
		if !m && out.Pix[i] != img.Pix[i] {
			t.Fatalf("known pixel %d changed: %v → %v", i, img.Pix[i], out.Pix[i])
		}
	}
}

// TestFillReference fills the crops of reference.json's
// inpaint_biharmonic cases (scikit-image 0.19.3's inpaint_biharmonic PSNR
// there) and prints the non-local fill, the DCT fill (restore.Inpaint's
// default) and biharmonic side by side. Asserted: above the DCT fill, and
// above biharmonic by the margins below (the goal of 1 dB at 50% loss is
// not reached on kodim13's crop: the table shows it):
//
//	go test ./restore/group -run FillReference -v
//
// TESSERA_FILL_GROUP_ON=clean groups on the clean crop instead (a bound
// on what better groups could give, not a fill).
func TestFillReference(t *testing.T) {
	fp := fillParams(t)
	t.Logf("%-22s %-18s %7s %7s %7s %7s %6s %6s", "clean", "mask", "fill", "dct", "biharm", "gain", "s", "dct s")
	var gain50 []float64
	for _, c := range testkit.FillCases(t) {
		if sel := os.Getenv("TESSERA_FILL_CASES"); sel != "" && !strings.Contains(c.Mask, sel) {
			continue
		}
		clean, miss := c.Img, c.Miss
		t0 := time.Now()
		if os.Getenv("TESSERA_FILL_GROUP_ON") == "clean" {
			groupOn = clean.Scaled(255 / clean.Peak())
		}
		out, _, err := FillWith(clean, miss, restore.InpaintDefaults(0), fp)
		groupOn = nil
		if err != nil {
			t.Fatal(err)
		}
		sec := time.Since(t0).Seconds()
		checkKnown(t, clean, out, miss)
		t0 = time.Now()
		dct := dctFill(t, clean, miss)
		dsec := time.Since(t0).Seconds()
		got, base := psnr(t, clean, out), psnr(t, clean, dct)
		t.Logf("%-22s %-18s %7.2f %7.2f %7.2f %+7.2f %6.2f %6.2f", c.Clean, c.Mask, got, base, c.PSNR, got-c.PSNR, sec, dsec)
		margin := 1.3 // measured +0.37 and +0.99 at 50% loss, +0.74 and +1.02 at 80%, +1.43 and +1.80 on the lines
		switch {
		case math.Abs(c.Missing-0.5) < 0.01:
			margin = 0.3
		case math.Abs(c.Missing-0.8) < 0.01:
			margin = 0.6
		}
		if got < c.PSNR+margin || got <= base {
			t.Errorf("%s %s: %.2f dB, want ≥ biharmonic %.2f + %.1f and above the DCT fill's %.2f", c.Clean, c.Mask, got, c.PSNR, margin, base)
		}
		if c.Missing > 0.49 && c.Missing < 0.51 {
			gain50 = append(gain50, got-c.PSNR)
		}
	}
	t.Logf("gain over biharmonic at 50%% loss: %.2f dB", gain50)
}

// TestFillWorkers checks that the fill does not depend on the worker
// count and keeps the known pixels.
func TestFillWorkers(t *testing.T) {
	clean := centreCrop(kodakGray(t, "kodim23.png"), 80, 72)
	miss := patches.RandomMask(clean.W, clean.H, 0.6, 4)
	var first *patches.Image
	for _, w := range []int{1, 3} {
		opt := restore.InpaintDefaults(0)
		opt.Workers = w
		out, _, err := Fill(clean, miss, opt)
		if err != nil {
			t.Fatal(err)
		}
		checkKnown(t, clean, out, miss)
		if first == nil {
			first = out
			if g, d := psnr(t, clean, out), psnr(t, clean, dctFill(t, clean, miss)); g < d-0.3 {
				t.Errorf("fill %.2f dB, DCT fill %.2f dB", g, d)
			}
			continue
		}
		for i := range out.Pix {
			if out.Pix[i] != first.Pix[i] {
				t.Fatalf("workers %d: pixel %d differs", w, i)
			}
		}
	}
}

// BenchmarkFillKodak fills whole Kodak gray images with seeded random loss
// (patches.RandomMask, seed the image's number; tessera bench --task
// inpaint seeds its masks otherwise, so single images differ between the
// two by a few tenths of a dB, the means over 24 by under 0.01) and prints per image the non-local fill, the DCT
// fill and the harmonic fill with their wall and process CPU seconds:
//
//	go test ./restore/group -run '^$' -bench FillKodak -benchtime 1x -timeout 2h
//
// TESSERA_BENCH_LIMIT / TESSERA_BENCH_IMAGES narrow the images (see
// restore/internal/testkit), TESSERA_FILL_LOSS ("0.8,0.5") sets the
// losses, TESSERA_FILL_DCT=0 skips the DCT fill. TESSERA_FILL_GROUP_ON
// measures the worth of better groups: "clean" groups the iterations on
// the clean image, "fill" runs the fill twice, the second time grouped on
// the first one's result (its seconds are those of both runs).
func BenchmarkFillKodak(b *testing.B) {
	losses := []float64{0.8}
	if s := os.Getenv("TESSERA_FILL_LOSS"); s != "" {
		losses = nil
		for _, f := range strings.Split(s, ",") {
			v, err := strconv.ParseFloat(f, 64)
			if err != nil {
				b.Fatal(err)
			}
			losses = append(losses, v)
		}
	}
	withDCT := os.Getenv("TESSERA_FILL_DCT") != "0"
	on := os.Getenv("TESSERA_FILL_GROUP_ON")
	groupOnClean, groupOnFill := on == "clean", on == "fill"
	if on != "" && !groupOnClean && !groupOnFill {
		b.Fatalf("TESSERA_FILL_GROUP_ON=%q: want clean or fill", on)
	}
	fp := fillParams(b)
	names, imgs := testkit.BenchKodak(b)
	b.ResetTimer()
	for it := 0; it < b.N; it++ {
		fmt.Printf("params %+v\n", fp)
		for _, loss := range losses {
			fmt.Printf("%.0f%% loss\n%-8s %7s %7s %7s %6s %6s %6s %6s\n", 100*loss, "image", "fill", "dct", "harm", "s", "dct s", "cpu s", "dct cpu")
			var sf, sd, sh, tf, td, cf, cd float64
			for i, name := range names {
				clean := imgs[i]
				var n int
				fmt.Sscanf(name, "kodim%02d.png", &n)
				miss := patches.RandomMask(clean.W, clean.H, loss, uint64(n))
				if groupOnClean {
					groupOn = clean.Scaled(255 / clean.Peak())
				}
				t0, c0 := time.Now(), cpuSeconds()
				out, _, err := FillWith(clean, miss, restore.InpaintDefaults(0), fp)
				if err != nil {
					b.Fatal(err)
				}
				if groupOnFill {
					// Once more from the start, grouped on the first fill.
					groupOn = out.Scaled(255 / clean.Peak())
					out, _, err = FillWith(clean, miss, restore.InpaintDefaults(0), fp)
					if err != nil {
						b.Fatal(err)
					}
				}
				groupOn = nil
				sec, cpu := time.Since(t0).Seconds(), cpuSeconds()-c0
				checkKnown(b, clean, out, miss)
				harm, err := restore.HarmonicFill(clean, miss)
				if err != nil {
					b.Fatal(err)
				}
				f, h := psnr(b, clean, out), psnr(b, clean, harm)
				d, dsec, dcpu := 0.0, 0.0, 0.0
				if withDCT {
					t0, c0 = time.Now(), cpuSeconds()
					dct := dctFill(b, clean, miss)
					dsec, dcpu = time.Since(t0).Seconds(), cpuSeconds()-c0
					d = psnr(b, clean, dct)
				}
				sf, sd, sh, tf, td, cf, cd = sf+f, sd+d, sh+h, tf+sec, td+dsec, cf+cpu, cd+dcpu
				fmt.Printf("%-8s %7.2f %7.2f %7.2f %6.2f %6.2f %6.2f %6.2f\n", name[:7], f, d, h, sec, dsec, cpu, dcpu)
			}
			k := float64(len(names))
			fmt.Printf("%-8s %7.2f %7.2f %7.2f %6.2f %6.2f %6.2f %6.2f\n", "mean", sf/k, sd/k, sh/k, tf/k, td/k, cf/k, cd/k)
			fmt.Printf("gain over harmonic: fill %+.2f dB, DCT fill %+.2f dB\n", (sf-sh)/k, (sd-sh)/k)
		}
	}
}

// opt.Patch sets the patch of both stages, so an image smaller than the
// default 8×8 fills with smaller patches, as the DCT fill alone does.
func TestFillSmallPatch(t *testing.T) {
	img := patches.New(6, 6, 1, 8)
	for i := range img.Pix {
		img.Pix[i] = float32(100 + i)
	}
	miss := patches.RandomMask(6, 6, 0.3, 2)
	opt := restore.InpaintDefaults(0)
	opt.Patch = 4
	out, _, err := Fill(img, miss, opt)
	if err != nil {
		t.Fatal(err)
	}
	checkKnown(t, img, out, miss)
	opt.Patch = 8
	if _, _, err := Fill(img, miss, opt); err == nil {
		t.Error("8×8 patches on a 6×6 image: want an error")
	}
}
