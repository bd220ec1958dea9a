package main

import (
	"fmt"
	"math"
	"regexp"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"tessera/restore"
)

// usageError is a bad command line: exit status 2, nothing processed.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, a ...any) error { return &usageError{fmt.Sprintf(format, a...)} }

// exitStatus ends the program with code after its messages were printed.
type exitStatus struct{ code int }

func (e *exitStatus) Error() string { return fmt.Sprintf("exit status %d", e.code) }

// defaultMaxPixels is the decompression-bomb guard: 1e9 pixels is a 31623²
// frame, beyond which a float copy alone needs 12 GB per colour image.
const defaultMaxPixels = 1_000_000_000

// outFormats are the values of --format: the lossless formats the encoder
// writes. pgm and ppm are the same Netpbm writer (P5 for gray, P6 for
// colour); the output name follows the channels.
var outFormats = map[string]string{"png": "png", "tiff": "tiff", "tif": "tiff", "pgm": "pgm", "ppm": "pgm", "pnm": "pgm"}

// config is the parsed command line of tessera denoise.
type config struct {
	paths  []string
	out    string
	outSet bool
	sigma  float64 // 0: estimate per image

	noise            string  // noiseGauss or noisePoisson
	gain, readNoise  float64 // photon model, when set
	gainSet, readSet bool

	patch, atoms, rounds, train int
	bound                       float64
	setPatch, setAtoms          bool
	setRounds, setTrain         bool
	setBound                    bool
	seed                        uint64

	jobs      int
	report    string
	force     bool
	quiet     bool
	shard     shard
	format    string // "", "png", "tiff" or "pgm"
	maxPixels int64

	method string             // methodLearned or methodGroup
	fill   restore.FillMethod // tessera inpaint's --method

	dictConfig // --dict and --tile (learncmd.go)
	batchHooks // what other batch commands change (batch.go)
}

// options gives the restore options for an image with σ on the 0–255
// scale: the library's defaults for that σ, with the options given on the
// command line laid over them.
func (c *config) options(sigma255 float64) restore.Options {
	defaults := restore.Defaults
	if c.defaults != nil {
		defaults = c.defaults
	}
	o := defaults(sigma255)
	if c.setPatch {
		o.Patch = c.patch
	}
	if c.setAtoms {
		o.Atoms = c.atoms
	}
	if c.setRounds {
		o.Rounds = c.rounds
	}
	if c.setTrain {
		o.Train = c.train
	}
	if c.setBound {
		o.Bound = c.bound
	}
	c.applyDict(&o)
	o.Seed = c.seed
	o.Fill = c.fill
	return o
}

// helpDefaults are the defaults shown in --help: the library's settings at
// σ = 25 on the 0–255 scale.
var helpDefaults = restore.Defaults(25)

const denoiseDescription = `Removes white Gaussian noise from each image: learns a dictionary of
patches from the noisy image itself (K-SVD), codes every overlapping patch
with orthogonal matching pursuit down to the error bound n·(C·σ)², and
averages the patches back.

--method group works in two stages instead: similar 9×9 patches within a
25×25 window are grouped and coded with one set of atoms (simultaneous
OMP) over a dictionary learned on the groups, each patch keeping its own
coefficients (after Mairal et al. 2009); that estimate then guides a
collaborative Wiener filter of regrouped noisy patches in a 3-D transform
(after Dabov et al. 2007). On the Kodak set it gains 0.4–0.6 dB over ksvd
at 3–4.5 times the time (README). --bound, --atoms, --train and --rounds
apply to both methods, and a --patch given sets both stages of group;
past --tile the group method runs on overlapping tiles, each learning its
own dictionary.

--noise poisson is for photon-limited frames, z = α·Poisson(y/α) + N(0, σ²)
with gain α (--gain) and read noise σ (--read-noise), both estimated per
image when omitted (see tessera noise): each sample is stabilised with the
generalized Anscombe transform, denoised at unit noise, and mapped back with
the closed-form exact unbiased inverse (Mäkitalo & Foi 2011, 2013).

PATH is an image file, a folder (walked recursively, sorted by relative
path; hidden files and folders and files without an image extension are
skipped and counted) or - for standard input. Formats read: PNG, TIFF,
JPEG, PGM and PPM, 8 or 16 bits, gray or colour, with or without alpha.

Outputs have the input's name, format and bit depth (--format changes the
format and the extension); alpha is copied through untouched; samples are
rounded and clipped. A folder's tree is mirrored under --out. With a single
file, --out may name the output file, an existing folder, or a new folder
(a name ending in / or without an image extension); without --out the
output goes beside the input as NAME.denoised.EXT. --out - writes one image
to standard output. Outputs are written to a temporary file and renamed,
so a killed run never leaves a partial file under its final name, and a
rerun skips the outputs that exist: a stopped batch resumes.

Each image's random choices derive from --seed and its path relative to
the input folder (its file name for a file named as PATH, "-" for
standard input), so the same inputs and options give byte-identical
outputs whatever --jobs and --shard are.

--shard K/N keeps the images at positions K-1, K-1+N, K-1+2N, ... (counted
from 0) of the sorted list of all images, so N shares cover every image
exactly once and differ in size by one at most; do not change the inputs
while the shares run. --shard auto reads a Slurm job array
(SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_COUNT, SLURM_ARRAY_TASK_MIN,
SLURM_ARRAY_TASK_STEP) or a Kubernetes Indexed Job (JOB_COMPLETION_INDEX,
with --shard-count). Give each share its own --report file.

Exit status: 0 when every image was done or skipped, 1 when any failed
(the others still finish), 2 for a bad command line (nothing is
processed), 130 or 143 when interrupted by SIGINT or SIGTERM.

` + caution

func denoiseCommand(e *env) *cli.Command {
	return &cli.Command{
		Name:            "denoise",
		Usage:           "remove noise (white Gaussian, or photon-limited) from images, files or whole folders",
		UsageText:       "tessera denoise [options] PATH...",
		Description:     denoiseDescription,
		HideHelpCommand: true,
		OnUsageError:    onUsageError,
		Flags: flagList([]cli.Flag{
			outFlag,
			&cli.StringFlag{Name: "sigma", Usage: "noise standard deviation `N` in the image's own units (0..255 for 8-bit, 0..65535 for 16-bit)" + sigmaHelp()},
			&cli.StringFlag{Name: "noise", Value: noiseGauss, Usage: "noise model `gauss|poisson`: white Gaussian, or photon-limited α·Poisson(y/α) + N(0, σ²)"},
			&cli.StringFlag{Name: "gain", Usage: "photon gain `A` (α) in image units per photon (--noise poisson); estimated per image when omitted"},
			&cli.StringFlag{Name: "read-noise", Usage: "read noise `S` (σ) in the image's own units (--noise poisson); estimated per image when omitted"},
			methodFlag,
		}, codingFlags(helpDefaults, "", "", pathSeed), batchFlags("images"), []cli.Flag{dictFlag, tileFlag}),
		Action: func(cc *cli.Context) error {
			cfg, err := parseConfig(cc, e)
			if err != nil {
				return err
			}
			return runBatch(cfg, e)
		},
	}
}

func sigmaHelp() string {
	if estimateSigma == nil {
		return "; required"
	}
	return "; estimated per image when omitted"
}

// onUsageError turns a flag parse error into a usage error with a pointer
// to the help.
func onUsageError(_ *cli.Context, err error, _ bool) error {
	return usagef("%s; see tessera denoise --help", flagErrText(err))
}

var badValue = regexp.MustCompile(`^invalid value (".*") for flag -+([A-Za-z0-9-]+): .*$`)

// flagErrText rewords the flag package's parse errors in the terms of the
// command line.
func flagErrText(err error) string {
	msg := err.Error()
	if m := badValue.FindStringSubmatch(msg); m != nil {
		return fmt.Sprintf("--%s %s: not a valid value (a whole number is expected, or a decimal for --bound)", m[2], m[1])
	}
	if n, ok := strings.CutPrefix(msg, "flag provided but not defined: "); ok {
		return "unknown option --" + strings.TrimLeft(n, "-")
	}
	if n, ok := strings.CutPrefix(msg, "flag needs an argument: "); ok {
		return "option --" + strings.TrimLeft(n, "-") + " needs a value"
	}
	return msg
}

func parseConfig(cc *cli.Context, e *env) (*config, error) {
	c, err := parseBatchConfig(cc, e, "denoise")
	if err != nil {
		return nil, err
	}
	if err := c.parseNoise(cc); err != nil {
		return nil, err
	}
	if c.method, err = parseMethod(cc.String("method")); err != nil {
		return nil, err
	}
	if cc.IsSet("sigma") {
		s, err := parseSigma(cc.String("sigma"))
		if err != nil {
			return nil, &usageError{err.Error()}
		}
		c.sigma = s
	} else if estimateSigma == nil && c.noise != noisePoisson {
		return nil, usagef("--sigma is required: give the noise standard deviation in the image's own units, e.g. --sigma 10 for 8-bit or --sigma 2500 for 16-bit images (this build cannot estimate it)")
	}
	if err := c.loadDict(cc); err != nil {
		return nil, err
	}
	if err := c.checkOptions(); err != nil {
		return nil, err
	}
	return c, nil
}

// checkOptions refuses numeric options that no image could use, so a
// batch does not fail on every file for the same reason. The ranges are
// those restore.Denoise checks.
func (c *config) checkOptions() error {
	o := c.options(25)
	switch {
	case o.Patch < 2 || o.Patch > 32:
		return usagef("--patch %d: the patch side must be 2..32", o.Patch)
	case o.Atoms < 1 || o.Atoms > 4096:
		return usagef("--atoms %d: the dictionary size must be 1..4096", o.Atoms)
	case o.Rounds < 0 || o.Rounds > 1000:
		return usagef("--rounds %d: must be 0..1000", o.Rounds)
	case !(o.Bound > 0) || math.IsInf(o.Bound, 0):
		return usagef("--bound %g: the bound factor must be a positive number (the published value is 1.15)", o.Bound)
	case o.Train < 1:
		return usagef("--train %d: must be at least 1", o.Train)
	case o.Rounds > 0 && o.Train < o.Atoms:
		return usagef("--train %d is below --atoms %d: training needs at least one patch per atom; raise --train or lower --atoms", o.Train, o.Atoms)
	}
	return nil
}

// parseSigma reads --sigma: a finite number above zero.
func parseSigma(s string) (float64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil && !errorsIsRange(err) {
		return 0, fmt.Errorf("--sigma %q: not a number; give the noise standard deviation in the image's own units, e.g. --sigma 10", s)
	}
	if math.IsNaN(v) || math.IsInf(v, 0) || err != nil {
		return 0, fmt.Errorf("--sigma %q: must be a finite number above 0, in the image's own units", s)
	}
	if !(v > 0) {
		return 0, fmt.Errorf("--sigma %q: must be above 0; a noise-free image needs no denoising", s)
	}
	return v, nil
}

func errorsIsRange(err error) bool {
	ne, ok := err.(*strconv.NumError)
	return ok && ne.Err == strconv.ErrRange
}

// parseMaxPixels reads --max-pixels: a whole number of pixels, written
// plainly or as 1e9; 0 turns the guard off.
func parseMaxPixels(s string) (int64, error) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || v < 0 || v > 1<<62 || v != math.Trunc(v) {
		return 0, fmt.Errorf("--max-pixels %q: must be a whole number of pixels such as 1e9, or 0 for no limit", s)
	}
	return int64(v), nil
}
