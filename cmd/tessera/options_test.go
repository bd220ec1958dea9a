package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"time"

	"tessera/restore"
)

func TestParseShard(t *testing.T) {
	for s, want := range map[string]shard{"1/1": {1, 1}, "2/8": {2, 8}, "8/8": {8, 8}, "007/10": {7, 10}} {
		if got, err := parseShard(s); err != nil || got != want {
			t.Errorf("parseShard(%q) = %v, %v; want %v", s, got, err, want)
		}
	}
	for _, s := range []string{"", "/", "1", "0/1", "2/1", "1/0", "-1/2", "+1/2", "1/+2", " 1/2", "1/2 ", "1.0/2",
		"1/2/3", "0x1/2", "1/1e3", "1/2000000", "9999999999/9999999999", "١/٢"} {
		if got, err := parseShard(s); err == nil {
			t.Errorf("parseShard(%q) = %v, want an error", s, got)
		}
	}
}

// TestShardPartition: for every N the shares 1..N take each position once.
func TestShardPartition(t *testing.T) {
	for n := 1; n <= 7; n++ {
		for i := 0; i < 50; i++ {
			c := 0
			for k := 1; k <= n; k++ {
				if (shard{k, n}).keeps(i) {
					c++
				}
			}
			if c != 1 {
				t.Fatalf("N=%d: position %d kept by %d shares", n, i, c)
			}
		}
	}
	if !(shard{}).keeps(12345) {
		t.Fatal("no shard must keep everything")
	}
}

func TestAutoShard(t *testing.T) {
	env := func(kv ...string) func(string) string {
		m := map[string]string{}
		for i := 0; i+1 < len(kv); i += 2 {
			m[kv[i]] = kv[i+1]
		}
		return func(k string) string { return m[k] }
	}
	ok := []struct {
		env   func(string) string
		count int
		want  shard
	}{
		{env("SLURM_ARRAY_TASK_ID", "0", "SLURM_ARRAY_TASK_COUNT", "4"), 0, shard{1, 4}},
		{env("SLURM_ARRAY_TASK_ID", "3", "SLURM_ARRAY_TASK_COUNT", "4"), 0, shard{4, 4}},
		{env("SLURM_ARRAY_TASK_ID", "4", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "1"), 0, shard{4, 4}},
		// --array=10-40:10 gives IDs 10, 20, 30, 40 and COUNT 4.
		{env("SLURM_ARRAY_TASK_ID", "30", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "10", "SLURM_ARRAY_TASK_STEP", "10"), 0, shard{3, 4}},
		{env("SLURM_ARRAY_TASK_ID", "2"), 5, shard{3, 5}},
		{env("JOB_COMPLETION_INDEX", "0"), 2, shard{1, 2}},
		{env("JOB_COMPLETION_INDEX", "1"), 2, shard{2, 2}},
	}
	for i, c := range ok {
		if got, err := autoShard(c.env, c.count); err != nil || got != c.want {
			t.Errorf("case %d: %v, %v; want %v", i, got, err, c.want)
		}
	}
	bad := []struct {
		env   func(string) string
		count int
	}{
		{env(), 0},
		{env("SLURM_ARRAY_TASK_ID", "4", "SLURM_ARRAY_TASK_COUNT", "4"), 0},
		{env("SLURM_ARRAY_TASK_ID", "0", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "1"), 0},
		{env("SLURM_ARRAY_TASK_ID", "15", "SLURM_ARRAY_TASK_COUNT", "4", "SLURM_ARRAY_TASK_MIN", "10", "SLURM_ARRAY_TASK_STEP", "10"), 0},
		{env("SLURM_ARRAY_TASK_ID", "1"), 0},
		{env("SLURM_ARRAY_TASK_ID", "-1", "SLURM_ARRAY_TASK_COUNT", "4"), 0},
		{env("SLURM_ARRAY_TASK_ID", "1", "SLURM_ARRAY_TASK_COUNT", "0"), 0},
		{env("JOB_COMPLETION_INDEX", "2"), 2},
		{env("JOB_COMPLETION_INDEX", "0"), 0},
		{env("JOB_COMPLETION_INDEX", "zero"), 2},
	}
	for i, c := range bad {
		if got, err := autoShard(c.env, c.count); err == nil {
			t.Errorf("bad case %d: got %v, want an error", i, got)
		}
	}
}

func TestParseSigma(t *testing.T) {
	for s, want := range map[string]float64{"10": 10, "0.5": 0.5, "2570": 2570, "1e-3": 1e-3, "25.0": 25} {
		if got, err := parseSigma(s); err != nil || got != want {
			t.Errorf("parseSigma(%q) = %v, %v", s, got, err)
		}
	}
	for _, s := range []string{"", "0", "-0", "-1", "NaN", "nan", "Inf", "+Inf", "-inf", "1e400", "1e-400", "ten", "10 ", "1,5"} {
		if got, err := parseSigma(s); err == nil {
			t.Errorf("parseSigma(%q) = %v, want an error", s, got)
		}
	}
}

func TestParseMaxPixels(t *testing.T) {
	for s, want := range map[string]int64{"1e9": 1e9, "0": 0, "1000000": 1e6, "4096": 4096} {
		if got, err := parseMaxPixels(s); err != nil || got != want {
			t.Errorf("parseMaxPixels(%q) = %v, %v", s, got, err)
		}
	}
	for _, s := range []string{"", "-1", "1.5", "NaN", "Inf", "1e300", "many"} {
		if got, err := parseMaxPixels(s); err == nil {
			t.Errorf("parseMaxPixels(%q) = %v, want an error", s, got)
		}
	}
}

func TestIntersperse(t *testing.T) {
	vf := map[string]bool{"out": true, "sigma": true}
	cases := []struct{ in, want []string }{
		{[]string{"a", "--out", "o", "b"}, []string{"--out", "o", "--", "a", "b"}},
		{[]string{"--sigma", "-5", "a"}, []string{"--sigma", "-5", "--", "a"}},
		{[]string{"-", "--out", "-"}, []string{"--out", "-", "--", "-"}},
		{[]string{"--quiet", "a", "--out=o"}, []string{"--quiet", "--out=o", "--", "a"}},
		{[]string{"a", "--", "--out", "b"}, []string{"--", "a", "--out", "b"}},
		{[]string{"--help"}, []string{"--help"}},
	}
	for _, c := range cases {
		got, err := intersperse(c.in, vf)
		if err != nil || !reflect.DeepEqual(got, c.want) {
			t.Errorf("intersperse(%q) = %q, %v; want %q", c.in, got, err, c.want)
		}
	}
	if _, err := intersperse([]string{"a", "--out"}, vf); err == nil {
		t.Error("a trailing --out without a value was accepted")
	}
}

// TestTempTarget: the stale-temporary cleanup recognises the names that
// os.CreateTemp makes from imgfile.WriteFileAtomic's pattern "."+name+".*.tmp".
func TestTempTarget(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"a.png", "x.y.tif", "sp ace.pgm"} {
		f, err := os.CreateTemp(dir, "."+name+".*.tmp")
		if err != nil {
			t.Fatal(err)
		}
		f.Close()
		if got, ok := tempTarget(filepath.Base(f.Name())); !ok || got != name {
			t.Errorf("tempTarget(%q) = %q, %v; want %q", filepath.Base(f.Name()), got, ok, name)
		}
	}
	for _, n := range []string{"a.png", ".a.png", ".a.png.tmp", ".a.png.12x.tmp", "a.png.12.tmp", "..12.tmp"} {
		if got, ok := tempTarget(n); ok {
			t.Errorf("tempTarget(%q) = %q, want no match", n, got)
		}
	}
}

func TestOutNames(t *testing.T) {
	cases := []struct{ name, format, gray, rgb string }{
		{"a/b.png", "", "a/b.png", ""},
		{"a/b.png", "png", "a/b.png", ""},
		{"a/b.PNG", "tiff", "a/b.tif", ""},
		{"b.tiff", "tiff", "b.tiff", ""},
		{"b.ppm", "pgm", "b.ppm", ""},
		{"b.jpg", "pgm", "b.pgm", "b.ppm"},
		{"scan", "png", "scan.png", ""},
	}
	for _, c := range cases {
		if g, r := outNames(c.name, c.format); g != c.gray || r != c.rgb {
			t.Errorf("outNames(%q, %q) = %q, %q", c.name, c.format, g, r)
		}
	}
	if got := besideName("dir.x/a.png"); got != "dir.x/a.denoised.png" {
		t.Errorf("besideName = %q", got)
	}
}

// TestConsole: the bar is drawn in place and erased before every message
// line, so a message never lands in the middle of it; without a terminal
// only the lines are written.
func TestConsole(t *testing.T) {
	var b bytes.Buffer
	c := newConsole(&b, true, func() int { return 100 })
	c.total = 3
	c.begin(0, "sub/a.png")
	c.set(0, stageText(restore.Stage{Name: "train", Round: 1, Rounds: 2}))
	c.dirty = true
	c.redraw()
	if got := b.String(); got != "\r\x1b[Ktessera: 0/3 images | sub/a.png: training round 2 of 2" {
		t.Fatalf("bar %q", got)
	}
	b.Reset()
	c.line("tessera: x.png: broken")
	if got := b.String(); got != "\r\x1b[Ktessera: x.png: broken\n" {
		t.Fatalf("line over the bar %q", got)
	}
	c.set(0, stageText(restore.Stage{Name: "code", Done: 5, Total: 20}))
	c.begin(1, "b.png")
	c.latest = 0
	b.Reset()
	c.redraw()
	if got := b.String(); got != "\r\x1b[Ktessera: 0/3 images | sub/a.png: coding 25% (+1 more running)" {
		t.Fatalf("bar %q", got)
	}
	c.finish("tessera: done")
	if got := b.String(); !strings.HasSuffix(got, "\r\x1b[Ktessera: done\n") {
		t.Fatalf("finish %q", got)
	}

	b.Reset()
	q := newConsole(&b, false, nil)
	q.start(2)
	q.begin(0, "a.png")
	q.set(0, "coding 50%")
	time.Sleep(150 * time.Millisecond)
	q.line("tessera: a.png: broken")
	q.finish("")
	if got := b.String(); got != "tessera: a.png: broken\n" {
		t.Fatalf("without a terminal: %q", got)
	}
	if got := truncate("abcdef", 4); got != "abc…" {
		t.Fatalf("truncate = %q", got)
	}
}

func TestStageText(t *testing.T) {
	for _, c := range []struct {
		s    restore.Stage
		want string
	}{
		{restore.Stage{Name: "train", Round: 0, Rounds: 10}, "training round 1 of 10"},
		{restore.Stage{Name: "train", Round: 9, Rounds: 10}, "training round 10 of 10"},
		{restore.Stage{Name: "train", Round: 10, Rounds: 10}, "coding 0%"},
		{restore.Stage{Name: "code", Done: 41, Total: 41}, "coding 100%"},
	} {
		if got := stageText(c.s); got != c.want {
			t.Errorf("stageText(%+v) = %q, want %q", c.s, got, c.want)
		}
	}
}

func FuzzShardSpec(f *testing.F) {
	for _, s := range []string{"1/1", "2/8", "0/3", "4/3", "a/b", "1/", "/1", "01/02", "1/1048576", "1/1048577", "+1/2"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		sh, err := parseShard(s)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "--shard ") {
				t.Fatalf("error %q does not name the option", err)
			}
			return
		}
		if sh.K < 1 || sh.K > sh.N || sh.N > maxShards {
			t.Fatalf("parseShard(%q) = %v out of range", s, sh)
		}
		if strings.Trim(s, "0123456789/") != "" {
			t.Fatalf("parseShard(%q) took characters other than digits and /", s)
		}
		if again, err := parseShard(sh.String()); err != nil || again != sh {
			t.Fatalf("round trip of %q: %v, %v", s, again, err)
		}
	})
}

func FuzzSigma(f *testing.F) {
	for _, s := range []string{"10", "0", "-1", "NaN", "Inf", "1e400", "1e-400", "0x1p3", "1_0", ".5", "5."} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v, err := parseSigma(s)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "--sigma ") {
				t.Fatalf("error %q does not name the option", err)
			}
			return
		}
		if !(v > 0) || math.IsInf(v, 0) || math.IsNaN(v) {
			t.Fatalf("parseSigma(%q) = %v", s, v)
		}
		if p, err := strconv.ParseFloat(s, 64); err != nil || p != v {
			t.Fatalf("parseSigma(%q) = %v, strconv says %v, %v", s, v, p, err)
		}
	})
}
