package quality

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches/patchtest"
)

// sharedDir is ../shared beside the module root; tests skip without it.
func sharedDir(t testing.TB) string {
	t.Helper()
	return patchtest.SharedPath(t)
}

var loadPNG = patchtest.LoadPNG

type reference struct {
	MetricPairs []struct {
		Reference string   `json:"reference"`
		Test      string   `json:"test"`
		PSNR      float64  `json:"psnr_db"`
		SSIM      *float64 `json:"ssim"`
	} `json:"metric_pairs"`
	SSIMIPOL struct {
		Reference string  `json:"reference"`
		Test      string  `json:"test"`
		IPOL      float64 `json:"ssim_ipol_imdiff"`
		Skimage   float64 `json:"ssim_scikit_image"`
	} `json:"ssim_ipol"`
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
