package main

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strings"

	"tessera/cmd/tessera/internal/imgfile"
)

// job is one listed input.
type job struct {
	name   string // the path as given or walked; names the input in messages and the report
	src    string // file to read; "-" for standard input
	rel    string // seed label: path relative to the input folder (slash-separated), or the file name
	key    string // sort key
	dst    string // output path; "-" for standard output
	dstRGB string // output path for colour images when the Netpbm extension follows the channels
	fail   error  // found while listing: the input is not processed
}

// output returns the output path for an image with c channels.
func (j *job) output(c int) string {
	if c > 1 && j.dstRGB != "" {
		return j.dstRGB
	}
	return j.dst
}

// batchPlan is the sorted list of every input image, before sharding.
type batchPlan struct {
	jobs    []*job
	ignored int               // hidden entries and files without an image extension
	left    int               // entries that leaveOut names (inpaint's masks)
	inputs  map[string]string // real path of every input file → its name
	outputs map[string]bool   // real path of every output

	// leaveOut, when set, names the files and folders that are not inputs.
	leaveOut func(path string, dir bool) bool
}

const besideSuffix = ".denoised"

// makePlan lists the inputs and decides every output path. It returns a
// usageError for a command line that cannot work (a folder without --out,
// an output over an input); problems of single inputs become failed jobs.
func makePlan(cfg *config) (*batchPlan, error) {
	p := &batchPlan{inputs: map[string]string{}, outputs: map[string]bool{}, leaveOut: cfg.leaveOut}
	if len(cfg.paths) == 1 && cfg.paths[0] == "-" {
		return p, p.planStdin(cfg)
	}
	for _, a := range cfg.paths {
		if a == "-" {
			return nil, usagef("- (standard input) must be the only PATH")
		}
	}

	type input struct {
		path string
		dir  bool
		err  error
	}
	var ins []input
	var folders []string
	for _, a := range cfg.paths {
		st, err := os.Stat(a)
		in := input{path: a, err: err}
		if err == nil && st.IsDir() {
			in.dir = true
			folders = append(folders, a)
		}
		ins = append(ins, in)
	}

	// Where the outputs go.
	const (
		toDir = iota
		toFile
		toStdout
		beside
	)
	mode := toDir
	switch {
	case cfg.out == "-":
		if len(ins) != 1 || ins[0].dir {
			return nil, usagef("--out - writes one image to standard output; give a single image file (or -) as PATH, or --out DIR")
		}
		mode = toStdout
	case !cfg.outSet:
		if len(folders) > 0 {
			return nil, usagef("%s is a folder: give --out DIR for the outputs (the folder's tree is mirrored there)", folders[0])
		}
		mode = beside
	case len(ins) == 1 && !ins[0].dir:
		if isFolderName(cfg.out) {
			mode = toDir
		} else {
			mode = toFile
		}
	default:
		if st, err := os.Stat(cfg.out); err == nil && !st.IsDir() {
			return nil, usagef("--out %s is a file; with a folder or several inputs --out must be a folder", cfg.out)
		} else if err != nil && imgfile.IsImageName(cfg.out) {
			return nil, usagef("--out %s looks like a file name, but the outputs of a folder or of several inputs need a folder; give a folder name", cfg.out)
		}
	}
	if mode == toFile {
		if err := checkFileFormat(cfg.out, cfg.format); err != nil {
			return nil, err
		}
	}

	realOut := ""
	if mode == toDir || mode == toFile {
		realOut = realPath(cfg.out)
	}
	if mode == toDir {
		for _, f := range folders {
			rf := realPath(f)
			if within(realOut, rf) {
				what := "lies inside"
				if realOut == rf {
					what = "is"
				}
				return nil, usagef("--out %s %s the input folder %s: outputs would mix with the inputs and be read back on the next run; choose a folder outside it", cfg.out, what, f)
			}
		}
	}

	// List every input file.
	for _, in := range ins {
		switch {
		case in.err != nil:
			p.jobs = append(p.jobs, &job{name: in.path, key: filepath.ToSlash(filepath.Base(in.path)), fail: statErr(in.path, in.err)})
		case in.dir:
			p.walk(in.path)
		case p.leaveOut != nil && p.leaveOut(in.path, false):
			p.left++
		default:
			base := filepath.Base(in.path)
			p.jobs = append(p.jobs, &job{name: in.path, src: in.path, rel: base, key: base})
		}
	}

	// Output paths, and the checks that keep them off the inputs and apart.
	for _, j := range p.jobs {
		if j.src == "" {
			continue
		}
		rp := realPath(j.src)
		p.inputs[rp] = j.name
		if st, err := os.Lstat(j.src); err == nil && st.Mode()&fs.ModeSymlink != 0 {
			if t, err := filepath.EvalSymlinks(j.src); err == nil {
				p.inputs[t] = j.name
			}
		}
	}
	realDirs := map[string]string{}
	claimed := map[string]*job{}
	for _, j := range p.jobs {
		if j.src == "" {
			continue
		}
		var real, realRGB string
		switch mode {
		case toStdout:
			j.dst = "-"
			continue
		case toFile:
			j.dst, real = cfg.out, realOut
		case toDir:
			n, rgb := outNames(j.rel, cfg.format)
			j.dst = filepath.Join(cfg.out, filepath.FromSlash(n))
			real = filepath.Join(realOut, filepath.FromSlash(n))
			if rgb != "" {
				j.dstRGB = filepath.Join(cfg.out, filepath.FromSlash(rgb))
				realRGB = filepath.Join(realOut, filepath.FromSlash(rgb))
			}
		case beside:
			dir := filepath.Dir(j.src)
			rd, ok := realDirs[dir]
			if !ok {
				rd = realPath(dir)
				realDirs[dir] = rd
			}
			n, rgb := outNames(filepath.Base(j.src), cfg.format)
			n = besideAs(n, cfg.besideTag())
			j.dst, real = filepath.Join(dir, n), filepath.Join(rd, n)
			if rgb != "" {
				rgb = besideAs(rgb, cfg.besideTag())
				j.dstRGB, realRGB = filepath.Join(dir, rgb), filepath.Join(rd, rgb)
			}
		}
		for _, r := range []string{real, realRGB} {
			if r == "" {
				continue
			}
			if in, ok := p.inputs[r]; ok {
				if mode == toFile {
					return nil, usagef("--out %s is the input file %s itself; choose another output name", cfg.out, in)
				}
				return nil, usagef("the output for %s would be written over the input %s; choose an --out folder apart from the inputs", j.name, in)
			}
			if other := claimed[r]; other != nil && other != j {
				msg := fmt.Errorf("%s and %s would both be written to %s; rename one of them or process them separately", other.name, j.name, j.dst)
				if realPath(other.src) == realPath(j.src) {
					msg = fmt.Errorf("%s is listed twice (also as %s); give it once", j.name, other.name)
				}
				if other.fail == nil {
					other.fail = msg
				}
				j.fail = msg
			}
			claimed[r] = j
			p.outputs[r] = true
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

func (p *batchPlan) planStdin(cfg *config) error {
	j := &job{name: "stdin", src: "-", rel: "-", key: "-"}
	switch {
	case !cfg.outSet:
		return usagef("reading standard input needs --out: - for standard output, or an output file name")
	case cfg.out == "-":
		j.dst = "-"
	case isFolderName(cfg.out):
		return usagef("--out %s is a folder; with standard input give --out - or an output file name with an image extension", cfg.out)
	default:
		if err := checkFileFormat(cfg.out, cfg.format); err != nil {
			return err
		}
		j.dst = cfg.out
		p.outputs[realPath(cfg.out)] = true
	}
	p.jobs = append(p.jobs, j)
	return nil
}

// walk lists the image files under root, skipping hidden entries and
// files without an image extension. A folder that cannot be read becomes
// a failed job; the rest of the walk goes on.
func (p *batchPlan) walk(root string) {
	filepath.WalkDir(root, func(q string, d fs.DirEntry, err error) error {
		rel := "."
		if r, e := filepath.Rel(root, q); e == nil {
			rel = filepath.ToSlash(r)
		}
		if err != nil {
			p.jobs = append(p.jobs, &job{name: q, key: rel + "/",
				fail: fmt.Errorf("%s: cannot read the folder (%s); check its permissions", q, errText(err))})
			return nil
		}
		if q == root {
			return nil
		}
		if strings.HasPrefix(d.Name(), ".") {
			p.ignored++
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if p.leaveOut != nil && p.leaveOut(q, d.IsDir()) {
			p.left++
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		if !imgfile.IsImageName(d.Name()) {
			p.ignored++
			return nil
		}
		if d.Type()&fs.ModeSymlink != 0 {
			st, err := os.Stat(q)
			if err != nil {
				p.jobs = append(p.jobs, &job{name: q, key: rel,
					fail: fmt.Errorf("%s: broken symbolic link (%s); repair or remove it", q, errText(err))})
				return nil
			}
			if !st.Mode().IsRegular() { // links to folders are not followed
				p.ignored++
				return nil
			}
		} else if !d.Type().IsRegular() {
			p.ignored++
			return nil
		}
		p.jobs = append(p.jobs, &job{name: q, src: q, rel: rel, key: rel})
		return nil
	})
}

// outNames gives the output name for an input name: unchanged, or with the
// extension of format when it differs from the input's. For Netpbm the
// second name is the one for colour images (.ppm).
func outNames(name, format string) (gray, rgb string) {
	if format == "" {
		return name, ""
	}
	in, known := imgfile.FormatFromExt(name)
	if known && family(in) == format {
		return name, ""
	}
	stem := name
	if known {
		stem = strings.TrimSuffix(name, path.Ext(name))
	}
	if format == "pgm" {
		return stem + ".pgm", stem + ".ppm"
	}
	return stem + imgfile.ExtFor(format, 1), ""
}

func family(format string) string {
	if format == "ppm" {
		return "pgm"
	}
	return format
}

// besideName inserts the suffix before an image extension: a.png → a.denoised.png.
func besideName(name string) string { return besideAs(name, besideSuffix) }

// besideAs inserts suffix before an image extension.
func besideAs(name, suffix string) string {
	if imgfile.IsImageName(name) {
		ext := filepath.Ext(name)
		return strings.TrimSuffix(name, ext) + suffix + ext
	}
	return name + suffix
}

// besideTag is the suffix of outputs written beside their inputs.
func (c *config) besideTag() string {
	if c.beside != "" {
		return c.beside
	}
	return besideSuffix
}

// isFolderName reports whether --out names a folder for a single input: an
// existing folder, a name ending in a separator, or a new name without an
// image extension.
func isFolderName(out string) bool {
	if st, err := os.Stat(out); err == nil {
		return st.IsDir()
	}
	if strings.HasSuffix(out, "/") || strings.HasSuffix(out, string(filepath.Separator)) {
		return true
	}
	return !imgfile.IsImageName(out)
}

// checkFileFormat refuses an output file name whose extension names one
// format while --format asks for another.
func checkFileFormat(out, format string) error {
	if format == "" {
		return nil
	}
	if f, ok := imgfile.FormatFromExt(out); ok && family(f) != format {
		return usagef("--out %s names a %s file but --format is %s; change the extension or drop --format", out, f, format)
	}
	return nil
}

// realPath is the absolute path of p with symbolic links resolved as far
// as p exists.
func realPath(p string) string {
	abs, err := filepath.Abs(p)
	if err != nil {
		return filepath.Clean(p)
	}
	rest := ""
	for cur := abs; ; {
		if r, err := filepath.EvalSymlinks(cur); err == nil {
			return filepath.Join(r, rest)
		}
		parent := filepath.Dir(cur)
		if parent == cur {
			return abs
		}
		rest = filepath.Join(filepath.Base(cur), rest)
		cur = parent
	}
}

// within reports whether p is dir or lies under it (both real paths).
func within(p, dir string) bool {
	if p == dir {
		return true
	}
	r, err := filepath.Rel(dir, p)
	return err == nil && r != ".." && !strings.HasPrefix(r, ".."+string(filepath.Separator))
}

// statErr describes a PATH that cannot be opened.
func statErr(p string, err error) error {
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return fmt.Errorf("%s: no such file or folder; check the name", p)
	case errors.Is(err, fs.ErrPermission):
		return fmt.Errorf("%s: permission denied; check the permissions of the file and its folders", p)
	}
	return fmt.Errorf("%s: cannot open (%s)", p, errText(err))
}

// errText is the innermost message of a file-system error ("permission
// denied"), without the path the caller already names.
func errText(err error) string {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err.Error()
	}
	return err.Error()
}
