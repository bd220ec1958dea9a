package main

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"time"

	"github.com/urfave/cli/v2"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/learn"
	"tessera/learn/dictfile"
	"tessera/patches"
	"tessera/restore"
	"tessera/restore/group"
)

const learnDescription = `Learns one dictionary of patches (K-SVD, started from an overcomplete DCT)
from patches drawn from many images at once, and stores it in a dictionary
file for tessera denoise --dict, which then codes every frame of a series
without training on each: much faster, and as good when the frames show
the same kind of specimen.

PATH is an image file or a folder (walked recursively and sorted as
tessera denoise does). The images may be noisy or clean, 8 or 16 bits; all
must have the same number of channels. --train patches are drawn in all,
shared evenly among the images (an image too small for its share passes
the rest to the next), without repeats, seeded by --seed and the image's
place in the sorted list. Each image's patches are coded to its own error
bound n·(C·σ)², with σ from --sigma or estimated per image. Clean images
need --sigma (their estimate is near 0): a few units on the 8-bit scale,
such as 5, makes the atoms follow their fine detail.

The file records the patch size, the channels, the atoms, how often each
atom was used in the last training round (tessera atoms sorts by it), the
training options and a checksum; it is written to a temporary file and
renamed. --out is replaced when it exists.

Exit status: 0 when the dictionary was written, 1 when an input could not
be used or the file could not be written, 2 for a bad command line.`

func learnCommand(e *env) *cli.Command {
	return &cli.Command{
		Name:            "learn",
		Usage:           "learn one dictionary from many images, for denoise --dict",
		UsageText:       "tessera learn [options] PATH... --out FILE",
		Description:     learnDescription,
		HideHelpCommand: true,
		OnUsageError: func(_ *cli.Context, err error, _ bool) error {
			return usagef("%s; see tessera learn --help", flagErrText(err))
		},
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "out", Usage: "write the dictionary to `FILE` (for example series.tdict)"},
			&cli.StringFlag{Name: "sigma", Usage: "noise standard deviation `N` in the images' own units (0..255 for 8-bit, 0..65535 for 16-bit); estimated per image when omitted"},
			&cli.IntFlag{Name: "patch", Value: helpDefaults.Patch, Usage: "patch side `N` in pixels, 2..32"},
			&cli.IntFlag{Name: "atoms", Value: helpDefaults.Atoms, Usage: "`N` dictionary atoms, 1..4096"},
			&cli.IntFlag{Name: "rounds", Value: helpDefaults.Rounds, Usage: "`N` K-SVD training rounds, 0..1000 (0 stores the starting DCT dictionary)"},
			&cli.Float64Flag{Name: "bound", Value: helpDefaults.Bound, Usage: "factor `C` of the coding error bound n·(C·σ)²"},
			&cli.IntFlag{Name: "train", Value: helpDefaults.Train, Usage: "`N` training patches drawn in all, shared evenly among the images; at least --atoms"},
			&cli.Uint64Flag{Name: "seed", Value: helpDefaults.Seed, Usage: "`N` seeds the choice of patches"},
			&cli.StringFlag{Name: "max-pixels", Value: "1e9", DefaultText: "1e9", Usage: "refuse images of more than `N` pixels, read from the header before decoding (0: no limit)"},
			&cli.BoolFlag{Name: "quiet", DisableDefaultText: true, Usage: "print failures only"},
		},
		Action: func(cc *cli.Context) error { return runLearn(cc, e) },
	}
}

// learnInput is one image to learn from.
type learnInput struct{ name, src string }

func runLearn(cc *cli.Context, e *env) error {
	start := time.Now()
	c := &config{
		paths: cc.Args().Slice(), out: cc.String("out"),
		patch: cc.Int("patch"), atoms: cc.Int("atoms"), rounds: cc.Int("rounds"),
		train: cc.Int("train"), bound: cc.Float64("bound"),
		setPatch: cc.IsSet("patch"), setAtoms: cc.IsSet("atoms"), setRounds: cc.IsSet("rounds"),
		setTrain: cc.IsSet("train"), setBound: cc.IsSet("bound"),
		seed: cc.Uint64("seed"), quiet: cc.Bool("quiet"),
	}
	if len(c.paths) == 0 {
		return usagef("give at least one PATH (an image or a folder); see tessera learn --help")
	}
	if !cc.IsSet("out") || c.out == "" || c.out == "-" {
		return usagef("give the dictionary file with --out FILE; see tessera learn --help")
	}
	if cc.IsSet("sigma") {
		s, err := parseSigma(cc.String("sigma"))
		if err != nil {
			return &usageError{err.Error()}
		}
		c.sigma = s
	} else if estimateSigma == nil {
		return usagef("--sigma is required: this build cannot estimate it")
	}
	if err := c.checkOptions(); err != nil {
		return err
	}
	mp, err := parseMaxPixels(cc.String("max-pixels"))
	if err != nil {
		return &usageError{err.Error()}
	}
	c.maxPixels = mp
	if st, err := os.Stat(c.out); err == nil && st.IsDir() {
		return usagef("--out %s is a folder; give a file name for the dictionary", c.out)
	}

	inputs, err := learnInputs(c)
	if err != nil {
		return err
	}
	status := newStatus(e.stderr, e.tty && !c.quiet)
	failf := func(format string, a ...any) error {
		status.done()
		fmt.Fprintf(e.stderr, "tessera: "+format+"\n", a...)
		return &exitStatus{1}
	}

	opt := c.options(25)
	opt.Workers = 0
	opt.Progress = func(s restore.Stage) {
		if s.Name == "train" && s.Round < s.Rounds {
			status.show(fmt.Sprintf("training round %d of %d", s.Round+1, s.Rounds))
		}
	}
	var first *learnInput
	channels := 0
	smin, smax := math.Inf(1), 0.0
	var bad error // the message of a failed input, already worded
	tr, err := restore.Train(len(inputs), func(i int) (*patches.Image, float64, error) {
		in := &inputs[i]
		status.show(fmt.Sprintf("reading %s (%d of %d)", in.name, i+1, len(inputs)))
		f, err := imgfile.DecodeFile(in.src, c.maxPixels)
		if err != nil {
			bad = errors.New(readErr(in.name, err))
			return nil, 0, bad
		}
		img := f.Img
		if first == nil {
			first, channels = in, img.C
		} else if img.C != channels {
			bad = fmt.Errorf("%s is %s (%d channel%s) but the first image, %s, is %s (%d channel%s): one dictionary serves one kind; learn gray and colour images apart",
				in.name, chanWord(img.C), img.C, plural(img.C), first.name, chanWord(channels), channels, plural(channels))
			return nil, 0, bad
		}
		if img.W < opt.Patch || img.H < opt.Patch {
			bad = fmt.Errorf("%s: the image (%d×%d) is smaller than one %d×%d patch; use a smaller patch (--patch) or leave it out", in.name, img.W, img.H, opt.Patch, opt.Patch)
			return nil, 0, bad
		}
		sigma := c.sigma
		if sigma == 0 {
			status.show(fmt.Sprintf("estimating σ of %s (%d of %d)", in.name, i+1, len(inputs)))
			sum := 0.0
			per := estimateSigma(img)
			for _, s := range per {
				sum += s * s
			}
			if len(per) > 0 {
				sigma = math.Sqrt(sum / float64(len(per)))
			}
			if !(sigma > 0) {
				bad = fmt.Errorf("%s: the noise estimate is %g (a flat or noise-free image?); give --sigma", in.name, sigma)
				return nil, 0, bad
			}
		}
		if peak := img.Peak(); sigma >= peak {
			bad = fmt.Errorf("%s: σ = %g is not below the %d-bit peak %g; give --sigma in the image's own units (0..%g)", in.name, sigma, img.Depth, peak, peak)
			return nil, 0, bad
		}
		s255 := sigma * 255 / img.Peak()
		smin, smax = math.Min(smin, s255), math.Max(smax, s255)
		return img, sigma, nil
	}, opt)
	if err != nil {
		var oe *restore.OptionError
		switch {
		case bad != nil && errors.Is(err, bad):
			return failf("%s", bad)
		case errors.As(err, &oe):
			return failf("%s (--%s)", oe.Reason, oe.Field)
		}
		return failf("%v", err)
	}

	d := tr.Dict
	counts := make([]uint64, len(tr.Uses))
	for i, u := range tr.Uses {
		counts[i] = uint64(u)
	}
	file := &dictfile.File{Dict: d, Uses: counts, Training: dictfile.Training{
		Program: "tessera learn", Images: len(inputs), ImageChannels: tr.ImageChannels, Patches: tr.Patches,
		Rounds: opt.Rounds, Train: opt.Train, Bound: opt.Bound, Seed: opt.Seed,
		Sigma: c.sigma, SigmaMin: round4(smin), SigmaMax: round4(smax),
	}}
	status.show("writing " + c.out)
	if dir := filepath.Dir(c.out); dir != "" {
		if err := os.MkdirAll(dir, 0o755); err != nil {
			return failf("%s: cannot create the folder %s (%s)%s", c.out, dir, errText(err), writeFix(err))
		}
	}
	if err := dictfile.WriteFile(c.out, file); err != nil {
		var fe *dictfile.FormatError
		if errors.As(err, &fe) {
			return failf("%v", err)
		}
		return failf("%s: cannot write (%s)%s", c.out, errText(err), writeFix(err))
	}
	status.done()
	if !c.quiet {
		kind := chanWord(d.Channels)
		if d.Channels < tr.ImageChannels {
			kind = "one-channel"
		}
		fmt.Fprintf(e.stderr, "tessera: learned %d atoms of %d×%d %s patches from %d patches of %d %s images (%d rounds, %.2f atoms per patch) in %.1f s → %s\n",
			d.K, d.Patch, d.Patch, kind, tr.Patches, len(inputs), chanWord(tr.ImageChannels), opt.Rounds, tr.MeanAtoms, time.Since(start).Seconds(), c.out)
	}
	return nil
}

func chanWord(c int) string {
	switch c {
	case 1:
		return "gray"
	case 3:
		return "colour"
	}
	return fmt.Sprintf("%d-channel", c)
}

// learnInputs lists the images of the PATHs, sorted as denoise sorts them.
// A PATH that cannot be used is a usage error: nothing is learned from a
// partial list.
func learnInputs(c *config) ([]learnInput, error) {
	p := &batchPlan{inputs: map[string]string{}, outputs: map[string]bool{}}
	for _, a := range c.paths {
		if a == "-" {
			return nil, usagef("tessera learn reads files and folders, not standard input")
		}
		st, err := os.Stat(a)
		switch {
		case err != nil:
			return nil, &usageError{statErr(a, err).Error()}
		case st.IsDir():
			p.walk(a)
		default:
			base := filepath.Base(a)
			p.jobs = append(p.jobs, &job{name: a, src: a, rel: base, key: base})
		}
	}
	sort.SliceStable(p.jobs, func(a, b int) bool {
		if p.jobs[a].key != p.jobs[b].key {
			return p.jobs[a].key < p.jobs[b].key
		}
		return p.jobs[a].name < p.jobs[b].name
	})
	out := realPath(c.out)
	var list []learnInput
	seen := map[string]string{}
	for _, j := range p.jobs {
		if j.fail != nil {
			return nil, &usageError{j.fail.Error()}
		}
		rp := realPath(j.src)
		if rp == out {
			return nil, usagef("--out %s is the input image %s; choose another name for the dictionary", c.out, j.name)
		}
		if other, ok := seen[rp]; ok {
			return nil, usagef("%s is listed twice (also as %s); give it once", j.name, other)
		}
		seen[rp] = j.name
		list = append(list, learnInput{name: j.name, src: j.src})
	}
	if len(list) == 0 {
		return nil, usagef("no images found in %v; tessera learn needs at least one image", c.paths)
	}
	return list, nil
}

// status is a one-line progress display on a terminal, redrawn in place.
type status struct {
	w     io.Writer
	on    bool
	shown bool
}

func newStatus(w io.Writer, on bool) *status { return &status{w: w, on: on} }

func (s *status) show(msg string) {
	if s.on {
		fmt.Fprint(s.w, "\r\x1b[K"+truncate("tessera: "+msg, 79))
		s.shown = true
	}
}

func (s *status) done() {
	if s.shown {
		fmt.Fprint(s.w, "\r\x1b[K")
		s.shown = false
	}
}

// Dictionaries in tessera denoise: --dict and --tile.

// dictConfig is the part of config that --dict and --tile set.
type dictConfig struct {
	dictPath string
	dict     *learn.Dict
	dictImgC int // channels of the images it was learned on; 0: not recorded
	tile     int
}

var dictFlag = &cli.StringFlag{Name: "dict", Usage: "code with the dictionary in `FILE` (from tessera learn) instead of training on each image; with --rounds N it is the start of N rounds of training"}

// defaultTile was chosen by measurement (README, "Large images"): larger tiles
// were no faster, smaller ones no leaner in total.
const defaultTile = 1024

var tileFlag = &cli.IntFlag{Name: "tile", Value: defaultTile, Usage: "restore images wider or taller than `N` pixels in tiles of at most N×N (same result, memory set by the tile size); 0: never"}

// loadDict reads --dict and --tile into c; it runs before the options are
// checked, since the dictionary fixes the patch size and the atoms.
func (c *config) loadDict(cc *cli.Context) error {
	c.tile = cc.Int("tile")
	if c.tile != 0 && (c.tile < 64 || c.tile > 1<<20) {
		return usagef("--tile %d: must be 64..1048576 pixels, or 0 to restore every image whole", c.tile)
	}
	if !cc.IsSet("dict") {
		return nil
	}
	c.dictPath = cc.String("dict")
	if c.dictPath == "" {
		return usagef("--dict is empty; give a dictionary file written by tessera learn")
	}
	f, err := dictfile.ReadFile(c.dictPath)
	if err != nil {
		var fe *dictfile.FormatError
		if errors.As(err, &fe) {
			return &usageError{err.Error()}
		}
		return usagef("--dict %s", statErr(c.dictPath, err))
	}
	d := f.Dict
	if d.Patch == 0 {
		return usagef("--dict %s: its atoms are not image patches", c.dictPath)
	}
	if d.Patch < 2 || d.Patch > 32 || d.K > 4096 {
		return usagef("--dict %s holds %d atoms of %d×%d; tessera denoise takes 2..32-pixel patches and up to 4096 atoms", c.dictPath, d.K, d.Patch, d.Patch)
	}
	if c.setPatch && c.patch != d.Patch {
		return usagef("--patch %d does not match --dict %s, which holds %d×%d patches; drop --patch", c.patch, c.dictPath, d.Patch, d.Patch)
	}
	if c.setAtoms && c.atoms != d.K {
		return usagef("--atoms %d does not match --dict %s, which holds %d atoms; drop --atoms", c.atoms, c.dictPath, d.K)
	}
	c.dict, c.dictImgC = d, f.Training.ImageChannels
	return nil
}

// applyDict lays --dict over restore options: its patch size and atom
// count, and no training unless --rounds was given.
func (c *config) applyDict(o *restore.Options) {
	if c.dict == nil {
		return
	}
	o.Dict, o.Patch, o.Atoms = c.dict, c.dict.Patch, c.dict.K
	if !c.setRounds {
		o.Rounds = 0
	}
}

// gaussDenoise restores one image with the chosen method: restore.Denoise
// (or DenoiseTiled when a side exceeds --tile), or the group method (on
// overlapping tiles past --tile). A stored dictionary must have been
// learned on images with the image's channels (restore checks the atom
// length too).
func (c *config) gaussDenoise(img *patches.Image, sigma float64, opt restore.Options) (*patches.Image, *restore.Result, error) {
	if d, k := c.dict, c.dictImgC; d != nil && k > 0 && k != img.C {
		return nil, nil, &restore.OptionError{Field: "dict", Reason: fmt.Sprintf(
			"the dictionary %s was learned on %s images (%d channel%s) but this image is %s (%d channel%s); learn one on %s images",
			c.dictPath, chanWord(k), k, plural(k), chanWord(img.C), img.C, plural(img.C), chanWord(img.C))}
	}
	large := c.tile > 0 && (img.W > c.tile || img.H > c.tile)
	if c.method == methodGroup {
		den := denoiser(methodGroup, c.setPatch)
		if large {
			return restore.DenoiseOverlapped(img, sigma, c.tile, group.TileMargin(opt.Patch), opt, den)
		}
		return den(img, sigma, opt)
	}
	if large {
		return restore.DenoiseTiled(img, sigma, c.tile, opt)
	}
	return restore.Denoise(img, sigma, opt)
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}
