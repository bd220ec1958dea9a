package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"slices"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/urfave/cli/v2"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
	"tessera/restore/group"
	"tessera/restore/quality"
)

const benchDescription = `Runs the project's denoising protocol on a set of clean images and reports
how much each method recovers. For every image and every σ of --sigma:

  1. white Gaussian noise of standard deviation σ is added in floating
     point, without clipping or rounding (as the denoising literature
     does), seeded by --seed, the image's name and σ;
  2. the noisy image is restored (with the options below, which are those
     of tessera denoise) and the result rounded and clipped as a file
     would store it;
  3. PSNR (peak 255, or 65535 for 16-bit images) and SSIM (Wang et al.
     2004, as tessera score measures them) of the noisy and the restored
     image are taken against the clean one, and the seconds the
     restoration took.

σ is on the 0–255 scale and scaled to the bit depth of 16-bit images.
Without --color each image is first made gray with the BT.601 luma
0.299 R + 0.587 G + 0.114 B, rounded half up; with --color RGB images are
restored in colour (SSIM on the luma) and gray images fail.

--set kodak (the default) uses the 24 images of the Kodak Lossless True
Color Image Suite from the user's cache folder (tessera/kodak under
$XDG_CACHE_HOME or ~/.cache), downloading the missing ones from --set-url,
else $` + kodakURLEnv + `, else
` + defaultKodakURL + `, and checking each one's decoded
pixels against the published SHA-256 before caching it.
Offline, download kodim01.png … kodim24.png by hand into a folder and give
--set FOLDER. --set FOLDER uses every image in FOLDER and its subfolders,
sorted by relative path (write ./kodak for a folder named kodak).
--images 1,5,23 picks images by their position in that order (for the
Kodak set, kodim01.png is 1), --limit N the first N.

Methods: ksvd is the dictionary learned from each noisy image (K-SVD,
started from the overcomplete DCT), every patch coded alone; group groups
similar patches and codes each group with one set of atoms (--method group
of tessera denoise); dct is the ksvd coding with the fixed overcomplete DCT
(no training), which shows what learning adds. --method picks the first
method, --compare adds others: --compare dct,group runs all three.

--task inpaint runs the inpainting protocol instead: for every image and
every entry of --holes, the pixels of a seeded mask are removed (N%: each
pixel lost with probability N/100; text: lines of overlaid capitals and
digits, strokes 2 pixels wide, about a tenth of the pixels), and filled
by the harmonic fill (Laplace's equation on the holes: the baseline every
row is measured against) and by the fill methods of tessera inpaint: dct
(the default; --method group or ksvd instead), and those of --compare
(--compare group,ksvd runs all three). The known pixels are noise-free; PSNR and SSIM are
taken over the whole image. The options default to those of tessera
inpaint; there is no report page.

Output: a Markdown table on standard output (a row per image, σ and
method; a mean row per σ and method), --json FILE and --csv FILE with the
same figures, and --html DIR: a report page (DIR/index.html with its
pictures in DIR/images) with the means, a chart of PSNR against σ, a
128×128 crop of every image clean, noisy and restored at 1:1, and the
learned atoms, each scaled to its own range. The page needs no network.

Exit status: 0 when every image was measured, 1 when any failed (the
others still run) or the set could not be had, 2 for a bad command line.`

// benchConfig is the parsed command line of tessera bench.
type benchConfig struct {
	den     config // numeric options, read as tessera denoise reads them
	set     string
	setURL  string
	sigmas  []float64
	color   bool
	limit   int
	images  []int // 1-based positions
	methods []string
	task    string     // taskDenoise or taskInpaint
	holes   []holeSpec // --task inpaint
	jsonOut string
	csvOut  string
	htmlDir string
}

func benchCommand(e *env) *cli.Command {
	return &cli.Command{
		Name:            "bench",
		Usage:           "measure denoising on a set of clean images (the Kodak set by default)",
		UsageText:       "tessera bench [options]",
		Description:     benchDescription,
		HideHelpCommand: true,
		OnUsageError: func(_ *cli.Context, err error, _ bool) error {
			return usagef("%s; see tessera bench --help", flagErrText(err))
		},
		Flags: flagList([]cli.Flag{
			&cli.StringFlag{Name: "set", Value: "kodak", Usage: "the clean images, `kodak|FOLDER`: the cached Kodak set (downloaded when missing) or a folder"},
			&cli.StringFlag{Name: "set-url", Usage: "download the Kodak set from `URL` (the folder holding kodim01.png …); default $" + kodakURLEnv + " or " + defaultKodakURL},
			&cli.StringFlag{Name: "sigma", Value: "15,25,50", Usage: "noise levels `LIST`, comma-separated, on the 0–255 scale"},
			&cli.BoolFlag{Name: "color", DisableDefaultText: true, Usage: "restore RGB images in colour (default: their BT.601 luma, rounded)"},
			&cli.IntFlag{Name: "limit", DefaultText: "all", Usage: "use the first `N` images only"},
			&cli.StringFlag{Name: "images", Usage: "use the images at positions `LIST` only, e.g. 1,5,23 (1 is the first)"},
			&cli.StringFlag{Name: "task", Value: taskDenoise, Usage: "protocol `denoise|inpaint`: add noise and denoise, or cut holes (--holes) and fill them"},
			&cli.StringFlag{Name: "holes", Value: "50%,80%,text", Usage: "with --task inpaint, the holes `LIST`: N% (random loss of N percent of the pixels) or text (lines of overlaid text)"},
			&cli.StringFlag{Name: "method", Value: methodLearned, Usage: "measure method `ksvd|group` (see tessera denoise --method); with --task inpaint dct|group|ksvd (tessera inpaint --method), default dct"},
			&cli.StringFlag{Name: "compare", Usage: "also run the methods in `LIST`, comma-separated: dct (the ksvd coding with the fixed overcomplete DCT, untrained), group, ksvd"},
		}, codingFlags(helpDefaults, "", "", "the noise and the training choices"), []cli.Flag{
			&cli.StringFlag{Name: "json", Usage: "also write the figures as JSON to `FILE`"},
			&cli.StringFlag{Name: "csv", Usage: "also write one CSV row per run to `FILE`"},
			&cli.StringFlag{Name: "html", Usage: "write a report page into `DIR` (index.html and images/)"},
		}),
		Action: func(cc *cli.Context) error {
			cfg, err := parseBenchConfig(cc)
			if err != nil {
				return err
			}
			if cfg.task == taskInpaint {
				return runBenchFill(cfg, e)
			}
			return runBench(cfg, e)
		},
	}
}

func parseBenchConfig(cc *cli.Context) (*benchConfig, error) {
	if cc.NArg() > 0 {
		return nil, usagef("tessera bench takes no paths (%q); give the images with --set FOLDER", cc.Args().First())
	}
	c := &benchConfig{
		den: config{
			patch: cc.Int("patch"), atoms: cc.Int("atoms"), rounds: cc.Int("rounds"),
			train: cc.Int("train"), bound: cc.Float64("bound"),
			setPatch: cc.IsSet("patch"), setAtoms: cc.IsSet("atoms"), setRounds: cc.IsSet("rounds"),
			setTrain: cc.IsSet("train"), setBound: cc.IsSet("bound"),
			seed: cc.Uint64("seed"),
		},
		set: cc.String("set"), setURL: cc.String("set-url"),
		color: cc.Bool("color"), limit: cc.Int("limit"),
		jsonOut: cc.String("json"), csvOut: cc.String("csv"), htmlDir: cc.String("html"),
	}
	if c.set == "" {
		return nil, usagef("--set is empty; give kodak or a folder of clean images")
	}
	if err := c.parseTask(cc); err != nil {
		return nil, err
	}
	if err := c.den.checkOptions(); err != nil {
		return nil, err
	}
	sig, err := parseSigmaList(cc.String("sigma"))
	if err != nil {
		return nil, err
	}
	c.sigmas = sig
	if cc.IsSet("limit") && c.limit < 1 {
		return nil, usagef("--limit %d: must be at least 1", c.limit)
	}
	if cc.IsSet("images") {
		if cc.IsSet("limit") {
			return nil, usagef("give --limit or --images, not both")
		}
		if c.images, err = parseImageList(cc.String("images")); err != nil {
			return nil, err
		}
	}
	if c.task == taskInpaint {
		if c.methods, err = parseFillMethods(cc); err != nil {
			return nil, err
		}
	} else {
		first, err := parseMethod(cc.String("method"))
		if err != nil {
			return nil, err
		}
		c.methods = []string{first}
		if cc.IsSet("compare") {
			for _, m := range strings.Split(cc.String("compare"), ",") {
				switch m = strings.TrimSpace(strings.ToLower(m)); m {
				case methodDCT, methodGroup, methodLearned:
					if !hasMethod(c.methods, m) {
						c.methods = append(c.methods, m)
					}
				default:
					return nil, usagef("--compare %q: unknown method; choose among dct, group and ksvd", m)
				}
			}
		}
	}
	for _, f := range []struct{ name, v string }{{"json", c.jsonOut}, {"csv", c.csvOut}, {"html", c.htmlDir}} {
		if cc.IsSet(f.name) && f.v == "" {
			return nil, usagef("--%s is empty; give a file or folder name", f.name)
		}
	}
	if c.jsonOut != "" && c.jsonOut == c.csvOut {
		return nil, usagef("--json and --csv both name %s; give them different files", c.jsonOut)
	}
	return c, nil
}

func hasMethod(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

// parseSigmaList reads --sigma: distinct numbers in (0, 255).
func parseSigmaList(s string) ([]float64, error) {
	var out []float64
	for _, f := range strings.Split(s, ",") {
		f = strings.TrimSpace(f)
		v, err := strconv.ParseFloat(f, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, usagef("--sigma %q: %q is not a number; give noise levels on the 0–255 scale, e.g. --sigma 15,25,50", s, f)
		}
		if !(v > 0 && v < 255) {
			return nil, usagef("--sigma %q: %g is outside 0 < σ < 255 (σ is on the 0–255 scale for every bit depth)", s, v)
		}
		for _, o := range out {
			if o == v {
				return nil, usagef("--sigma %q: %g is given twice", s, v)
			}
		}
		out = append(out, v)
	}
	return out, nil
}

// parseImageList reads --images: distinct positions from 1.
func parseImageList(s string) ([]int, error) {
	var out []int
	seen := map[int]bool{}
	for _, f := range strings.Split(s, ",") {
		f = strings.TrimSpace(f)
		v, err := strconv.Atoi(f)
		if err != nil || v < 1 {
			return nil, usagef("--images %q: %q is not a position (1 is the first image); e.g. --images 1,5,23", s, f)
		}
		if seen[v] {
			return nil, usagef("--images %q: %d is given twice", s, v)
		}
		seen[v] = true
		out = append(out, v)
	}
	return out, nil
}

// benchEntry is one clean image of the set.
type benchEntry struct {
	name string // row label and seed label: the Kodak name or the path relative to --set
	path string
	fail error // found while listing
}

// pick applies --images or --limit to n images and returns the indices.
func (c *benchConfig) pick(n int) ([]int, error) {
	var idx []int
	switch {
	case c.images != nil:
		for _, p := range c.images {
			if p > n {
				return nil, usagef("--images: there is no image %d; the set has %d", p, n)
			}
			idx = append(idx, p-1)
		}
	default:
		k := n
		if c.limit > 0 {
			k = min(n, c.limit)
		}
		for i := 0; i < k; i++ {
			idx = append(idx, i)
		}
	}
	return idx, nil
}

// benchSet lists the chosen images of the set, fetching the Kodak set
// when asked for it. The second result names the folder read.
func (c *benchConfig) benchSet(e *env, con *console) ([]benchEntry, string, error) {
	if c.set == "kodak" {
		idx, err := c.pick(len(kodakSet))
		if err != nil {
			return nil, "", err
		}
		base, err := kodakBaseURL(c.setURL, e.getenv)
		if err != nil {
			return nil, "", err
		}
		dir, err := kodakCacheDir()
		if err != nil {
			return nil, "", err
		}
		var want []kodakImage
		for _, i := range idx {
			want = append(want, kodakSet[i])
		}
		f := &kodakFetcher{dir: dir, base: base, note: con.line}
		paths, err := f.ensure(want)
		if err != nil {
			return nil, dir, err
		}
		var out []benchEntry
		for i, k := range want {
			out = append(out, benchEntry{name: k.name, path: paths[i]})
		}
		return out, dir, nil
	}
	if c.setURL != "" {
		return nil, "", usagef("--set-url goes with --set kodak, not with a folder")
	}
	st, err := os.Stat(c.set)
	if err != nil {
		return nil, "", &usageError{"--set " + statErr(c.set, err).Error()}
	}
	if !st.IsDir() {
		return nil, "", usagef("--set %s: is a file; give a folder of clean images, or kodak", c.set)
	}
	bp := &batchPlan{}
	bp.walk(c.set)
	sort.Slice(bp.jobs, func(i, j int) bool { return bp.jobs[i].key < bp.jobs[j].key })
	if len(bp.jobs) == 0 {
		return nil, "", usagef("--set %s: no images found (PNG, TIFF, JPEG, PGM or PPM)", c.set)
	}
	idx, err := c.pick(len(bp.jobs))
	if err != nil {
		return nil, "", err
	}
	var out []benchEntry
	for _, i := range idx {
		j := bp.jobs[i]
		out = append(out, benchEntry{name: j.rel, path: j.src, fail: j.fail})
	}
	return out, c.set, nil
}

// benchRun is one image at one σ with one method.
type benchRun struct {
	Image     string  `json:"image"`
	Method    string  `json:"method"`
	Sigma     float64 `json:"sigma"` // 0–255 scale
	Color     bool    `json:"color"`
	PSNRNoisy float64 `json:"psnr_noisy"`
	SSIMNoisy float64 `json:"ssim_noisy"`
	PSNR      float64 `json:"psnr"`
	SSIM      float64 `json:"ssim"`
	Seconds   float64 `json:"seconds"`
	MeanAtoms float64 `json:"mean_atoms"`
}

// benchMean averages the runs of one method at one σ.
type benchMean struct {
	Method    string  `json:"method"`
	Sigma     float64 `json:"sigma"`
	Color     bool    `json:"color"`
	Images    int     `json:"images"`
	PSNRNoisy float64 `json:"psnr_noisy"`
	SSIMNoisy float64 `json:"ssim_noisy"`
	PSNR      float64 `json:"psnr"`
	SSIM      float64 `json:"ssim"`
	Seconds   float64 `json:"seconds"`
}

// benchOptions records what the figures were measured with.
type benchOptions struct {
	Set     string    `json:"set"`
	SetDir  string    `json:"set_dir"`
	Images  []string  `json:"images"`
	Sigmas  []float64 `json:"sigmas"`
	Color   bool      `json:"color"`
	Methods []string  `json:"methods"`
	Patch   int       `json:"patch"`
	// GroupFirstPatch is the group method's first-stage patch side when
	// it is not Patch (--patch not given).
	GroupFirstPatch int     `json:"group_first_patch,omitempty"`
	Atoms           int     `json:"atoms"`
	Rounds          int     `json:"rounds"`
	Bound           float64 `json:"bound"`
	Train           int     `json:"train"`
	Seed            uint64  `json:"seed"`
	Workers         int     `json:"workers"`
}

// benchReport is the --json file.
type benchReport struct {
	Runs    []benchRun   `json:"runs"`
	Mean    []benchMean  `json:"mean"`
	Options benchOptions `json:"options"`
	Version string       `json:"version"`
	Failed  []string     `json:"failed"`
	Started time.Time    `json:"started"`
}

// benchShots are the pictures of one image for the report page.
type benchShots struct {
	image        string
	w, h         int
	x0, y0, side int
	clean        *patches.Image // crop, display-ready
	rows         []benchShotRow // one per σ
}

type benchShotRow struct {
	sigma     float64
	noisy     *patches.Image // crop, rounded and clipped for display
	psnrNoisy float64
	restored  []*patches.Image // crop per method, in benchConfig.methods order
	psnr      []float64
	dict      *learn.Dict // learned dictionary (nil when not learned)
}

// cropSide is the side of the 1:1 crops of the report.
const cropSide = 128

func runBench(cfg *benchConfig, e *env) error {
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
	if cfg.htmlDir != "" {
		if err := os.MkdirAll(filepath.Join(cfg.htmlDir, "images"), 0o755); err != nil {
			return usagef("--html %s: cannot create the folder (%s)", cfg.htmlDir, errText(err))
		}
	}
	workers := runtime.NumCPU()
	o25 := cfg.den.options(cfg.sigmas[0])
	rep := &benchReport{
		Runs: []benchRun{}, Mean: []benchMean{}, Failed: []string{},
		Options: benchOptions{
			Set: cfg.set, SetDir: dir, Sigmas: cfg.sigmas, Color: cfg.color, Methods: cfg.methods,
			Patch: o25.Patch, Atoms: o25.Atoms, Rounds: o25.Rounds, Bound: o25.Bound,
			Train: o25.Train, Seed: cfg.den.seed, Workers: workers,
		},
		Version: benchVersion(),
		Started: start.UTC().Truncate(time.Second),
	}
	if slices.Contains(cfg.methods, methodGroup) && !cfg.den.setPatch {
		rep.Options.GroupFirstPatch = group.DefaultParams(cfg.sigmas[0]).Patch
	}
	for _, en := range entries {
		rep.Options.Images = append(rep.Options.Images, en.name)
	}
	var shots []*benchShots
	con.start(len(entries) * len(cfg.sigmas) * len(cfg.methods))
	for _, en := range entries {
		sh, runs, err := cfg.benchImage(en, con, workers, cfg.htmlDir != "")
		rep.Runs = append(rep.Runs, runs...)
		if err != nil {
			rep.Failed = append(rep.Failed, err.Error())
			con.line("tessera: " + err.Error())
			continue
		}
		if sh != nil {
			shots = append(shots, sh)
		}
	}
	rep.Mean = benchMeans(rep.Runs, cfg)
	outErr := cfg.writeOutputs(e, func(w io.Writer) error { return writeMarkdown(w, rep) }, rep, benchCSV(rep.Runs))
	if cfg.htmlDir != "" {
		if err := writeHTMLReport(cfg.htmlDir, rep, shots); err != nil {
			outErr = append(outErr, fmt.Sprintf("--html %v", err))
		}
	}
	for _, m := range outErr {
		con.line("tessera: " + m)
	}
	con.finish(fmt.Sprintf("tessera: %d runs on %d of %d images in %.1f s", len(rep.Runs), len(entries)-len(rep.Failed), len(entries), time.Since(start).Seconds()))
	if len(rep.Failed) > 0 || len(outErr) > 0 {
		return &exitStatus{1}
	}
	return nil
}

// benchImage runs every σ and method on one image. The runs done before a
// failure are returned with it.
func (cfg *benchConfig) benchImage(en benchEntry, con *console, workers int, pictures bool) (sh *benchShots, runs []benchRun, err error) {
	n := len(cfg.sigmas) * len(cfg.methods)
	done := 0
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("%s: internal error (%v); please report it with the image", en.name, r)
		}
		for ; done < n; done++ {
			con.end(0) // the runs not done count as handled for the bar
		}
	}()
	if en.fail != nil {
		return nil, nil, en.fail
	}
	con.begin(0, en.name)
	clean, err := cfg.loadClean(en, con)
	if err != nil {
		return nil, nil, err
	}
	if pictures {
		sh = &benchShots{image: en.name, w: clean.W, h: clean.H}
		sh.x0, sh.y0, sh.side = pickCrop(clean, cropSide)
		sh.clean = displayCrop(clean, sh.x0, sh.y0, sh.side)
	}
	for _, s := range cfg.sigmas {
		var row *benchShotRow
		for _, m := range cfg.methods {
			con.begin(0, fmt.Sprintf("%s σ=%g %s", en.name, s, m))
			opt := cfg.den.options(s)
			opt.Workers = workers
			opt.Progress = func(st restore.Stage) { con.set(0, stageText(st)) }
			r, noisy, out, dict, err := benchCase(clean, en.name, s, cfg.den.seed, opt, m, cfg.den.setPatch)
			if err != nil {
				return nil, runs, err
			}
			runs = append(runs, r)
			con.end(0)
			done++
			if sh != nil {
				if row == nil {
					sh.rows = append(sh.rows, benchShotRow{sigma: s, psnrNoisy: r.PSNRNoisy,
						noisy: displayCrop(noisy, sh.x0, sh.y0, sh.side)})
					row = &sh.rows[len(sh.rows)-1]
				}
				row.restored = append(row.restored, displayCrop(out, sh.x0, sh.y0, sh.side))
				row.psnr = append(row.psnr, r.PSNR)
				if (m == methodLearned || m == methodGroup) && opt.Rounds > 0 && row.dict == nil {
					row.dict = dict
				}
			}
		}
	}
	return sh, runs, nil
}

// benchCase is restore.BenchCase, keeping the dictionary for the report
// and measuring the noisy image's SSIM too: noise of σ (0–255 scale,
// scaled to the bit depth) without clipping, restoration, rounding and
// clipping, then PSNR and SSIM against the clean image.
func benchCase(clean *patches.Image, name string, sigma255 float64, seed uint64, opt restore.Options, method string, setPatch bool) (benchRun, *patches.Image, *patches.Image, *learn.Dict, error) {
	sigma := sigma255 * clean.Peak() / 255
	noisy := restore.AddNoise(clean, sigma, seed, name)
	if method == methodDCT {
		opt.Rounds = 0
		opt.Dict = nil
	}
	den := denoiser(method, setPatch)
	t0 := time.Now()
	out, res, err := den(noisy, sigma, opt)
	dt := time.Since(t0).Seconds()
	if err != nil {
		var oe *restore.OptionError
		if errors.As(err, &oe) {
			return benchRun{}, nil, nil, nil, fmt.Errorf("%s: %s (--%s)", name, oe.Reason, oe.Field)
		}
		return benchRun{}, nil, nil, nil, fmt.Errorf("%s: %v", name, err)
	}
	out.Quantize()
	r := benchRun{Image: name, Method: method, Sigma: sigma255, Color: clean.C > 1,
		Seconds: round4(dt), MeanAtoms: round4(res.MeanAtoms)}
	var errs [4]error
	r.PSNRNoisy, errs[0] = quality.PSNR(clean, noisy)
	r.SSIMNoisy, errs[1] = quality.SSIM(clean, noisy)
	r.PSNR, errs[2] = quality.PSNR(clean, out)
	r.SSIM, errs[3] = quality.SSIM(clean, out)
	for _, e := range errs {
		if e != nil {
			return benchRun{}, nil, nil, nil, fmt.Errorf("%s: %v", name, e)
		}
	}
	if math.IsInf(r.PSNR, 0) || math.IsNaN(r.PSNR) || math.IsNaN(r.SSIM) {
		return benchRun{}, nil, nil, nil, fmt.Errorf("%s: the restoration gave a PSNR of %g; please report it with the image", name, r.PSNR)
	}
	return r, noisy, out, res.Dict, nil
}

// writeOutputs writes the Markdown table to standard output and rep as
// --json and csv as --csv when asked, and returns a message per failure.
func (cfg *benchConfig) writeOutputs(e *env, md func(io.Writer) error, rep any, csv []byte) []string {
	var outErr []string
	if err := md(e.stdout); err != nil {
		outErr = append(outErr, fmt.Sprintf("standard output: cannot write (%s)%s", errText(err), writeFix(err)))
	}
	if cfg.jsonOut != "" {
		b, err := json.MarshalIndent(rep, "", "  ")
		if err == nil {
			err = writeBytesAtomic(cfg.jsonOut, append(b, '\n'))
		}
		if err != nil {
			outErr = append(outErr, fmt.Sprintf("--json %v", err))
		}
	}
	if cfg.csvOut != "" {
		if err := writeBytesAtomic(cfg.csvOut, csv); err != nil {
			outErr = append(outErr, fmt.Sprintf("--csv %v", err))
		}
	}
	return outErr
}

// benchMeans averages the runs per method and σ, in the order of the
// command line.
func benchMeans(runs []benchRun, cfg *benchConfig) []benchMean {
	out := []benchMean{}
	for _, s := range cfg.sigmas {
		for _, m := range cfg.methods {
			bm := benchMean{Method: m, Sigma: s, Color: cfg.color}
			for _, r := range runs {
				if r.Sigma == s && r.Method == m {
					bm.Images++
					bm.PSNRNoisy += r.PSNRNoisy
					bm.SSIMNoisy += r.SSIMNoisy
					bm.PSNR += r.PSNR
					bm.SSIM += r.SSIM
					bm.Seconds += r.Seconds
				}
			}
			if bm.Images == 0 {
				continue
			}
			k := float64(bm.Images)
			bm.PSNRNoisy /= k
			bm.SSIMNoisy /= k
			bm.PSNR /= k
			bm.SSIM /= k
			bm.Seconds = round4(bm.Seconds / k)
			out = append(out, bm)
		}
	}
	return out
}

// writeMarkdown prints the table: per σ and method, a row per image and a
// mean row.
func writeMarkdown(w io.Writer, rep *benchReport) error {
	var b bytes.Buffer
	b.WriteString("| image | σ | method | noisy PSNR | PSNR | gain | noisy SSIM | SSIM | seconds |\n")
	b.WriteString("|:--|--:|:--|--:|--:|--:|--:|--:|--:|\n")
	for _, m := range rep.Mean {
		for _, r := range rep.Runs {
			if r.Sigma == m.Sigma && r.Method == m.Method {
				fmt.Fprintf(&b, "| %s | %g | %s | %.2f | %.2f | %+.2f | %.4f | %.4f | %.1f |\n",
					mdEscape(r.Image), r.Sigma, r.Method, r.PSNRNoisy, r.PSNR, r.PSNR-r.PSNRNoisy, r.SSIMNoisy, r.SSIM, r.Seconds)
			}
		}
		fmt.Fprintf(&b, "| **mean of %d** | %g | %s | %.2f | **%.2f** | %+.2f | %.4f | **%.4f** | %.1f |\n",
			m.Images, m.Sigma, m.Method, m.PSNRNoisy, m.PSNR, m.PSNR-m.PSNRNoisy, m.SSIMNoisy, m.SSIM, m.Seconds)
	}
	mode := "gray (BT.601 luma, rounded)"
	if rep.Options.Color {
		mode = "RGB"
	}
	patch := strconv.Itoa(rep.Options.Patch)
	if gp := rep.Options.GroupFirstPatch; gp > 0 && gp != rep.Options.Patch {
		patch += fmt.Sprintf(" (group's first stage %d)", gp)
	}
	fmt.Fprintf(&b, "\nPSNR and its gain in dB; %s; patch %s, atoms %d, rounds %d, bound %g, train %d, seed %d; %s.\n",
		mode, patch, rep.Options.Atoms, rep.Options.Rounds, rep.Options.Bound, rep.Options.Train, rep.Options.Seed, rep.Version)
	_, err := w.Write(b.Bytes())
	return err
}

func mdEscape(s string) string { return strings.ReplaceAll(s, "|", `\|`) }

// benchCSV is one row per run with a header.
func benchCSV(runs []benchRun) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"image", "method", "sigma", "color", "psnr_noisy", "ssim_noisy", "psnr", "ssim", "seconds", "mean_atoms"})
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for _, r := range runs {
		w.Write([]string{r.Image, r.Method, g(r.Sigma), strconv.FormatBool(r.Color), g(r.PSNRNoisy), g(r.SSIMNoisy),
			g(r.PSNR), g(r.SSIM), g(r.Seconds), g(r.MeanAtoms)})
	}
	w.Flush()
	return b.Bytes()
}

// benchVersion names the build: module version, VCS revision when
// stamped, and the Go release.
func benchVersion() string {
	v := "tessera (devel)"
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return v
	}
	if bi.Main.Version != "" && bi.Main.Version != "(devel)" {
		v = "tessera " + bi.Main.Version
	}
	for _, s := range bi.Settings {
		if s.Key == "vcs.revision" && s.Value != "" {
			v += " " + s.Value[:min(12, len(s.Value))]
		}
		if s.Key == "vcs.modified" && s.Value == "true" {
			v += "+dirty"
		}
	}
	return v + " " + bi.GoVersion
}

// pickCrop chooses the side×side window (or the whole image when smaller)
// with the most detail: the largest sum of squared neighbour differences,
// over windows on a grid of half a side. Detail is where restoration
// differences show.
func pickCrop(img *patches.Image, side int) (x0, y0, s int) {
	s = min(side, img.W, img.H)
	w, h := img.W, img.H
	// Gradient energy per pixel, summed over channels, as an integral image.
	ii := make([]float64, (w+1)*(h+1))
	for y := 0; y < h; y++ {
		row := 0.0
		for x := 0; x < w; x++ {
			g := 0.0
			for c := 0; c < img.C; c++ {
				pl := img.Plane(c)
				v := float64(pl[y*w+x])
				if x+1 < w {
					d := float64(pl[y*w+x+1]) - v
					g += d * d
				}
				if y+1 < h {
					d := float64(pl[(y+1)*w+x]) - v
					g += d * d
				}
			}
			row += g
			ii[(y+1)*(w+1)+x+1] = ii[y*(w+1)+x+1] + row
		}
	}
	sum := func(x, y int) float64 {
		return ii[(y+s)*(w+1)+x+s] - ii[y*(w+1)+x+s] - ii[(y+s)*(w+1)+x] + ii[y*(w+1)+x]
	}
	step := max(1, s/2)
	best := -1.0
	for y := 0; y+s <= h; y += step {
		for x := 0; x+s <= w; x += step {
			if v := sum(x, y); v > best {
				best, x0, y0 = v, x, y
			}
		}
	}
	return x0, y0, s
}

// displayCrop cuts the window and rounds and clips it as a file stores it.
func displayCrop(img *patches.Image, x0, y0, s int) *patches.Image {
	c := img.Crop(x0, y0, s, s)
	c.Quantize()
	return c
}
