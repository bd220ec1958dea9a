package main

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/urfave/cli/v2"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
)

// batch runs the jobs of one share with a pool of cfg.jobs workers. Each
// worker holds one image at a time, so memory grows with --jobs, not with
// the number of inputs.
type batch struct {
	cfg     *config
	env     *env
	con     *console
	workers int // restore.Options.Workers of each image
	start   time.Time

	// writeMu is held shared while outputs are written and exclusively by
	// the signal handler, which so never exits in the middle of a write.
	writeMu sync.RWMutex

	mu       sync.Mutex
	dstNames map[string]map[string]bool // output folder → output names of this run
	cleaned  map[string]bool            // output folders already cleared of stale temporaries
}

// addNote adds a note to the closing line's parenthesis.
func addNote(line, note string) string {
	if s, ok := strings.CutSuffix(line, ")"); ok && strings.Contains(line, " (") {
		return s + "; " + note + ")"
	}
	return line + " (" + note + ")"
}

// step is the per-image work of a batch command: it restores the decoded
// image of j, noting what it found in rec, and returns the image to write
// (rounded and clipped by the caller) or an error that names j.
type step func(b *batch, j *job, f *imgfile.File, slot int, rec *record) (*patches.Image, error)

// batchHooks is what a command other than tessera denoise changes in the
// batch runner; the zero value is tessera denoise.
type batchHooks struct {
	step     step                                   // nil: (*batch).denoise
	defaults func(sigma255 float64) restore.Options // nil: restore.Defaults
	beside   string                                 // suffix of outputs beside their inputs; "": besideSuffix
	// leaveOut, when set, names files and folders that are not inputs
	// (inpaint's masks); leftOut words them in the summary ("mask file").
	leaveOut func(path string, dir bool) bool
	leftOut  string
	// prepare runs on the whole plan before sharding; an error stops the
	// run as a usage error. annotate starts every record.
	prepare  func(p *batchPlan) error
	annotate func(j *job, rec *record)
}

func runBatch(cfg *config, e *env) error {
	start := time.Now()
	plan, err := makePlan(cfg)
	if err != nil {
		return err
	}
	if cfg.prepare != nil {
		if err := cfg.prepare(plan); err != nil {
			return err
		}
	}
	var todo []*job
	for i, j := range plan.jobs {
		if cfg.shard.keeps(i) {
			todo = append(todo, j)
		}
	}

	var rep *reportWriter
	switch cfg.report {
	case "":
	case "-":
		rep = newReportWriter(e.stdout, nil)
	default:
		rp := realPath(cfg.report)
		if in, ok := plan.inputs[rp]; ok {
			return usagef("--report %s is the input %s; choose another report name", cfg.report, in)
		}
		if plan.outputs[rp] {
			return usagef("--report %s is also an output image; choose another report name", cfg.report)
		}
		if err := os.MkdirAll(filepath.Dir(cfg.report), 0o755); err != nil {
			return usagef("--report %s: cannot create its folder (%s)", cfg.report, errText(err))
		}
		f, err := os.Create(cfg.report)
		if err != nil {
			return usagef("--report %s: cannot create (%s); check the folder's permissions", cfg.report, errText(err))
		}
		rep = newReportWriter(f, f)
	}

	b := &batch{
		cfg: cfg, env: e, start: start,
		con:      newConsole(e.stderr, e.tty && !cfg.quiet, e.width),
		workers:  max(1, runtime.NumCPU()/cfg.jobs),
		dstNames: map[string]map[string]bool{},
		cleaned:  map[string]bool{},
	}
	for _, j := range todo {
		for _, d := range []string{j.dst, j.dstRGB} {
			if d != "" && d != "-" {
				dir := filepath.Dir(d)
				if b.dstNames[dir] == nil {
					b.dstNames[dir] = map[string]bool{}
				}
				b.dstNames[dir][filepath.Base(d)] = true
			}
		}
	}

	var repMu sync.Mutex
	var done, skipped, failed int
	if e.signals {
		sigs := make(chan os.Signal, 1)
		signal.Notify(sigs, syscall.SIGINT, syscall.SIGTERM)
		defer signal.Stop(sigs)
		go func() {
			s := <-sigs
			signal.Stop(sigs) // a second signal stops at once
			b.writeMu.Lock()  // wait for writes under way; no new ones start
			repMu.Lock()
			rep.close()
			b.con.finish(fmt.Sprintf("tessera: interrupted (%s) after %d done, %d skipped, %d failed; rerun the same command to resume",
				s, done, skipped, failed))
			code := 130
			if s == syscall.SIGTERM {
				code = 143
			}
			os.Exit(code)
		}()
	}

	b.con.start(len(todo))
	work := make(chan *job)
	results := make(chan *record)
	var wg sync.WaitGroup
	for w := 0; w < min(cfg.jobs, len(todo)); w++ {
		wg.Add(1)
		go func(slot int) {
			defer wg.Done()
			for j := range work {
				b.con.begin(slot, j.name)
				rec := b.process(j, slot)
				b.con.end(slot)
				results <- rec
			}
		}(w)
	}
	go func() {
		for _, j := range todo {
			work <- j
		}
		close(work)
		wg.Wait()
		close(results)
	}()
	for rec := range results {
		repMu.Lock()
		switch rec.Status {
		case statusDone:
			done++
		case statusSkipped:
			skipped++
		default:
			failed++
		}
		rep.write(rec)
		repMu.Unlock()
		if rec.Status == statusFailed {
			b.con.line("tessera: " + rec.Error)
		}
	}
	repMu.Lock()
	repErr := rep.close()
	repMu.Unlock()
	last := summary(done, skipped, failed, plan.ignored, time.Since(start), cfg.shard, len(plan.jobs))
	if plan.left > 0 {
		last = addNote(last, fmt.Sprintf("%d %s%s not taken as input%s", plan.left, cfg.leftOut, plural(plan.left), plural(plan.left)))
	}
	if cfg.quiet {
		last = ""
	}
	b.con.finish(last)
	if repErr != nil {
		fmt.Fprintf(e.stderr, "tessera: --report %s: cannot write (%s); the images are written, the report is incomplete\n", cfg.report, errText(repErr))
		return &exitStatus{1}
	}
	if failed > 0 {
		return &exitStatus{1}
	}
	return nil
}

// parseBatchConfig reads the options that every batch command shares:
// the paths, --out, the numeric options of the numerics, --jobs, --report,
// --force, --quiet, --max-pixels, --format and --shard. cmd names the
// command in messages.
func parseBatchConfig(cc *cli.Context, e *env, cmd string) (*config, error) {
	c := &config{
		paths:  cc.Args().Slice(),
		out:    cc.String("out"),
		outSet: cc.IsSet("out"),
		patch:  cc.Int("patch"), atoms: cc.Int("atoms"), rounds: cc.Int("rounds"),
		train: cc.Int("train"), bound: cc.Float64("bound"),
		setPatch: cc.IsSet("patch"), setAtoms: cc.IsSet("atoms"), setRounds: cc.IsSet("rounds"),
		setTrain: cc.IsSet("train"), setBound: cc.IsSet("bound"),
		seed:   cc.Uint64("seed"),
		jobs:   cc.Int("jobs"),
		report: cc.String("report"),
		force:  cc.Bool("force"),
		quiet:  cc.Bool("quiet"),
	}
	if len(c.paths) == 0 {
		return nil, usagef("give at least one PATH (an image, a folder, or - for standard input); see tessera %s --help", cmd)
	}
	for _, p := range c.paths {
		if p == "" {
			return nil, usagef("an empty PATH was given; check the quoting of the command line")
		}
	}
	if c.outSet && c.out == "" {
		return nil, usagef("--out is empty; give a folder, a file name or -")
	}
	if c.jobs < 1 || c.jobs > 4096 {
		return nil, usagef("--jobs %d: must be 1..4096", c.jobs)
	}
	mp, err := parseMaxPixels(cc.String("max-pixels"))
	if err != nil {
		return nil, &usageError{err.Error()}
	}
	c.maxPixels = mp
	if cc.IsSet("format") {
		f, ok := outFormats[strings.ToLower(cc.String("format"))]
		if !ok {
			return nil, usagef("--format %q: unknown output format; choose png, tiff or pgm", cc.String("format"))
		}
		c.format = f
	}
	count := 0
	if cc.IsSet("shard-count") {
		n, err := parseCount(cc.String("shard-count"))
		if err != nil || n < 1 || n > maxShards {
			return nil, usagef("--shard-count %q: must be a whole number 1..%d", cc.String("shard-count"), maxShards)
		}
		count = n
	}
	switch s := cc.String("shard"); {
	case !cc.IsSet("shard"):
		if cc.IsSet("shard-count") {
			return nil, usagef("--shard-count goes with --shard auto")
		}
	case s == "auto":
		sh, err := autoShard(e.getenv, count)
		if err != nil {
			return nil, &usageError{err.Error()}
		}
		c.shard = sh
	default:
		if cc.IsSet("shard-count") {
			return nil, usagef("--shard-count goes with --shard auto, not with --shard %s", s)
		}
		sh, err := parseShard(s)
		if err != nil {
			return nil, &usageError{err.Error()}
		}
		c.shard = sh
	}
	if c.report == "" && cc.IsSet("report") {
		return nil, usagef("--report is empty; give a file name or -")
	}
	if c.report == "-" && c.out == "-" {
		return nil, usagef("--report - and --out - both want standard output; give the report a file name")
	}
	return c, nil
}

// process restores one image and returns its record. It never panics: a
// panic inside the numerics fails this image only.
func (b *batch) process(j *job, slot int) (rec *record) {
	rec = &record{Input: j.name, Output: j.dst, Status: statusFailed}
	t0 := time.Now()
	defer func() {
		if r := recover(); r != nil {
			rec.Status = statusFailed
			rec.Error = fmt.Sprintf("%s: internal error (%v); please report it with the image", j.name, r)
		}
		rec.Seconds = round4(time.Since(t0).Seconds())
	}()
	if b.cfg.annotate != nil {
		b.cfg.annotate(j, rec)
	}
	if j.fail != nil {
		rec.Error = j.fail.Error()
		return rec
	}
	if !b.cfg.force && j.dst != "-" {
		for _, d := range []string{j.dst, j.dstRGB} {
			if d == "" {
				continue
			}
			if _, err := os.Lstat(d); err == nil {
				rec.Status, rec.Output = statusSkipped, d
				return rec
			}
		}
	}

	var f *imgfile.File
	var err error
	if j.src == "-" {
		f, err = imgfile.Decode(b.env.stdin, "stdin", b.cfg.maxPixels)
	} else {
		f, err = imgfile.DecodeFile(j.src, b.cfg.maxPixels)
	}
	if err != nil {
		rec.Error = readErr(j.name, err)
		return rec
	}
	img := f.Img
	rec.Width, rec.Height, rec.Channels, rec.BitDepth = ptr(img.W), ptr(img.H), ptr(img.C), ptr(img.Depth)
	rec.Alpha = ptr(f.Alpha != nil)
	dst := j.output(img.C)
	rec.Output = dst

	step := b.cfg.step
	if step == nil {
		step = (*batch).denoise
	}
	out, err := step(b, j, f, slot, rec)
	if err != nil {
		rec.Error = err.Error()
		return rec
	}
	out.Quantize()

	format := b.cfg.format
	if format == "" {
		if ff, ok := imgfile.FormatFromExt(dst); ok && dst != "-" {
			format = ff
		} else {
			format = f.Format
		}
	}
	rec.Format = format
	b.con.set(slot, "writing")
	result := &imgfile.File{Img: out, Alpha: f.Alpha, Format: format}
	if err := b.write(j, dst, result, format); err != nil {
		rec.Format = ""
		rec.Error = err.Error()
		return rec
	}
	rec.Status = statusDone
	return rec
}

// denoise is the step of tessera denoise: σ given or estimated, then
// K-SVD denoising with the noise model of the command line.
func (b *batch) denoise(j *job, f *imgfile.File, slot int, rec *record) (*patches.Image, error) {
	img := f.Img
	sigma := b.cfg.sigma
	if p := b.cfg.options(25).Patch; sigma == 0 && (img.W < p || img.H < p) {
		// Said before the estimator, which needs whole patches too.
		return nil, fmt.Errorf("%s: the image (%d×%d) is smaller than one %d×%d patch; use a smaller patch (--patch)", j.name, img.W, img.H, p, p)
	}
	if sigma == 0 && b.cfg.noise != noisePoisson {
		b.con.set(slot, "estimating σ")
		per := estimateSigma(img)
		sum := 0.0
		for _, s := range per {
			rec.SigmaChannels = append(rec.SigmaChannels, round4(s))
			sum += s * s
		}
		if len(per) > 0 {
			sigma = math.Sqrt(sum / float64(len(per)))
		}
		rec.SigmaEstimated = true
		if !(sigma > 0) {
			return nil, fmt.Errorf("%s: the noise estimate is %g (a flat or noise-free image?); give --sigma", j.name, sigma)
		}
	}
	rec.Sigma = ptr(round4(sigma))
	if peak := img.Peak(); sigma >= peak {
		return nil, fmt.Errorf("%s: σ = %g is not below the %d-bit peak %g; give --sigma in the image's own units (0..%g)", j.name, sigma, img.Depth, peak, peak)
	}

	opt := b.cfg.options(sigma * 255 / img.Peak())
	opt.Seed = learn.SubSeed(b.cfg.seed, j.rel)
	opt.Workers = b.workers
	opt.Progress = func(s restore.Stage) { b.con.set(slot, stageText(s)) }
	if opt.Rounds > 0 {
		b.con.set(slot, stageText(restore.Stage{Name: "train", Rounds: opt.Rounds}))
	} else {
		b.con.set(slot, "coding 0%")
	}
	out, res, err := b.cfg.denoiseImage(img, sigma, opt, rec)
	if err != nil {
		return nil, restoreErr(j.name, err)
	}
	rec.MeanAtoms = ptr(round4(res.MeanAtoms))
	rec.Method = b.cfg.method
	return out, nil
}

// restoreErr words an error of the numerics for the record of name.
func restoreErr(name string, err error) error {
	var oe *restore.OptionError
	if errors.As(err, &oe) {
		return fmt.Errorf("%s: %s (--%s)", name, oe.Reason, oe.Field)
	}
	return fmt.Errorf("%s: %v", name, err)
}

// write stores the result at dst, or on standard output for "-".
func (b *batch) write(j *job, dst string, f *imgfile.File, format string) error {
	b.writeMu.RLock()
	defer b.writeMu.RUnlock()
	if dst == "-" {
		var buf bytes.Buffer
		if err := imgfile.Encode(&buf, f, format); err != nil {
			return fmt.Errorf("%s: %v", j.name, err)
		}
		if _, err := b.env.stdout.Write(buf.Bytes()); err != nil {
			return fmt.Errorf("standard output: cannot write (%s)%s", errText(err), writeFix(err))
		}
		return nil
	}
	if j.src != "-" {
		if a, err := os.Stat(j.src); err == nil {
			if o, err := os.Stat(dst); err == nil && os.SameFile(a, o) {
				return fmt.Errorf("%s: is the input %s itself; refusing to write over an input", dst, j.name)
			}
		}
	}
	dir := filepath.Dir(dst)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		if errors.Is(err, syscall.ENOTDIR) {
			return fmt.Errorf("%s: cannot create the folder %s: a file of that name is in the way; move it", dst, dir)
		}
		return fmt.Errorf("%s: cannot create the folder %s (%s)%s", dst, dir, errText(err), writeFix(err))
	}
	b.clearStale(dir)
	if err := imgfile.WriteFileAtomic(dst, f, format); err != nil {
		var ue *imgfile.UnsupportedError
		if errors.As(err, &ue) || errors.Is(err, syscall.ENOSPC) || errors.Is(err, syscall.EDQUOT) {
			return err // these name the fix already
		}
		return fmt.Errorf("%v%s", err, writeFix(err))
	}
	return nil
}

// writeFix is the advice for a failed write.
func writeFix(err error) string {
	switch {
	case errors.Is(err, syscall.ENOSPC), errors.Is(err, syscall.EDQUOT):
		return "; the disk is full or over quota: free some space or write to another folder"
	case errors.Is(err, fs.ErrPermission), errors.Is(err, syscall.EROFS):
		return "; check that the output folder is writable"
	case errors.Is(err, syscall.EPIPE):
		return "; the reader of standard output has gone"
	}
	return ""
}

// clearStale removes, once per output folder and run, the temporary files
// that a killed earlier run left for outputs of this run: imgfile names
// them "." + name + "." + digits + ".tmp". Only files older than this run
// and named for this run's outputs are touched, so other shares writing
// into the same folder keep theirs.
func (b *batch) clearStale(dir string) {
	b.mu.Lock()
	if b.cleaned[dir] {
		b.mu.Unlock()
		return
	}
	b.cleaned[dir] = true
	names := b.dstNames[dir]
	b.mu.Unlock()
	ents, err := os.ReadDir(dir)
	if err != nil {
		return
	}
	for _, e := range ents {
		target, ok := tempTarget(e.Name())
		if !ok || !names[target] || !e.Type().IsRegular() {
			continue
		}
		if info, err := e.Info(); err == nil && info.ModTime().Before(b.start) {
			os.Remove(filepath.Join(dir, e.Name()))
		}
	}
}

// tempTarget parses a temporary name ".NAME.DIGITS.tmp" and returns NAME.
func tempTarget(n string) (string, bool) {
	if !strings.HasPrefix(n, ".") || !strings.HasSuffix(n, ".tmp") {
		return "", false
	}
	s := strings.TrimSuffix(n[1:], ".tmp")
	i := strings.LastIndexByte(s, '.')
	if i <= 0 || i == len(s)-1 {
		return "", false
	}
	for _, r := range s[i+1:] {
		if r < '0' || r > '9' {
			return "", false
		}
	}
	return s[:i], true
}

// readErr describes a failed read of an input in one line with the fix.
func readErr(name string, err error) string {
	var fe *imgfile.FormatError
	var ue *imgfile.UnsupportedError
	switch {
	case errors.As(err, &ue) && strings.HasSuffix(ue.Fix, "raise the pixel limit"):
		return err.Error() + " (--max-pixels)"
	case errors.As(err, &fe), errors.As(err, &ue):
		return err.Error()
	case errors.Is(err, fs.ErrPermission):
		return fmt.Sprintf("%s: cannot read (permission denied); check the file's permissions", name)
	case errors.Is(err, fs.ErrNotExist):
		return fmt.Sprintf("%s: vanished after it was listed; check whether something else moves the inputs", name)
	case errors.Is(err, io.ErrUnexpectedEOF):
		return fmt.Sprintf("%s: truncated input; check the copy", name)
	}
	return fmt.Sprintf("%s: cannot read (%s)", name, errText(err))
}
