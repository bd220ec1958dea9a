package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches"
)

// bin is the tessera binary built once for the end-to-end tests.
var bin string

func TestMain(m *testing.M) {
	flag.Parse()
	if f := flag.Lookup("test.fuzz"); f != nil && f.Value.String() != "" {
		os.Exit(m.Run()) // fuzzing the parsers needs no binary
	}
	dir, err := os.MkdirTemp("", "tessera-e2e-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	os.Chmod(dir, 0o755) // the unreadable-input tests run it as another user
	bin = filepath.Join(dir, "tessera")
	build := exec.Command("go", "build", "-o", bin, ".")
	build.Stderr = os.Stderr
	if err := build.Run(); err != nil {
		fmt.Fprintln(os.Stderr, "building tessera:", err)
		os.RemoveAll(dir)
		os.Exit(1)
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

func needBin(t *testing.T) {
	t.Helper()
	if bin == "" {
		t.Skip("the binary is not built while fuzzing")
	}
}

// fast keeps each image to a fraction of a second: one K-SVD round on a
// small dictionary.
var fast = []string{"--rounds", "1", "--train", "500", "--atoms", "64"}

// result of one run of the binary.
type result struct {
	stdout, stderr string
	code           int
}

// cleanEnv is the test's environment without job-array variables, so a
// test run inside a Slurm or Kubernetes job sees none of its own.
func cleanEnv(extra ...string) []string {
	var env []string
	for _, kv := range os.Environ() {
		if strings.HasPrefix(kv, "SLURM_") || strings.HasPrefix(kv, "JOB_COMPLETION_INDEX=") {
			continue
		}
		env = append(env, kv)
	}
	return append(env, extra...)
}

// tessera runs the binary in dir with args and returns its output.
func tessera(t *testing.T, dir string, stdin []byte, env []string, args ...string) result {
	t.Helper()
	needBin(t)
	cmd := exec.Command(bin, args...)
	cmd.Dir = dir
	cmd.Env = cleanEnv(env...)
	if stdin != nil {
		cmd.Stdin = bytes.NewReader(stdin)
	}
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	code := 0
	if err != nil {
		ee, ok := err.(*exec.ExitError)
		if !ok {
			t.Fatalf("running tessera %v: %v", args, err)
		}
		code = ee.ExitCode()
	}
	return result{out.String(), errb.String(), code}
}

// denoise runs "tessera denoise" with the fast settings and σ = 10 (8-bit
// units) unless args give their own.
func denoise(t *testing.T, dir string, args ...string) result {
	t.Helper()
	a := append([]string{"denoise"}, fast...)
	if !hasArg(args, "--sigma") {
		a = append(a, "--sigma", "10")
	}
	return tessera(t, dir, nil, nil, append(a, args...)...)
}

func hasArg(args []string, name string) bool {
	for _, a := range args {
		if a == name || strings.HasPrefix(a, name+"=") {
			return true
		}
	}
	return false
}

func (r result) want(t *testing.T, code int, parts ...string) {
	t.Helper()
	if r.code != code {
		t.Fatalf("exit status %d, want %d\nstderr:\n%s", r.code, code, r.stderr)
	}
	for _, p := range parts {
		if !strings.Contains(r.stderr, p) {
			t.Fatalf("stderr lacks %q:\n%s", p, r.stderr)
		}
	}
}

// testImage is a smooth pattern plus white Gaussian noise of σ = 10 (in
// 8-bit units, scaled for 16-bit), reproducible from seed.
func testImage(w, h, c, depth int, alpha bool, seed uint64) (noisy *imgfile.File, clean *patches.Image) {
	r := rand.New(rand.NewPCG(seed, 7))
	clean = patches.New(w, h, c, depth)
	peak := clean.Peak()
	scale := peak / 255
	fx, fy := 2*math.Pi/float64(w)*(1+float64(seed%3)), 2*math.Pi/float64(h)*2
	for ch := 0; ch < c; ch++ {
		pl := clean.Plane(ch)
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				v := 128 + 60*math.Sin(fx*float64(x)+float64(ch)) + 40*math.Cos(fy*float64(y))
				if (x/12+y/12)%2 == 0 { // edges as well as smooth parts
					v -= 30
				}
				pl[y*w+x] = float32(v * scale)
			}
		}
	}
	n := clean.Clone()
	for i := range n.Pix {
		n.Pix[i] += float32(10 * scale * r.NormFloat64())
	}
	n.Quantize()
	f := &imgfile.File{Img: n, Format: "png"}
	if alpha {
		f.Alpha = make([]uint16, w*h)
		for i := range f.Alpha {
			f.Alpha[i] = uint16((i * 37) % int(peak+1))
		}
	}
	return f, clean
}

// writeImage encodes f as format to path, making folders as needed.
func writeImage(t *testing.T, path string, f *imgfile.File, format string) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := imgfile.Encode(&b, f, format); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func encodeBytes(t *testing.T, f *imgfile.File, format string) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := imgfile.Encode(&b, f, format); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func decode(t *testing.T, path string) *imgfile.File {
	t.Helper()
	f, err := imgfile.DecodeFile(path, 0)
	if err != nil {
		t.Fatalf("decoding an output: %v", err)
	}
	return f
}

// makeFolder writes n small noisy images (gray and colour, 8-bit PNG) into
// dir, some in subfolders, and returns their paths relative to dir.
func makeFolder(t *testing.T, dir string, n int) []string {
	t.Helper()
	var rels []string
	for i := 0; i < n; i++ {
		rel := fmt.Sprintf("img%02d.png", i)
		if i%3 == 1 {
			rel = fmt.Sprintf("sub/img%02d.png", i)
		} else if i%3 == 2 {
			rel = fmt.Sprintf("sub/deep/img%02d.png", i)
		}
		c := 1
		if i%2 == 1 {
			c = 3
		}
		f, _ := testImage(48, 48, c, 8, false, uint64(i))
		writeImage(t, filepath.Join(dir, filepath.FromSlash(rel)), f, "png")
		rels = append(rels, rel)
	}
	sort.Strings(rels)
	return rels
}

// tree maps every file under dir (slash-separated relative path) to the
// SHA-256 of its content.
func tree(t *testing.T, dir string) map[string]string {
	t.Helper()
	m := map[string]string{}
	err := filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err != nil {
			return err
		}
		if info.IsDir() {
			return nil
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		s := sha256.Sum256(b)
		m[filepath.ToSlash(rel)] = hex.EncodeToString(s[:])
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func sameTree(t *testing.T, a, b map[string]string) {
	t.Helper()
	if len(a) != len(b) {
		t.Fatalf("trees differ in size: %d and %d files\n%v\n%v", len(a), len(b), keys(a), keys(b))
	}
	for k, v := range a {
		if b[k] != v {
			t.Fatalf("%s differs between the runs", k)
		}
	}
}

func keys(m map[string]string) []string {
	var k []string
	for s := range m {
		k = append(k, s)
	}
	sort.Strings(k)
	return k
}

// readReport parses a JSON-lines report into generic maps.
func readReport(t *testing.T, path string) []map[string]any {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return parseReport(t, string(b))
}

func parseReport(t *testing.T, s string) []map[string]any {
	t.Helper()
	var recs []map[string]any
	for _, line := range strings.Split(strings.TrimSpace(s), "\n") {
		if line == "" {
			continue
		}
		var m map[string]any
		if err := json.Unmarshal([]byte(line), &m); err != nil {
			t.Fatalf("report line %q: %v", line, err)
		}
		recs = append(recs, m)
	}
	return recs
}

// waitFor polls until cond holds or the deadline passes.
func waitFor(d time.Duration, cond func() bool) bool {
	end := time.Now().Add(d)
	for time.Now().Before(end) {
		if cond() {
			return true
		}
		time.Sleep(2 * time.Millisecond)
	}
	return cond()
}

func mse(a, b *patches.Image) float64 {
	s := 0.0
	for i := range a.Pix {
		d := float64(a.Pix[i]) - float64(b.Pix[i])
		s += d * d
	}
	return s / float64(len(a.Pix))
}
