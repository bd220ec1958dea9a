package group

import (
	"image"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches"
	"tessera/restore/quality"
)

// The helpers below copy restore's test helpers, which are not importable.

// sharedPath joins elem under ../shared (beside the module root), or skips
// the test with a message when that folder is absent.
func sharedPath(t testing.TB, elem ...string) string {
	t.Helper()
	wd, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for d := wd; filepath.Dir(d) != d; d = filepath.Dir(d) {
		if _, err := os.Stat(filepath.Join(d, "go.mod")); err == nil {
			s := filepath.Join(d, "..", "shared")
			if _, err := os.Stat(s); err != nil {
				t.Skipf("reference data %s is absent; the checks against outside values need it", s)
			}
			return filepath.Join(append([]string{s}, elem...)...)
		}
	}
	t.Skip("module root not found; cannot locate ../shared")
	return ""
}

// loadPNG reads an 8-bit gray or RGB PNG exactly.
func loadPNG(t testing.TB, path string) *patches.Image {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	b := m.Bounds()
	switch src := m.(type) {
	case *image.Gray:
		out := patches.New(b.Dx(), b.Dy(), 1, 8)
		for y := 0; y < b.Dy(); y++ {
			for x := 0; x < b.Dx(); x++ {
				out.Pix[y*b.Dx()+x] = float32(src.GrayAt(b.Min.X+x, b.Min.Y+y).Y)
			}
		}
		return out
	case *image.RGBA:
		out := patches.New(b.Dx(), b.Dy(), 3, 8)
		wh := b.Dx() * b.Dy()
		for y := 0; y < b.Dy(); y++ {
			for x := 0; x < b.Dx(); x++ {
				c := src.RGBAAt(b.Min.X+x, b.Min.Y+y)
				i := y*b.Dx() + x
				out.Pix[i], out.Pix[wh+i], out.Pix[2*wh+i] = float32(c.R), float32(c.G), float32(c.B)
			}
		}
		return out
	}
	t.Fatalf("%s: unexpected PNG type %T", path, m)
	return nil
}

// kodakGray is a Kodak image in BT.601 gray (the project's protocol).
func kodakGray(t testing.TB, name string) *patches.Image {
	return quality.Luma(loadPNG(t, sharedPath(t, "kodak", name)), true)
}

func centreCrop(img *patches.Image, w, h int) *patches.Image {
	return img.Crop((img.W-w)/2, (img.H-h)/2, w, h)
}

// psnr scores test after rounding and clipping, as a file would be stored.
func psnr(t testing.TB, ref, test *patches.Image) float64 {
	t.Helper()
	q := test.Clone()
	q.Quantize()
	v, err := quality.PSNR(ref, q)
	if err != nil {
		t.Fatal(err)
	}
	return v
}
