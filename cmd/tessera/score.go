package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"text/tabwriter"

	"github.com/urfave/cli/v2"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches"
	"tessera/restore/quality"
)

const scoreDescription = `Measures how close each TEST image is to its reference:

  PSNR  in dB, 10·log10(peak²/MSE) with the MSE over all pixels and
        channels and the peak of the bit depth (255 for 8-bit, 65535 for
        16-bit);
  SSIM  the mean structural similarity of Wang, Bovik, Sheikh & Simoncelli
        (2004): 11×11 Gaussian window of σ = 1.5, K1 = 0.01, K2 = 0.03,
        L = the peak, averaged over the window positions wholly inside the
        image. For a colour pair SSIM is taken on the BT.601 luma of both
        images (0.299 R + 0.587 G + 0.114 B, not rounded).

REF is an image file, with which every TEST is compared, or a folder: a
TEST file is then matched with the file of the same name in REF, and a TEST
folder is walked (recursively, sorted, hidden and non-image files skipped)
and each image matched with the same relative path under REF; when that
path is missing, a single file with the same name and another image
extension is taken instead (a.tif for a.png).

Both images of a pair must have the same size, the same channels (gray or
RGB) and the same bit depth; alpha is ignored.

Output: a table with one row per pair and the mean over the pairs scored
(the mean of the dB values, as the literature reports them). Identical
images have an infinite PSNR, shown as inf and left out of the PSNR mean.
SSIM needs images of at least 11×11 pixels; smaller ones show "-".
--json prints a list of records instead, one per pair with the keys input,
reference, width, height, channels, bit_depth, psnr, ssim (null when not
defined), ssim_on ("gray" or "luma") and error, then one with "mean": true
holding the means, count (pairs scored) and failed.

Exit status: 0 when every pair was scored, 1 when any pair failed (the
others are still scored), 2 for a bad command line (nothing is scored).`

func scoreCommand(e *env) *cli.Command {
	return &cli.Command{
		Name:            "score",
		Usage:           "measure PSNR and SSIM of images against their references",
		UsageText:       "tessera score --ref REF [options] TEST...",
		Description:     scoreDescription,
		HideHelpCommand: true,
		OnUsageError: func(_ *cli.Context, err error, _ bool) error {
			return usagef("%s; see tessera score --help", flagErrText(err))
		},
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "ref", Usage: "the reference: an image `FILE` for every TEST, or a FOLDER matched by relative path"},
			&cli.BoolFlag{Name: "json", DisableDefaultText: true, Usage: "print a JSON list of records instead of the table"},
			&cli.StringFlag{Name: "max-pixels", Value: "1e9", DefaultText: "1e9", Usage: "refuse images of more than `N` pixels, read from the header before decoding (0: no limit)"},
		},
		Action: func(cc *cli.Context) error {
			return runScore(cc, e)
		},
	}
}

// scoreRecord is one pair, or (Mean set) the mean over the set.
type scoreRecord struct {
	Input     string   `json:"input"`
	Reference string   `json:"reference"`
	Width     *int     `json:"width"`
	Height    *int     `json:"height"`
	Channels  *int     `json:"channels"`
	BitDepth  *int     `json:"bit_depth"`
	PSNR      *float64 `json:"psnr"`
	SSIM      *float64 `json:"ssim"`
	SSIMOn    string   `json:"ssim_on,omitempty"`
	Identical bool     `json:"identical,omitempty"`
	Error     string   `json:"error,omitempty"`
	Mean      bool     `json:"mean,omitempty"`
	Count     *int     `json:"count,omitempty"`
	Failed    *int     `json:"failed,omitempty"`
}

// scorePair is one TEST image with the reference path found for it.
type scorePair struct {
	test, ref string
	fail      error // found while matching
}

func runScore(cc *cli.Context, e *env) error {
	ref := cc.String("ref")
	tests := cc.Args().Slice()
	switch {
	case !cc.IsSet("ref") || ref == "":
		return usagef("give the reference with --ref (an image file, or a folder holding the same relative paths as the TEST folders); see tessera score --help")
	case len(tests) == 0:
		return usagef("give at least one TEST image or folder to score against --ref %s", ref)
	}
	maxPix, err := parseMaxPixels(cc.String("max-pixels"))
	if err != nil {
		return &usageError{err.Error()}
	}
	rst, err := os.Stat(ref)
	if err != nil {
		return &usageError{"--ref " + statErr(ref, err).Error()}
	}
	pairs, err := scorePairs(ref, rst.IsDir(), tests)
	if err != nil {
		return err
	}

	var refImg *patches.Image // REF as a file: read once
	if !rst.IsDir() {
		f, err := imgfile.DecodeFile(ref, maxPix)
		if err != nil {
			fmt.Fprintln(e.stderr, "tessera: --ref "+readErr(ref, err))
			return &exitStatus{1}
		}
		refImg = f.Img
	}
	con := newConsole(e.stderr, e.tty, e.width)
	con.start(len(pairs))
	var recs []*scoreRecord
	failed := 0
	for _, p := range pairs {
		con.begin(0, p.test)
		rec := scorePairRecord(p, refImg, maxPix)
		con.end(0)
		if rec.Error != "" {
			failed++
			con.line("tessera: " + rec.Error)
		}
		recs = append(recs, rec)
	}
	con.finish("")
	mean := scoreMean(recs)
	var werr error
	if cc.Bool("json") {
		werr = writeScoreJSON(e.stdout, append(recs, mean))
	} else {
		werr = writeScoreTable(e.stdout, recs, mean)
	}
	if werr != nil {
		fmt.Fprintf(e.stderr, "tessera: standard output: cannot write (%s)%s\n", errText(werr), writeFix(werr))
		return &exitStatus{1}
	}
	if failed > 0 {
		fmt.Fprintf(e.stderr, "tessera: %d of %d pairs could not be scored\n", failed, len(recs))
		return &exitStatus{1}
	}
	return nil
}

// scorePairs lists the TEST images and their references. A TEST path that
// does not exist is a usage error; a missing reference fails its pair only.
func scorePairs(ref string, refDir bool, tests []string) ([]scorePair, error) {
	var refInfo os.FileInfo
	if !refDir {
		refInfo, _ = os.Stat(ref)
	}
	var pairs []scorePair
	for _, t := range tests {
		if t == "" {
			return nil, usagef("an empty TEST path was given; check the quoting of the command line")
		}
		st, err := os.Stat(t)
		if err != nil {
			return nil, &usageError{statErr(t, err).Error()}
		}
		if !st.IsDir() {
			p := scorePair{test: t, ref: ref}
			if refDir {
				p.ref, p.fail = matchRef(t, ref, filepath.Base(t))
			}
			pairs = append(pairs, p)
			continue
		}
		bp := &batchPlan{}
		bp.walk(t)
		sort.Slice(bp.jobs, func(i, j int) bool { return bp.jobs[i].key < bp.jobs[j].key })
		for _, j := range bp.jobs {
			p := scorePair{test: j.name, ref: ref, fail: j.fail}
			if p.fail == nil && refDir {
				p.ref, p.fail = matchRef(j.name, ref, j.rel)
			}
			if p.fail == nil && !refDir {
				if ti, err := os.Stat(j.src); err == nil && os.SameFile(ti, refInfo) {
					continue // the reference itself, inside a TEST folder
				}
			}
			pairs = append(pairs, p)
		}
	}
	return pairs, nil
}

// matchRef finds the reference for test under the folder dir by its
// relative path rel: the same path, or else the one file of the same stem
// with another image extension.
func matchRef(test, dir, rel string) (string, error) {
	want := filepath.Join(dir, filepath.FromSlash(rel))
	if st, err := os.Stat(want); err == nil && !st.IsDir() {
		return want, nil
	}
	stem := strings.TrimSuffix(filepath.Base(want), filepath.Ext(want))
	var found []string
	if ents, err := os.ReadDir(filepath.Dir(want)); err == nil {
		for _, en := range ents {
			n := en.Name()
			if !en.IsDir() && imgfile.IsImageName(n) && strings.TrimSuffix(n, filepath.Ext(n)) == stem {
				found = append(found, filepath.Join(filepath.Dir(want), n))
			}
		}
	}
	switch len(found) {
	case 1:
		return found[0], nil
	case 0:
		return want, fmt.Errorf("%s: no reference %s; the --ref folder must hold the same relative paths as the TEST folder", test, want)
	}
	return want, fmt.Errorf("%s: no reference %s, and %d files of that name with other extensions (%s); keep one or name the pair's files alike", test, want, len(found), strings.Join(found, ", "))
}

// scorePairRecord reads and scores one pair.
func scorePairRecord(p scorePair, refImg *patches.Image, maxPix int64) *scoreRecord {
	rec := &scoreRecord{Input: p.test, Reference: p.ref}
	if p.fail != nil {
		rec.Error = p.fail.Error()
		return rec
	}
	tf, err := imgfile.DecodeFile(p.test, maxPix)
	if err != nil {
		rec.Error = readErr(p.test, err)
		return rec
	}
	test := tf.Img
	rec.Width, rec.Height, rec.Channels, rec.BitDepth = ptr(test.W), ptr(test.H), ptr(test.C), ptr(test.Depth)
	r := refImg
	if r == nil {
		rf, err := imgfile.DecodeFile(p.ref, maxPix)
		if err != nil {
			rec.Error = readErr(p.ref, err)
			return rec
		}
		r = rf.Img
	}
	if msg := scoreMismatch(p.test, test, p.ref, r); msg != "" {
		rec.Error = msg
		return rec
	}
	ps, err := quality.PSNR(r, test)
	if err != nil {
		rec.Error = fmt.Sprintf("%s: %v", p.test, err)
		return rec
	}
	if math.IsInf(ps, 1) {
		rec.Identical = true
	} else {
		rec.PSNR = ptr(ps)
	}
	rec.SSIMOn = "gray"
	if r.C == 3 {
		rec.SSIMOn = "luma"
	}
	var se *quality.SizeError
	switch s, err := quality.SSIM(r, test); {
	case err == nil:
		rec.SSIM = ptr(s)
	case errors.As(err, &se) && (r.W < 11 || r.H < 11):
		// Undefined below the window size: PSNR alone.
	default:
		rec.Error = fmt.Sprintf("%s: %v", p.test, err)
	}
	return rec
}

// scoreMismatch says why two images cannot be compared, or "".
func scoreMismatch(tn string, t *patches.Image, rn string, r *patches.Image) string {
	kind := func(m *patches.Image) string {
		if m.C == 1 {
			return "gray"
		}
		return "RGB"
	}
	switch {
	case t.W != r.W || t.H != r.H:
		return fmt.Sprintf("%s: is %d×%d but its reference %s is %d×%d; score images of the same size (crop or scale one of them first)", tn, t.W, t.H, rn, r.W, r.H)
	case t.C != r.C:
		return fmt.Sprintf("%s: is %s but its reference %s is %s; convert both to gray or both to RGB", tn, kind(t), rn, kind(r))
	case t.Depth != r.Depth:
		return fmt.Sprintf("%s: is %d-bit but its reference %s is %d-bit; the PSNR peak follows the bit depth, so convert both to the same depth", tn, t.Depth, rn, r.Depth)
	}
	return ""
}

// scoreMean averages the finite PSNRs and the defined SSIMs.
func scoreMean(recs []*scoreRecord) *scoreRecord {
	m := &scoreRecord{Mean: true}
	var sp, ss float64
	var np, ns, ok, failed int
	for _, r := range recs {
		if r.Error != "" {
			failed++
			continue
		}
		ok++
		if r.PSNR != nil {
			sp += *r.PSNR
			np++
		}
		if r.SSIM != nil {
			ss += *r.SSIM
			ns++
		}
	}
	if np > 0 {
		m.PSNR = ptr(sp / float64(np))
	}
	if ns > 0 {
		m.SSIM = ptr(ss / float64(ns))
	}
	m.Count, m.Failed = ptr(ok), ptr(failed)
	return m
}

func writeScoreJSON(w io.Writer, recs []*scoreRecord) error {
	b, err := json.MarshalIndent(recs, "", "  ")
	if err != nil {
		return err
	}
	_, err = w.Write(append(b, '\n'))
	return err
}

func writeScoreTable(w io.Writer, recs []*scoreRecord, mean *scoreRecord) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprint(tw, "input\treference\tsize\tbits\tPSNR dB\tSSIM\n")
	for _, r := range recs {
		if r.Error != "" {
			fmt.Fprintf(tw, "%s\t%s\t-\t-\tfailed\t-\n", r.Input, r.Reference)
			continue
		}
		size := fmt.Sprintf("%d×%d", *r.Width, *r.Height)
		if *r.Channels == 3 {
			size += " RGB"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%s\t%s\n", r.Input, r.Reference, size, *r.BitDepth, fmtPSNR(r), fmtOpt(r.SSIM, 4))
	}
	label := fmt.Sprintf("mean of %d", *mean.Count)
	if *mean.Failed > 0 {
		label += fmt.Sprintf(" (%d failed)", *mean.Failed)
	}
	fmt.Fprintf(tw, "%s\t\t\t\t%s\t%s\n", label, fmtOpt(mean.PSNR, 4), fmtOpt(mean.SSIM, 4))
	return tw.Flush()
}

func fmtPSNR(r *scoreRecord) string {
	if r.Identical {
		return "inf"
	}
	return fmtOpt(r.PSNR, 4)
}

func fmtOpt(v *float64, prec int) string {
	if v == nil {
		return "-"
	}
	return fmt.Sprintf("%.*f", prec, *v)
}
