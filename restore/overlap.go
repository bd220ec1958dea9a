package restore

import (
	"fmt"

	"tessera/learn"
	"tessera/patches"
)

// DenoiseOverlapped runs den on overlapping tiles of at most tile×tile
// pixels plus margin on every inner side, and keeps each tile's centre:
// for denoisers that hold per-pixel state of the whole image (the group
// method's block matching) and have no tiled form of their own. Each tile
// gets its own seed, derived from opt.Seed and its position, so the result
// does not depend on the order the tiles run in; it differs from a whole
// run by the tiles' own dictionaries. A margin of at least the patch side
// plus the search radius makes the seams invisible.
func DenoiseOverlapped(img *patches.Image, sigma float64, tile, margin int, opt Options, den Denoiser) (*patches.Image, *Result, error) {
	if tile < 2*opt.Patch {
		return nil, nil, &OptionError{"tile", fmt.Sprintf("tiles must be at least twice the patch side (%d), got %d", 2*opt.Patch, tile)}
	}
	if img.W <= tile && img.H <= tile {
		return den(img, sigma, opt)
	}
	out := patches.New(img.W, img.H, img.C, img.Depth)
	res := &Result{}
	xb, yb := tileBounds(img.W, tile), tileBounds(img.H, tile)
	n := 0
	for j := 0; j+1 < len(yb); j++ {
		for i := 0; i+1 < len(xb); i++ {
			x0, x1 := max(xb[i]-margin, 0), min(xb[i+1]+margin, img.W)
			y0, y1 := max(yb[j]-margin, 0), min(yb[j+1]+margin, img.H)
			o := opt
			o.Seed = learn.SubSeed(opt.Seed, fmt.Sprint("tile", xb[i], ",", yb[j]))
			part, r, err := den(img.Crop(x0, y0, x1-x0, y1-y0), sigma, o)
			if err != nil {
				return nil, nil, err
			}
			pw := x1 - x0
			for c := 0; c < img.C; c++ {
				src, dst := part.Plane(c), out.Plane(c)
				for y := yb[j]; y < yb[j+1]; y++ {
					copy(dst[y*img.W+xb[i]:y*img.W+xb[i+1]], src[(y-y0)*pw+xb[i]-x0:])
				}
			}
			res.MeanAtoms += r.MeanAtoms
			res.Dict = r.Dict
			n++
		}
	}
	res.MeanAtoms /= float64(n)
	return out, res, nil
}
