package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches"
)

// scoreJSON runs tessera score --json and parses its records.
func scoreJSON(t *testing.T, dir string, args ...string) ([]map[string]any, result) {
	t.Helper()
	r := tessera(t, dir, nil, nil, append([]string{"score", "--json"}, args...)...)
	var recs []map[string]any
	if r.code != 2 {
		if err := json.Unmarshal([]byte(r.stdout), &recs); err != nil {
			t.Fatalf("stdout is not a JSON list (%v):\n%s\nstderr: %s", err, r.stdout, r.stderr)
		}
	}
	return recs, r
}

// TestScoreMetricPairs reproduces every pair of the reference data's
// metric_pairs: PSNR (peak 255) and SSIM as scikit-image 0.19.3 computes
// them (peak_signal_noise_ratio, structural_similarity with the Gaussian
// window of Wang et al. 2004), to 1e-6 dB and 1e-4.
func TestScoreMetricPairs(t *testing.T) {
	metrics := sharedRef(t, "reference", "metrics")
	raw, err := os.ReadFile(sharedRef(t, "reference", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Pairs []struct {
			Reference, Test string
			PSNR            float64  `json:"psnr_db"`
			SSIM            *float64 `json:"ssim"`
		} `json:"metric_pairs"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Pairs) < 12 {
		t.Fatalf("only %d metric pairs", len(ref.Pairs))
	}
	// One run per reference image, all its test images at once.
	byRef := map[string][]int{}
	var order []string
	for i, p := range ref.Pairs {
		if byRef[p.Reference] == nil {
			order = append(order, p.Reference)
		}
		byRef[p.Reference] = append(byRef[p.Reference], i)
	}
	checked := 0
	for _, rn := range order {
		args := []string{"--ref", rn}
		for _, i := range byRef[rn] {
			args = append(args, ref.Pairs[i].Test)
		}
		recs, r := scoreJSON(t, metrics, args...)
		r.want(t, 0)
		if len(recs) != len(byRef[rn])+1 {
			t.Fatalf("%d records for %d pairs", len(recs), len(byRef[rn]))
		}
		for k, i := range byRef[rn] {
			p, got := ref.Pairs[i], recs[k]
			if got["input"] != p.Test || got["reference"] != rn {
				t.Fatalf("record %v for pair %s / %s", got, p.Test, rn)
			}
			ps, _ := got["psnr"].(float64)
			if math.Abs(ps-p.PSNR) > 1e-6 {
				t.Errorf("%s: PSNR %.9f, scikit-image %.9f", p.Test, ps, p.PSNR)
			}
			if p.SSIM != nil {
				ss, _ := got["ssim"].(float64)
				if math.Abs(ss-*p.SSIM) > 1e-4 {
					t.Errorf("%s: SSIM %.6f, scikit-image %.6f", p.Test, ss, *p.SSIM)
				}
			}
			checked++
		}
		if m := recs[len(recs)-1]; m["mean"] != true || m["count"] != float64(len(byRef[rn])) {
			t.Fatalf("last record %v is not the mean", m)
		}
	}
	if checked != len(ref.Pairs) {
		t.Fatalf("checked %d of %d pairs", checked, len(ref.Pairs))
	}
}

// TestScoreSSIMIpol: the SSIM of the IPOL pair agrees with the value that
// the IPOL article's independent implementation gives (0.357959, as cited
// in scikit-image's tests) to 1e-3.
func TestScoreSSIMIpol(t *testing.T) {
	dir := sharedRef(t, "reference", "ssim_ipol")
	recs, r := scoreJSON(t, dir, "--ref", "camera.png", "camera_noisy.png")
	r.want(t, 0)
	if s, _ := recs[0]["ssim"].(float64); math.Abs(s-0.357959) > 1e-3 {
		t.Fatalf("SSIM %.6f, IPOL 0.357959", s)
	}
	if recs[0]["ssim_on"] != "gray" {
		t.Fatalf("ssim_on %v", recs[0]["ssim_on"])
	}
}

// flatPlus is a w×h image of depth bits, value v everywhere, with d added
// to the first sample of each channel.
func flatPlus(w, h, c, depth int, v, d float32) *patches.Image {
	m := patches.New(w, h, c, depth)
	for i := range m.Pix {
		m.Pix[i] = v
	}
	for ch := 0; ch < c; ch++ {
		m.Plane(ch)[0] += d
	}
	return m
}

func writeImg(t *testing.T, path string, m *patches.Image) {
	t.Helper()
	writeImage(t, path, &imgfile.File{Img: m, Format: "png"}, "png")
}

// TestScore16Bit: the PSNR peak follows the bit depth. With one sample of
// n off by d, MSE = d²/n and PSNR = 10·log10(peak²·n/d²) (the definition);
// identical images have no finite PSNR.
func TestScore16Bit(t *testing.T) {
	dir := t.TempDir()
	writeImg(t, filepath.Join(dir, "ref.png"), flatPlus(32, 32, 1, 16, 30000, 0))
	writeImg(t, filepath.Join(dir, "off.png"), flatPlus(32, 32, 1, 16, 30000, 1000))
	writeImg(t, filepath.Join(dir, "same.png"), flatPlus(32, 32, 1, 16, 30000, 0))
	recs, r := scoreJSON(t, dir, "--ref", "ref.png", "off.png", "same.png")
	r.want(t, 0)
	want := 10 * math.Log10(65535.0*65535*1024/(1000*1000))
	if p, _ := recs[0]["psnr"].(float64); math.Abs(p-want) > 1e-9 {
		t.Fatalf("16-bit PSNR %.9f, want %.9f", p, want)
	}
	if recs[1]["psnr"] != nil || recs[1]["identical"] != true || recs[1]["ssim"].(float64) != 1 {
		t.Fatalf("identical pair: %v", recs[1])
	}
	// The mean leaves the infinite PSNR out.
	if p, _ := recs[2]["psnr"].(float64); math.Abs(p-want) > 1e-9 {
		t.Fatalf("mean PSNR %v, want %v", recs[2]["psnr"], want)
	}
	tbl := tessera(t, dir, nil, nil, "score", "--ref", "ref.png", "off.png", "same.png")
	tbl.want(t, 0)
	if !strings.Contains(tbl.stdout, "inf") || !strings.Contains(tbl.stdout, "mean of 2") {
		t.Fatalf("table:\n%s", tbl.stdout)
	}
}

// TestScoreFolders: a reference folder is matched by relative path, with
// another image extension as a fallback; a missing reference fails that
// pair only (status 1), with a one-line message naming both paths.
func TestScoreFolders(t *testing.T) {
	dir := t.TempDir()
	a := flatPlus(24, 24, 3, 8, 100, 0)
	writeImg(t, filepath.Join(dir, "ref", "a.png"), a)
	writeImage(t, filepath.Join(dir, "ref", "sub", "b.tif"), &imgfile.File{Img: flatPlus(24, 24, 1, 8, 50, 0), Format: "tiff"}, "tiff")
	writeImg(t, filepath.Join(dir, "out", "a.png"), flatPlus(24, 24, 3, 8, 100, 10))
	writeImg(t, filepath.Join(dir, "out", "sub", "b.png"), flatPlus(24, 24, 1, 8, 50, 5))
	writeImg(t, filepath.Join(dir, "out", "c.png"), a)
	recs, r := scoreJSON(t, dir, "--ref", "ref", "out")
	r.want(t, 1, "out/c.png: no reference ref/c.png")
	if len(recs) != 4 {
		t.Fatalf("%d records: %v", len(recs), recs)
	}
	// Sorted by relative path: a.png, c.png, sub/b.png.
	if recs[0]["reference"] != "ref/a.png" || recs[1]["error"] == nil || recs[2]["reference"] != "ref/sub/b.tif" {
		t.Fatalf("records %v", recs)
	}
	// MSE over all channels: 3 samples of 24·24·3 off by 10.
	want := 10 * math.Log10(255.0*255*24*24*3/(3*100))
	if p, _ := recs[0]["psnr"].(float64); math.Abs(p-want) > 1e-9 || recs[0]["ssim_on"] != "luma" {
		t.Fatalf("RGB pair: %v, want PSNR %v", recs[0], want)
	}
	if m := recs[3]; m["count"] != 2.0 || m["failed"] != 1.0 {
		t.Fatalf("mean record %v", m)
	}
	// A TEST file is matched by its name inside the reference folder.
	recs, r = scoreJSON(t, dir, "--ref", "ref", "out/a.png")
	r.want(t, 0)
	if recs[0]["reference"] != "ref/a.png" {
		t.Fatalf("record %v", recs[0])
	}
}

// TestScoreMismatch: pairs that cannot be compared fail with one line
// naming the test image, its reference, what differs and the fix.
func TestScoreMismatch(t *testing.T) {
	dir := t.TempDir()
	writeImg(t, filepath.Join(dir, "ref.png"), flatPlus(20, 20, 1, 8, 10, 0))
	writeImg(t, filepath.Join(dir, "size.png"), flatPlus(20, 21, 1, 8, 10, 0))
	writeImg(t, filepath.Join(dir, "rgb.png"), flatPlus(20, 20, 3, 8, 10, 0))
	writeImg(t, filepath.Join(dir, "deep.png"), flatPlus(20, 20, 1, 16, 10, 0))
	os.WriteFile(filepath.Join(dir, "junk.png"), []byte("not an image"), 0o644)
	for _, c := range []struct{ file, want string }{
		{"size.png", "size.png: is 20×21 but its reference ref.png is 20×20; score images of the same size"},
		{"rgb.png", "rgb.png: is RGB but its reference ref.png is gray; convert both"},
		{"deep.png", "deep.png: is 16-bit but its reference ref.png is 8-bit;"},
		{"junk.png", "junk.png: "},
	} {
		r := tessera(t, dir, nil, nil, "score", "--ref", "ref.png", c.file)
		r.want(t, 1, "tessera: "+c.want)
		if lines := strings.Split(strings.TrimSpace(r.stderr), "\n"); len(lines) != 2 {
			t.Fatalf("%s: stderr is not one message and the count:\n%s", c.file, r.stderr)
		}
		if !strings.Contains(r.stdout, "failed") {
			t.Fatalf("%s: table lacks the failed row:\n%s", c.file, r.stdout)
		}
	}
	// An unreadable reference file stops the run with one line.
	r := tessera(t, dir, nil, nil, "score", "--ref", "junk.png", "ref.png", "size.png")
	r.want(t, 1, "tessera: --ref junk.png: ")
	if strings.Count(r.stderr, "\n") != 1 || r.stdout != "" {
		t.Fatalf("unreadable reference: stdout %q, stderr %q", r.stdout, r.stderr)
	}
}

func TestScoreUsage(t *testing.T) {
	dir := t.TempDir()
	writeImg(t, filepath.Join(dir, "a.png"), flatPlus(12, 12, 1, 8, 10, 0))
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"a.png"}, "give the reference with --ref"},
		{[]string{"--ref", "a.png"}, "give at least one TEST"},
		{[]string{"--ref", "nope.png", "a.png"}, "--ref nope.png: no such file"},
		{[]string{"--ref", "a.png", "nope.png"}, "nope.png: no such file"},
		{[]string{"--ref", "a.png", "--bogus", "a.png"}, "unknown option --bogus"},
	} {
		r := tessera(t, dir, nil, nil, append([]string{"score"}, c.args...)...)
		r.want(t, 2, c.want)
		if r.stdout != "" {
			t.Fatalf("%v: stdout %q", c.args, r.stdout)
		}
	}
}
