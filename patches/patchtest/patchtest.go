// Package patchtest holds what the tests of tessera's packages share:
// finding the reference data of ../shared beside the module root, and
// reading its 8-bit PNGs exactly.
package patchtest

import (
	"image"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches"
)

// Shared is ../shared beside the module root, or "" where it is absent.
func Shared() string {
	wd, err := os.Getwd()
	if err != nil {
		return ""
	}
	for d := wd; filepath.Dir(d) != d; d = filepath.Dir(d) {
		if _, err := os.Stat(filepath.Join(d, "go.mod")); err == nil {
			s := filepath.Join(d, "..", "shared")
			if _, err := os.Stat(s); err != nil {
				return ""
			}
			return s
		}
	}
	return ""
}

// SharedPath joins elem under ../shared, or skips the test with a message
// when that folder is absent.
func SharedPath(t testing.TB, elem ...string) string {
	t.Helper()
	s := Shared()
	if s == "" {
		t.Skip("reference data ../shared beside the module root is absent (a fresh clone has none); the checks against outside values need it")
	}
	return filepath.Join(append([]string{s}, elem...)...)
}

// LoadPNG decodes an 8-bit gray or opaque RGB PNG into an Image exactly.
func LoadPNG(t testing.TB, path string) *patches.Image {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	src, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	b := src.Bounds()
	w, h := b.Dx(), b.Dy()
	switch m := src.(type) {
	case *image.Gray:
		img := patches.New(w, h, 1, 8)
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				img.Pix[y*w+x] = float32(m.Pix[y*m.Stride+x])
			}
		}
		return img
	case *image.RGBA, *image.NRGBA:
		var pix []uint8
		var stride int
		if r, ok := m.(*image.RGBA); ok {
			pix, stride = r.Pix, r.Stride
		} else {
			n := m.(*image.NRGBA)
			pix, stride = n.Pix, n.Stride
		}
		img := patches.New(w, h, 3, 8)
		n := w * h
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				p := pix[y*stride+4*x:]
				if p[3] != 255 {
					t.Fatalf("%s: transparent pixel", path)
				}
				for c := 0; c < 3; c++ {
					img.Pix[c*n+y*w+x] = float32(p[c])
				}
			}
		}
		return img
	default:
		t.Fatalf("%s: unexpected PNG type %T", path, src)
	}
	return nil
}
