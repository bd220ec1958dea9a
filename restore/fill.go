package restore

import (
	"math"
	"runtime"
	"sync"

	"tessera/learn"
	"tessera/patches"
)

// harmonicStart fills the missing pixels of every channel with the
// solution of Laplace's equation, the known pixels as boundary values
// (successive over-relaxation). It is the smooth first guess that the
// sparse passes then refine.
func harmonicStart(img *patches.Image, missing []bool) *patches.Image {
	out := img.Clone()
	w, h, wh := img.W, img.H, img.W*img.H
	var holes []int
	for i, m := range missing {
		if m {
			holes = append(holes, i)
		}
	}
	for c := 0; c < img.C; c++ {
		u := make([]float64, wh)
		pl := out.Plane(c)
		mean, cnt := 0.0, 0
		for i, v := range pl {
			u[i] = float64(v)
			if !missing[i] {
				mean += float64(v)
				cnt++
			}
		}
		mean /= float64(max(cnt, 1))
		for _, i := range holes {
			u[i] = mean
		}
		for it := 0; it < 5000; it++ {
			change := 0.0
			for _, i := range holes {
				x, y := i%w, i/w
				s, k := 0.0, 0.0
				if x > 0 {
					s, k = s+u[i-1], k+1
				}
				if x < w-1 {
					s, k = s+u[i+1], k+1
				}
				if y > 0 {
					s, k = s+u[i-w], k+1
				}
				if y < h-1 {
					s, k = s+u[i+w], k+1
				}
				nv := u[i] + 1.85*(s/k-u[i])
				change = math.Max(change, math.Abs(nv-u[i]))
				u[i] = nv
			}
			if change < 0.01 {
				break
			}
		}
		for _, i := range holes {
			pl[i] = float32(u[i])
		}
	}
	return out
}

// Iterated thresholding, chosen by measurement on the crops of
// TestInpaintBeatsBiharmonicReference and TestInpaintKodakRandomLoss.
const (
	// itersPerPass thresholding iterations make one pass: the default 5
	// passes run 15, about 6 s of 2 cores for 768×512. 20 gained up to
	// 0.3 dB on the smoother crops (kodim19 at 80% loss) and lost 0.08 dB
	// on the foliage crop (kodim13 at 50%).
	itersPerPass = 3
	// The threshold falls geometrically from thresholdHi to thresholdLo
	// (0–255 units). Starting high lets coarse structure settle first:
	// from 30 instead of 60, kodim19 at 80% loss lost 1 dB.
	thresholdHi = 60.0
	thresholdLo = 3.0
	// overRelax scales each step's change of the holes: at 1.5, 10
	// iterations gave what 20 gave at 1; 1.8 beat 1.5 on 8 of the 12 crops
	// (kodim13 lost up to 0.03 dB).
	overRelax = 1.8
)

// thresholdFill fills the holes of a noise-free image by iterated
// thresholding with back-projection (Guleryuz 2006, "Nonlinear
// approximation based image recovery using adaptive sparse reconstructions
// and iterated denoising"): every patch that holds a hole is
// hard-thresholded in the orthonormal 2-D DCT (its constant kept), the
// patches are averaged back, the holes move to the average and the known
// pixels stay as observed, with a threshold that falls from iteration to
// iteration. The holes start from the harmonic guess. Colour images are
// filled per opponent channel.
func thresholdFill(img *patches.Image, missing []bool, opt Options) (*patches.Image, *InpaintResult) {
	passes := opt.Passes
	if passes <= 0 {
		passes = defaultPasses
	}
	res := &InpaintResult{Passes: passes}
	for _, m := range missing {
		if m {
			res.Filled++
		}
	}
	planes := img
	if img.C == 3 {
		planes = ToOpponent(img)
	}
	g := newHoleGrid(missing, img.W, img.H, opt.Patch, opt.Stride)
	out := patches.New(img.W, img.H, img.C, img.Depth)
	iters := itersPerPass * passes
	for c := 0; c < img.C; c++ {
		cur := harmonicStart(planes.Channel(c), missing)
		for k := 0; k < iters; k++ {
			T := thresholdHi
			if iters > 1 {
				T *= math.Pow(thresholdLo/thresholdHi, float64(k)/float64(iters-1))
			}
			dctThresholdStep(cur, missing, g, T, opt.Workers)
			if opt.Progress != nil && (k+1)%itersPerPass == 0 {
				opt.Progress(Stage{Name: "code", Done: c*passes + (k+1)/itersPerPass, Total: img.C * passes})
			}
		}
		copy(out.Plane(c), cur.Pix)
	}
	if img.C == 3 {
		// Back from the opponent space, the known pixels as they were (the
		// round trip is exact only to float32 rounding).
		out = FromOpponent(out)
		wh := img.W * img.H
		for c := 0; c < img.C; c++ {
			for i, m := range missing {
				if !m {
					out.Pix[c*wh+i] = img.Pix[c*wh+i]
				}
			}
		}
	}
	res.Dict = dctDict(opt.Patch)
	return out, res
}

// dctDict is the orthonormal 2-D DCT of p×p patches as a dictionary (atom
// k1·p+k2 is the product of the 1-D basis vectors k1 down and k2 across).
func dctDict(p int) *learn.Dict {
	B := learn.DCTBasis(p)
	d := learn.NewDict(p*p, p*p)
	d.Patch, d.Channels = p, 1
	for k1 := 0; k1 < p; k1++ {
		for k2 := 0; k2 < p; k2++ {
			a := d.Atom(k1*p + k2)
			for r := 0; r < p; r++ {
				for c := 0; c < p; c++ {
					a[r*p+c] = B[k1][r] * B[k2][c]
				}
			}
		}
	}
	return d
}

// holeGrid is the patch grid of a fill: the positions, which patches hold a
// hole (only those are coded), and how many of those cover each pixel.
type holeGrid struct {
	w, h, p int
	xs, ys  []int
	hole    []bool // len(ys)×len(xs)
	cnt     []float64
}

func newHoleGrid(missing []bool, w, h, p, stride int) *holeGrid {
	g := &holeGrid{w: w, h: h, p: p, xs: patches.Positions(w, p, stride), ys: patches.Positions(h, p, stride)}
	g.hole = make([]bool, len(g.xs)*len(g.ys))
	g.cnt = make([]float64, w*h)
	// Holes per column over the p rows of the current patch row.
	col := make([]int, w)
	for y := 0; y < p; y++ {
		for x := 0; x < w; x++ {
			if missing[y*w+x] {
				col[x]++
			}
		}
	}
	row := 0
	for iy, y := range g.ys {
		for ; row < y; row++ {
			for x := 0; x < w; x++ {
				if missing[row*w+x] {
					col[x]--
				}
				if missing[(row+p)*w+x] {
					col[x]++
				}
			}
		}
		for ix, x := range g.xs {
			s := 0
			for _, v := range col[x : x+p] {
				s += v
			}
			if s == 0 {
				continue
			}
			g.hole[iy*len(g.xs)+ix] = true
			for r := 0; r < p; r++ {
				c := g.cnt[(y+r)*w+x : (y+r)*w+x+p]
				for j := range c {
					c[j]++
				}
			}
		}
	}
	return g
}

// dctBand is the number of patch rows one worker of dctThresholdStep
// takes at a time.
const dctBand = 32

// dctHalves splits the DCT-II basis by the symmetry B[k][p−1−i] =
// (−1)^k·B[k][i]: even rows act on the sums x_i + x_{p−1−i}, odd rows on
// the differences, over the first half of i (half the multiplications).
// ev[j*ne+i] = B[2j][i] for i < ne = ⌈p/2⌉, od[j*no+i] = B[2j+1][i] for
// i < no = ⌊p/2⌋.
func dctHalves(p int) (ev, od []float64, ne, no int) {
	B := learn.DCTBasis(p)
	ne, no = (p+1)/2, p/2
	ev = make([]float64, ne*ne)
	od = make([]float64, no*no)
	for j := 0; j < ne; j++ {
		copy(ev[j*ne:(j+1)*ne], B[2*j][:ne])
	}
	for j := 0; j < no; j++ {
		copy(od[j*no:(j+1)*no], B[2*j+1][:no])
	}
	return ev, od, ne, no
}

// dctThresholdStep hard-thresholds at T the orthonormal 2-D DCT of every
// patch of g that holds a hole (the constant coefficient kept), averages
// the patches back, and moves the holes of cur towards that average by
// overRelax times the difference. The transform is separable: the 1-D DCT
// of every row window once, then of the columns per patch, and the
// transposes on the way back, each by even and odd halves (about p³ + p²
// multiplications a patch instead of the 2p⁴ of the full product),
// skipping the coefficients the threshold zeroed. Bands of patch rows are
// done in parallel, each into its own sums, added in band order, so the
// result does not depend on the number of workers.
func dctThresholdStep(cur *patches.Image, missing []bool, g *holeGrid, T float64, workers int) {
	w, p := g.w, g.p
	nx := len(g.xs)
	ev, od, ne, no := dctHalves(p)
	pl := cur.Pix[:w*g.h]
	nb := (len(g.ys) + dctBand - 1) / dctBand
	type band struct {
		y0  int       // first pixel row
		sum []float64 // rows y0 .. y0+len/w
	}
	bands := make([]band, nb)
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	var wg sync.WaitGroup
	next := make(chan int, nb)
	for i := 0; i < nb; i++ {
		next <- i
	}
	close(next)
	for wk := 0; wk < min(workers, nb); wk++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var R, S []float64
			c := make([]float64, p*p)  // coefficients c[k1*p+k2]
			hv := make([]float64, p*p) // half sums / differences, p-long rows
			nz := make([]bool, p)      // rows of c with a coefficient left
			for bi := range next {
				iy0, iy1 := bi*dctBand, min((bi+1)*dctBand, len(g.ys))
				y0, y1 := g.ys[iy0], g.ys[iy1-1]+p // pixel rows [y0, y1)
				rows := y1 - y0
				need := rows * nx * p
				if len(R) < need {
					R, S = make([]float64, need), make([]float64, need)
				}
				R, S := R[:need], S[:need]
				for i := range S {
					S[i] = 0
				}
				// Rows that some hole patch of the band covers.
				used := make([]bool, rows)
				for iy := iy0; iy < iy1; iy++ {
					for ix := 0; ix < nx; ix++ {
						if g.hole[iy*nx+ix] {
							for r := 0; r < p; r++ {
								used[g.ys[iy]-y0+r] = true
							}
							break
						}
					}
				}
				// R[row][ix][k]: 1-D DCT of each row window.
				var sd [64]float64
				for r := 0; r < rows; r++ {
					if !used[r] {
						continue
					}
					src := pl[(y0+r)*w:]
					for ix, x := range g.xs {
						dst := R[(r*nx+ix)*p : (r*nx+ix)*p+p]
						win := src[x : x+p]
						for i := 0; i < no; i++ {
							a, b := float64(win[i]), float64(win[p-1-i])
							sd[i], sd[32+i] = a+b, a-b
						}
						if ne > no {
							sd[no] = float64(win[no])
						}
						for j := 0; j < ne; j++ {
							e := ev[j*ne : (j+1)*ne]
							v := 0.0
							for i, f := range e {
								v += f * sd[i]
							}
							dst[2*j] = v
						}
						for j := 0; j < no; j++ {
							o := od[j*no : (j+1)*no]
							v := 0.0
							for i, f := range o {
								v += f * sd[32+i]
							}
							dst[2*j+1] = v
						}
					}
				}
				for iy := iy0; iy < iy1; iy++ {
					r0 := g.ys[iy] - y0
					for ix := 0; ix < nx; ix++ {
						if !g.hole[iy*nx+ix] {
							continue
						}
						// Column DCT: halves of the rows r and p−1−r, then
						// c[2j][·] = Σ ev·sums, c[2j+1][·] = Σ od·differences.
						at := func(r int) []float64 { return R[((r0+r)*nx+ix)*p : ((r0+r)*nx+ix)*p+p] }
						for i := 0; i < no; i++ {
							a, b := at(i), at(p-1-i)
							s, d := hv[i*p:i*p+p], hv[(ne+i)*p:(ne+i)*p+p]
							for k, v := range a {
								s[k], d[k] = v+b[k], v-b[k]
							}
						}
						if ne > no {
							copy(hv[no*p:no*p+p], at(no))
						}
						for i := range c {
							c[i] = 0
						}
						for j := 0; j < ne; j++ {
							ck := c[2*j*p : 2*j*p+p]
							for i, f := range ev[j*ne : (j+1)*ne] {
								for k, v := range hv[i*p : i*p+p] {
									ck[k] += f * v
								}
							}
						}
						for j := 0; j < no; j++ {
							ck := c[(2*j+1)*p : (2*j+1)*p+p]
							for i, f := range od[j*no : (j+1)*no] {
								for k, v := range hv[(ne+i)*p : (ne+i)*p+p] {
									ck[k] += f * v
								}
							}
						}
						for k1 := 0; k1 < p; k1++ {
							nz[k1] = false
							for k2, v := range c[k1*p : k1*p+p] {
								if (k1 != 0 || k2 != 0) && math.Abs(v) < T {
									c[k1*p+k2] = 0
								} else {
									nz[k1] = true
								}
							}
						}
						// Back: e_i = Σ_j ev·c[2j], o_i = Σ_j od·c[2j+1];
						// rows i and p−1−i take e ± o.
						for i := range hv {
							hv[i] = 0
						}
						for j := 0; j < ne; j++ {
							if !nz[2*j] {
								continue
							}
							cr := c[2*j*p : 2*j*p+p]
							for i := 0; i < ne; i++ {
								f := ev[j*ne+i]
								e := hv[i*p : i*p+p]
								for k, v := range cr {
									e[k] += f * v
								}
							}
						}
						for j := 0; j < no; j++ {
							if !nz[2*j+1] {
								continue
							}
							cr := c[(2*j+1)*p : (2*j+1)*p+p]
							for i := 0; i < no; i++ {
								f := od[j*no+i]
								o := hv[(ne+i)*p : (ne+i)*p+p]
								for k, v := range cr {
									o[k] += f * v
								}
							}
						}
						for i := 0; i < no; i++ {
							e, o := hv[i*p:i*p+p], hv[(ne+i)*p:(ne+i)*p+p]
							top := S[((r0+i)*nx+ix)*p : ((r0+i)*nx+ix)*p+p]
							bot := S[((r0+p-1-i)*nx+ix)*p : ((r0+p-1-i)*nx+ix)*p+p]
							for k := range top {
								top[k] += e[k] + o[k]
								bot[k] += e[k] - o[k]
							}
						}
						if ne > no {
							mid := S[((r0+no)*nx+ix)*p : ((r0+no)*nx+ix)*p+p]
							for k, v := range hv[no*p : no*p+p] {
								mid[k] += v
							}
						}
					}
				}
				// Row inverse of S into the band's pixel sums.
				sum := make([]float64, rows*w)
				for r := 0; r < rows; r++ {
					if !used[r] {
						continue
					}
					for ix, x := range g.xs {
						sr := S[(r*nx+ix)*p : (r*nx+ix)*p+p]
						var eo [64]float64
						for j := 0; j < ne; j++ {
							if v := sr[2*j]; v != 0 {
								for i, f := range ev[j*ne : (j+1)*ne] {
									eo[i] += f * v
								}
							}
						}
						for j := 0; j < no; j++ {
							if v := sr[2*j+1]; v != 0 {
								for i, f := range od[j*no : (j+1)*no] {
									eo[32+i] += f * v
								}
							}
						}
						dst := sum[r*w+x : r*w+x+p]
						for i := 0; i < no; i++ {
							dst[i] += eo[i] + eo[32+i]
							dst[p-1-i] += eo[i] - eo[32+i]
						}
						if ne > no {
							dst[no] += eo[no]
						}
					}
				}
				bands[bi] = band{y0, sum}
			}
		}()
	}
	wg.Wait()
	sum := make([]float64, w*g.h)
	for _, bd := range bands {
		dst := sum[bd.y0*w : bd.y0*w+len(bd.sum)]
		for i, v := range bd.sum {
			dst[i] += v
		}
	}
	for i, m := range missing {
		if m && g.cnt[i] > 0 {
			v := float64(pl[i])
			pl[i] = float32(v + overRelax*(sum[i]/g.cnt[i]-v))
		}
	}
}
