package main

import (
	"encoding/json"
	"math"
	"path/filepath"
	"testing"
)

func TestParseHoles(t *testing.T) {
	h, err := parseHoles("50%, 80.0%,TEXT")
	if err != nil || len(h) != 3 || h[0] != (holeSpec{"50%", 0.5}) || h[1] != (holeSpec{"80%", 0.8}) || h[2] != (holeSpec{"text", 0}) {
		t.Fatalf("parseHoles: %v, %v", h, err)
	}
	for _, s := range []string{"", "50", "0%", "100%", "50%,50.0%", "lines", "-5%", "NaN%"} {
		if _, err := parseHoles(s); err == nil {
			t.Errorf("parseHoles(%q): want an error", s)
		}
	}
}

// TestBenchInpaint runs the inpainting protocol on one small image: the
// harmonic fill first as the baseline (gain 0), the default (dct), the
// dictionary (ksvd) and the non-local (group) fills measured against it, the holes as asked, and the usage errors of the protocol.
func TestBenchInpaint(t *testing.T) {
	dir := t.TempDir()
	cleanSet(t, filepath.Join(dir, "set"), 1, 1, 48)
	r := tessera(t, dir, nil, nil, append([]string{"bench", "--set", "set", "--task", "inpaint", "--holes", "50%,text", "--compare", "ksvd,group", "--json", "f.json", "--csv", "f.csv"}, quick...)...)
	r.want(t, 0)
	var rep fillReport
	if err := json.Unmarshal(mustRead(t, filepath.Join(dir, "f.json")), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Runs) != 8 || len(rep.Mean) != 8 || rep.Task != "inpaint" {
		t.Fatalf("%d runs, %d means, task %q", len(rep.Runs), len(rep.Mean), rep.Task)
	}
	for i, want := range []struct{ holes, method string }{{"50%", "harmonic"}, {"50%", "dct"}, {"50%", "ksvd"}, {"50%", "group"}, {"text", "harmonic"}, {"text", "dct"}, {"text", "ksvd"}, {"text", "group"}} {
		run := rep.Runs[i]
		if run.Holes != want.holes || run.Method != want.method || !(run.PSNR > 10) {
			t.Errorf("run %d: %+v, want %s by %s", i, run, want.holes, want.method)
		}
		if run.Method == "harmonic" && run.Gain != 0 {
			t.Errorf("the baseline's gain is %g", run.Gain)
		}
		if base := rep.Runs[i-i%4]; math.Abs(run.Gain-(run.PSNR-base.PSNR)) > 1e-3 {
			t.Errorf("gain %g is not PSNR %g over the harmonic %g", run.Gain, run.PSNR, base.PSNR)
		}
	}
	// 48² = 2304 pixels at 50%: 5 binomial s.d. is 0.052.
	if m := rep.Runs[0].Missing; math.Abs(m-0.5) > 0.052 {
		t.Errorf("50%% holes cover %g of the pixels", m)
	}
	for _, bad := range []struct {
		args []string
		msg  string
	}{
		{[]string{"--task", "fill"}, `--task "fill": unknown protocol; choose denoise (the default) or inpaint`},
		{[]string{"--holes", "50%"}, "--holes goes with --task inpaint"},
		{[]string{"--task", "inpaint", "--sigma", "25"}, "--sigma goes with --task denoise"},
		{[]string{"--task", "inpaint", "--method", "nlm"}, `--method "nlm": unknown fill method; choose dct, group or ksvd`},
		{[]string{"--task", "inpaint", "--holes", "120%"}, `--holes "120%": "120%" is neither N%`},
	} {
		tessera(t, dir, nil, nil, append([]string{"bench", "--set", "set"}, bad.args...)...).want(t, 2, bad.msg)
	}
}
