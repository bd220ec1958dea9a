package main

import (
	"bytes"
	"context"
	"fmt"
	"html"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
)

// TestAtomsPicture: each atom is stretched from its own minimum (0) to
// its maximum (255), a flat atom is mid gray, the gaps take the page
// colour, and colour atoms keep their channels apart.
func TestAtomsPicture(t *testing.T) {
	d := &learn.Dict{N: 4, K: 3, Patch: 2, Channels: 1,
		Atoms: []float64{0, 1, 2, 3, 5, 5, 5, 5, -1, 1, 1, -1}}
	m := atomsPicture(d)
	// 2×2 grid of 3-pixel cells plus a border: 7 pixels, enlarged 300/7 = 42 times.
	const z = 42
	if m == nil || m.W != 7*z || m.H != 7*z || m.C != 3 {
		t.Fatalf("picture %+v", m)
	}
	at := func(gx, gy, c int) float32 { return m.At(gx*z+z/2, gy*z+z/2, c) }
	for _, c := range []struct {
		gx, gy int
		want   float32
	}{
		{1, 1, 0}, {2, 1, 85}, {1, 2, 170}, {2, 2, 255}, // atom 0: 0 1 / 2 3
		{4, 1, 128}, {5, 2, 128}, // atom 1 is flat
		{1, 4, 0}, {2, 4, 255}, {1, 5, 255}, {2, 5, 0}, // atom 2
	} {
		for ch := 0; ch < 3; ch++ {
			if v := at(c.gx, c.gy, ch); v != c.want {
				t.Fatalf("cell (%d,%d) channel %d = %v, want %v", c.gx, c.gy, ch, v, c.want)
			}
		}
	}
	if at(0, 0, 0) != float32(pagePaper.R) || at(3, 3, 2) != float32(pagePaper.B) || at(4, 4, 1) != float32(pagePaper.G) {
		t.Fatal("the gaps are not the page colour")
	}
	rgb := &learn.Dict{N: 3, K: 1, Patch: 1, Channels: 3, Atoms: []float64{-2, 0, 2}}
	m = atomsPicture(rgb)
	if m.At(m.W/2, m.H/2, 0) != 0 || m.At(m.W/2, m.H/2, 1) != 128 || m.At(m.W/2, m.H/2, 2) != 255 {
		t.Fatalf("colour atom drawn as %v %v %v", m.At(m.W/2, m.H/2, 0), m.At(m.W/2, m.H/2, 1), m.At(m.W/2, m.H/2, 2))
	}
	if atomsPicture(&learn.Dict{N: 5, K: 1, Atoms: make([]float64, 5)}) != nil || atomsPicture(nil) != nil {
		t.Fatal("a dictionary that is not of patches was drawn")
	}
}

// TestPickCrop: the crop goes where the detail is.
func TestPickCrop(t *testing.T) {
	img := patches.New(300, 200, 1, 8)
	for y := 40; y < 80; y++ {
		for x := 200; x < 240; x++ {
			img.Pix[y*300+x] = float32(255 * ((x + y) % 2))
		}
	}
	x0, y0, s := pickCrop(img, 128)
	if s != 128 || x0 > 200 || x0+s < 240 || y0 > 40 || y0+s < 80 {
		t.Fatalf("crop at (%d,%d) side %d misses the textured square", x0, y0, s)
	}
	if _, _, s := pickCrop(patches.New(40, 90, 1, 8), 128); s != 40 {
		t.Fatalf("side %d for a 40-pixel-wide image", s)
	}
}

// demoReport is a report with made-up figures and real pictures, built
// without any restoration.
func demoReport(t *testing.T) (*benchReport, []*benchShots) {
	t.Helper()
	cfg := &benchConfig{sigmas: []float64{15, 25, 50}, methods: []string{methodLearned, methodDCT}}
	rep := &benchReport{Version: "tessera (test)", Started: time.Date(2026, 1, 2, 3, 4, 0, 0, time.UTC),
		Options: benchOptions{Set: "demo-set", Images: []string{"a.png", "sub/<b>.png"}, Sigmas: cfg.sigmas,
			Methods: cfg.methods, Patch: 8, Atoms: 64, Rounds: 2, Bound: 1.15, Train: 500, Seed: 1}}
	var shots []*benchShots
	for i, name := range rep.Options.Images {
		_, clean := testImage(160, 140, 1, 8, false, uint64(i))
		clean.Quantize()
		sh := &benchShots{image: name, w: clean.W, h: clean.H}
		sh.x0, sh.y0, sh.side = pickCrop(clean, cropSide)
		sh.clean = displayCrop(clean, sh.x0, sh.y0, sh.side)
		for _, s := range cfg.sigmas {
			noisy := restore.AddNoise(clean, s, 1, name)
			row := benchShotRow{sigma: s, psnrNoisy: 20 * math.Log10(255/s), noisy: displayCrop(noisy, sh.x0, sh.y0, sh.side),
				dict: learn.OvercompleteDCT(8, 8, 1)}
			for k, m := range cfg.methods {
				r := benchRun{Image: name, Method: m, Sigma: s, PSNRNoisy: row.psnrNoisy, SSIMNoisy: 0.3,
					PSNR: row.psnrNoisy + 6 - float64(k) - s/50, SSIM: 0.8 - s/100, Seconds: 1.5}
				rep.Runs = append(rep.Runs, r)
				row.restored = append(row.restored, sh.clean)
				row.psnr = append(row.psnr, r.PSNR)
			}
			sh.rows = append(sh.rows, row)
		}
		shots = append(shots, sh)
	}
	rep.Mean = benchMeans(rep.Runs, cfg)
	return rep, shots
}

// TestHTMLReportPage: the page holds the figures, escapes names, and
// shows only pictures written beside it.
func TestHTMLReportPage(t *testing.T) {
	rep, shots := demoReport(t)
	dir := t.TempDir()
	if err := writeHTMLReport(dir, rep, shots); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(dir, "index.html"))
	if err != nil {
		t.Fatal(err)
	}
	page := string(b)
	checkPageFiles(t, dir, page, 2*(1+3*4)+2)
	m := rep.Mean[2] // σ = 25, learned
	text := html.UnescapeString(page)
	for _, want := range []string{"demo-set", "sub/<b>.png", fmt.Sprintf("%.2f", m.PSNR), "K-SVD, learned", "DCT, fixed", "+1.00 dB"} {
		if !strings.Contains(text, want) {
			t.Fatalf("the page lacks %q", want)
		}
	}
	if strings.Contains(page, "<b>.png") {
		t.Fatal("an image name went into the page unescaped")
	}
	// The charts are gonum/plot PNGs at twice the displayed size.
	f, err := os.Open(filepath.Join(dir, "images", "chart-psnr.png"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	cfg, err := png.DecodeConfig(f)
	if err != nil || cfg.Width != 2*492 || cfg.Height != 2*312 {
		t.Fatalf("chart %+v (%v)", cfg, err)
	}
}

// chromium finds the browser, installing Debian's package when the test
// runs as root under CI=true.
func chromium(t *testing.T) string {
	t.Helper()
	for _, p := range []string{"/usr/bin/chromium", "chromium"} {
		if q, err := exec.LookPath(p); err == nil {
			return q
		}
	}
	if os.Geteuid() != 0 || os.Getenv("CI") != "true" {
		t.Skip("chromium is not installed (apt-get install -y chromium); the browser check needs it")
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Minute)
	defer cancel()
	for _, args := range [][]string{{"install", "-y", "chromium"}, {"update"}, {"install", "-y", "chromium"}} {
		cmd := exec.CommandContext(ctx, "apt-get", args...)
		cmd.Env = append(os.Environ(), "DEBIAN_FRONTEND=noninteractive")
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Logf("apt-get %v: %v\n%s", args, err, out[max(0, len(out)-400):])
		}
		if q, err := exec.LookPath("/usr/bin/chromium"); err == nil {
			return q
		}
	}
	t.Skip("chromium could not be installed; the browser check needs it")
	return ""
}

// browse opens page in headless chromium and returns its log; with shot
// set it saves a screenshot there.
func browse(t *testing.T, exe, page, shot string) string {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	args := []string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir=" + t.TempDir(), "--enable-logging=stderr", "--v=0",
		"--hide-scrollbars", "--window-size=1200,1500"}
	if shot != "" {
		args = append(args, "--screenshot="+shot)
	} else {
		args = append(args, "--dump-dom")
	}
	cmd := exec.CommandContext(ctx, exe, append(args, "file://"+page)...)
	cmd.WaitDelay = 5 * time.Second
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		t.Fatalf("chromium: %v\n%s", err, errb.String())
	}
	return out.String() + errb.String()
}

// consoleLines are the page's console messages in chromium's log.
func consoleLines(log string) []string {
	var out []string
	for _, l := range strings.Split(log, "\n") {
		if strings.Contains(l, ":CONSOLE") || strings.Contains(l, "Uncaught") {
			out = append(out, l)
		}
	}
	return out
}

// TestHTMLReportInBrowser: the page loads in a real browser without
// console messages and renders something (the screenshot is not blank);
// with a picture removed the page's own check reports it on the console,
// so the scan would see a broken page.
func TestHTMLReportInBrowser(t *testing.T) {
	exe := chromium(t)
	rep, shots := demoReport(t)
	dir := t.TempDir()
	if err := writeHTMLReport(dir, rep, shots); err != nil {
		t.Fatal(err)
	}
	page := filepath.Join(dir, "index.html")
	shot := filepath.Join(t.TempDir(), "shot.png")
	log := browse(t, exe, page, shot)
	if c := consoleLines(log); len(c) > 0 {
		t.Fatalf("console messages:\n%s", strings.Join(c, "\n"))
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v\n%s", err, log)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	var s, s2, n float64
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y += 2 {
		for x := b.Min.X; x < b.Max.X; x += 2 {
			r, g, bl, _ := img.At(x, y).RGBA()
			v := (float64(r) + float64(g) + float64(bl)) / 3
			s, s2, n = s+v, s2+v*v, n+1
		}
	}
	if v := s2/n - (s/n)*(s/n); !(v > 0) {
		t.Fatalf("the screenshot is blank (variance %g)", v)
	}
	if os.Getenv("TESSERA_KEEP_SHOT") != "" {
		data, _ := os.ReadFile(shot)
		os.WriteFile(os.Getenv("TESSERA_KEEP_SHOT"), data, 0o644)
	}

	os.Remove(filepath.Join(dir, "images", "chart-ssim.png"))
	log = browse(t, exe, page, "")
	if c := consoleLines(log); len(c) == 0 || !strings.Contains(c[0], "did not load") || !strings.Contains(log, `class="missing"`) {
		t.Fatalf("a missing picture went unnoticed:\n%s", log)
	}
}
