package noise

import (
	"encoding/json"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches"
)

// sharedDir is ../shared beside the module root; tests skip without it.
func sharedDir(t testing.TB) string {
	t.Helper()
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			break
		}
		up := filepath.Dir(dir)
		if up == dir {
			t.Skip("module root not found")
		}
		dir = up
	}
	s := filepath.Join(dir, "..", "shared")
	if _, err := os.Stat(filepath.Join(s, "reference", "reference.json")); err != nil {
		t.Skipf("reference data not found at %s (only present beside a full checkout): %v", s, err)
	}
	return s
}

// loadPNG decodes an 8-bit gray or opaque RGB PNG into an Image exactly.
func loadPNG(t testing.TB, path string) *patches.Image {
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

type reference struct {
	WaveletSigma struct {
		Values []struct {
			Image string  `json:"image"`
			Sigma float64 `json:"sigma"`
		} `json:"values"`
	} `json:"wavelet_sigma"`
}

func loadReference(t testing.TB) (string, *reference) {
	s := sharedDir(t)
	data, err := os.ReadFile(filepath.Join(s, "reference", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r reference
	if err := json.Unmarshal(data, &r); err != nil {
		t.Fatal(err)
	}
	return s, &r
}

// grayBT601 is the BT.601 luma rounded half up, as reference.json
// gray_conversion describes the gray reference files.
func grayBT601(m *patches.Image) *patches.Image {
	if m.C == 1 {
		return m
	}
	out := patches.New(m.W, m.H, 1, m.Depth)
	r, g, b := m.Plane(0), m.Plane(1), m.Plane(2)
	for i := range out.Pix {
		v := 0.299*float64(r[i]) + 0.587*float64(g[i]) + 0.114*float64(b[i])
		out.Pix[i] = float32(math.Floor(v + 0.5))
	}
	return out
}
