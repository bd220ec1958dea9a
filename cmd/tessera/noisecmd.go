package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"text/tabwriter"

	"github.com/urfave/cli/v2"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/restore/noise"
)

const noiseDescription = `Estimates how noisy each image is, without changing it, and prints the
estimate in the image's own units (0..255 for 8-bit, 0..65535 for 16-bit
images): the numbers tessera denoise uses when --sigma, --gain or
--read-noise are omitted.

White Gaussian noise, one standard deviation per channel (--method):
  pca      (the default) the smallest eigenvalue of the covariance of
           weak-texture 7×7 patches (Liu, Tanaka & Okutomi 2013), iterated
           with the patch selection and corrected for the number of
           patches; small or densely textured images, with too few such
           patches, get the wavelet estimate;
  wavelet  median(|d|)/0.6745 over the finest diagonal wavelet band (Donoho
           & Johnstone 1994); fast, but it mistakes fine texture for noise.
sigma is the root mean square over the channels: the σ tessera denoise
uses for a colour image.

--noise poisson also fits the photon model z = α·Poisson(y/α) + N(0, σ²),
whose variance is α·E[z] + σ², to each channel (after Foi et al. 2008):
gain α in image units per photon and read noise σ in image units, from
the smooth parts of the image. Data clipped at 0 or at the peak are fitted
as clipped. A gain of 0 means no signal-dependent noise was found.

PATH is an image file, a folder (walked recursively, sorted by relative
path; hidden files and folders and files without an image extension are
skipped) or - for standard input. Formats read: PNG, TIFF, JPEG, PGM and
PPM, 8 or 16 bits, gray or colour; alpha is ignored.

Output: a table with one row per image; --json prints one JSON record per
line instead, with the keys input, sigma, sigma_channels, method, width,
height, channels, bit_depth and, with --noise poisson, gain, read_noise,
gain_channels and read_noise_channels; an image that could not be read has
an error key and null numbers.

Exit status: 0 when every image was measured, 1 when any failed (the others
are still measured), 2 for a bad command line (nothing is measured).`

func noiseCommand(e *env) *cli.Command {
	return &cli.Command{
		Name:            "noise",
		Usage:           "estimate the noise level of images (σ per channel, or the photon model)",
		UsageText:       "tessera noise [options] PATH...",
		Description:     noiseDescription,
		HideHelpCommand: true,
		OnUsageError: func(_ *cli.Context, err error, _ bool) error {
			return usagef("%s; see tessera noise --help", flagErrText(err))
		},
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "method", Value: noise.Default.String(), Usage: "white-noise estimator `pca|wavelet`"},
			&cli.StringFlag{Name: "noise", Value: noiseGauss, Usage: "noise model `gauss|poisson`; poisson also fits the photon model's gain and read noise"},
			&cli.BoolFlag{Name: "json", DisableDefaultText: true, Usage: "print one JSON record per line instead of the table"},
			&cli.IntFlag{Name: "jobs", Value: 1, Usage: "measure `N` images at once"},
			&cli.StringFlag{Name: "max-pixels", Value: "1e9", DefaultText: "1e9", Usage: "refuse images of more than `N` pixels, read from the header before decoding (0: no limit)"},
		},
		Action: func(cc *cli.Context) error {
			cfg, err := parseNoiseConfig(cc)
			if err != nil {
				return err
			}
			return runNoise(cfg, e)
		},
	}
}

type noiseConfig struct {
	paths     []string
	method    noise.Method
	photon    bool
	json      bool
	jobs      int
	maxPixels int64
}

func parseNoiseConfig(cc *cli.Context) (*noiseConfig, error) {
	c := &noiseConfig{paths: cc.Args().Slice(), json: cc.Bool("json"), jobs: cc.Int("jobs")}
	if len(c.paths) == 0 {
		return nil, usagef("give at least one PATH (an image, a folder, or - for standard input); see tessera noise --help")
	}
	for _, p := range c.paths {
		if p == "" {
			return nil, usagef("an empty PATH was given; check the quoting of the command line")
		}
	}
	m, err := noise.ParseMethod(strings.ToLower(cc.String("method")))
	if err != nil {
		return nil, usagef("--method %q: unknown estimator; choose pca or wavelet", cc.String("method"))
	}
	c.method = m
	switch strings.ToLower(cc.String("noise")) {
	case noiseGauss:
	case noisePoisson:
		c.photon = true
	default:
		return nil, usagef("--noise %q: unknown noise model; choose gauss (white Gaussian) or poisson (photon-limited)", cc.String("noise"))
	}
	if c.jobs < 1 || c.jobs > 4096 {
		return nil, usagef("--jobs %d: must be 1..4096", c.jobs)
	}
	if c.maxPixels, err = parseMaxPixels(cc.String("max-pixels")); err != nil {
		return nil, &usageError{err.Error()}
	}
	return c, nil
}

// noiseRecord is one line of --json: the estimates for one input, in its
// units. Numbers never known (for an unreadable file) are null.
type noiseRecord struct {
	Input             string    `json:"input"`
	Sigma             *float64  `json:"sigma"`
	SigmaChannels     []float64 `json:"sigma_channels"`
	Method            string    `json:"method"`
	Width             *int      `json:"width"`
	Height            *int      `json:"height"`
	Channels          *int      `json:"channels"`
	BitDepth          *int      `json:"bit_depth"`
	Gain              *float64  `json:"gain,omitempty"`
	ReadNoise         *float64  `json:"read_noise,omitempty"`
	GainChannels      []float64 `json:"gain_channels,omitempty"`
	ReadNoiseChannels []float64 `json:"read_noise_channels,omitempty"`
	Error             string    `json:"error,omitempty"`
}

// listNoiseInputs lists the images as tessera denoise does: files as
// named, folders walked, sorted by relative path.
func listNoiseInputs(paths []string) (*batchPlan, error) {
	p := &batchPlan{}
	if len(paths) == 1 && paths[0] == "-" {
		p.jobs = []*job{{name: "stdin", src: "-", rel: "-", key: "-"}}
		return p, nil
	}
	for _, a := range paths {
		if a == "-" {
			return nil, usagef("- (standard input) must be the only PATH")
		}
	}
	for _, a := range paths {
		st, err := os.Stat(a)
		switch {
		case err != nil:
			p.jobs = append(p.jobs, &job{name: a, key: filepath.ToSlash(filepath.Base(a)), fail: statErr(a, err)})
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
	return p, nil
}

func runNoise(cfg *noiseConfig, e *env) error {
	plan, err := listNoiseInputs(cfg.paths)
	if err != nil {
		return err
	}
	con := newConsole(e.stderr, e.tty, e.width)
	con.start(len(plan.jobs))
	recs := make([]*noiseRecord, len(plan.jobs))
	work := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < min(cfg.jobs, len(plan.jobs)); w++ {
		wg.Go(func() {
			for i := range work {
				j := plan.jobs[i]
				con.begin(w, j.name)
				recs[i] = cfg.measure(j, e.stdin)
				con.end(w)
				if recs[i].Error != "" {
					con.line("tessera: " + recs[i].Error)
				}
			}
		})
	}
	for i := range plan.jobs {
		work <- i
	}
	close(work)
	wg.Wait()
	con.finish("")

	failed := 0
	for _, r := range recs {
		if r.Error != "" {
			failed++
		}
	}
	var werr error
	if cfg.json {
		werr = writeNoiseJSON(e.stdout, recs)
	} else if len(recs) > 0 {
		werr = writeNoiseTable(e.stdout, recs, cfg)
	}
	if werr != nil {
		fmt.Fprintf(e.stderr, "tessera: standard output: cannot write (%s)%s\n", errText(werr), writeFix(werr))
		return &exitStatus{1}
	}
	if len(recs) == 0 {
		fmt.Fprintf(e.stderr, "tessera: no images found (%d hidden or non-image files ignored)\n", plan.ignored)
	}
	if failed > 0 {
		fmt.Fprintf(e.stderr, "tessera: %d of %d images could not be measured\n", failed, len(recs))
		return &exitStatus{1}
	}
	return nil
}

// measure reads one input and estimates its noise. It never panics: a
// panic inside the numerics fails this image only.
func (c *noiseConfig) measure(j *job, stdin io.Reader) (rec *noiseRecord) {
	rec = &noiseRecord{Input: j.name, Method: c.method.String()}
	defer func() {
		if r := recover(); r != nil {
			*rec = noiseRecord{Input: j.name, Method: c.method.String(),
				Error: fmt.Sprintf("%s: internal error (%v); please report it with the image", j.name, r)}
		}
	}()
	if j.fail != nil {
		rec.Error = j.fail.Error()
		return rec
	}
	var f *imgfile.File
	var err error
	if j.src == "-" {
		f, err = imgfile.Decode(stdin, "stdin", c.maxPixels)
	} else {
		f, err = imgfile.DecodeFile(j.src, c.maxPixels)
	}
	if err != nil {
		rec.Error = readErr(j.name, err)
		return rec
	}
	img := f.Img
	rec.Width, rec.Height, rec.Channels, rec.BitDepth = ptr(img.W), ptr(img.H), ptr(img.C), ptr(img.Depth)
	per := c.method.EstimateAll(img)
	rec.Sigma, rec.SigmaChannels = ptr(round4(rms(per))), round4All(per)
	if c.photon {
		p := estimatePhoton(img)
		rec.Gain, rec.ReadNoise = ptr(round4(p.gain)), ptr(round4(p.read))
		rec.GainChannels, rec.ReadNoiseChannels = round4All(p.gains), round4All(p.reads)
	}
	return rec
}

func writeNoiseJSON(w io.Writer, recs []*noiseRecord) error {
	bw := bufio.NewWriter(w)
	for _, r := range recs {
		b, err := json.Marshal(r)
		if err != nil {
			return err
		}
		bw.Write(append(b, '\n'))
	}
	return bw.Flush()
}

func writeNoiseTable(w io.Writer, recs []*noiseRecord, cfg *noiseConfig) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	head := "input\tsize\tbits\tsigma (" + cfg.method.String() + ")\t"
	if cfg.photon {
		head += "gain\tread noise\t"
	}
	fmt.Fprint(tw, head+"per channel\n")
	for _, r := range recs {
		if r.Error != "" {
			fmt.Fprintf(tw, "%s\t-\t-\tfailed\t", r.Input)
			if cfg.photon {
				fmt.Fprint(tw, "-\t-\t")
			}
			fmt.Fprint(tw, "\n")
			continue
		}
		size := fmt.Sprintf("%d×%d", *r.Width, *r.Height)
		if *r.Channels == 3 {
			size += " RGB"
		}
		fmt.Fprintf(tw, "%s\t%s\t%d\t%s\t", r.Input, size, *r.BitDepth, fmtNum(*r.Sigma))
		if cfg.photon {
			fmt.Fprintf(tw, "%s\t%s\t", fmtNum(*r.Gain), fmtNum(*r.ReadNoise))
		}
		// Per channel: σ, and α/σ pairs of the photon model.
		var parts []string
		if len(r.SigmaChannels) > 1 {
			for i, s := range r.SigmaChannels {
				part := fmtNum(s)
				if cfg.photon {
					part += fmt.Sprintf(" (%s/%s)", fmtNum(r.GainChannels[i]), fmtNum(r.ReadNoiseChannels[i]))
				}
				parts = append(parts, part)
			}
		}
		fmt.Fprintln(tw, strings.Join(parts, "  "))
	}
	return tw.Flush()
}

// fmtNum prints an estimate with two decimals: finer than any estimator.
func fmtNum(v float64) string { return fmt.Sprintf("%.2f", v) }
