package main

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches"
	"tessera/restore"
)

// quick keeps a bench run to a fraction of a second per image.
var quick = []string{"--rounds", "1", "--train", "300", "--atoms", "32"}

// cleanSet writes n clean images (smooth patterns with edges, 8-bit) into
// dir, one in a subfolder, gray or RGB.
func cleanSet(t *testing.T, dir string, n, c, size int) []string {
	t.Helper()
	var rels []string
	for i := 0; i < n; i++ {
		rel := []string{"a.png", "sub/b.png", "c.png"}[i%3]
		_, clean := testImage(size, size, c, 8, false, uint64(i))
		clean.Quantize()
		writeImage(t, filepath.Join(dir, filepath.FromSlash(rel)), &imgfile.File{Img: clean, Format: "png"}, "png")
		rels = append(rels, rel)
	}
	return rels
}

// TestBenchNoisyPSNR: noise of σ = 25 added without clipping to a 768×512
// image gives a PSNR of 20·log10(255/25) = 20.17 dB (the definition of
// PSNR with E[n²] = σ²), to ±0.05 dB; a 16-bit image, whose σ is scaled by
// 65535/255, gives the same.
func TestBenchNoisyPSNR(t *testing.T) {
	opt := restore.Defaults(25)
	opt.Rounds, opt.Atoms, opt.Bound = 0, 4, 4 // the restoration is not under test
	for _, depth := range []int{8, 16} {
		img := patches.New(768, 512, 1, depth)
		for i := range img.Pix {
			img.Pix[i] = float32(img.Peak() * float64(i%768) / 767)
		}
		r, noisy, _, _, err := benchCase(img, "flat.png", 25, 1, opt, methodLearned, false)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(r.PSNRNoisy-20.17) > 0.05 {
			t.Errorf("%d-bit: noisy PSNR %.3f dB, want 20.17 ± 0.05", depth, r.PSNRNoisy)
		}
		clipped := false
		for _, v := range noisy.Pix {
			if v < 0 || float64(v) > img.Peak() {
				clipped = true
				break
			}
		}
		if !clipped {
			t.Errorf("%d-bit: no noisy sample lies outside [0, peak]: the noise was clipped", depth)
		}
	}
}

// TestBenchCaseMatchesLibrary: the command's measurement is the library's
// protocol (restore.BenchCase) figure for figure, for both methods.
func TestBenchCaseMatchesLibrary(t *testing.T) {
	_, img := testImage(48, 40, 1, 8, false, 5)
	img.Quantize()
	opt := restore.Defaults(25)
	opt.Rounds, opt.Train, opt.Atoms = 1, 300, 32
	for _, fixed := range []bool{false, true} {
		m := methodLearned
		if fixed {
			m = methodDCT
		}
		want, _, _, err := restore.BenchCase(restore.BenchImage{Name: "x.png", Clean: img}, 25, 7, opt, fixed)
		if err != nil {
			t.Fatal(err)
		}
		got, _, _, dict, err := benchCase(img, "x.png", 25, 7, opt, m, false)
		if err != nil {
			t.Fatal(err)
		}
		if got.PSNR != want.PSNR || got.SSIM != want.SSIM || got.PSNRNoisy != want.PSNRNoisy || got.Method != want.Method {
			t.Fatalf("%s: command %+v, library %+v", m, got, want)
		}
		if dict == nil || dict.K != 32 || dict.Patch != 8 {
			t.Fatalf("%s: dictionary %+v", m, dict)
		}
	}
}

// TestBenchFolder runs tessera bench end to end on a small folder: the
// Markdown table, the JSON (with the keys of the issue), the CSV and the
// report page agree, and every restoration gains over its noisy input
// (K-SVD denoising gains several dB at σ = 25, Elad & Aharon 2006,
// table I; any gain on these smooth patterns is a weak claim).
func TestBenchFolder(t *testing.T) {
	dir := t.TempDir()
	rels := cleanSet(t, filepath.Join(dir, "set"), 2, 3, 48)
	args := append([]string{"bench", "--set", "set", "--sigma", "25,50", "--compare", "dct",
		"--json", "out/b.json", "--csv", "out/b.csv", "--html", "out/page"}, quick...)
	if err := os.MkdirAll(filepath.Join(dir, "out"), 0o755); err != nil {
		t.Fatal(err)
	}
	r := tessera(t, dir, nil, nil, args...)
	r.want(t, 0)
	if !regexp.MustCompile(`^tessera: 8 runs on 2 of 2 images in [0-9.]+ s\n$`).MatchString(r.stderr) {
		t.Fatalf("stderr is not the summary line:\n%q", r.stderr)
	}

	// Markdown: header, rule, 8 runs, 4 means, then a blank line and the note.
	lines := strings.Split(r.stdout, "\n")
	var rows, means int
	for _, l := range lines {
		if strings.HasPrefix(l, "| **mean of 2** |") {
			means++
		} else if strings.HasPrefix(l, "| a.png |") || strings.HasPrefix(l, "| sub/b.png |") {
			rows++
		}
	}
	if rows != 8 || means != 4 || !strings.HasPrefix(lines[1], "|:--|") {
		t.Fatalf("table has %d runs and %d means:\n%s", rows, means, r.stdout)
	}

	var rep struct {
		Runs    []map[string]any `json:"runs"`
		Mean    []map[string]any `json:"mean"`
		Options map[string]any   `json:"options"`
		Version string           `json:"version"`
	}
	b, err := os.ReadFile(filepath.Join(dir, "out", "b.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Runs) != 8 || len(rep.Mean) != 4 || rep.Version == "" || rep.Options["patch"] != 8.0 || rep.Options["train"] != 300.0 {
		t.Fatalf("JSON: %d runs, %d means, version %q, options %v", len(rep.Runs), len(rep.Mean), rep.Version, rep.Options)
	}
	for _, run := range rep.Runs {
		for _, k := range []string{"image", "sigma", "color", "psnr_noisy", "psnr", "ssim", "seconds", "method"} {
			if _, ok := run[k]; !ok {
				t.Fatalf("run lacks %q: %v", k, run)
			}
		}
		if run["color"] != false || !(run["psnr"].(float64) > run["psnr_noisy"].(float64)) || !(run["ssim"].(float64) > run["ssim_noisy"].(float64)) {
			t.Fatalf("run without a gain: %v", run)
		}
	}
	// Each mean is the mean of its runs.
	for _, m := range rep.Mean {
		var s float64
		var n int
		for _, run := range rep.Runs {
			if run["sigma"] == m["sigma"] && run["method"] == m["method"] {
				s += run["psnr"].(float64)
				n++
			}
		}
		for _, k := range []string{"sigma", "color", "psnr", "ssim", "seconds"} {
			if _, ok := m[k]; !ok {
				t.Fatalf("mean lacks %q: %v", k, m)
			}
		}
		if n != 2 || math.Abs(s/2-m["psnr"].(float64)) > 1e-9 {
			t.Fatalf("mean %v of %d runs (sum %v)", m, n, s)
		}
	}

	f, err := os.Open(filepath.Join(dir, "out", "b.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil || len(recs) != 9 || recs[0][0] != "image" || recs[1][0] != rels[0] {
		t.Fatalf("CSV %v (%v)", recs, err)
	}

	page, err := os.ReadFile(filepath.Join(dir, "out", "page", "index.html"))
	if err != nil {
		t.Fatal(err)
	}
	checkPageFiles(t, filepath.Join(dir, "out", "page"), string(page), 2*(1+2*4)+2) // per image: clean, and per σ noisy, two restored, atoms; two charts
}

// checkPageFiles: every picture the page shows exists beside it and
// decodes, there are want of them, and the page names no network address.
func checkPageFiles(t *testing.T, dir, page string, want int) {
	t.Helper()
	srcs := regexp.MustCompile(`src="([^"]+)"`).FindAllStringSubmatch(page, -1)
	seen := map[string]bool{}
	for _, m := range srcs {
		if seen[m[1]] {
			continue
		}
		seen[m[1]] = true
		if _, err := imgfile.DecodeFile(filepath.Join(dir, filepath.FromSlash(m[1])), 0); err != nil {
			t.Fatalf("picture %s: %v", m[1], err)
		}
	}
	if len(seen) != want {
		t.Fatalf("the page shows %d pictures, want %d", len(seen), want)
	}
	for _, bad := range []string{"http:", "https:", "<link", "@import", "url("} {
		if strings.Contains(page, bad) {
			t.Fatalf("the page holds %q: it would need the network or other files", bad)
		}
	}
}

// TestBenchChoices: --images and --limit pick by sorted position; --color
// refuses gray images (status 1, the others still run).
func TestBenchChoices(t *testing.T) {
	dir := t.TempDir()
	cleanSet(t, filepath.Join(dir, "set"), 3, 1, 32) // a.png, c.png, sub/b.png
	cheap := []string{"bench", "--set", "set", "--sigma", "30", "--rounds", "0", "--atoms", "4", "--bound", "3"}
	r := tessera(t, dir, nil, nil, append(cheap, "--images", "3,1")...)
	r.want(t, 0)
	if !strings.Contains(r.stdout, "| sub/b.png |") || !strings.Contains(r.stdout, "| a.png |") || strings.Contains(r.stdout, "| c.png |") ||
		strings.Index(r.stdout, "| sub/b.png |") > strings.Index(r.stdout, "| a.png |") {
		t.Fatalf("--images 3,1:\n%s", r.stdout)
	}
	r = tessera(t, dir, nil, nil, append(cheap, "--limit", "1")...)
	r.want(t, 0)
	if !strings.Contains(r.stdout, "| **mean of 1** |") || strings.Contains(r.stdout, "| c.png |") {
		t.Fatalf("--limit 1:\n%s", r.stdout)
	}
	r = tessera(t, dir, nil, nil, append(cheap, "--color", "--limit", "1")...)
	r.want(t, 1, "set/a.png: is a gray image; --color needs RGB images")

	// --color restores RGB images in colour; the note says so.
	cleanSet(t, filepath.Join(dir, "rgb"), 1, 3, 32)
	r = tessera(t, dir, nil, nil, append(cheap, "--set", "rgb", "--color", "--json", "rgb.json")...)
	r.want(t, 0)
	b, err := os.ReadFile(filepath.Join(dir, "rgb.json"))
	if err != nil {
		t.Fatal(err)
	}
	var rep benchReport
	if err := json.Unmarshal(b, &rep); err != nil || len(rep.Runs) != 1 || !rep.Runs[0].Color || !rep.Mean[0].Color ||
		!strings.Contains(r.stdout, "; RGB;") {
		t.Fatalf("--color: %v %+v\n%s", err, rep.Runs, r.stdout)
	}
}

func TestBenchUsage(t *testing.T) {
	dir := t.TempDir()
	cleanSet(t, filepath.Join(dir, "set"), 1, 1, 32)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--sigma", "25,x"}, `--sigma "25,x": "x" is not a number`},
		{[]string{"--sigma", "300"}, "outside 0 < σ < 255"},
		{[]string{"--sigma", "25,25"}, "25 is given twice"},
		{[]string{"--limit", "1", "--images", "1"}, "give --limit or --images, not both"},
		{[]string{"--images", "0"}, "is not a position"},
		{[]string{"--images", "2"}, "there is no image 2; the set has 1"},
		{[]string{"--compare", "wavelet"}, `--compare "wavelet": unknown method`},
		{[]string{"--train", "10"}, "--train 10 is below --atoms 256"},
		{[]string{"--set", "missing"}, "--set missing: no such file or folder"},
		{[]string{"--set-url", "http://a.test/"}, "--set-url goes with --set kodak"},
		{[]string{"extra"}, "takes no paths"},
	} {
		args := append([]string{"bench"}, c.args...)
		if !hasArg(c.args, "--set") {
			args = append(args, "--set", "set")
		}
		r := tessera(t, dir, nil, nil, args...)
		r.want(t, 2, c.want)
		if r.stdout != "" {
			t.Fatalf("%v: stdout %q", c.args, r.stdout)
		}
	}
}
