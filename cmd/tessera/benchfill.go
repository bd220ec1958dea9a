package main

// The inpainting protocol of tessera bench (--task inpaint).

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"time"

	"github.com/urfave/cli/v2"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
	"tessera/restore/group"
	"tessera/restore/quality"
)

const (
	taskDenoise = "denoise"
	taskInpaint = "inpaint"
	// methodHarmonic is the baseline fill every inpainting run is measured
	// against: Laplace's equation on the holes.
	methodHarmonic = "harmonic"
)

// holeSpec is one entry of --holes: random loss of a fraction of the
// pixels, or overlaid text.
type holeSpec struct {
	name string  // "50%", "text"
	frac float64 // random loss; 0 for text
}

// parseHoles reads --holes: N% (random loss of N percent of the pixels,
// 1..99) or text, comma-separated and distinct.
func parseHoles(s string) ([]holeSpec, error) {
	var out []holeSpec
	for _, f := range strings.Split(s, ",") {
		f = strings.ToLower(strings.TrimSpace(f))
		h := holeSpec{name: f}
		if f != "text" {
			v, err := strconv.ParseFloat(strings.TrimSuffix(f, "%"), 64)
			if err != nil || !strings.HasSuffix(f, "%") || !(v >= 1 && v <= 99) {
				return nil, usagef("--holes %q: %q is neither N%% (random loss of 1%%..99%% of the pixels) nor text; e.g. --holes 50%%,80%%,text", s, f)
			}
			h.name, h.frac = strconv.FormatFloat(v, 'g', -1, 64)+"%", v/100
		}
		for _, o := range out {
			if o.name == h.name {
				return nil, usagef("--holes %q: %s is given twice", s, h.name)
			}
		}
		out = append(out, h)
	}
	return out, nil
}

// mask draws the holes of h over a w×h frame for the image named name;
// every image and hole kind has its own seed.
func (h holeSpec) mask(w, ht int, seed uint64, name string) []bool {
	s := learn.SubSeed(seed, "holes/"+name+"/"+h.name)
	if h.frac == 0 {
		return patches.TextMask(w, ht, s)
	}
	return patches.RandomMask(w, ht, h.frac, s)
}

// fillRun is one image with one kind of holes filled by one method.
type fillRun struct {
	Image   string  `json:"image"`
	Holes   string  `json:"holes"`
	Missing float64 `json:"missing"` // fraction of the pixels
	Method  string  `json:"method"`
	Color   bool    `json:"color"`
	PSNR    float64 `json:"psnr"`
	SSIM    float64 `json:"ssim"`
	// Gain is PSNR over the harmonic fill of the same image and holes.
	Gain    float64 `json:"gain"`
	Seconds float64 `json:"seconds"`
}

// fillMean averages the runs of one method on one kind of holes.
type fillMean struct {
	Method  string  `json:"method"`
	Holes   string  `json:"holes"`
	Color   bool    `json:"color"`
	Images  int     `json:"images"`
	Missing float64 `json:"missing"`
	PSNR    float64 `json:"psnr"`
	SSIM    float64 `json:"ssim"`
	Gain    float64 `json:"gain"`
	Seconds float64 `json:"seconds"`
}

type fillOptions struct {
	Set     string   `json:"set"`
	SetDir  string   `json:"set_dir"`
	Images  []string `json:"images"`
	Holes   []string `json:"holes"`
	Color   bool     `json:"color"`
	Methods []string `json:"methods"`
	Patch   int      `json:"patch"`
	Atoms   int      `json:"atoms"`
	Rounds  int      `json:"rounds"`
	Train   int      `json:"train"`
	Seed    uint64   `json:"seed"`
	Workers int      `json:"workers"`
}

type fillReport struct {
	Task    string      `json:"task"`
	Runs    []fillRun   `json:"runs"`
	Mean    []fillMean  `json:"mean"`
	Options fillOptions `json:"options"`
	Version string      `json:"version"`
	Failed  []string    `json:"failed"`
	Started time.Time   `json:"started"`
}

// parseTask reads --task and --holes and refuses what the inpainting
// protocol does not take.
func (c *benchConfig) parseTask(cc *cli.Context) error {
	switch c.task = strings.ToLower(strings.TrimSpace(cc.String("task"))); c.task {
	case taskDenoise:
		if cc.IsSet("holes") {
			return usagef("--holes goes with --task inpaint")
		}
		return nil
	case taskInpaint:
	default:
		return usagef("--task %q: unknown protocol; choose denoise (the default) or inpaint", cc.String("task"))
	}
	for _, f := range []string{"sigma", "html", "bound"} {
		if cc.IsSet(f) {
			return usagef("--%s goes with --task denoise: the inpainting protocol fills noise-free images and writes no report page", f)
		}
	}
	h, err := parseHoles(cc.String("holes"))
	if err != nil {
		return err
	}
	c.holes = h
	c.den.defaults = restore.InpaintDefaults
	return nil
}

// parseFillMethods reads --method and --compare of the inpainting
// protocol: dct (the default of tessera inpaint), group and ksvd.
func parseFillMethods(cc *cli.Context) ([]string, error) {
	var out []string
	add := func(flag, m string) error {
		switch m = strings.ToLower(strings.TrimSpace(m)); m {
		case methodDCT, methodGroup, methodLearned:
			if !hasMethod(out, m) {
				out = append(out, m)
			}
			return nil
		}
		return usagef("--%s %q: unknown fill method; choose dct, group or ksvd", flag, m)
	}
	first := methodDCT
	if cc.IsSet("method") {
		first = cc.String("method")
	}
	if err := add("method", first); err != nil {
		return nil, err
	}
	if cc.IsSet("compare") {
		for _, m := range strings.Split(cc.String("compare"), ",") {
			if err := add("compare", m); err != nil {
				return nil, err
			}
		}
	}
	return out, nil
}

// fillMethods are the methods of an inpainting run: the harmonic baseline
// first, then those of --method and --compare.
func (c *benchConfig) fillMethods() []string {
	out := []string{methodHarmonic}
	for _, m := range c.methods {
		if m != methodHarmonic {
			out = append(out, m)
		}
	}
	return out
}

func runBenchFill(cfg *benchConfig, e *env) error {
	start := time.Now()
	con := newConsole(e.stderr, e.tty, e.width)
	entries, dir, err := cfg.benchSet(e, con)
	if err != nil {
		if _, ok := err.(*usageError); ok {
			return err
		}
		con.line("tessera: " + err.Error())
		return &exitStatus{1}
	}
	workers := runtime.NumCPU()
	methods := cfg.fillMethods()
	o := cfg.den.options(0)
	rep := &fillReport{Task: taskInpaint, Runs: []fillRun{}, Mean: []fillMean{}, Failed: []string{},
		Options: fillOptions{Set: cfg.set, SetDir: dir, Color: cfg.color, Methods: methods,
			Patch: o.Patch, Atoms: o.Atoms, Rounds: o.Rounds, Train: o.Train, Seed: cfg.den.seed, Workers: workers},
		Version: benchVersion(), Started: start.UTC().Truncate(time.Second)}
	for _, h := range cfg.holes {
		rep.Options.Holes = append(rep.Options.Holes, h.name)
	}
	for _, en := range entries {
		rep.Options.Images = append(rep.Options.Images, en.name)
	}
	con.start(len(entries) * len(cfg.holes) * len(methods))
	for _, en := range entries {
		runs, err := cfg.fillImage(en, methods, con, workers)
		rep.Runs = append(rep.Runs, runs...)
		if err != nil {
			rep.Failed = append(rep.Failed, err.Error())
			con.line("tessera: " + err.Error())
		}
	}
	rep.Mean = fillMeans(rep.Runs, cfg.holes, methods, cfg.color)
	outErr := cfg.writeOutputs(e, func(w io.Writer) error { return writeFillMarkdown(w, rep) }, rep, fillCSV(rep.Runs))
	for _, m := range outErr {
		con.line("tessera: " + m)
	}
	con.finish(fmt.Sprintf("tessera: %d runs on %d of %d images in %.1f s", len(rep.Runs), len(entries)-len(rep.Failed), len(entries), time.Since(start).Seconds()))
	if len(rep.Failed) > 0 || len(outErr) > 0 {
		return &exitStatus{1}
	}
	return nil
}

// fillImage runs every kind of holes and method on one image; the runs
// done before a failure are returned with it.
func (cfg *benchConfig) fillImage(en benchEntry, methods []string, con *console, workers int) (runs []fillRun, err error) {
	n := len(cfg.holes) * len(methods)
	done := 0
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("%s: internal error (%v); please report it with the image", en.name, r)
		}
		for ; done < n; done++ {
			con.end(0)
		}
	}()
	if en.fail != nil {
		return nil, en.fail
	}
	con.begin(0, en.name)
	clean, err := cfg.loadClean(en, con)
	if err != nil {
		return nil, err
	}
	for _, h := range cfg.holes {
		miss := h.mask(clean.W, clean.H, cfg.den.seed, en.name)
		k := 0
		for _, m := range miss {
			if m {
				k++
			}
		}
		// The holes are zeroed, so that no method can read the clean
		// pixels through them.
		holed := clean.Clone()
		wh := clean.W * clean.H
		for c := 0; c < clean.C; c++ {
			pl := holed.Plane(c)
			for i, m := range miss {
				if m {
					pl[i] = 0
				}
			}
		}
		base := 0.0
		for _, m := range methods {
			con.begin(0, fmt.Sprintf("%s %s %s", en.name, h.name, m))
			opt := cfg.den.options(0)
			opt.Workers = workers
			opt.Seed = learn.SubSeed(cfg.den.seed, en.name)
			opt.Progress = func(st restore.Stage) { con.set(0, stageText(st)) }
			r, err := fillCase(clean, holed, miss, m, opt)
			if err != nil {
				return runs, fmt.Errorf("%s (%s holes): %v", en.name, h.name, err)
			}
			if m == methodHarmonic {
				base = r.PSNR
			}
			r.Image, r.Holes, r.Missing = en.name, h.name, round4(float64(k)/float64(wh))
			r.Gain = round4(r.PSNR - base)
			runs = append(runs, r)
			con.end(0)
			done++
		}
	}
	return runs, nil
}

// fillCase fills the holes with one method and measures the result,
// rounded and clipped as a file stores it, over the whole image.
func fillCase(clean, holed *patches.Image, miss []bool, method string, opt restore.Options) (fillRun, error) {
	t0 := time.Now()
	var out *patches.Image
	var err error
	switch method {
	case methodHarmonic:
		out, err = restore.HarmonicFill(holed, miss)
	case methodDCT:
		opt.Fill = restore.FillTransform
		out, _, err = restore.Inpaint(holed, miss, 0, opt)
	case methodGroup:
		out, _, err = group.Fill(holed, miss, opt)
	default:
		opt.Fill = restore.FillDictionary
		out, _, err = restore.Inpaint(holed, miss, 0, opt)
	}
	dt := time.Since(t0).Seconds()
	if err != nil {
		var oe *restore.OptionError
		if errors.As(err, &oe) {
			return fillRun{}, fmt.Errorf("%s (--%s)", oe.Reason, oe.Field)
		}
		return fillRun{}, err
	}
	out.Quantize()
	r := fillRun{Method: method, Color: clean.C > 1, Seconds: round4(dt)}
	var e1, e2 error
	r.PSNR, e1 = quality.PSNR(clean, out)
	r.SSIM, e2 = quality.SSIM(clean, out)
	if err := errors.Join(e1, e2); err != nil {
		return fillRun{}, err
	}
	if math.IsNaN(r.PSNR) || math.IsNaN(r.SSIM) {
		return fillRun{}, fmt.Errorf("the fill gave a PSNR of %g; please report it with the image", r.PSNR)
	}
	return r, nil
}

func fillMeans(runs []fillRun, holes []holeSpec, methods []string, color bool) []fillMean {
	out := []fillMean{}
	for _, h := range holes {
		for _, m := range methods {
			fm := fillMean{Method: m, Holes: h.name, Color: color}
			for _, r := range runs {
				if r.Holes == h.name && r.Method == m {
					fm.Images++
					fm.Missing += r.Missing
					fm.PSNR += r.PSNR
					fm.SSIM += r.SSIM
					fm.Gain += r.Gain
					fm.Seconds += r.Seconds
				}
			}
			if fm.Images == 0 {
				continue
			}
			k := float64(fm.Images)
			fm.Missing, fm.PSNR, fm.SSIM, fm.Gain = round4(fm.Missing/k), fm.PSNR/k, fm.SSIM/k, fm.Gain/k
			fm.Seconds = round4(fm.Seconds / k)
			out = append(out, fm)
		}
	}
	return out
}

func writeFillMarkdown(w io.Writer, rep *fillReport) error {
	var b bytes.Buffer
	b.WriteString("| image | holes | missing | method | PSNR | over harmonic | SSIM | seconds |\n")
	b.WriteString("|:--|:--|--:|:--|--:|--:|--:|--:|\n")
	for _, m := range rep.Mean {
		for _, r := range rep.Runs {
			if r.Holes == m.Holes && r.Method == m.Method {
				fmt.Fprintf(&b, "| %s | %s | %.1f%% | %s | %.2f | %+.2f | %.4f | %.1f |\n",
					mdEscape(r.Image), r.Holes, 100*r.Missing, r.Method, r.PSNR, r.Gain, r.SSIM, r.Seconds)
			}
		}
		fmt.Fprintf(&b, "| **mean of %d** | %s | %.1f%% | %s | **%.2f** | %+.2f | **%.4f** | %.1f |\n",
			m.Images, m.Holes, 100*m.Missing, m.Method, m.PSNR, m.Gain, m.SSIM, m.Seconds)
	}
	mode := "gray (BT.601 luma, rounded)"
	if rep.Options.Color {
		mode = "RGB"
	}
	fmt.Fprintf(&b, "\nInpainting, noise-free known pixels; PSNR over the whole image in dB; %s; patch %d, atoms %d, rounds %d, train %d, seed %d; %s.\n",
		mode, rep.Options.Patch, rep.Options.Atoms, rep.Options.Rounds, rep.Options.Train, rep.Options.Seed, rep.Version)
	_, err := w.Write(b.Bytes())
	return err
}

func fillCSV(runs []fillRun) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"image", "holes", "missing", "method", "color", "psnr", "ssim", "gain", "seconds"})
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for _, r := range runs {
		w.Write([]string{r.Image, r.Holes, g(r.Missing), r.Method, strconv.FormatBool(r.Color), g(r.PSNR), g(r.SSIM), g(r.Gain), g(r.Seconds)})
	}
	w.Flush()
	return b.Bytes()
}

// loadClean reads one image of the set as the protocol uses it: gray
// (rounded BT.601 luma) unless --color, and large enough for a patch and
// the SSIM window.
func (cfg *benchConfig) loadClean(en benchEntry, con *console) (*patches.Image, error) {
	f, err := imgfile.DecodeFile(en.path, defaultMaxPixels)
	if err != nil {
		return nil, fmt.Errorf("%s", readErr(en.path, err))
	}
	clean := f.Img
	if k, ok := kodakFind(filepath.Base(en.name)); ok && cfg.set != "kodak" {
		if why := kodakCheck(clean, k); why != "" {
			con.line(fmt.Sprintf("tessera: note: %s is not the published Kodak image (%s); its figures will not compare with published ones", en.path, why))
		}
	}
	switch {
	case cfg.color && clean.C != 3:
		return nil, fmt.Errorf("%s: is a gray image; --color needs RGB images (drop --color to measure on gray)", en.path)
	case !cfg.color && clean.C == 3:
		clean = quality.Luma(clean, true)
	}
	if p := cfg.den.options(25).Patch; clean.W < max(p, 11) || clean.H < max(p, 11) {
		return nil, fmt.Errorf("%s: the image (%d×%d) is too small: the patch needs %d pixels and SSIM 11 on each side", en.path, clean.W, clean.H, p)
	}
	return clean, nil
}
