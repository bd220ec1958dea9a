// Package testkit holds what the tests of restore and its packages share:
// finding ../shared beside the module root and reading its PNGs exactly.
package testkit

import (
	"image"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches"
)

// SharedPath joins elem under ../shared (beside the module root), or skips
// the test with a message when that folder is absent.
func SharedPath(t testing.TB, elem ...string) string {
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

// LoadPNG reads an 8-bit gray or RGB PNG exactly.
func LoadPNG(t testing.TB, path string) *patches.Image {
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
