package main

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"syscall"
	"testing"
	"time"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches"
)

// TestMirroredTree: a folder's tree is mirrored under --out with the same
// names, sizes and depths; hidden entries and non-images are skipped and
// counted; options after the paths work; stderr, not a terminal here,
// gets the summary line and nothing else.
func TestMirroredTree(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in")
	rels := makeFolder(t, in, 4)
	os.WriteFile(filepath.Join(in, "notes.txt"), []byte("not an image"), 0o644)
	os.WriteFile(filepath.Join(in, ".hidden.png"), []byte("x"), 0o644)
	f, _ := testImage(48, 48, 1, 8, false, 9)
	writeImage(t, filepath.Join(in, ".cache", "x.png"), f, "png")

	r := denoise(t, dir, "in", "--out", "out")
	r.want(t, 0)
	if !regexp.MustCompile(`^tessera: 4 done, 0 skipped, 0 failed in [0-9.]+ s \(3 hidden or non-image files ignored\)\n$`).MatchString(r.stderr) {
		t.Fatalf("stderr is not the one summary line:\n%q", r.stderr)
	}
	if r.stdout != "" {
		t.Fatalf("stdout not empty: %q", r.stdout)
	}
	got := tree(t, filepath.Join(dir, "out"))
	if len(got) != len(rels) {
		t.Fatalf("outputs %v, want %v", keys(got), rels)
	}
	for _, rel := range rels {
		if _, ok := got[rel]; !ok {
			t.Fatalf("no output %s among %v", rel, keys(got))
		}
		src := decode(t, filepath.Join(in, rel))
		out := decode(t, filepath.Join(dir, "out", rel))
		if out.Format != "png" || out.Img.W != src.Img.W || out.Img.H != src.Img.H || out.Img.C != src.Img.C || out.Img.Depth != 8 {
			t.Fatalf("%s: output %s %dx%dx%d/%d, input %dx%dx%d", rel, out.Format, out.Img.W, out.Img.H, out.Img.C, out.Img.Depth, src.Img.W, src.Img.H, src.Img.C)
		}
	}

	// A rerun skips every output; --force redoes them with the same bytes.
	r = denoise(t, dir, "in", "--out", "out")
	r.want(t, 0, "0 done, 4 skipped, 0 failed")
	denoise(t, dir, "--force", "in", "--out", "out").want(t, 0, "4 done, 0 skipped")
	sameTree(t, got, tree(t, filepath.Join(dir, "out")))
}

// TestDenoisesAndKeepsAlpha: the output is closer to the clean image than
// the noisy input, and alpha is copied bit for bit. The bound is loose:
// K-SVD denoising at σ = 10 gains several dB on natural images (Elad &
// Aharon 2006, table I); 2.2 dB on this smooth pattern is a weak claim.
func TestDenoisesAndKeepsAlpha(t *testing.T) {
	dir := t.TempDir()
	noisy, clean := testImage(64, 64, 3, 8, true, 3)
	writeImage(t, filepath.Join(dir, "a.png"), noisy, "png")
	denoise(t, dir, "--rounds", "2", "a.png", "--out", "a-out.png").want(t, 0)
	out := decode(t, filepath.Join(dir, "a-out.png"))
	before, after := mse(noisy.Img, clean), mse(out.Img, clean)
	if !(after < 0.6*before) {
		t.Fatalf("MSE to the clean image %.1f after, %.1f before: expected a gain of over 2.2 dB", after, before)
	}
	if out.Alpha == nil || len(out.Alpha) != len(noisy.Alpha) {
		t.Fatal("alpha was lost")
	}
	for i := range out.Alpha {
		if out.Alpha[i] != noisy.Alpha[i] {
			t.Fatalf("alpha[%d] = %d, was %d", i, out.Alpha[i], noisy.Alpha[i])
		}
	}
}

func TestHelpKeepsCaution(t *testing.T) {
	for _, args := range [][]string{{"--help"}, {"denoise", "--help"}} {
		r := tessera(t, t.TempDir(), nil, nil, args...)
		if r.code != 0 || !strings.Contains(r.stdout, "Restored images are estimates, not measurements") {
			t.Fatalf("tessera %v: status %d, caution missing:\n%s", args, r.code, r.stdout)
		}
	}
}

// TestResumeAfterKill: a batch killed (SIGKILL) after its first output
// leaves only whole outputs; a rerun finishes the rest, skips what was
// done, removes temporaries a killed writer left, and the result matches
// a clean run byte for byte.
func TestResumeAfterKill(t *testing.T) {
	needBin(t)
	dir := t.TempDir()
	in := filepath.Join(dir, "in")
	var rels []string
	for i := 0; i < 12; i++ {
		f, _ := testImage(64, 64, 1, 8, false, uint64(i))
		rel := fmt.Sprintf("f%02d.png", i)
		writeImage(t, filepath.Join(in, rel), f, "png")
		rels = append(rels, rel)
	}
	denoise(t, dir, "in", "--out", "clean").want(t, 0, "12 done")
	want := tree(t, filepath.Join(dir, "clean"))

	out := filepath.Join(dir, "out")
	args := append(append([]string{"denoise", "--sigma", "10", "--jobs", "1"}, fast...), "in", "--out", "out")
	cmd := exec.Command(bin, args...)
	cmd.Dir, cmd.Env = dir, cleanEnv()
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	first := filepath.Join(out, rels[0])
	if !waitFor(30*time.Second, func() bool { _, err := os.Stat(first); return err == nil }) {
		cmd.Process.Kill()
		cmd.Wait()
		t.Fatal("no first output within 30 s")
	}
	cmd.Process.Kill()
	cmd.Wait()
	partial := tree(t, out)
	t.Logf("killed with %d of 12 outputs written", len(partial))
	for rel, h := range partial {
		if strings.HasPrefix(filepath.Base(rel), ".") {
			continue // a temporary of the write under way; the rerun clears it
		}
		if want[rel] != h {
			t.Fatalf("after the kill %s is not a whole output", rel)
		}
	}
	// A temporary as a writer killed mid-file leaves it, for an output of
	// this batch, and another that belongs to no output of it.
	stale := filepath.Join(out, "."+rels[11]+".123456.tmp")
	foreign := filepath.Join(out, ".other.png.99.tmp")
	old := time.Now().Add(-time.Hour)
	for _, p := range []string{stale, foreign} {
		os.WriteFile(p, []byte("partial"), 0o644)
		os.Chtimes(p, old, old)
	}
	os.Remove(filepath.Join(out, rels[11]))

	r := denoise(t, dir, "in", "--out", "out")
	r.want(t, 0, "0 failed")
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Fatal("the stale temporary of an output of this batch is still there")
	}
	if _, err := os.Stat(foreign); err != nil {
		t.Fatal("a temporary of no output of this batch was removed")
	}
	os.Remove(foreign)
	sameTree(t, want, tree(t, out))
}

// TestInterruptCleanly: SIGTERM (what a scheduler sends at a time limit)
// stops the batch with status 143, no temporaries, a readable report and
// the advice to rerun.
func TestInterruptCleanly(t *testing.T) {
	needBin(t)
	dir := t.TempDir()
	makeFolder(t, filepath.Join(dir, "in"), 8)
	args := append(append([]string{"denoise", "--sigma", "10"}, fast...), "in", "--out", "out", "--report", "r.jsonl")
	cmd := exec.Command(bin, args...)
	cmd.Dir, cmd.Env = dir, cleanEnv()
	var errb bytes.Buffer
	cmd.Stderr = &errb
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	if !waitFor(30*time.Second, func() bool { b, _ := os.ReadFile(filepath.Join(dir, "r.jsonl")); return len(b) > 0 }) {
		cmd.Process.Kill()
		t.Fatal("no report line within 30 s")
	}
	cmd.Process.Signal(syscall.SIGTERM)
	err := cmd.Wait()
	code := 0
	if ee, ok := err.(*exec.ExitError); ok {
		code = ee.ExitCode()
	}
	t.Logf("status %d, stderr %q", code, errb.String())
	if code != 143 && code != 0 { // 0: the batch ended before the signal came
		t.Fatalf("status %d after SIGTERM, want 143\n%s", code, errb.String())
	}
	if code == 143 && !strings.Contains(errb.String(), "rerun the same command to resume") {
		t.Fatalf("no resume advice:\n%s", errb.String())
	}
	for rel := range tree(t, filepath.Join(dir, "out")) {
		if strings.HasSuffix(rel, ".tmp") {
			t.Fatalf("temporary %s left behind", rel)
		}
	}
	for _, rec := range readReport(t, filepath.Join(dir, "r.jsonl")) {
		if rec["status"] != "done" {
			t.Fatalf("report record %v", rec)
		}
	}
}

// TestJobsIdentical: --jobs changes the time, not the bytes.
func TestJobsIdentical(t *testing.T) {
	dir := t.TempDir()
	makeFolder(t, filepath.Join(dir, "in"), 6)
	denoise(t, dir, "--jobs", "1", "in", "--out", "o1").want(t, 0, "6 done")
	denoise(t, dir, "--jobs", "3", "in", "--out", "o3").want(t, 0, "6 done")
	sameTree(t, tree(t, filepath.Join(dir, "o1")), tree(t, filepath.Join(dir, "o3")))
}

// TestReport: one JSON line per input with the documented keys; sizes and
// σ for done images, status skipped on a rerun, the message for failures.
func TestReport(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in")
	makeFolder(t, in, 2)
	os.WriteFile(filepath.Join(in, "bad.png"), []byte("\x89PNG\r\n\x1a\nrubbish"), 0o644)
	denoise(t, dir, "in", "--out", "out", "--report", "r.jsonl").want(t, 1, "1 failed")
	recs := readReport(t, filepath.Join(dir, "r.jsonl"))
	if len(recs) != 3 {
		t.Fatalf("%d records, want 3", len(recs))
	}
	keys := []string{"input", "output", "status", "error", "sigma", "sigma_estimated", "width", "height",
		"channels", "bit_depth", "seconds", "mean_atoms"}
	byInput := map[string]map[string]any{}
	for _, rec := range recs {
		for _, k := range keys {
			if _, ok := rec[k]; !ok {
				t.Fatalf("record lacks %q: %v", k, rec)
			}
		}
		byInput[filepath.ToSlash(rec["input"].(string))] = rec
	}
	good := byInput["in/img00.png"]
	if good["status"] != "done" || good["sigma"] != 10.0 || good["sigma_estimated"] != false ||
		good["width"] != 48.0 || good["height"] != 48.0 || good["channels"] != 1.0 || good["bit_depth"] != 8.0 ||
		filepath.ToSlash(good["output"].(string)) != "out/img00.png" || good["error"] != "" {
		t.Fatalf("record of a done image: %v", good)
	}
	if ma, ok := good["mean_atoms"].(float64); !ok || !(ma > 0) || ma > 32 {
		t.Fatalf("mean_atoms %v: want a positive count of at most n/2 = 32", good["mean_atoms"])
	}
	bad := byInput["in/bad.png"]
	if bad["status"] != "failed" || !strings.Contains(bad["error"].(string), "in/bad.png: truncated PNG") || bad["width"] != nil {
		t.Fatalf("record of a failed image: %v", bad)
	}

	denoise(t, dir, "in", "--out", "out", "--report", "-").want(t, 1)
	r := denoise(t, dir, "in", "--out", "out", "--report", "-")
	n := 0
	for _, rec := range parseReport(t, r.stdout) {
		if rec["status"] == "skipped" {
			n++
		}
	}
	if n != 2 {
		t.Fatalf("report on stdout of a rerun: %d skipped, want 2\n%s", n, r.stdout)
	}
}

// TestBadInputs: each bad file fails alone with one line naming it, what is
// wrong and the fix; the good file of the folder is still done (status 1).
func TestBadInputs(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "in")
	good, _ := testImage(48, 48, 1, 8, false, 1)
	writeImage(t, filepath.Join(in, "good.png"), good, "png")
	full := encodeBytes(t, good, "png")
	os.WriteFile(filepath.Join(in, "truncated.png"), full[:len(full)/2], 0o644)
	os.WriteFile(filepath.Join(in, "corrupt.png"), append([]byte("\x89PNG\r\n\x1a\n"), bytes.Repeat([]byte{0xa5}, 64)...), 0o644)
	os.WriteFile(filepath.Join(in, "notpng.png"), []byte("GIF89a\x01\x00\x01\x00\x00\x00\x00;"), 0o644)
	os.WriteFile(filepath.Join(in, "ascii.pgm"), []byte("P2\n2 2\n255\n1 2 3 4\n"), 0o644)
	os.WriteFile(filepath.Join(in, "float.tif"), floatTIFF(), 0o644)
	tiny, _ := testImage(5, 5, 1, 8, false, 2)
	writeImage(t, filepath.Join(in, "tiny.png"), tiny, "png")
	os.WriteFile(filepath.Join(in, "empty.png"), nil, 0o644)

	r := denoise(t, dir, "in", "--out", "out")
	r.want(t, 1,
		"tessera: in/truncated.png: corrupt PNG (not enough pixel data); re-export the file or check the copy",
		"tessera: in/corrupt.png: corrupt PNG",
		"tessera: in/notpng.png: GIF is not supported; convert it",
		"tessera: in/ascii.pgm: plain (ASCII) Netpbm P2 is not supported",
		"tessera: in/float.tif: TIFF sample format is not supported; convert it to an 8- or 16-bit PNG or TIFF",
		"tessera: in/tiny.png: the image (5×5) is smaller than one 8×8 patch; use a smaller patch (--patch)",
		"tessera: in/empty.png: empty file; re-export the file",
		"1 done, 0 skipped, 7 failed")
	t.Logf("stderr:\n%s", r.stderr)
	for _, line := range strings.Split(strings.TrimSpace(r.stderr), "\n") {
		if !strings.HasPrefix(line, "tessera: ") {
			t.Fatalf("line without the program name: %q", line)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "out", "good.png")); err != nil {
		t.Fatal("the good image was not done")
	}
	if strings.Count(r.stderr, "\n") != 8 {
		t.Fatalf("want one line per bad file and the summary:\n%s", r.stderr)
	}

	// Per-image checks that need the image: σ above the peak, the pixel limit.
	denoise(t, dir, "--sigma", "300", "in/good.png", "--out", "x.png").want(t, 1,
		"in/good.png: σ = 300 is not below the 8-bit peak 255; give --sigma in the image's own units")
	denoise(t, dir, "--max-pixels", "1000", "in/good.png", "--out", "x.png").want(t, 1,
		"in/good.png: an image of 48x48 pixels, over the limit of 1000", "(--max-pixels)")
	denoise(t, dir, "missing.png", "in/good.png", "--out", "two").want(t, 1,
		"tessera: missing.png: no such file or folder; check the name", "1 done")
}

// floatTIFF is a 2×2 one-sample 32-bit float TIFF (TIFF 6.0 with
// SampleFormat 3), a bit depth the decoder does not take.
func floatTIFF() []byte {
	type tag struct {
		id, typ uint16
		val     uint32
	}
	const dataOff = 8 + 2 + 9*12 + 4
	tags := []tag{
		{256, 3, 2}, {257, 3, 2}, {258, 3, 32}, {259, 3, 1}, {262, 3, 1},
		{273, 4, dataOff}, {278, 3, 2}, {279, 4, 16}, {339, 3, 3},
	}
	b := []byte("II*\x00")
	b = binary.LittleEndian.AppendUint32(b, 8)
	b = binary.LittleEndian.AppendUint16(b, uint16(len(tags)))
	for _, tg := range tags {
		b = binary.LittleEndian.AppendUint16(b, tg.id)
		b = binary.LittleEndian.AppendUint16(b, tg.typ)
		b = binary.LittleEndian.AppendUint32(b, 1)
		if tg.typ == 3 {
			b = binary.LittleEndian.AppendUint16(b, uint16(tg.val))
			b = append(b, 0, 0)
		} else {
			b = binary.LittleEndian.AppendUint32(b, tg.val)
		}
	}
	b = binary.LittleEndian.AppendUint32(b, 0)
	return append(b, make([]byte, 16)...)
}

// TestUsageErrors: a bad command line exits 2 before any image is read.
func TestUsageErrors(t *testing.T) {
	dir := t.TempDir()
	makeFolder(t, filepath.Join(dir, "in"), 1)
	cases := []struct {
		args []string
		msg  string
	}{
		{[]string{"--sigma", "0"}, `--sigma "0": must be above 0`},
		{[]string{"--sigma", "-3"}, `--sigma "-3": must be above 0`},
		{[]string{"--sigma", "NaN"}, `--sigma "NaN": must be a finite number above 0`},
		{[]string{"--sigma", "inf"}, `--sigma "inf": must be a finite number above 0`},
		{[]string{"--sigma", "ten"}, `--sigma "ten": not a number`},
		{[]string{"--format", "gif"}, `--format "gif": unknown output format; choose png, tiff or pgm`},
		{[]string{"--jobs", "0"}, "--jobs 0: must be 1..4096"},
		{[]string{"--jobs", "two"}, `--jobs "two": not a valid value`},
		{[]string{"--patch", "1"}, "--patch 1: the patch side must be 2..32"},
		{[]string{"--atoms", "5000"}, "--atoms 5000: the dictionary size must be 1..4096"},
		{[]string{"--rounds", "-1"}, "--rounds -1: must be 0..1000"},
		{[]string{"--bound", "0"}, "--bound 0: the bound factor must be a positive number"},
		{[]string{"--train", "10"}, "--train 10 is below --atoms 64"},
		{[]string{"--max-pixels", "lots"}, `--max-pixels "lots": must be a whole number`},
		{[]string{"--shard", "3/2"}, `--shard "3/2": K must be 1..2`},
		{[]string{"--shard-count", "2"}, "--shard-count goes with --shard auto"},
		{[]string{"--bogus"}, "unknown option --bogus"},
		{[]string{"--report", "in/img00.png"}, "--report in/img00.png is the input in/img00.png"},
	}
	for _, c := range cases {
		t.Run(strings.Join(c.args, " "), func(t *testing.T) {
			denoise(t, dir, append(c.args, "in", "--out", "out")...).want(t, 2, "tessera: "+c.msg)
		})
	}
	for _, c := range []struct {
		args []string
		msg  string
	}{
		{[]string{"in"}, "in is a folder: give --out DIR"},
		{[]string{"in", "--out", "in/out"}, "--out in/out lies inside the input folder in"},
		{[]string{"in", "--out", "in"}, "--out in is the input folder in"},
		{[]string{"in", "--out", "in/sub/x"}, "--out in/sub/x lies inside the input folder in"},
		{[]string{"in/img00.png", "--out", "in/img00.png"}, "--out in/img00.png is the input file in/img00.png itself"},
		{[]string{"in/img00.png", "--out", "./in/../in/img00.png"}, "--out ./in/../in/img00.png is the input file in/img00.png itself"},
		{[]string{"in/img00.png", "--out", "in"}, "the output for in/img00.png would be written over the input in/img00.png"},
		{[]string{"in", "--out", "o.png"}, "--out o.png looks like a file name"},
		{[]string{"in/img00.png", "--format", "tiff", "--out", "o.png"}, "--out o.png names a png file but --format is tiff"},
		{[]string{"-", "in"}, "- (standard input) must be the only PATH"},
		{[]string{"-"}, "reading standard input needs --out"},
		{[]string{"in", "--out", "-"}, "--out - writes one image to standard output"},
		{nil, "give at least one PATH"},
		{[]string{"in", "--out"}, "option --out needs a value"},
	} {
		t.Run(strings.Join(c.args, " "), func(t *testing.T) {
			r := denoise(t, dir, c.args...)
			r.want(t, 2, "tessera: "+c.msg)
			if _, err := os.Stat(filepath.Join(dir, "out")); err == nil {
				t.Fatal("a usage error wrote outputs")
			}
		})
	}
	// Without --sigma and without an estimator the fix is named.
	if estimateSigma == nil {
		r := tessera(t, dir, nil, nil, "denoise", "in", "--out", "out")
		r.want(t, 2, "--sigma is required")
	}
	tessera(t, dir, nil, nil, "frobnicate").want(t, 2, `unknown command "frobnicate"`)
}

// TestUnreadable: a folder and a file that cannot be read fail alone. As
// root the binary runs as user nobody, for whom permissions hold.
func TestUnreadable(t *testing.T) {
	needBin(t)
	var prefix []string
	if os.Geteuid() == 0 {
		sp, err := exec.LookPath("setpriv")
		if err != nil {
			t.Skip("running as root without setpriv: file permissions cannot be tested")
		}
		prefix = []string{sp, "--reuid=65534", "--regid=65534", "--clear-groups", "--"}
	}
	dir := t.TempDir()
	for p := dir; p != filepath.Dir(p) && p != os.TempDir(); p = filepath.Dir(p) {
		os.Chmod(p, 0o755) // the test's own folders only
		if filepath.Dir(p) == os.TempDir() {
			break
		}
	}
	in := filepath.Join(dir, "in")
	makeFolder(t, in, 1)
	f, _ := testImage(48, 48, 1, 8, false, 4)
	writeImage(t, filepath.Join(in, "locked", "a.png"), f, "png")
	writeImage(t, filepath.Join(in, "secret.png"), f, "png")
	os.Chmod(filepath.Join(in, "locked"), 0)
	os.Chmod(filepath.Join(in, "secret.png"), 0)
	out := filepath.Join(dir, "out")
	os.Mkdir(out, 0o755)
	os.Chmod(out, 0o777)
	t.Cleanup(func() { os.Chmod(filepath.Join(in, "locked"), 0o755) })

	args := append(prefix, bin, "denoise", "--sigma", "10")
	args = append(append(args, fast...), "in", "--out", "out")
	cmd := exec.Command(args[0], args[1:]...)
	cmd.Dir, cmd.Env = dir, cleanEnv()
	var errb bytes.Buffer
	cmd.Stderr = &errb
	err := cmd.Run()
	ee, ok := err.(*exec.ExitError)
	if !ok || ee.ExitCode() != 1 {
		t.Fatalf("status %v, want 1\n%s", err, errb.String())
	}
	r := result{stderr: errb.String(), code: 1}
	r.want(t, 1, "tessera: in/locked: cannot read the folder (permission denied); check its permissions",
		"tessera: in/secret.png: cannot read (permission denied); check the file's permissions",
		"1 done, 0 skipped, 2 failed")
}

// TestDiskFull: a write that runs out of space fails that image with the
// fix, on standard output (/dev/full) and, as root, on a tiny tmpfs.
func TestDiskFull(t *testing.T) {
	needBin(t)
	dir := t.TempDir()
	f, _ := testImage(48, 48, 1, 8, false, 5)
	writeImage(t, filepath.Join(dir, "a.png"), f, "png")
	devFull, err := os.OpenFile("/dev/full", os.O_WRONLY, 0)
	if err != nil {
		t.Skip("no /dev/full")
	}
	defer devFull.Close()
	args := append(append([]string{"denoise", "--sigma", "10"}, fast...), "a.png", "--out", "-")
	cmd := exec.Command(bin, args...)
	cmd.Dir, cmd.Env, cmd.Stdout = dir, cleanEnv(), devFull
	var errb bytes.Buffer
	cmd.Stderr = &errb
	err = cmd.Run()
	if ee, ok := err.(*exec.ExitError); !ok || ee.ExitCode() != 1 {
		t.Fatalf("status %v, want 1\n%s", err, errb.String())
	}
	(result{stderr: errb.String(), code: 1}).want(t, 1, "standard output: cannot write (no space left on device); the disk is full")

	if os.Geteuid() != 0 {
		t.Skip("mounting a small tmpfs needs root")
	}
	mnt := filepath.Join(dir, "small")
	os.Mkdir(mnt, 0o755)
	if err := exec.Command("mount", "-t", "tmpfs", "-o", "size=8k", "tmpfs", mnt).Run(); err != nil {
		t.Skipf("cannot mount a tmpfs: %v", err)
	}
	t.Cleanup(func() { exec.Command("umount", mnt).Run() })
	os.WriteFile(filepath.Join(mnt, "fill"), bytes.Repeat([]byte{1}, 4096), 0o644)
	big, _ := testImage(96, 96, 3, 16, false, 6)
	writeImage(t, filepath.Join(dir, "big.png"), big, "png")
	r := denoise(t, dir, "--sigma", "2570", "big.png", "--out", "small/big.png")
	r.want(t, 1, "small/big.png: disk full or over quota while writing", "free some space or write to another folder")
	ents, _ := os.ReadDir(mnt)
	if len(ents) != 1 {
		t.Fatalf("files left on the full disk: %v", ents)
	}
}

// TestShard: N shares cover every image exactly once, sizes within one.
func TestShard(t *testing.T) {
	dir := t.TempDir()
	rels := makeFolder(t, filepath.Join(dir, "in"), 7)
	seen := map[string]int{}
	var sizes []int
	for k := 1; k <= 3; k++ {
		rep := fmt.Sprintf("r%d.jsonl", k)
		denoise(t, dir, "--shard", fmt.Sprintf("%d/3", k), "in", "--out", "out", "--report", rep).
			want(t, 0, fmt.Sprintf("(share %d/3 of 7 listed images)", k))
		recs := readReport(t, filepath.Join(dir, rep))
		sizes = append(sizes, len(recs))
		for _, rec := range recs {
			if rec["status"] != "done" {
				t.Fatalf("share %d: %v", k, rec)
			}
			seen[filepath.ToSlash(rec["input"].(string))]++
		}
	}
	for _, rel := range rels {
		if seen["in/"+rel] != 1 {
			t.Fatalf("%s processed %d times over the shares", rel, seen["in/"+rel])
		}
	}
	if len(seen) != len(rels) || fmt.Sprint(sizes) != "[3 2 2]" {
		t.Fatalf("shares %v over %d images", sizes, len(seen))
	}
	// Sharded outputs equal an unsharded run.
	denoise(t, dir, "in", "--out", "whole").want(t, 0)
	sameTree(t, tree(t, filepath.Join(dir, "whole")), tree(t, filepath.Join(dir, "out")))

	for _, bad := range []string{"0/3", "4/3", "1/0", "a/b", "1-3", "1/3/4", "+1/3", " 1/3", "1/", "/3", "", "auto2", "0x1/2"} {
		r := denoise(t, dir, "--shard", bad, "in", "--out", "bad")
		r.want(t, 2, "--shard")
	}
}

// TestShardAuto: job-array variables pick the share; the Slurm index is
// made 0-based with SLURM_ARRAY_TASK_MIN.
func TestShardAuto(t *testing.T) {
	dir := t.TempDir()
	makeFolder(t, filepath.Join(dir, "in"), 5)
	inputs := func(r result) []string {
		var s []string
		for _, rec := range parseReport(t, r.stdout) {
			s = append(s, filepath.ToSlash(rec["input"].(string)))
		}
		sort.Strings(s)
		return s
	}
	run := func(env []string, args ...string) result {
		a := append(append([]string{"denoise", "--sigma", "10", "--report", "-"}, fast...), args...)
		return tessera(t, dir, nil, env, append(a, "in", "--out", "out")...)
	}
	explicit := run(nil, "--shard", "2/3")
	explicit.want(t, 0)
	slurm := run([]string{"SLURM_ARRAY_TASK_ID=5", "SLURM_ARRAY_TASK_COUNT=3", "SLURM_ARRAY_TASK_MIN=4"}, "--shard", "auto", "--force")
	slurm.want(t, 0, "share 2/3")
	if a, b := inputs(explicit), inputs(slurm); fmt.Sprint(a) != fmt.Sprint(b) || len(a) != 2 {
		t.Fatalf("--shard auto under Slurm took %v, --shard 2/3 took %v", b, a)
	}
	k8s := run([]string{"JOB_COMPLETION_INDEX=1"}, "--shard", "auto", "--shard-count", "3", "--force")
	k8s.want(t, 0, "share 2/3")
	if a, b := inputs(explicit), inputs(k8s); fmt.Sprint(a) != fmt.Sprint(b) {
		t.Fatalf("--shard auto with JOB_COMPLETION_INDEX took %v, --shard 2/3 took %v", b, a)
	}
	run([]string{"SLURM_ARRAY_TASK_ID=0", "SLURM_ARRAY_TASK_COUNT=2"}, "--shard", "auto", "--force").want(t, 0, "share 1/2")
	run([]string{"SLURM_ARRAY_TASK_ID=7", "SLURM_ARRAY_TASK_COUNT=3", "SLURM_ARRAY_TASK_MIN=1"}, "--shard", "auto").
		want(t, 2, "outside 0..2")
	run([]string{"JOB_COMPLETION_INDEX=1"}, "--shard", "auto").want(t, 2, "also give --shard-count")
	run(nil, "--shard", "auto").want(t, 2, "neither SLURM_ARRAY_TASK_ID nor JOB_COMPLETION_INDEX is set")
	run([]string{"SLURM_ARRAY_TASK_ID=x", "SLURM_ARRAY_TASK_COUNT=3"}, "--shard", "auto").want(t, 2, "is not a whole number")
}

// TestSixteenBit: 16-bit PNG and TIFF, gray and colour, come back 16-bit in
// their own format, with values that an 8-bit image could not hold.
func TestSixteenBit(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		name, format string
		ch           int
	}{{"g16.png", "png", 1}, {"c16.tif", "tiff", 3}, {"g16.pgm", "pgm", 1}} {
		f, clean := testImage(48, 48, c.ch, 16, false, 8)
		writeImage(t, filepath.Join(dir, "in", c.name), f, c.format)
		// σ = 10 on the 8-bit scale is 2570 in 16-bit units.
		denoise(t, dir, "--sigma", "2570", "in/"+c.name, "--out", "out/").want(t, 0)
		out := decode(t, filepath.Join(dir, "out", c.name))
		if out.Format != c.format || out.Img.Depth != 16 || out.Img.C != c.ch {
			t.Fatalf("%s: came back as %s, %d-bit, %d channels", c.name, out.Format, out.Img.Depth, out.Img.C)
		}
		off := 0
		for _, v := range out.Img.Pix {
			if int(v)%257 != 0 {
				off++
			}
		}
		if off < len(out.Img.Pix)/2 {
			t.Fatalf("%s: only %d of %d samples use the 16-bit range", c.name, off, len(out.Img.Pix))
		}
		if after, before := mse(out.Img, clean), mse(f.Img, clean); !(after < before) {
			t.Fatalf("%s: MSE %.0f after, %.0f before", c.name, after, before)
		}
	}
}

// TestFormatOption: --format changes the format and the extension; pgm
// names gray outputs .pgm and colour ones .ppm; alpha cannot go to PGM.
func TestFormatOption(t *testing.T) {
	dir := t.TempDir()
	g, _ := testImage(48, 48, 1, 8, false, 1)
	c, _ := testImage(48, 48, 3, 8, false, 2)
	a, _ := testImage(48, 48, 1, 8, true, 3)
	writeImage(t, filepath.Join(dir, "in", "g.png"), g, "png")
	writeImage(t, filepath.Join(dir, "in", "c.tif"), c, "tiff")
	denoise(t, dir, "--format", "tiff", "in", "--out", "t").want(t, 0, "2 done")
	if got := keys(tree(t, filepath.Join(dir, "t"))); fmt.Sprint(got) != "[c.tif g.tif]" {
		t.Fatalf("--format tiff gave %v", got)
	}
	if f := decode(t, filepath.Join(dir, "t", "g.tif")); f.Format != "tiff" {
		t.Fatalf("g.tif holds %s", f.Format)
	}
	denoise(t, dir, "--format", "pgm", "in", "--out", "p").want(t, 0, "2 done")
	if got := keys(tree(t, filepath.Join(dir, "p"))); fmt.Sprint(got) != "[c.ppm g.pgm]" {
		t.Fatalf("--format pgm gave %v", got)
	}
	denoise(t, dir, "--format", "pgm", "in", "--out", "p").want(t, 0, "0 done, 2 skipped")
	writeImage(t, filepath.Join(dir, "alpha.png"), a, "png")
	denoise(t, dir, "--format", "pgm", "alpha.png", "--out", "q").want(t, 1, "alpha in PGM/PPM is not supported; choose --format png or tiff")
	// Without --out the output lands beside the input.
	denoise(t, dir, "alpha.png").want(t, 0)
	if f := decode(t, filepath.Join(dir, "alpha.denoised.png")); f.Alpha == nil {
		t.Fatal("alpha.denoised.png lost its alpha")
	}
	// Two inputs for one output fail, the others go on.
	writeImage(t, filepath.Join(dir, "in", "g.tif"), g, "tiff")
	denoise(t, dir, "--format", "png", "in", "--out", "clash").want(t, 1,
		"in/g.png and in/g.tif would both be written to clash/g.png", "1 done, 0 skipped, 2 failed")
}

// TestStdio: "-" reads standard input; --out - writes standard output; the
// bytes equal those written to a file from the same input.
func TestStdio(t *testing.T) {
	dir := t.TempDir()
	f, _ := testImage(48, 48, 3, 8, false, 11)
	png := encodeBytes(t, f, "png")
	writeImage(t, filepath.Join(dir, "a.png"), f, "png")
	args := append(append([]string{"denoise", "--sigma", "10"}, fast...), "-", "--out", "-")
	r := tessera(t, dir, png, nil, args...)
	r.want(t, 0, "1 done")
	out, err := imgfile.Decode(strings.NewReader(r.stdout), "stdout", 0)
	if err != nil || out.Format != "png" || out.Img.W != 48 || out.Img.C != 3 {
		t.Fatalf("standard output is not the image: %v", err)
	}
	args[len(args)-1] = "s.png"
	tessera(t, dir, png, nil, args...).want(t, 0)
	if b, _ := os.ReadFile(filepath.Join(dir, "s.png")); !bytes.Equal(b, []byte(r.stdout)) {
		t.Fatal("stdin to a file differs from stdin to stdout")
	}
	// A file to standard output, with the format by content on a TIFF.
	r = tessera(t, dir, nil, nil, append(append([]string{"denoise", "--sigma", "10"}, fast...), "a.png", "--out", "-")...)
	r.want(t, 0)
	if !bytes.HasPrefix([]byte(r.stdout), []byte("\x89PNG")) {
		t.Fatal("a.png to stdout is not a PNG")
	}
	tessera(t, dir, encodeBytes(t, f, "tiff"), nil, append(append([]string{"denoise", "--sigma", "10"}, fast...), "-", "--out", "-")...).want(t, 0)
	r = tessera(t, dir, []byte("junk"), nil, append(append([]string{"denoise", "--sigma", "10"}, fast...), "-", "--out", "-")...)
	r.want(t, 1, "tessera: stdin: not a PNG, TIFF, JPEG, PGM or PPM file")
	if r.stdout != "" {
		t.Fatal("a failed image wrote to stdout")
	}
}

// TestSigmaEstimated: without --sigma each image's σ is estimated in its
// own units and recorded; a colour image uses the root mean square of its
// channels. The images are gentle ramps, where a white-noise estimator
// has nothing to mistake for noise; the tolerance (a factor 1.5) checks
// units and plumbing only, the estimator's accuracy is tested in
// restore/noise.
func TestSigmaEstimated(t *testing.T) {
	if estimateSigma == nil {
		t.Skip("this build has no noise estimator")
	}
	dir := t.TempDir()
	writeImage(t, filepath.Join(dir, "in", "g16.png"), rampImage(96, 1, 16), "png")
	writeImage(t, filepath.Join(dir, "in", "c8.png"), rampImage(64, 3, 8), "png")
	r := tessera(t, dir, nil, nil, append(append([]string{"denoise"}, fast...), "in", "--out", "out", "--report", "-")...)
	r.want(t, 0, "2 done")
	for _, rec := range parseReport(t, r.stdout) {
		truth := 10.0 // the σ testImage adds, in 8-bit units
		if rec["bit_depth"] == 16.0 {
			truth *= 65535.0 / 255
		}
		s, _ := rec["sigma"].(float64)
		if rec["sigma_estimated"] != true || !(s > truth/1.5 && s < truth*1.5) {
			t.Fatalf("%v: σ %v estimated %v, true σ %g", rec["input"], rec["sigma"], rec["sigma_estimated"], truth)
		}
		ch, _ := rec["sigma_channels"].([]any)
		if len(ch) != int(rec["channels"].(float64)) {
			t.Fatalf("%v: %d channel estimates", rec["input"], len(ch))
		}
		sum := 0.0
		for _, v := range ch {
			sum += v.(float64) * v.(float64)
		}
		if rms := math.Sqrt(sum / float64(len(ch))); math.Abs(rms-s) > 1e-3*s {
			t.Fatalf("%v: σ %g is not the RMS %g of %v", rec["input"], s, rms, ch)
		}
	}
	// A flat image has no noise to measure.
	writeImage(t, filepath.Join(dir, "flat.png"), &imgfile.File{Img: patches.New(32, 32, 1, 8)}, "png")
	tessera(t, dir, nil, nil, append(append([]string{"denoise"}, fast...), "flat.png")...).
		want(t, 1, "tessera: flat.png: the noise estimate is 0 (a flat or noise-free image?); give --sigma")
}

// rampImage is a w×w ramp plus white Gaussian noise of σ = 10 in 8-bit
// units (scaled for 16-bit).
func rampImage(w, c, depth int) *imgfile.File {
	m := patches.New(w, w, c, depth)
	scale := m.Peak() / 255
	r := rand.New(rand.NewPCG(uint64(w), uint64(c)))
	for ch := 0; ch < c; ch++ {
		pl := m.Plane(ch)
		for y := 0; y < w; y++ {
			for x := 0; x < w; x++ {
				pl[y*w+x] = float32((60 + float64(x+y+20*ch) + 10*r.NormFloat64()) * scale)
			}
		}
	}
	m.Quantize()
	return &imgfile.File{Img: m, Format: "png"}
}
