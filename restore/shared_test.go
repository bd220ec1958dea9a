package restore

import (
	"testing"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore/internal/testkit"
	"tessera/restore/quality"
)

// The shared helpers live in restore/internal/testkit.
func sharedPath(t testing.TB, elem ...string) string {
	t.Helper()
	return testkit.SharedPath(t, elem...)
}

func loadPNG(t testing.TB, path string) *patches.Image {
	t.Helper()
	return testkit.LoadPNG(t, path)
}

// kodakGray is a Kodak image in BT.601 gray (the project's protocol).
func kodakGray(t testing.TB, name string) *patches.Image {
	return quality.Luma(loadPNG(t, sharedPath(t, "kodak", name)), true)
}

func centreCrop(img *patches.Image, w, h int) *patches.Image {
	return img.Crop((img.W-w)/2, (img.H-h)/2, w, h)
}

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

func newTestRand() interface{ NormFloat64() float64 } { return learn.NewRand(99) }
