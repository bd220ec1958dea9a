package main

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"

	"github.com/urfave/cli/v2"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/learn"
	"tessera/learn/dictfile"
	"tessera/patches"
)

const atomsDescription = `Draws the atoms of a dictionary file (from tessera learn) as a grid of
small images, one per atom, each stretched to its own range (its lowest
value black, its highest white; a flat atom mid-gray), between white lines
one pixel wide. Colour atoms are drawn in colour. When the file records how
often each atom was used, the most used come first (left to right, top to
bottom); otherwise the atoms keep their order in the file. --scale N draws
every atom pixel as an N×N block.

The format follows the extension of --out: .png, .tif/.tiff or .pgm/.ppm
(8 bits). The file is written to a temporary file and renamed.`

func atomsCommand(e *env) *cli.Command {
	return &cli.Command{
		Name:            "atoms",
		Usage:           "draw the atoms of a dictionary file as an image",
		UsageText:       "tessera atoms [options] FILE --out IMAGE",
		Description:     atomsDescription,
		HideHelpCommand: true,
		OnUsageError: func(_ *cli.Context, err error, _ bool) error {
			return usagef("%s; see tessera atoms --help", flagErrText(err))
		},
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "out", Usage: "write the picture to `IMAGE` (.png, .tif or .pgm)"},
			&cli.IntFlag{Name: "scale", Value: 1, Usage: "draw each atom pixel as an `N`×N block, 1..64"},
		},
		Action: func(cc *cli.Context) error { return runAtoms(cc, e) },
	}
}

// atomPixelLimit bounds the picture: 2²⁸ pixels is 256 MB at 8 bits gray.
const atomPixelLimit = 1 << 28

func runAtoms(cc *cli.Context, e *env) error {
	if cc.NArg() != 1 {
		return usagef("give one dictionary FILE; see tessera atoms --help")
	}
	src, out, scale := cc.Args().First(), cc.String("out"), cc.Int("scale")
	if out == "" {
		return usagef("give the picture's name with --out IMAGE (.png, .tif or .pgm)")
	}
	format, ok := imgfile.FormatFromExt(out)
	if !ok || format == "jpeg" {
		return usagef("--out %s: give a .png, .tif or .pgm name (the picture is written losslessly)", out)
	}
	if scale < 1 || scale > 64 {
		return usagef("--scale %d: must be 1..64", scale)
	}
	f, err := dictfile.ReadFile(src)
	if err != nil {
		var fe *dictfile.FormatError
		if errors.As(err, &fe) {
			return &usageError{err.Error()}
		}
		return &usageError{statErr(src, err).Error()}
	}
	d := f.Dict
	if d.Patch == 0 {
		return usagef("%s: its atoms are not image patches; there is nothing to draw", src)
	}
	if d.Channels != 1 && d.Channels != 3 {
		return usagef("%s: atoms of %d channels cannot be drawn; only gray and colour ones", src, d.Channels)
	}
	cols := int(math.Ceil(math.Sqrt(float64(d.K))))
	rows := (d.K + cols - 1) / cols
	cell := d.Patch*scale + 1
	w, h := cols*cell+1, rows*cell+1
	if int64(w)*int64(h) > atomPixelLimit {
		return usagef("the picture would be %d×%d pixels; lower --scale", w, h)
	}
	img := drawAtoms(f, scale)
	if err := os.MkdirAll(filepath.Dir(out), 0o755); err != nil {
		fmt.Fprintf(e.stderr, "tessera: %s: cannot create the folder (%s)%s\n", out, errText(err), writeFix(err))
		return &exitStatus{1}
	}
	if err := imgfile.WriteFileAtomic(out, &imgfile.File{Img: img, Format: format}, format); err != nil {
		fmt.Fprintf(e.stderr, "tessera: %v%s\n", err, writeFix(err))
		return &exitStatus{1}
	}
	return nil
}

// atomOrder lists the atoms by use, most used first (ties and files
// without counts in file order).
func atomOrder(f *dictfile.File) []int {
	order := make([]int, f.Dict.K)
	for i := range order {
		order[i] = i
	}
	if f.Uses != nil {
		sort.SliceStable(order, func(a, b int) bool { return f.Uses[order[a]] > f.Uses[order[b]] })
	}
	return order
}

// drawAtoms lays the atoms out in a near-square grid of cells p·scale
// pixels wide, separated and framed by one-pixel white lines.
func drawAtoms(f *dictfile.File, scale int) *patches.Image {
	img := layAtoms(f.Dict, atomOrder(f), scale)
	for i, v := range img.Pix {
		if v != v {
			img.Pix[i] = 255
		}
	}
	return img
}

// layAtoms draws the atoms of d in the given order (nil: their own) in a
// near-square grid of cells p·scale pixels wide, one-pixel lines between
// and around them, each atom scaled from its own minimum (0) to its
// maximum (255), a flat one at 128. The lines and the empty cells are NaN,
// for the caller to paint.
func layAtoms(d *learn.Dict, order []int, scale int) *patches.Image {
	p, c := d.Patch, d.Channels
	if order == nil {
		order = make([]int, d.K)
		for i := range order {
			order[i] = i
		}
	}
	cols := int(math.Ceil(math.Sqrt(float64(d.K))))
	rows := (d.K + cols - 1) / cols
	cell := p*scale + 1
	img := patches.New(cols*cell+1, rows*cell+1, c, 8)
	nan := float32(math.NaN())
	for i := range img.Pix {
		img.Pix[i] = nan
	}
	wh := img.W * img.H
	for slot, k := range order {
		a := d.Atom(k)
		lo, hi := a[0], a[0]
		for _, v := range a {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		x0, y0 := 1+(slot%cols)*cell, 1+(slot/cols)*cell
		for ch := 0; ch < c; ch++ {
			for y := 0; y < p; y++ {
				for x := 0; x < p; x++ {
					v := 128.0
					if hi > lo {
						v = math.Round(255 * (a[ch*p*p+y*p+x] - lo) / (hi - lo))
					}
					for dy := 0; dy < scale; dy++ {
						row := ch*wh + (y0+y*scale+dy)*img.W + x0 + x*scale
						for dx := 0; dx < scale; dx++ {
							img.Pix[row+dx] = float32(v)
						}
					}
				}
			}
		}
	}
	return img
}
