package main

import (
	"fmt"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
	"tessera/restore/group"
)

// inpaintHelpDefaults are the numerics' inpainting settings shown in --help.
var inpaintHelpDefaults = restore.InpaintDefaults(0)

const inpaintDescription = `Fills the missing pixels of each image (dust, scratches, dead or saturated
pixels) from what the rest of the image shows. The holes start from a
smooth (harmonic) guess, which --passes passes then refine, by one of three
methods:

  --method dct   (the default without --sigma) iterated thresholding: every
                 8×8 patch that holds a hole is hard-thresholded in the 2-D
                 DCT, the patches are averaged back and the known pixels
                 reset, with a threshold falling from pass to pass
                 (Guleryuz 2006); 3 iterations per pass. Known pixels must
                 be noise-free; --atoms, --rounds, --train and --bound do
                 not apply.
  --method group from the dct fill, 8 more iterations that group similar
                 8×8 patches (16 within a 19×19 window, found again every
                 4 iterations) and hard-threshold each group in a 3-D
                 transform (2-D DCT of each patch, Walsh–Hadamard across
                 the group; after Egiazarian, Foi & Katkovnik 2007).
                 Better by about 0.4 dB at 80% loss on the Kodak set, in
                 about twice the time of dct; noise-free known pixels
                 only; --passes sets its dct start, --patch both stages.
  --method ksvd  (the default with --sigma) learns a dictionary
                 of patches on the known pixels only (masked K-SVD) and
                 codes every patch that touches a hole with weighted
                 orthogonal matching pursuit (Mairal, Elad & Sapiro 2008);
                 it can denoise the known pixels too.

On the project's Kodak tests dct was better than ksvd on 9 of 12 crops
and about ten times faster, and group better than dct on every reference
crop (README).

Where the missing pixels are, exactly one of:
  --mask FILE          one mask for every input
  --mask DIR           each input's mask under DIR, at the input's path
                       relative to the folder given as PATH (a file given as
                       PATH: its name), with any image extension: input
                       photos/a/b/frame.tif takes DIR/a/b/frame.png
  --mask-suffix SUFFIX each input's mask beside it: frame.png takes
                       frame_mask.png for --mask-suffix _mask, with any
                       image extension; images whose name ends in SUFFIX are
                       masks and are not processed as inputs
  --missing-value V    no mask file: a pixel is missing when every colour
                       channel equals V (0 for dead pixels, 255 or 65535
                       for saturated ones)
A mask is an image of the input's size, in any format and depth tessera
reads: white marks the missing pixels, black the valid ones. A pixel is
missing when its value is above half the mask's peak (above 127 for 8-bit,
above 32767 for 16-bit) in any colour channel of the mask; the mask's alpha
is not looked at. A mask given as --mask FILE or found in a folder given
as PATH is not processed as an input.

Without --sigma the known pixels are kept exactly: they are bit-identical
in the output. With --sigma N (the noise in the image's own units) the
known pixels are denoised too, and --sigma auto estimates N per image
(on the whole image, holes included: an approximation that the few
missing pixels of a dust mask hardly move). An image whose mask marks no
pixel is copied unchanged (denoised instead when --sigma is given), and
the report says so; a mask that marks every pixel is refused, as nothing
is left to learn from.

PATH, --out, outputs (written beside an input as NAME.inpainted.EXT
without --out), alpha (copied untouched), bit depth, rounding and
clipping, resuming, seeds, --jobs, --shard, --report and the exit status
are as for tessera denoise; see tessera denoise --help. The report gains
the keys mask (the mask file, or "value=V"), filled (pixels filled) and
passes, and a note when the mask marks no pixel.

` + caution

func inpaintCommand(e *env) *cli.Command {
	return &cli.Command{
		Name:            "inpaint",
		Usage:           "fill missing pixels (given by masks or by a sample value) of images, files or whole folders",
		UsageText:       "tessera inpaint [options] (--mask FILE|DIR | --mask-suffix SUFFIX | --missing-value V) PATH...",
		Description:     inpaintDescription,
		HideHelpCommand: true,
		OnUsageError: func(_ *cli.Context, err error, _ bool) error {
			return usagef("%s; see tessera inpaint --help", flagErrText(err))
		},
		Flags: flagList([]cli.Flag{
			outFlag,
			&cli.StringFlag{Name: "mask", Usage: "the missing pixels: `FILE|DIR`, one mask image for all inputs or a folder of masks at the inputs' relative paths"},
			&cli.StringFlag{Name: "mask-suffix", Usage: "the missing pixels: each input's mask lies beside it, named with `SUFFIX` added (frame.png → frame_mask.png for _mask)"},
			&cli.StringFlag{Name: "missing-value", Usage: "the missing pixels: those equal to `V` in every channel (0..65535, in the image's own units)"},
			&cli.StringFlag{Name: "sigma", Usage: "noise standard deviation `N` in the image's own units, or auto to estimate it per image; denoises the known pixels too (without it they are kept exactly)"},
			&cli.StringFlag{Name: "method", DefaultText: "dct, or ksvd with --sigma", Usage: "fill method `dct|group|ksvd`: iterated DCT thresholding, then non-local thresholding of groups of similar patches (group), or a dictionary learned on the known pixels"},
			&cli.IntFlag{Name: "passes", Value: 5, Usage: "`N` passes over the holes, 1..1000"},
		}, codingFlags(inpaintHelpDefaults, " on the known pixels", " (σ at least 1.5 on the 8-bit scale)", pathSeed), batchFlags("images and masks")),
		Action: func(cc *cli.Context) error {
			cfg, err := parseInpaint(cc, e)
			if err != nil {
				return err
			}
			return runBatch(cfg, e)
		},
	}
}

// Mask sources.
const (
	fromMaskFile = iota + 1
	fromMaskDir
	fromMaskSuffix
	fromMissingValue
)

// inpainter holds what tessera inpaint adds to the batch runner.
type inpainter struct {
	cfg    *config
	source int
	arg    string        // --mask or --mask-suffix as given
	real   string        // real path of --mask
	shared *imgfile.File // --mask FILE, read once
	value  int           // --missing-value
	sigma  float64       // --sigma; 0: known pixels kept
	auto   bool          // --sigma auto
	passes int           // 0: the numerics' default
	// masks maps each job to its mask file; written by prepare before
	// the workers start, read only afterwards.
	masks map[*job]string
}

func parseInpaint(cc *cli.Context, e *env) (*config, error) {
	c, err := parseBatchConfig(cc, e, "inpaint")
	if err != nil {
		return nil, err
	}
	c.defaults = restore.InpaintDefaults
	c.beside = ".inpainted"
	if err := c.checkOptions(); err != nil {
		return nil, err
	}
	in := &inpainter{cfg: c, masks: map[*job]string{}}
	if cc.IsSet("passes") {
		in.passes = cc.Int("passes")
		if in.passes < 1 || in.passes > 1000 {
			return nil, usagef("--passes %d: must be 1..1000", in.passes)
		}
	}
	if cc.IsSet("sigma") {
		if in.sigma, in.auto, err = parseInpaintSigma(cc.String("sigma")); err != nil {
			return nil, err
		}
	}
	if cc.IsSet("method") {
		switch m := strings.ToLower(strings.TrimSpace(cc.String("method"))); m {
		case methodDCT:
			if in.sigma > 0 || in.auto {
				return nil, usagef("--method dct keeps the known pixels as they are and takes no --sigma; use --method ksvd to denoise them too")
			}
			c.fill = restore.FillTransform
		case methodGroup:
			if in.sigma > 0 || in.auto {
				return nil, usagef("--method group keeps the known pixels as they are and takes no --sigma; use --method ksvd to denoise them too")
			}
			c.fill, c.method = restore.FillTransform, methodGroup
		case methodLearned:
			c.fill = restore.FillDictionary
		default:
			return nil, usagef("--method %q: unknown fill method; choose dct (the default), group or ksvd", cc.String("method"))
		}
	}
	if c.fill == restore.FillTransform || (c.fill == restore.FillAuto && in.sigma == 0 && !in.auto) {
		var unused []string
		for _, f := range []string{"atoms", "rounds", "train", "bound"} {
			if cc.IsSet(f) {
				unused = append(unused, "--"+f)
			}
		}
		if unused != nil {
			fmt.Fprintf(e.stderr, "tessera: note: %s set the dictionary fill, which this run does not use; add --method ksvd for it\n", strings.Join(unused, ", "))
		}
	}

	var given []string
	for _, f := range []string{"mask", "mask-suffix", "missing-value"} {
		if cc.IsSet(f) {
			given = append(given, "--"+f)
		}
	}
	switch len(given) {
	case 0:
		return nil, usagef("say where the missing pixels are: give --mask FILE or DIR, --mask-suffix SUFFIX or --missing-value V; see tessera inpaint --help")
	case 1:
	default:
		return nil, usagef("%s: give only one source of missing pixels", strings.Join(given, " and "))
	}
	stdin := len(c.paths) == 1 && c.paths[0] == "-"
	switch {
	case cc.IsSet("missing-value"):
		s := cc.String("missing-value")
		v, err := parseCount(s)
		if err != nil || v > 65535 {
			return nil, usagef("--missing-value %q: must be a whole number 0..65535, the sample value of the missing pixels in the image's own units (e.g. 0 or 65535)", s)
		}
		in.source, in.value = fromMissingValue, v
	case cc.IsSet("mask-suffix"):
		s := cc.String("mask-suffix")
		switch {
		case s == "":
			return nil, usagef("--mask-suffix is empty; give the ending of the masks' names, e.g. _mask")
		case strings.ContainsAny(s, `/\`):
			return nil, usagef("--mask-suffix %q: must be the ending of a file name before its extension, without folders, e.g. _mask", s)
		case stdin:
			return nil, usagef("--mask-suffix finds masks beside named inputs; with standard input give --mask FILE or --missing-value")
		}
		in.source, in.arg = fromMaskSuffix, s
		c.leaveOut = func(p string, dir bool) bool { return !dir && in.isSuffixed(filepath.Base(p)) }
	default:
		m := cc.String("mask")
		if m == "" || m == "-" {
			return nil, usagef("--mask %q: give a mask image file or a folder of masks", m)
		}
		st, err := os.Stat(m)
		if err != nil {
			return nil, usagef("--mask %s", statErr(m, err))
		}
		in.arg, in.real = m, realPath(m)
		if st.IsDir() {
			if stdin {
				return nil, usagef("--mask %s is a folder, which holds masks for named inputs; with standard input give --mask FILE", m)
			}
			if c.outSet && c.out != "-" {
				if o := realPath(c.out); within(o, in.real) || within(in.real, o) {
					return nil, usagef("--out %s and --mask %s overlap: outputs would mix with the masks; write the outputs elsewhere", c.out, m)
				}
			}
			in.source = fromMaskDir
			c.leaveOut = func(p string, dir bool) bool { return dir && realPath(p) == in.real }
		} else {
			f, err := imgfile.DecodeFile(m, c.maxPixels)
			if err != nil {
				return nil, usagef("--mask %s", readErr(m, err))
			}
			in.source, in.shared = fromMaskFile, f
			base := filepath.Base(m)
			c.leaveOut = func(p string, dir bool) bool {
				return !dir && filepath.Base(p) == base && realPath(p) == in.real
			}
		}
	}
	c.leftOut = "mask file"
	c.step, c.prepare, c.annotate = in.step, in.prepare, in.annotate
	return c, nil
}

// parseInpaintSigma reads --sigma: auto, or a finite number of 0 or more
// (0 keeps the known pixels, as without --sigma).
func parseInpaintSigma(s string) (float64, bool, error) {
	if strings.EqualFold(s, "auto") {
		return 0, true, nil
	}
	v, err := strconv.ParseFloat(s, 64)
	switch {
	case err == nil && v == 0:
		return 0, false, nil
	case err == nil && v < 0:
		return 0, false, usagef("--sigma %q: must be 0 or more (0: keep the known pixels), or auto", s)
	}
	if v, err = parseSigma(s); err != nil {
		return 0, false, usagef("%s, or auto", err)
	}
	return v, false, nil
}

// isSuffixed reports whether name is a mask name for --mask-suffix.
func (in *inpainter) isSuffixed(name string) bool {
	if !imgfile.IsImageName(name) {
		return false
	}
	return strings.HasSuffix(strings.TrimSuffix(name, filepath.Ext(name)), in.arg)
}

// prepare finds every input's mask before anything is processed. A mask
// that is missing or ambiguous fails its image; one that an output would
// overwrite, or that is an input, stops the run.
func (in *inpainter) prepare(p *batchPlan) error {
	if in.source == fromMissingValue {
		return nil
	}
	if in.source == fromMaskFile && p.outputs[in.real] {
		return usagef("--mask %s is also an output; write the outputs elsewhere", in.arg)
	}
	listings := map[string][]string{}
	for _, j := range p.jobs {
		if j.src == "" || j.fail != nil {
			continue
		}
		var m string
		switch in.source {
		case fromMaskFile:
			in.masks[j] = in.arg
			continue
		case fromMaskDir:
			rel := filepath.FromSlash(j.rel)
			m, j.fail = findMask(listings, j.name, filepath.Join(in.arg, filepath.Dir(rel)), stem(filepath.Base(rel)), "",
				fmt.Sprintf("under --mask %s (the input's relative path and name, any image extension); add one, or give --mask FILE for all inputs", in.arg))
		case fromMaskSuffix:
			m, j.fail = findMask(listings, j.name, filepath.Dir(j.src), stem(filepath.Base(j.src)), in.arg,
				fmt.Sprintf("beside it (its name with %s added, any image extension); add one, or choose another mask source", in.arg))
		}
		if j.fail != nil {
			continue
		}
		rm := realPath(m)
		if p.outputs[rm] {
			return usagef("the mask %s of %s would be overwritten by an output; write the outputs elsewhere", m, j.name)
		}
		if other, ok := p.inputs[rm]; ok {
			if other == j.name {
				return usagef("the mask found for %s is the image itself; keep the masks in a folder of their own", j.name)
			}
			return usagef("the mask %s of %s is also an input; keep the masks apart from the inputs", m, j.name)
		}
		in.masks[j] = m
	}
	return nil
}

// stem is a file name without its image extension.
func stem(name string) string {
	if imgfile.IsImageName(name) {
		return strings.TrimSuffix(name, filepath.Ext(name))
	}
	return name
}

// findMask looks in dir for the one image named stem+suffix with any image
// extension, for the input name; where tells where it looked and the fix.
// listings caches the folders read.
func findMask(listings map[string][]string, name, dir, stem, suffix, where string) (string, error) {
	names, ok := listings[dir]
	if !ok {
		ents, _ := os.ReadDir(dir) // a missing folder lists nothing
		for _, e := range ents {
			if !e.IsDir() && imgfile.IsImageName(e.Name()) {
				names = append(names, e.Name())
			}
		}
		listings[dir] = names
	}
	var found []string
	for _, n := range names {
		if strings.TrimSuffix(n, path.Ext(n)) == stem+suffix {
			found = append(found, filepath.Join(dir, n))
		}
	}
	sort.Strings(found)
	switch len(found) {
	case 0:
		return "", fmt.Errorf("%s: no mask %s.* %s", name, filepath.Join(dir, stem+suffix), where)
	case 1:
		return found[0], nil
	}
	return "", fmt.Errorf("%s: several masks match (%s); keep one", name, strings.Join(found, ", "))
}

func (in *inpainter) annotate(j *job, rec *record) {
	rec.Inpainting = &Inpainting{Mask: in.masks[j]}
	if in.source == fromMissingValue {
		rec.Mask = "value=" + strconv.Itoa(in.value)
	}
}

// missing reads the missing pixels of the image of j.
func (in *inpainter) missing(j *job, img *patches.Image) ([]bool, error) {
	wh := img.W * img.H
	miss := make([]bool, wh)
	if in.source == fromMissingValue {
		if peak := img.Peak(); float64(in.value) > peak {
			return nil, fmt.Errorf("%s: --missing-value %d is above the %d-bit peak %g of the image; give a value 0..%g", j.name, in.value, img.Depth, peak, peak)
		}
		v := float32(in.value)
		for i := range miss {
			miss[i] = true
			for c := 0; c < img.C && miss[i]; c++ {
				miss[i] = img.Pix[c*wh+i] == v
			}
		}
		return miss, nil
	}
	mf := in.shared
	name := in.masks[j]
	if mf == nil {
		var err error
		if mf, err = imgfile.DecodeFile(name, in.cfg.maxPixels); err != nil {
			return nil, fmt.Errorf("%s (the mask of %s)", readErr(name, err), j.name)
		}
	}
	m := mf.Img
	if m.W != img.W || m.H != img.H {
		return nil, fmt.Errorf("%s: the mask %s is %d×%d but the image is %d×%d; give a mask of the image's size", j.name, name, m.W, m.H, img.W, img.H)
	}
	half := float32(m.Peak() / 2)
	for c := 0; c < m.C; c++ {
		for i, v := range m.Plane(c) {
			if v > half {
				miss[i] = true
			}
		}
	}
	return miss, nil
}

// step fills the missing pixels of one image.
func (in *inpainter) step(b *batch, j *job, f *imgfile.File, slot int, rec *record) (*patches.Image, error) {
	img := f.Img
	b.con.set(slot, "reading the mask")
	miss, err := in.missing(j, img)
	if err != nil {
		return nil, err
	}
	holes := 0
	for _, m := range miss {
		if m {
			holes++
		}
	}
	if holes == len(miss) {
		what := "the mask " + rec.Mask + " marks every pixel missing"
		if in.source == fromMissingValue {
			what = fmt.Sprintf("every pixel equals --missing-value %d", in.value)
		}
		return nil, fmt.Errorf("%s: %s: nothing is left to learn from; check that white marks the missing pixels and black the valid ones", j.name, what)
	}

	sigma := in.sigma
	if p := b.cfg.options(25).Patch; img.W < p || img.H < p {
		return nil, fmt.Errorf("%s: the image (%d×%d) is smaller than one %d×%d patch; use a smaller patch (--patch)", j.name, img.W, img.H, p, p)
	}
	if in.auto {
		b.con.set(slot, "estimating σ")
		per := estimateSigma(img)
		rec.SigmaChannels = round4All(per)
		rec.SigmaEstimated = true
		sigma = rms(per)
		if !(sigma > 0) {
			sigma = 0
			rec.Note = "the noise estimate is 0: the known pixels are kept"
		}
	}
	if sigma > 0 {
		rec.Sigma = ptr(round4(sigma))
		if peak := img.Peak(); sigma >= peak {
			return nil, fmt.Errorf("%s: σ = %g is not below the %d-bit peak %g; give --sigma in the image's own units (0..%g)", j.name, sigma, img.Depth, peak, peak)
		}
	}
	if holes == 0 {
		rec.Note = "the mask marks no pixel missing: nothing to fill"
		if sigma == 0 {
			rec.Note += "; the image is copied unchanged"
			rec.Filled, rec.Passes = ptr(0), ptr(0)
			return img, nil
		}
		rec.Note += "; the known pixels are denoised (--sigma)"
	}

	opt := b.cfg.options(sigma * 255 / img.Peak())
	opt.Seed = learn.SubSeed(b.cfg.seed, j.rel)
	opt.Workers = b.workers
	opt.Passes = in.passes
	passes := in.passes
	if passes == 0 {
		passes = 5 // the numerics' default
	}
	filling := func(k int) string { return fmt.Sprintf("filling: pass %d of %d", min(k, passes), passes) }
	opt.Progress = func(s restore.Stage) {
		switch {
		case s.Name == "train" && s.Round < s.Rounds:
			b.con.set(slot, stageText(s))
		case s.Name == "train":
			b.con.set(slot, filling(1))
		case s.Name == "code":
			b.con.set(slot, fmt.Sprintf("filling %d%%", 100*s.Done/max(s.Total, 1)))
		}
	}
	// As restore.Inpaint picks under FillAuto (--sigma auto is resolved by now).
	if opt.Fill == restore.FillAuto {
		opt.Fill = restore.FillTransform
		if sigma > 0 {
			opt.Fill = restore.FillDictionary
		}
	}
	rec.Method = methodDCT
	fill := restore.Inpaint
	switch {
	case opt.Fill == restore.FillDictionary:
		rec.Method = methodLearned
	case b.cfg.method == methodGroup:
		rec.Method = methodGroup
		fill = func(img *patches.Image, miss []bool, _ float64, opt restore.Options) (*patches.Image, *restore.InpaintResult, error) {
			return group.Fill(img, miss, opt)
		}
	}
	if opt.Rounds > 0 && opt.Fill == restore.FillDictionary {
		b.con.set(slot, stageText(restore.Stage{Name: "train", Rounds: opt.Rounds}))
	} else {
		b.con.set(slot, filling(1))
	}
	out, res, err := fill(img, miss, sigma, opt)
	if err != nil {
		return nil, restoreErr(j.name, err)
	}
	if sigma == 0 {
		// Kept exactly, whatever the numerics' scaling did to them.
		wh := img.W * img.H
		for c := 0; c < img.C; c++ {
			for i, m := range miss {
				if !m {
					out.Pix[c*wh+i] = img.Pix[c*wh+i]
				}
			}
		}
	}
	rec.Filled, rec.Passes = ptr(res.Filled), ptr(res.Passes)
	return out, nil
}
