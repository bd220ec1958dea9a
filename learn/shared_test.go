package learn

import (
	"os"
	"path/filepath"
	"testing"
)

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
