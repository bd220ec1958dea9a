package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"

	"tessera/restore"
)

func TestParseMethod(t *testing.T) {
	for s, want := range map[string]string{"ksvd": methodLearned, "GROUP": methodGroup, " group ": methodGroup} {
		if got, err := parseMethod(s); err != nil || got != want {
			t.Errorf("parseMethod(%q) = %q, %v; want %q", s, got, err, want)
		}
	}
	for _, s := range []string{"", "dct", "bm", "k-svd"} {
		if _, err := parseMethod(s); err == nil {
			t.Errorf("parseMethod(%q): want an error", s)
		}
	}
}

// TestDenoiseMethodGroup runs both methods through the command and checks
// that each output is nearer the clean frame than the noisy input is,
// that the group output is not the K-SVD one, and that the report names
// the method.
func TestDenoiseMethodGroup(t *testing.T) {
	dir := t.TempDir()
	noisy, clean := testImage(64, 64, 1, 8, false, 5)
	writeImage(t, filepath.Join(dir, "in", "a.png"), noisy, "png")
	fast := []string{"--sigma", "10", "--atoms", "64", "--train", "2000", "--rounds", "2", "--quiet"}
	denoise(t, dir, append([]string{"in", "--out", "k", "--report", "k.jsonl"}, fast...)...).want(t, 0)
	denoise(t, dir, append([]string{"in", "--out", "g", "--report", "g.jsonl", "--method", "group"}, fast...)...).want(t, 0)
	k, g := decode(t, filepath.Join(dir, "k", "a.png")), decode(t, filepath.Join(dir, "g", "a.png"))
	in := mse(noisy.Img, clean)
	if mk, mg := mse(k.Img, clean), mse(g.Img, clean); !(mk < in/2 && mg < in/2) {
		t.Errorf("MSE noisy %.2f, ksvd %.2f, group %.2f: both should halve it at least", in, mk, mg)
	}
	if mse(k.Img, g.Img) == 0 {
		t.Error("--method group gave the K-SVD output")
	}
	for file, want := range map[string]string{"k.jsonl": "ksvd", "g.jsonl": "group"} {
		rec := readReport(t, filepath.Join(dir, file))
		if len(rec) != 1 || rec[0]["method"] != want {
			t.Errorf("%s: %v, want method %q", file, rec, want)
		}
	}
	denoise(t, dir, "in", "--out", "x", "--sigma", "10", "--method", "nlm").want(t, 2, `--method "nlm": unknown method; choose ksvd (the default) or group`)
}

// TestGroupTiles: past --tile the group method runs on overlapping tiles;
// the result stays within a small margin of a whole run (the tiles learn
// their own dictionaries, so it is not equal).
func TestGroupTiles(t *testing.T) {
	noisy, clean := testImage(150, 97, 1, 8, false, 3)
	opt := restore.Defaults(10)
	opt.Train, opt.Rounds, opt.Atoms = 1000, 2, 64
	whole, _, err := (&config{method: methodGroup}).gaussDenoise(noisy.Img, 10, opt)
	if err != nil {
		t.Fatal(err)
	}
	tiled, _, err := (&config{method: methodGroup, dictConfig: dictConfig{tile: 64}}).gaussDenoise(noisy.Img, 10, opt)
	if err != nil {
		t.Fatal(err)
	}
	mw, mt := mse(whole, clean), mse(tiled, clean)
	t.Logf("MSE against clean: whole %.3f, tiles of 64 %.3f", mw, mt)
	if mt > 1.15*mw {
		t.Errorf("tiled MSE %.3f is more than 15%% above the whole run's %.3f", mt, mw)
	}
}

// TestBenchMethods: --method picks the first method and --compare adds
// the others, in that order, each measured on every image.
func TestBenchMethods(t *testing.T) {
	dir := t.TempDir()
	cleanSet(t, filepath.Join(dir, "set"), 1, 1, 48)
	r := tessera(t, dir, nil, nil, append([]string{"bench", "--set", "set", "--sigma", "25", "--method", "group", "--compare", "ksvd,group,dct", "--json", "b.json"}, quick...)...)
	r.want(t, 0)
	var rep struct {
		Runs    []struct{ Method string } `json:"runs"`
		Options struct {
			Patch           int `json:"patch"`
			GroupFirstPatch int `json:"group_first_patch"`
		} `json:"options"`
	}
	if err := json.Unmarshal(mustRead(t, filepath.Join(dir, "b.json")), &rep); err != nil {
		t.Fatal(err)
	}
	// Without --patch the group method's first stage is 9×9: the footer
	// and the JSON say so beside the patch of the others.
	if rep.Options.Patch != 8 || rep.Options.GroupFirstPatch != 9 || !strings.Contains(r.stdout, "; patch 8 (group's first stage 9), ") {
		t.Errorf("patch %d, group first patch %d; footer:\n%s", rep.Options.Patch, rep.Options.GroupFirstPatch, r.stdout)
	}
	var got []string
	for _, run := range rep.Runs {
		got = append(got, run.Method)
	}
	if strings.Join(got, ",") != "group,ksvd,dct" {
		t.Errorf("methods run: %v, want group, ksvd, dct", got)
	}
	tessera(t, dir, nil, nil, "bench", "--set", "set", "--compare", "bm").want(t, 2, `--compare "bm": unknown method; choose among dct, group and ksvd`)
}

// A --patch given on the command line is the group method's patch in both
// stages; without it the first stage learns on group.DefaultParams' 9×9.
func TestGroupPatchFlag(t *testing.T) {
	noisy, _ := testImage(48, 48, 1, 8, false, 3)
	opt := restore.Defaults(10)
	opt.Atoms, opt.Train, opt.Rounds, opt.Patch = 64, 1000, 1, 6
	for set, want := range map[bool]int{true: 36, false: 81} {
		_, res, err := denoiser(methodGroup, set)(noisy.Img, 10, opt)
		if err != nil {
			t.Fatal(err)
		}
		if res.Dict.N != want {
			t.Errorf("--patch given %v: atoms of %d samples, want %d", set, res.Dict.N, want)
		}
	}
}
