package restore

import (
	"fmt"
	"math"
	"runtime"

	"tessera/learn"
	"tessera/patches"
)

// DenoiseTiled is Denoise for large images: the same training (the same
// patches drawn from the whole image), then the patches coded and averaged
// back tile by tile, at most tile×tile pixels each. Every patch is coded
// once, by the tile that holds its top-left corner; the sums of the patches
// that reach over a tile's right or bottom border are carried to the tiles
// beside and below, so every pixel is blended from all the patches that
// cover it, as in Denoise. The result equals Denoise's up to the order of
// floating-point additions.
//
// Memory beyond the input and the output image (float32 each) is per tile
// (patch sums and counts for (tile+p−1)² pixels, a band of coded patches)
// plus p−1 rows of carried sums across the width; Denoise instead holds
// several copies of the whole image, some in float64. Colour images coded
// per channel are transformed to the opponent space in the output's memory
// and restored there in place.
func DenoiseTiled(img *patches.Image, sigma float64, tile int, opt Options) (*patches.Image, *Result, error) {
	if err := opt.check(img, sigma); err != nil {
		return nil, nil, err
	}
	if tile < 2*opt.Patch {
		return nil, nil, &OptionError{"tile", fmt.Sprintf("tiles must be at least twice the patch side (%d), got %d", 2*opt.Patch, tile)}
	}
	scale := 255 / img.Peak()
	s255 := sigma * scale
	out := patches.New(img.W, img.H, img.C, img.Depth)
	if img.C == 1 || opt.Color != ColorSeparate {
		res := denoiseTiles(img, out, scale, s255, tile, opt)
		return out, res, nil
	}
	// As Denoise: the opponent channels of the scaled image, each restored
	// alone with its own seed, then back to RGB and to the image's units.
	opponentScaled(img, out, scale)
	res := &Result{}
	for c := 0; c < img.C; c++ {
		o := opt
		o.Seed = learn.SubSeed(opt.Seed, fmt.Sprint("channel", c))
		pl := &patches.Image{W: img.W, H: img.H, C: 1, Pix: out.Plane(c), Depth: img.Depth}
		r := denoiseTiles(pl, pl, 1, s255, tile, o)
		res.MeanAtoms += r.MeanAtoms / float64(img.C)
		res.Dict = r.Dict
	}
	fromOpponentScaled(out, 1/scale)
	return out, res, nil
}

// opponentScaled writes ToOpponent(img.Scaled(s)) into out, with the same
// roundings and no intermediate copy.
func opponentScaled(img, out *patches.Image, s float64) {
	r, g, b := img.Plane(0), img.Plane(1), img.Plane(2)
	o0, o1, o2 := out.Plane(0), out.Plane(1), out.Plane(2)
	for i := range r {
		R, G, B := r[i], g[i], b[i]
		if s != 1 {
			R, G, B = float32(float64(R)*s), float32(float64(G)*s), float32(float64(B)*s)
		}
		o0[i] = float32((float64(R) + float64(G) + float64(B)) / math.Sqrt(3))
		o1[i] = float32((float64(R) - float64(B)) / math.Sqrt2)
		o2[i] = float32((float64(R) - 2*float64(G) + float64(B)) / math.Sqrt(6))
	}
}

// fromOpponentScaled is FromOpponent(img).Scaled(s) in place.
func fromOpponentScaled(img *patches.Image, s float64) {
	a, b, c := img.Plane(0), img.Plane(1), img.Plane(2)
	s3, s2, s6 := math.Sqrt(3), math.Sqrt2, math.Sqrt(6)
	for i := range a {
		A, B, C := float64(a[i]), float64(b[i]), float64(c[i])
		v := [3]float32{float32(A/s3 + B/s2 + C/s6), float32(A/s3 - 2*C/s6), float32(A/s3 - B/s2 + C/s6)}
		if s != 1 {
			for k := range v {
				v[k] = float32(float64(v[k]) * s)
			}
		}
		a[i], b[i], c[i] = v[0], v[1], v[2]
	}
}

// denoiseTiles is denoisePlane on src·scale, tile by tile, with the result
// scaled back by 1/scale into dst. dst may be src: a tile writes only
// pixels that no later tile reads.
func denoiseTiles(src, dst *patches.Image, scale, s255 float64, tile int, opt Options) *Result {
	img := src
	p := opt.Patch
	n := img.C * p * p
	eps := float64(n) * (opt.Bound * s255) * (opt.Bound * s255)
	maxAtoms := n / 2
	d := opt.Dict
	if d == nil {
		d = learn.DCTAtoms(p, opt.Atoms, img.C)
	}
	if opt.Rounds > 0 {
		nx, ny := img.W-p+1, img.H-p+1
		pos := samplePositions(nx*ny, min(opt.Train, nx*ny), learn.SubSeed(opt.Seed, "train"))
		X := make([]float64, len(pos)*n)
		for i, q := range pos {
			extractScaled(img, q%nx, q/nx, p, scale, X[i*n:(i+1)*n])
		}
		d, _ = opt.ksvd(d, X, len(pos), learn.KSVDOptions{Eps: eps, MaxAtoms: maxAtoms})
	}
	coder := opt.coder(d)
	lambda := opt.Lambda
	if lambda == 0 {
		lambda = 30 / s255
	}
	xs := patches.Positions(img.W, p, opt.Stride)
	ys := patches.Positions(img.H, p, opt.Stride)
	bx, by := tileBounds(img.W, tile), tileBounds(img.H, tile)
	t := &tiler{img: img, out: dst, scale: scale, lambda: lambda,
		p: p, n: n, C: img.C, coder: coder, eps: eps, maxAtoms: maxAtoms,
		bottom: newCarry(img.W, p-1, img.C), next: newCarry(img.W, p-1, img.C)}
	rows := 0
	for i := 0; i+1 < len(by); i++ {
		y0, y1 := by[i], by[i+1]
		tys := within(ys, y0, y1)
		var left *carry
		for j := 0; j+1 < len(bx); j++ {
			left = t.tile(bx[j], bx[j+1], y0, y1, within(xs, bx[j], bx[j+1]), tys, left, &t.carries[j%2])
			// The image-sized buffers hold no pointers, so a collection is
			// cheap; one per tile keeps the heap near its live size (the
			// input and the output) instead of the runtime's default goal of
			// twice that.
			runtime.GC()
		}
		t.bottom, t.next = t.next, t.bottom
		rows += len(tys)
		if opt.Progress != nil {
			opt.Progress(Stage{Name: "code", Done: rows, Total: len(ys)})
		}
	}
	return &Result{Dict: d, MeanAtoms: float64(t.atoms) / float64(max(t.coded, 1))}
}

// tileBounds splits a side of length n into ⌈n/tile⌉ nearly equal spans;
// it returns their ends, starting with 0.
func tileBounds(n, tile int) []int {
	k := (n + tile - 1) / tile
	b := make([]int, k+1)
	for i := range b {
		b[i] = i * n / k
	}
	return b
}

// within returns the positions in [lo, hi).
func within(pos []int, lo, hi int) []int {
	i := 0
	for i < len(pos) && pos[i] < lo {
		i++
	}
	j := i
	for j < len(pos) && pos[j] < hi {
		j++
	}
	return pos[i:j]
}

// carry holds patch sums and counts of a rectangle of pixels that a later
// tile completes. Sum is C planes of w×h, Count one plane.
type carry struct {
	x0, y0, w, h, C int
	Sum, Count      []float64
}

func newCarry(w, h, c int) *carry {
	return &carry{w: w, h: h, C: c, Sum: make([]float64, w*h*c), Count: make([]float64, w*h)}
}

// tiler holds what every tile shares.
type tiler struct {
	img, out     *patches.Image
	scale        float64
	lambda       float64
	p, n, C      int
	coder        *learn.Coder
	eps          float64
	maxAtoms     int
	bottom, next *carry // sums for the p−1 rows below the tile row above, and for those below this one
	atoms, coded int
	// Buffers reused from tile to tile, so that garbage does not grow with
	// the image and the heap stays near its live size.
	sum, count []float64
	X, means   []float64
	carries    [2]carry // the right margins of neighbouring tiles, in turn
}

// grow returns b resized to n (new memory only when it is too short) and
// zeroed.
func grow(b []float64, n int) []float64 {
	if cap(b) < n {
		return make([]float64, n)
	}
	b = b[:n]
	clear(b)
	return b
}

// tile codes the patches with top-left corners in [x0, x1) × [y0, y1),
// completes the pixels of that rectangle, and returns the sums of its
// right margin, in right, for the tile beside (nil for the last tile of a
// row); the bottom margin goes to t.next.
func (t *tiler) tile(x0, x1, y0, y1 int, txs, tys []int, left, right *carry) *carry {
	img, p, n, C := t.img, t.p, t.n, t.C
	rx1, ry1 := min(img.W, x1+p-1), min(img.H, y1+p-1)
	w, h := rx1-x0, ry1-y0
	t.sum, t.count = grow(t.sum, w*h*C), grow(t.count, w*h)
	acc := &patches.Accumulator{W: w, H: h, C: C, P: p, Sum: t.sum, Count: t.count}
	// The pixels the tile beside already summed; the rows above came with
	// them, so the carried bottom rows are added only right of them.
	from := x0
	if left != nil {
		for c := 0; c < C; c++ {
			for y := 0; y < h; y++ {
				for x := 0; x < left.w; x++ {
					acc.Sum[c*w*h+y*w+x] += left.Sum[c*left.w*left.h+y*left.w+x]
				}
			}
		}
		for y := 0; y < h; y++ {
			for x := 0; x < left.w; x++ {
				acc.Count[y*w+x] += left.Count[y*left.w+x]
			}
		}
		from = x0 + left.w
	}
	if y0 > 0 {
		b := t.bottom
		for y := 0; y < min(b.h, h); y++ {
			for x := from; x < rx1; x++ {
				for c := 0; c < C; c++ {
					acc.Sum[c*w*h+y*w+x-x0] += b.Sum[c*b.w*b.h+y*b.w+x]
				}
				acc.Count[y*w+x-x0] += b.Count[y*b.w+x]
			}
		}
	}

	// Code in bands of a few thousand patches, as denoisePlane does.
	src := t.img
	band := max(1, 8192/max(len(txs), 1))
	t.X = grow(t.X, min(band, len(tys))*len(txs)*n)
	t.means = grow(t.means, min(band, len(tys))*len(txs))
	X, means := t.X, t.means
	rec := make([]float64, n)
	for r0 := 0; r0 < len(tys); r0 += band {
		r1 := min(r0+band, len(tys))
		m := 0
		for _, y := range tys[r0:r1] {
			for _, x := range txs {
				means[m] = extractScaled(src, x, y, p, t.scale, X[m*n:(m+1)*n])
				m++
			}
		}
		codes := t.coder.Code(X[:m*n], m, t.eps, nil, t.maxAtoms)
		t.atoms += len(codes.Idx)
		t.coded += m
		i := 0
		for _, y := range tys[r0:r1] {
			for _, x := range txs {
				codes.Reconstruct(t.coder.D, i, rec)
				for j := range rec {
					rec[j] += means[i]
				}
				acc.Add(x-x0, y-y0, rec, 1)
				i++
			}
		}
	}

	// Complete the rectangle: the blend of Accumulator.Blend, then the scale
	// back of Denoise, with the same roundings.
	wh, iwh := w*h, img.W*img.H
	for c := 0; c < C; c++ {
		for y := y0; y < min(y1, ry1); y++ {
			for x := x0; x < x1; x++ {
				li := (y-y0)*w + x - x0
				gi := c*iwh + y*img.W + x
				v := img.Pix[gi]
				if t.scale != 1 {
					v = float32(float64(v) * t.scale)
				}
				yv := float64(v)
				o := float32(yv)
				if d := t.lambda + acc.Count[li]; d != 0 {
					o = float32((t.lambda*yv + acc.Sum[c*wh+li]) / d)
				}
				if t.scale != 1 {
					o = float32(float64(o) * (1 / t.scale))
				}
				t.out.Pix[gi] = o
			}
		}
	}
	// The margins: rows below the tile (as far as the tile beside takes
	// them over) for the next tile row, columns right of it for the tile
	// beside.
	nb := t.next
	for y := y1; y < ry1; y++ {
		for x := x0; x < x1; x++ {
			li := (y-y0)*w + x - x0
			bi := (y-y1)*nb.w + x
			for c := 0; c < C; c++ {
				nb.Sum[c*nb.w*nb.h+bi] = acc.Sum[c*wh+li]
			}
			nb.Count[bi] = acc.Count[li]
		}
	}
	if x1 >= img.W {
		return nil
	}
	right.w, right.h, right.C = rx1-x1, h, C
	right.Sum, right.Count = grow(right.Sum, right.w*h*C), grow(right.Count, right.w*h)
	for y := 0; y < h; y++ {
		for x := 0; x < right.w; x++ {
			li := y*w + x1 - x0 + x
			for c := 0; c < C; c++ {
				right.Sum[c*right.w*h+y*right.w+x] = acc.Sum[c*wh+li]
			}
			right.Count[y*right.w+x] = acc.Count[li]
		}
	}
	return right
}
