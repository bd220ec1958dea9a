package noise

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches"
	"tessera/patches/patchtest"
)

// sharedDir is ../shared beside the module root; tests skip without it.
func sharedDir(t testing.TB) string {
	t.Helper()
	return patchtest.SharedPath(t)
}

var loadPNG = patchtest.LoadPNG

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
