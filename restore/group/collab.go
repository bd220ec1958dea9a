package group

import (
	"math"
	"runtime"

	"tessera/learn"
	"tessera/patches"
)

// stripeFloats bounds the spectra held at once: about 64 MB per array of
// float32, whatever the image size (a variable for the tests).
var stripeFloats = 1 << 24

// collabIn is what the collaborative Wiener stage filters.
type collabIn struct {
	noisy, pilot *patches.Image // 0–255
	g            *grouping      // grouped on the pilot
	sigma        float64
	p            int
	workers      int
}

// collab is the second step of Dabov et al. 2007 with the first estimate
// as the pilot: every group (cut to a power of two, nearest first) is
// transformed by the 2-D DCT of each patch and a Walsh–Hadamard transform
// across the members, the noisy spectrum is scaled by the empirical
// Wiener factors P²/(P² + σ²) of the pilot's spectrum P, and the patches
// come back weighted by 1/‖W‖². The result is that weighted average
// alone, without the noisy image.
//
// The references are taken in stripes of whole rows: the spectra of the
// stripe's positions are computed once, and the filtered ones are summed
// per position before one inverse transform (the transforms are linear
// and the weights are per group). Sums run in group order, so the result
// does not depend on the worker count.
func collab(in collabIn) *patches.Image {
	s2 := in.sigma * in.sigma
	return filterGroups(in, func(bn, bp []float64, k int) float64 {
		ks2 := float64(k) * s2
		wsum := 0.0
		for i, a := range bp {
			f := a * a / (a*a + ks2)
			wsum += f * f
			bn[i] *= f
		}
		return 1 / math.Max(wsum, 1e-3)
	})
}

// groupFilter shrinks the 3-D spectrum bn of a group of k members (k×n,
// after the unnormalised Walsh–Hadamard transform, so scaled by √k) in
// place, given the pilot's spectrum bp (nil without a pilot), and returns
// the group's weight in the average back.
type groupFilter func(bn, bp []float64, k int) float64

// filterGroups is the machinery of collab with the shrinkage of each
// group left to filter; in.pilot may be nil if filter does not use it.
func filterGroups(in collabIn, filter groupFilter) *patches.Image {
	noisy, pilot, g, p := in.noisy, in.pilot, in.g, in.p
	W, H, C := noisy.W, noisy.H, noisy.C
	n := C * p * p
	workers := in.workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	sp := newSpectra(p, W, H, C, workers)
	nref := len(g.refs)
	size := make([]int, nref) // members used, a power of two
	for r := range size {
		size[r] = 1 << (bitsLen(g.size(r)) - 1)
	}
	members := func(r int) []int32 { return g.member[g.start[r] : int(g.start[r])+size[r]] }
	PW := W - p + 1 // positions per row
	sum := make([]float64, W*H*C)
	wt := make([]float64, W*H)
	var specN, specP, accS []float32
	var accW []float64
	var used []bool
	var rec, rbuf []float64
	recOff := make([]int, chunkGroups+1)
	gw := make([]float64, chunkGroups)
	for r0 := 0; r0 < nref; {
		// The stripe: whole reference rows while their members' rows fit.
		r1, ya, yb := r0, H, -1
		for r1 < nref {
			e := r1
			for e < nref && g.refs[e]/int32(W) == g.refs[r1]/int32(W) {
				e++
			}
			a, b := ya, yb
			for r := r1; r < e; r++ {
				for _, q := range members(r) {
					y := int(q) / W
					a, b = min(a, y), max(b, y)
				}
			}
			if r1 > r0 && (b-a+1)*PW*n > stripeFloats {
				break
			}
			r1, ya, yb = e, a, b
		}
		np := (yb - ya + 1) * PW
		loc := func(q int32) int { return (int(q)/W-ya)*PW + int(q)%W }
		specN, accS = grow32(specN, np*n), grow32(accS, np*n)
		if pilot != nil {
			specP = grow32(specP, np*n)
		}
		clear(accS)
		accW = grow(accW, np)
		clear(accW)
		if cap(used) < np {
			used = make([]bool, np)
		}
		used = used[:np]
		clear(used)
		for r := r0; r < r1; r++ {
			for _, q := range members(r) {
				used[loc(q)] = true
			}
		}
		rows := yb - ya + 1
		rbuf = grow(rbuf, C*(rows+p-1)*PW*p)
		sp.forward(noisy, ya, rows, used, specN, rbuf)
		if pilot != nil {
			sp.forward(pilot, ya, rows, used, specP, rbuf)
		}
		for c0 := r0; c0 < r1; c0 += chunkGroups {
			c1 := min(c0+chunkGroups, r1)
			for r := c0; r < c1; r++ {
				recOff[r-c0+1] = recOff[r-c0] + size[r]
			}
			rec = grow(rec, recOff[c1-c0]*n)
			parallel(c1-c0, 16, workers, func(g0, g1 int, s *collabScratch) {
				for gi := g0; gi < g1; gi++ {
					mem := members(c0 + gi)
					k := len(mem)
					bn := s.block(k*n, 0)
					var bp []float64
					for i, q := range mem {
						c := loc(q)
						for j, v := range specN[c*n : (c+1)*n] {
							bn[i*n+j] = float64(v)
						}
					}
					if pilot != nil {
						bp = s.block(k*n, 1)
						for i, q := range mem {
							c := loc(q)
							for j, v := range specP[c*n : (c+1)*n] {
								bp[i*n+j] = float64(v)
							}
						}
						whtRows(bp, k, n)
					}
					// Unnormalised transforms scale the coefficients by √k
					// and the round trip by k, taken out in the sum below.
					whtRows(bn, k, n)
					gw[gi] = filter(bn, bp, k)
					whtRows(bn, k, n)
					copy(rec[recOff[gi]*n:recOff[gi+1]*n], bn)
				}
			})
			for r := c0; r < c1; r++ {
				gi := r - c0
				w, wk := gw[gi], gw[gi]/float64(size[r])
				for i, q := range members(r) {
					c := loc(q)
					dst := accS[c*n : (c+1)*n]
					for j, v := range rec[(recOff[gi]+i)*n : (recOff[gi]+i+1)*n] {
						dst[j] += float32(wk * v)
					}
					accW[c] += w
				}
			}
		}
		// The inverse transforms put back, and the weights per pixel.
		sp.adjoint(accS, accW, ya, rows, sum, rbuf)
		for i := 0; i < np; i++ {
			if w := accW[i]; w != 0 {
				x0, y0 := i%PW, ya+i/PW
				for y := 0; y < p; y++ {
					row := wt[(y0+y)*W+x0 : (y0+y)*W+x0+p]
					for x := range row {
						row[x] += w
					}
				}
			}
		}
		r0 = r1
	}
	out := patches.New(W, H, C, noisy.Depth)
	wh := W * H
	for c := 0; c < C; c++ {
		for i := 0; i < wh; i++ {
			if wt[i] > 0 {
				out.Pix[c*wh+i] = float32(sum[c*wh+i] / wt[i])
			} else {
				out.Pix[c*wh+i] = noisy.Pix[c*wh+i]
			}
		}
	}
	return out
}

func grow32(s []float32, n int) []float32 {
	if cap(s) < n {
		return make([]float32, n)
	}
	return s[:n]
}

// collabScratch is one worker's memory.
type collabScratch struct {
	x   []float64
	blk [2][]float64
}

func (s *collabScratch) vec(n int) []float64 {
	if cap(s.x) < n {
		s.x = make([]float64, n)
	}
	return s.x[:n]
}

func (s *collabScratch) block(m, i int) []float64 {
	if cap(s.blk[i]) < m {
		s.blk[i] = make([]float64, m)
	}
	return s.blk[i][:m]
}

// parallel runs fn over [0, m) in blocks of bs, one scratch per worker.
func parallel(m, bs, workers int, fn func(i0, i1 int, s *collabScratch)) {
	learn.Blocks((m+bs-1)/bs, workers, func() *collabScratch { return &collabScratch{} }, func(b int, s *collabScratch) {
		fn(b*bs, min((b+1)*bs, m), s)
	})
}

// spectra computes the 2-D DCTs of all the patches of a stripe of rows
// separably: the 1-D DCT of every p-long row segment once, then down the
// columns of segments (p² + p³ products a position against 2p³ patch by
// patch). adjoint is its transpose, which puts inverse transforms back
// summed per pixel, the transform being orthonormal.
type spectra struct {
	T             []float64 // p×p, row k the k-th basis vector
	p, W, H, C, w int
}

func newSpectra(p, W, H, C, workers int) *spectra {
	T := make([]float64, p*p)
	for k, row := range learn.DCTBasis(p) {
		copy(T[k*p:], row)
	}
	return &spectra{T: T, p: p, W: W, H: H, C: C, w: workers}
}

// forward writes into out (rows·PW positions × C·p², channel-major as
// patches.Extract lays a patch) the spectra of the patches with top rows
// ya..ya+rows−1 that used marks; R holds C·(rows+p−1)·PW·p.
func (sp *spectra) forward(img *patches.Image, ya, rows int, used []bool, out []float32, R []float64) {
	p, W, C, T := sp.p, sp.W, sp.C, sp.T
	PW, ir := W-p+1, rows+p-1
	n := C * p * p
	// R[c][y][x][k] = Σ_j T[k][j]·img[c][ya+y][x+j].
	parallel(C*ir, 8, sp.w, func(l0, l1 int, _ *collabScratch) {
		for l := l0; l < l1; l++ {
			c, y := l/ir, l%ir
			src := img.Plane(c)[(ya+y)*W : (ya+y+1)*W]
			dst := R[l*PW*p : (l+1)*PW*p]
			for x := 0; x < PW; x++ {
				seg := src[x : x+p]
				d := dst[x*p : (x+1)*p]
				for k := range d {
					v := 0.0
					for j, t := range T[k*p : (k+1)*p] {
						v += t * float64(seg[j])
					}
					d[k] = v
				}
			}
		}
	})
	// out[pos][c][ky][kx] = Σ_i T[ky][i]·R[c][y+i][x][kx].
	parallel(rows*PW, 512, sp.w, func(i0, i1 int, s *collabScratch) {
		acc := s.vec(p)
		for i := i0; i < i1; i++ {
			if !used[i] {
				continue
			}
			x, y := i%PW, i/PW
			for c := 0; c < C; c++ {
				for ky := 0; ky < p; ky++ {
					clear(acc)
					for yi, t := range T[ky*p : (ky+1)*p] {
						row := R[((c*ir+y+yi)*PW+x)*p:][:p]
						for kx, v := range row {
							acc[kx] += t * v
						}
					}
					o := out[i*n+(c*p+ky)*p:][:p]
					for kx, v := range acc {
						o[kx] = float32(v)
					}
				}
			}
		}
	})
}

// adjoint adds to sum (C planes of W×H) the inverse transforms of the
// spectra spec of the positions whose weight w is not zero, each at its
// place; R is scratch as for forward. The partition over the workers does
// not change the order of any sum.
func (sp *spectra) adjoint(spec []float32, w []float64, ya, rows int, sum []float64, R []float64) {
	p, W, H, C, T := sp.p, sp.W, sp.H, sp.C, sp.T
	PW, ir := W-p+1, rows+p-1
	n := C * p * p
	clear(R[:C*ir*PW*p])
	// R[c][y+i][x][kx] += Σ_ky T[ky][i]·spec[pos][c][ky][kx], column by
	// column of positions (a column's positions touch only its entries).
	parallel(PW, 16, sp.w, func(x0, x1 int, _ *collabScratch) {
		for x := x0; x < x1; x++ {
			for y := 0; y < rows; y++ {
				i := y*PW + x
				if w[i] == 0 {
					continue
				}
				for c := 0; c < C; c++ {
					for yi := 0; yi < p; yi++ {
						dst := R[((c*ir+y+yi)*PW+x)*p:][:p]
						for ky := 0; ky < p; ky++ {
							t := T[ky*p+yi]
							for kx, v := range spec[i*n+(c*p+ky)*p:][:p] {
								dst[kx] += t * float64(v)
							}
						}
					}
				}
			}
		}
	})
	// sum[c][ya+y][x+j] += Σ_k T[k][j]·R[c][y][x][k], row by row.
	parallel(C*ir, 8, sp.w, func(l0, l1 int, _ *collabScratch) {
		for l := l0; l < l1; l++ {
			c, y := l/ir, l%ir
			dst := sum[c*W*H+(ya+y)*W : c*W*H+(ya+y+1)*W]
			src := R[l*PW*p : (l+1)*PW*p]
			for x := 0; x < PW; x++ {
				d := dst[x : x+p]
				for k, v := range src[x*p : (x+1)*p] {
					if v == 0 {
						continue
					}
					for j, t := range T[k*p : (k+1)*p] {
						d[j] += t * v
					}
				}
			}
		}
	})
}

// whtRows applies the unnormalised Walsh–Hadamard transform (k a power
// of two; applied twice it multiplies by k) across the k rows of the k×n
// block b, all columns at once.
func whtRows(b []float64, k, n int) {
	for h := 1; h < k; h *= 2 {
		for i := 0; i < k; i += 2 * h {
			for j := i; j < i+h; j++ {
				x, y := b[j*n:(j+1)*n], b[(j+h)*n:(j+h+1)*n]
				for t, u := range x {
					v := y[t]
					x[t], y[t] = u+v, u-v
				}
			}
		}
	}
}

func bitsLen(x int) int {
	n := 0
	for ; x > 0; x >>= 1 {
		n++
	}
	return n
}
