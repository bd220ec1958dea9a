// Package testkit holds what the tests and benchmarks of restore and its
// packages share: finding ../shared beside the module root, reading its
// PNGs exactly, the Kodak protocol's gray images and scoring, and the
// TESSERA_BENCH_* settings of the Kodak benchmarks.
package testkit

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"tessera/patches"
	"tessera/patches/patchtest"
	"tessera/restore/quality"
)

// SharedPath and LoadPNG are patchtest's, for the packages that import
// this one only.
var (
	SharedPath = patchtest.SharedPath
	LoadPNG    = patchtest.LoadPNG
)

// KodakGray is a Kodak image in BT.601 gray, rounded (the project's
// protocol).
func KodakGray(t testing.TB, name string) *patches.Image {
	t.Helper()
	return quality.Luma(LoadPNG(t, SharedPath(t, "kodak", name)), true)
}

// CentreCrop is the w×h crop at the centre of img.
func CentreCrop(img *patches.Image, w, h int) *patches.Image {
	return img.Crop((img.W-w)/2, (img.H-h)/2, w, h)
}

// PSNR scores test after rounding and clipping, as a file would be stored.
func PSNR(t testing.TB, ref, test *patches.Image) float64 {
	t.Helper()
	q := test.Clone()
	q.Quantize()
	v, err := quality.PSNR(ref, q)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// BenchSigmas are the noise levels of a Kodak benchmark run:
// TESSERA_BENCH_SIGMAS ("15,25,50" by default).
func BenchSigmas(b testing.TB) []float64 {
	s := os.Getenv("TESSERA_BENCH_SIGMAS")
	if s == "" {
		return []float64{15, 25, 50}
	}
	var out []float64
	for _, f := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil {
			b.Fatalf("TESSERA_BENCH_SIGMAS: %v", err)
		}
		out = append(out, v)
	}
	return out
}

// BenchKodak loads the clean images of a Kodak benchmark run, all 24 or
// the first TESSERA_BENCH_LIMIT, or those numbered in TESSERA_BENCH_IMAGES
// ("3,19"); gray by the protocol unless TESSERA_BENCH_COLOR=1, centre
// crops of side TESSERA_BENCH_CROP when set.
func BenchKodak(b testing.TB) (names []string, imgs []*patches.Image) {
	var nums []int
	limit := 24
	if s := os.Getenv("TESSERA_BENCH_LIMIT"); s != "" {
		var err error
		if limit, err = strconv.Atoi(s); err != nil {
			b.Fatalf("TESSERA_BENCH_LIMIT: %v", err)
		}
	}
	for i := 1; i <= limit; i++ {
		nums = append(nums, i)
	}
	if s := os.Getenv("TESSERA_BENCH_IMAGES"); s != "" {
		nums = nil
		for _, f := range strings.Split(s, ",") {
			v, err := strconv.Atoi(strings.TrimSpace(f))
			if err != nil {
				b.Fatalf("TESSERA_BENCH_IMAGES: %v", err)
			}
			nums = append(nums, v)
		}
	}
	crop, _ := strconv.Atoi(os.Getenv("TESSERA_BENCH_CROP"))
	color := os.Getenv("TESSERA_BENCH_COLOR") == "1"
	for _, i := range nums {
		name := fmt.Sprintf("kodim%02d.png", i)
		img := LoadPNG(b, SharedPath(b, "kodak", name))
		if !color {
			img = quality.Luma(img, true)
		}
		if crop > 0 {
			img = CentreCrop(img, min(crop, img.W), min(crop, img.H))
		}
		names, imgs = append(names, name), append(imgs, img)
	}
	return names, imgs
}

// FillCase is one case of reference.json's inpaint_biharmonic: a gray
// Kodak crop, its mask, and the PSNR of scikit-image 0.19.3's
// inpaint_biharmonic on it.
type FillCase struct {
	Clean, Mask string // file names under reference/inpaint
	Missing     float64
	PSNR        float64
	Img         *patches.Image
	Miss        []bool
}

// FillCases loads the inpaint_biharmonic cases of ../shared/reference.
func FillCases(t testing.TB) []FillCase {
	t.Helper()
	b, err := os.ReadFile(SharedPath(t, "reference", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Inpaint struct {
			Cases []struct {
				Clean, Mask string
				Missing     float64 `json:"missing_fraction"`
				PSNR        float64 `json:"biharmonic_psnr_db"`
			}
		} `json:"inpaint_biharmonic"`
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	var out []FillCase
	for _, c := range ref.Inpaint.Cases {
		clean := LoadPNG(t, SharedPath(t, "reference", "inpaint", c.Clean))
		if clean.C == 3 {
			clean = quality.Luma(clean, true)
		}
		mimg := LoadPNG(t, SharedPath(t, "reference", "inpaint", c.Mask))
		miss := make([]bool, mimg.W*mimg.H)
		for i := range miss {
			miss[i] = mimg.Pix[i] > 127
		}
		out = append(out, FillCase{Clean: c.Clean, Mask: c.Mask, Missing: c.Missing, PSNR: c.PSNR, Img: clean, Miss: miss})
	}
	return out
}

// SameAt16Bits denoises noisy at σ and the same images scaled to 16 bits
// (×257) at 257σ, and fails unless both restore clean to within 0.05 dB
// of each other: σ given in the image's own units means the same at
// either depth.
func SameAt16Bits(t testing.TB, clean, noisy *patches.Image, sigma float64, den func(*patches.Image, float64) (*patches.Image, error)) {
	t.Helper()
	out8, err := den(noisy, sigma)
	if err != nil {
		t.Fatal(err)
	}
	clean16, noisy16 := clean.Clone(), noisy.Clone()
	clean16.Depth, noisy16.Depth = 16, 16
	for i := range clean16.Pix {
		clean16.Pix[i] *= 257
		noisy16.Pix[i] *= 257
	}
	out16, err := den(noisy16, sigma*257)
	if err != nil {
		t.Fatal(err)
	}
	p8, p16 := PSNR(t, clean, out8), PSNR(t, clean16, out16)
	t.Logf("8-bit %.4f dB, 16-bit %.4f dB", p8, p16)
	if math.Abs(p8-p16) > 0.05 {
		t.Errorf("8-bit %.3f dB vs 16-bit %.3f dB", p8, p16)
	}
}
