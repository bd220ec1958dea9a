package group

import (
	"fmt"
	"math"

	"tessera/patches"
	"tessera/restore"
)

// FillParams are the settings of Fill.
type FillParams struct {
	// StartPasses is the number of passes of the DCT fill
	// (restore.FillTransform) that gives the first estimate.
	StartPasses int
	// Patch, Step, Window and Group describe the block matching: p×p
	// patches, references every Step pixels, the search window side and
	// the most patches per group (cut to a power of two).
	Patch, Step, Window, Group int
	// Iters thresholding iterations, grouping again on the estimate every
	// Regroup of them.
	Iters, Regroup int
	// The threshold (0–255 units, on orthonormal 3-D coefficients) falls
	// geometrically from THi to TLo.
	THi, TLo float64
	// Relax scales each iteration's change of the holes.
	Relax float64
	// Sparse weighs groups by the inverse of their kept coefficients, as
	// Dabov et al. 2007 do for denoising; else all alike.
	Sparse bool
	// WienerSigma, when positive, adds a last collaborative Wiener step
	// with the estimate as its own pilot at this σ (0–255 units).
	WienerSigma float64
}

// DefaultFillParams returns the settings chosen by measurement on the
// crops of TestFillReference and whole images of TestFillKodak at 80%
// loss, within about twice the DCT fill's time: a full DCT start (three
// passes lost 0.3 dB), the threshold restarting well above the DCT fill's
// last one, groups found again once halfway. More iterations help slowly
// (10 with window 25 gained 0.1 dB over 6 on kodim01 and kodim19); step 3
// gained up to 0.06 dB on the 50% crops at more cost; sparse weights lost
// 0.04–0.1 dB on crops; groups of 32, a last Wiener step and TLo = 1 gave
// nothing.
func DefaultFillParams() FillParams {
	return FillParams{
		StartPasses: 5,
		Patch:       8, Step: 4, Window: 19, Group: 16,
		Iters: 8, Regroup: 4,
		THi: 30, TLo: 3,
		Relax: 1.8,
	}
}

// Fill fills the pixels where missing[y*W+x] is set (all channels) of a
// noise-free image by non-local iterated thresholding: from the DCT fill's
// estimate, similar patches are grouped on the current estimate, each
// group is hard-thresholded in a 3-D transform (2-D DCT of each patch,
// Walsh–Hadamard across the members; Dabov et al. 2007), the patches are
// averaged back, and the holes move towards that average while the known
// pixels stay as observed, with a falling threshold (the recursive
// filtering of Egiazarian, Foi & Katkovnik 2007, and Guleryuz 2006's
// iterated denoising with a non-local transform). Known pixels come out
// exactly as given; the result does not depend on opt.Workers. Colour
// images are filled per opponent channel, grouped on the first.
// opt.Passes, when set, is the DCT fill's passes (FillParams.StartPasses),
// and opt.Patch the patch side of both stages.
func Fill(img *patches.Image, missing []bool, opt restore.Options) (*patches.Image, *restore.InpaintResult, error) {
	fp := DefaultFillParams()
	if opt.Passes > 0 {
		fp.StartPasses = opt.Passes
	}
	if opt.Patch > 0 {
		fp.Patch = opt.Patch
	}
	return FillWith(img, missing, opt, fp)
}

// FillWith is Fill with explicit settings.
func FillWith(img *patches.Image, missing []bool, opt restore.Options, fp FillParams) (*patches.Image, *restore.InpaintResult, error) {
	switch {
	case fp.StartPasses < 1 || fp.Patch < 2 || fp.Patch > 32 || fp.Step < 1 || fp.Window < 1 || fp.Group < 1 ||
		fp.Iters < 0 || fp.Regroup < 1 || !(fp.THi > 0) || !(fp.TLo > 0) || !(fp.Relax > 0) || fp.WienerSigma < 0:
		return nil, nil, &ParamError{"fill", "bad fill settings"}
	case len(missing) == img.W*img.H && (img.W < fp.Patch || img.H < fp.Patch):
		return nil, nil, &ParamError{"patch", fmt.Sprintf("the image (%d×%d) is smaller than one %d×%d patch", img.W, img.H, fp.Patch, fp.Patch)}
	}
	o := opt
	o.Fill, o.Passes, o.Progress = restore.FillTransform, fp.StartPasses, nil
	start, res, err := restore.Inpaint(img, missing, 0, o)
	if err != nil {
		return nil, nil, err
	}
	if res.Filled == 0 {
		return start, res, nil
	}
	scale := 255 / img.Peak()
	cur := start.Scaled(scale)
	if img.C == 3 {
		cur = restore.ToOpponent(cur)
	}
	chans := make([]*patches.Image, img.C)
	for c := range chans {
		chans[c] = cur.Channel(c)
	}
	mp := matchParams{p: fp.Patch, step: fp.Step, radius: fp.Window / 2, size: fp.Group, maxDist: float32(math.Inf(1))}
	hole := holePatches(missing, img.W, img.H, fp.Patch)
	var g *grouping
	total := fp.Iters
	if fp.WienerSigma > 0 {
		total++
	}
	for k := 0; k < fp.Iters; k++ {
		if k%fp.Regroup == 0 {
			on := chans[0]
			if groupOn != nil {
				on = groupOn
			}
			g = holeGroups(match(on, mp, opt.Workers), hole)
		}
		T := fp.THi
		if fp.Iters > 1 {
			T *= math.Pow(fp.TLo/fp.THi, float64(k)/float64(fp.Iters-1))
		}
		for _, ch := range chans {
			f := filterGroups(collabIn{noisy: ch, g: g, p: fp.Patch, workers: opt.Workers}, hardThreshold(T, fp.Sparse))
			relaxHoles(ch, f, missing, fp.Relax)
		}
		report(opt, k+1, total)
	}
	if fp.WienerSigma > 0 {
		g = holeGroups(match(chans[0], mp, opt.Workers), hole)
		for _, ch := range chans {
			f := collab(collabIn{noisy: ch, pilot: ch, g: g, sigma: fp.WienerSigma, p: fp.Patch, workers: opt.Workers})
			relaxHoles(ch, f, missing, 1)
		}
		report(opt, total, total)
	}
	out := patches.New(img.W, img.H, img.C, img.Depth)
	for c, ch := range chans {
		copy(out.Plane(c), ch.Pix)
	}
	if img.C == 3 {
		out = restore.FromOpponent(out)
	}
	out = out.Scaled(1 / scale)
	// The round trips through 0–255 and the opponent space are exact only
	// to float32 rounding.
	wh := img.W * img.H
	for c := 0; c < img.C; c++ {
		for i, m := range missing {
			if !m {
				out.Pix[c*wh+i] = img.Pix[c*wh+i]
			}
		}
	}
	res.Passes += fp.Iters
	return out, res, nil
}

// groupOn, set by BenchmarkFillKodak only, is a gray image (0–255) that
// the thresholding iterations group on instead of the estimate: the clean
// image, to measure what better groups would be worth.
var groupOn *patches.Image

func report(opt restore.Options, done, total int) {
	if opt.Progress != nil {
		opt.Progress(restore.Stage{Name: "code", Done: done, Total: total})
	}
}

// hardThreshold zeroes the 3-D coefficients below T (the group's constant
// kept); sparse weighs the group by the inverse of the coefficients left.
func hardThreshold(T float64, sparse bool) groupFilter {
	return func(bn, _ []float64, k int) float64 {
		t := T * math.Sqrt(float64(k)) // the unnormalised transform's scale
		nz := 1
		for i, v := range bn[1:] {
			if math.Abs(v) < t {
				bn[i+1] = 0
			} else {
				nz++
			}
		}
		if !sparse {
			return 1
		}
		return 1 / float64(nz)
	}
}

// relaxHoles moves the holes of cur by relax times their change towards f.
func relaxHoles(cur, f *patches.Image, missing []bool, relax float64) {
	for i, m := range missing {
		if m {
			v := float64(cur.Pix[i])
			cur.Pix[i] = float32(v + relax*(float64(f.Pix[i])-v))
		}
	}
}

// holePatches marks the p×p patches (by top-left corner y·W + x) that
// hold a missing pixel.
func holePatches(missing []bool, W, H, p int) []bool {
	// Integral image of the mask.
	S := make([]int32, (W+1)*(H+1))
	for y := 0; y < H; y++ {
		row := int32(0)
		for x := 0; x < W; x++ {
			if missing[y*W+x] {
				row++
			}
			S[(y+1)*(W+1)+x+1] = S[y*(W+1)+x+1] + row
		}
	}
	out := make([]bool, W*H)
	for y := 0; y+p <= H; y++ {
		for x := 0; x+p <= W; x++ {
			out[y*W+x] = S[(y+p)*(W+1)+x+p]-S[y*(W+1)+x+p]-S[(y+p)*(W+1)+x]+S[y*(W+1)+x] > 0
		}
	}
	return out
}

// holeGroups keeps the groups with a member that holds a hole: the others
// change known pixels only, which the fill puts back anyway.
func holeGroups(g *grouping, hole []bool) *grouping {
	out := &grouping{w: g.w, start: []int32{0}}
	for r, ref := range g.refs {
		mem := g.member[g.start[r]:g.start[r+1]]
		for _, q := range mem {
			if hole[q] {
				out.refs = append(out.refs, ref)
				out.member = append(out.member, mem...)
				out.start = append(out.start, int32(len(out.member)))
				break
			}
		}
	}
	return out
}
