package group

import (
	"fmt"
	"math"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
)

// Second says what the second pass codes.
type Second int

const (
	// SecondNone stops after one pass.
	SecondNone Second = iota
	// SecondGuided groups again on the first estimate and codes the noisy
	// image with those groups at the full σ (Mairal et al. 2009 regroup on
	// the first estimate).
	SecondGuided
	// SecondIterative codes y₂ = x̂ + δ(y − x̂) at a reduced σ₂ =
	// γ·√(σ² − mean((y − x̂)²)), grouped on y₂ (the iterative
	// regularisation of Dong et al. 2013 and their successors).
	SecondIterative
	// SecondWiener groups and codes the first estimate, then estimates
	// the noisy patches' coefficients on those supports by empirical Wiener
	// shrinkage with the estimate's coefficients as the pilot.
	SecondWiener
	// SecondCollab groups again on the first estimate and filters the
	// noisy groups by empirical Wiener shrinkage in a 3-D transform (2-D
	// DCT of each patch, Walsh–Hadamard across the group) with the
	// estimate's spectra as the pilot: the second step of Dabov et al.
	// 2007, after a first pass that is better than their first step.
	SecondCollab
)

// Params are the settings of the group method that restore.Options has no
// field for. Build them with DefaultParams and change fields.
type Params struct {
	Window int // search window side (odd)
	Group  int // most patches per group, the reference included
	Step   int // reference grid step
	// Match bounds the squared distance of a member to its reference, as a
	// multiple of 2nσ² (the expected distance of two noisy copies of one
	// patch); Match2 is the bound of the second pass, as a multiple of 2nσ²
	// of the first σ.
	Match, Match2 float64
	Rule          learn.SOMPRule
	Second        Second
	// Rounds2 is the number of dictionary rounds of the second pass, from
	// the first pass's dictionary (0: that dictionary as it is).
	Rounds2 int
	// Delta and Gamma are δ and γ of SecondIterative.
	Delta, Gamma float64
	// BoundScale multiplies opt.Bound (C in ε = n(Cσ)²) for group coding:
	// a group's residual averages over its members, so it needs less slack
	// above the noise energy than one patch does. BoundScale2 is the same
	// for the second pass; 0 means BoundScale.
	BoundScale, BoundScale2 float64
	// ChromaScale replaces BoundScale for the second and later channels
	// of colour images coded per channel, whose weak signal needs fewer
	// atoms; 0 means BoundScale.
	ChromaScale float64
	// PilotBound is C of the pilot's coding under SecondWiener.
	PilotBound float64
	// Sparse weighs groups in the average back by the inverse of their
	// number of coefficients (of their squared Wiener factors under
	// SecondWiener), favouring sparse groups as Dabov et al. 2007 do; else
	// every coded patch weighs alike.
	Sparse bool
	// PatchWeight is the weight of one coded patch in the average back,
	// against λ for the noisy image.
	PatchWeight float64
	// Patch is the patch side of the first pass when opt.Dict is nil and
	// the image holds such a patch (0: opt.Patch); TrainShare is the
	// share of opt.Train that its dictionary learns from (0: all).
	Patch      int
	TrainShare float64
	// Window2, Group2, Step2 and Patch2 are the search window, the most
	// patches per group (cut to a power of two), the reference step and
	// the patch side (0: opt.Patch) of SecondCollab; Match2 bounds its
	// distances.
	Window2, Group2, Step2, Patch2 int
}

// DefaultParams returns the group settings chosen by measurement on the
// Kodak protocol (see the package benchmark and the notes in its doc).
// sigma255 is σ on the 0–255 scale. A first pass on 9×9 patches gives the
// pilot of the SecondCollab stage; after that stage a coarser first grid
// and half the training patches cost nothing measurable. Above σ = 35,
// where K-SVD itself is fast, both grids are coarser still and the
// second window smaller, to stay within 4× its time. Match2 = 1 is for
// SecondCollab; the other second passes were measured with 0.1.
func DefaultParams(sigma255 float64) Params {
	step, step2, window2, share := 4, 3, 39, 0.5
	if sigma255 > 35 {
		step, step2, window2, share = 6, 5, 31, 0.35
	}
	return Params{
		Window: 25, Group: 16, Step: step,
		Match: 3, Match2: 1,
		Rule:        learn.SumAbs,
		Second:      SecondCollab,
		Delta:       0.1,
		Gamma:       0.65,
		BoundScale:  0.83,
		ChromaScale: 0.95,
		PilotBound:  0.1,
		PatchWeight: 10,
		Patch:       9,
		TrainShare:  share,
		Window2:     window2, Group2: 32, Step2: step2,
	}
}

// TileMargin is the overlap that restore.DenoiseOverlapped needs around
// each tile for the group method with p×p patches: a patch and a search
// radius of the wider of the two stages, so that every pixel kept from a
// tile was grouped as in a whole run.
func TileMargin(p int) int {
	pr := DefaultParams(25)
	return max(max(p, pr.Patch)+pr.Window/2, p+pr.Window2/2)
}

// boundScale is the bound scale of channel c in the first pass.
func (pr *Params) boundScale(c int) float64 {
	if c > 0 && pr.ChromaScale > 0 {
		return pr.ChromaScale
	}
	return pr.BoundScale
}

// ParamError is a bad value in Params; Field names it.
type ParamError struct{ Field, Reason string }

func (e *ParamError) Error() string { return fmt.Sprintf("group parameter %s: %s", e.Field, e.Reason) }

func (pr *Params) check() error {
	switch {
	case pr.Window < 1 || pr.Window > 101:
		return &ParamError{"window", fmt.Sprintf("window must be 1..101, got %d", pr.Window)}
	case pr.Group < 1 || pr.Group > 256:
		return &ParamError{"group", fmt.Sprintf("group size must be 1..256, got %d", pr.Group)}
	case pr.Step < 1 || pr.Step > 32:
		return &ParamError{"step", fmt.Sprintf("reference step must be 1..32, got %d", pr.Step)}
	case !(pr.Match > 0) || (pr.Second != SecondNone && !(pr.Match2 > 0)):
		return &ParamError{"match", "distance bounds must be positive"}
	case pr.Second < SecondNone || pr.Second > SecondCollab:
		return &ParamError{"second", fmt.Sprintf("unknown second pass %d", pr.Second)}
	case pr.Rounds2 < 0 || pr.Rounds2 > 1000:
		return &ParamError{"rounds2", fmt.Sprintf("rounds must be 0..1000, got %d", pr.Rounds2)}
	case pr.Second == SecondIterative && !(pr.Delta >= 0 && pr.Delta <= 1 && pr.Gamma > 0):
		return &ParamError{"delta", "δ must be in [0, 1] and γ positive"}
	case !(pr.BoundScale > 0) || pr.BoundScale2 < 0 || pr.ChromaScale < 0:
		return &ParamError{"boundscale", "bound scales must be positive"}
	case pr.Second == SecondWiener && !(pr.PilotBound > 0):
		return &ParamError{"pilotbound", "the pilot bound must be positive"}
	case pr.Patch < 0 || pr.Patch == 1 || pr.Patch > 32:
		return &ParamError{"patch", fmt.Sprintf("patch side must be 0 or 2..32, got %d", pr.Patch)}
	case !(pr.TrainShare >= 0 && pr.TrainShare <= 1):
		return &ParamError{"trainshare", fmt.Sprintf("the training share must be in [0, 1], got %g", pr.TrainShare)}
	case pr.Second == SecondCollab && (pr.Window2 < 1 || pr.Window2 > 101 || pr.Group2 < 1 || pr.Group2 > 256 ||
		pr.Step2 < 1 || pr.Step2 > 32 || pr.Patch2 < 0 || pr.Patch2 == 1 || pr.Patch2 > 32):
		return &ParamError{"window2", "the second stage's window must be 1..101, its group size 1..256, its step 1..32 and its patch side 0 or 2..32"}
	case !(pr.PatchWeight > 0):
		return &ParamError{"patchweight", "the patch weight must be positive"}
	}
	return nil
}

// checkOptions validates the shared options as restore.Denoise does.
func checkOptions(img *patches.Image, sigma float64, o *restore.Options) error {
	oe := func(f, r string) error { return &restore.OptionError{Field: f, Reason: r} }
	switch {
	case !(sigma > 0) || math.IsInf(sigma, 0):
		return oe("sigma", fmt.Sprintf("σ must be a positive number, got %g", sigma))
	case o.Patch < 2 || o.Patch > 32:
		return oe("patch", fmt.Sprintf("patch side must be 2..32, got %d", o.Patch))
	case img.W < o.Patch || img.H < o.Patch:
		return oe("patch", fmt.Sprintf("the image (%d×%d) is smaller than one %d×%d patch; use a smaller patch", img.W, img.H, o.Patch, o.Patch))
	case o.Atoms < 1 || o.Atoms > 4096:
		return oe("atoms", fmt.Sprintf("atoms must be 1..4096, got %d", o.Atoms))
	case o.Rounds < 0 || o.Rounds > 1000:
		return oe("rounds", fmt.Sprintf("rounds must be 0..1000, got %d", o.Rounds))
	case !(o.Bound > 0):
		return oe("bound", fmt.Sprintf("the bound factor must be positive, got %g", o.Bound))
	case o.Rounds > 0 && o.Train < o.Atoms:
		return oe("train", fmt.Sprintf("training patches (%d) must be at least the number of atoms (%d)", o.Train, o.Atoms))
	case o.Lambda < 0:
		return oe("lambda", fmt.Sprintf("λ must be ≥ 0, got %g", o.Lambda))
	}
	c := img.C
	if o.Color == restore.ColorSeparate {
		c = 1
	}
	if o.Dict != nil && o.Dict.N != c*o.Patch*o.Patch {
		return oe("dict", fmt.Sprintf("the dictionary has atoms of length %d; this image with %d×%d patches needs %d", o.Dict.N, o.Patch, o.Patch, c*o.Patch*o.Patch))
	}
	return nil
}

// Denoise restores an image degraded by white Gaussian noise of standard
// deviation sigma (in the image's own units) with the group method and
// DefaultParams. It takes the options of restore.Denoise (Stride does not
// apply: references lie on the grid of Params.Step); the result is in the
// image's units, not rounded or clipped, and does not depend on
// opt.Workers.
func Denoise(img *patches.Image, sigma float64, opt restore.Options) (*patches.Image, *restore.Result, error) {
	return DenoiseParams(img, sigma, opt, DefaultParams(sigma*255/img.Peak()))
}

// DenoiseParams is Denoise with explicit group settings.
func DenoiseParams(img *patches.Image, sigma float64, opt restore.Options, pr Params) (*patches.Image, *restore.Result, error) {
	if err := checkOptions(img, sigma, &opt); err != nil {
		return nil, nil, err
	}
	if err := pr.check(); err != nil {
		return nil, nil, err
	}
	if pr.Patch2 == 0 {
		pr.Patch2 = opt.Patch
	}
	if pr.Second == SecondCollab && (img.W < pr.Patch2 || img.H < pr.Patch2) {
		return nil, nil, &ParamError{"patch2", fmt.Sprintf("the image (%d×%d) is smaller than one %d×%d patch", img.W, img.H, pr.Patch2, pr.Patch2)}
	}
	if pr.Patch > 0 && opt.Dict == nil && img.W >= pr.Patch && img.H >= pr.Patch {
		opt.Patch = pr.Patch
	}
	if pr.TrainShare > 0 {
		opt.Train = max(opt.Atoms, int(math.Round(pr.TrainShare*float64(opt.Train))))
	}
	scale := 255 / img.Peak()
	work := img.Scaled(scale)
	s255 := sigma * scale
	rep := newReporter(opt, pr, img.C)
	var out *patches.Image
	res := &restore.Result{}
	if img.C > 1 && opt.Color == restore.ColorSeparate {
		// Each channel alone, in the opponent space when there are three;
		// every channel is grouped on the first (the luminance), as colour
		// block matching does (Dabov et al. 2007b).
		sep := work
		if img.C == 3 {
			sep = restore.ToOpponent(work)
		}
		chans := make([]*patches.Image, img.C)
		for c := range chans {
			chans[c] = sep.Channel(c)
		}
		outs, dicts, atoms := denoiseChannels(chans, s255, opt, pr, rep)
		out = patches.New(img.W, img.H, img.C, img.Depth)
		for c := range outs {
			copy(out.Plane(c), outs[c].Pix)
		}
		if img.C == 3 {
			out = restore.FromOpponent(out)
		}
		res.Dict, res.MeanAtoms = dicts[len(dicts)-1], atoms
	} else {
		outs, dicts, atoms := denoiseChannels([]*patches.Image{work}, s255, opt, pr, rep)
		out, res.Dict, res.MeanAtoms = outs[0], dicts[0], atoms
	}
	return out.Scaled(1 / scale), res, nil
}

// denoiseChannels runs the passes on images in 0–255 units; all are
// grouped on the first.
func denoiseChannels(ims []*patches.Image, s255 float64, opt restore.Options, pr Params, rep *reporter) ([]*patches.Image, []*learn.Dict, float64) {
	p := opt.Patch
	n1 := float64(ims[0].C * p * p)
	mp := matchParams{p: p, step: pr.Step, radius: pr.Window / 2, size: pr.Group,
		maxDist: float32(pr.Match * 2 * n1 * s255 * s255)}
	g := match(ims[0], mp, opt.Workers)
	first := make([]*patches.Image, len(ims))
	dicts := make([]*learn.Dict, len(ims))
	atoms := 0.0
	seed := func(c int) restore.Options {
		o := opt
		if len(ims) > 1 {
			o.Seed = learn.SubSeed(opt.Seed, fmt.Sprint("channel", c))
		}
		return o
	}
	for c, im := range ims {
		in := passIn{img: im, g: g, sigma: s255, bound: opt.Bound * pr.boundScale(c),
			d0: opt.Dict, rounds: opt.Rounds, stage: "pass1"}
		var a float64
		first[c], dicts[c], a = runPass(in, seed(c), pr, rep)
		atoms += a / float64(len(ims))
	}
	if pr.Second == SecondNone {
		return first, dicts, atoms
	}
	if pr.Second == SecondCollab {
		p2 := pr.Patch2
		n2 := float64(ims[0].C * p2 * p2)
		g2 := match(first[0], matchParams{p: p2, step: pr.Step2, radius: pr.Window2 / 2, size: pr.Group2,
			maxDist: float32(pr.Match2 * 2 * n2 * s255 * s255)}, opt.Workers)
		outs := make([]*patches.Image, len(ims))
		for c, im := range ims {
			outs[c] = collab(collabIn{noisy: im, pilot: first[c], g: g2, sigma: s255, p: p2, workers: opt.Workers})
			rep.filtered()
		}
		return outs, dicts, atoms
	}
	guides, code := first, ims
	sig2, bound2 := s255, opt.Bound*pr.BoundScale
	if pr.BoundScale2 > 0 {
		bound2 = opt.Bound * pr.BoundScale2
	}
	if pr.Second == SecondIterative {
		// y₂ = x̂ + δ(y − x̂), σ₂ = γ·√(σ² − mean((y − x̂)²)).
		code = make([]*patches.Image, len(ims))
		ss, cnt := 0.0, 0
		for c, im := range ims {
			y2 := first[c].Clone()
			for i, v := range im.Pix {
				e := float64(v) - float64(first[c].Pix[i])
				ss += e * e
				y2.Pix[i] = float32(float64(first[c].Pix[i]) + pr.Delta*e)
			}
			cnt += len(im.Pix)
			code[c] = y2
		}
		sig2 = pr.Gamma * math.Sqrt(math.Max(0, s255*s255-ss/float64(cnt)))
		sig2 = math.Max(sig2, 0.05*s255)
		guides = code
	}
	mp.maxDist = float32(pr.Match2 * 2 * n1 * s255 * s255)
	g = match(guides[0], mp, opt.Workers)
	outs := make([]*patches.Image, len(ims))
	atoms = 0
	for c, im := range code {
		in := passIn{img: im, g: g, sigma: sig2, bound: bound2, d0: dicts[c], rounds: pr.Rounds2, stage: "pass2"}
		if pr.Second == SecondWiener {
			in.pilot = first[c]
		}
		var a float64
		outs[c], dicts[c], a = runPass(in, seed(c), pr, rep)
		atoms += a / float64(len(ims))
	}
	return outs, dicts, atoms
}

// reporter turns the passes' steps into restore.Stage reports: training
// rounds and coded chunks are counted over every pass and channel.
type reporter struct {
	fn            func(restore.Stage)
	round, rounds int
	chunk, runs   int // runs is the number of (pass, channel) codings
	per           int // chunks per coding
	extra         int // SecondCollab stages, one "code" step each
}

func newReporter(opt restore.Options, pr Params, channels int) *reporter {
	r := &reporter{fn: opt.Progress}
	if opt.Color != restore.ColorSeparate {
		channels = 1
	}
	r.rounds, r.runs = opt.Rounds*channels, channels
	switch pr.Second {
	case SecondNone:
	case SecondCollab:
		r.extra = channels
	default:
		r.rounds += pr.Rounds2 * channels
		r.runs *= 2
	}
	return r
}

func (r *reporter) trained() {
	r.round++
	if r.fn != nil {
		r.fn(restore.Stage{Name: "train", Round: r.round, Rounds: r.rounds})
	}
}

// coded reports one more chunk of a coding of perRun chunks.
func (r *reporter) coded(perRun int) {
	r.chunk++
	r.per = perRun
	if r.fn != nil {
		r.fn(restore.Stage{Name: "code", Done: r.chunk, Total: perRun*r.runs + r.extra})
	}
}

// filtered reports one channel's SecondCollab stage, after the codings.
func (r *reporter) filtered() { r.coded(r.per) }
