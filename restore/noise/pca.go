package noise

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/mathext"

	"tessera/patches"
)

// PCA estimator settings.
const (
	pcaPatch = 7                   // patch side p (Liu et al. 2013 use 7)
	pcaDim   = pcaPatch * pcaPatch // n
	// pcaTarget is about how many weak-texture patches enter the covariance.
	pcaTarget  = 60000
	pcaBatch   = 1024
	pcaMaxIter = 20
	// pcaMinPatches weak-texture patches at least, else Wavelet.
	pcaMinPatches = 8 * pcaDim
	// pcaPoolMargin: the pool holds patches up to this factor above the
	// threshold, so that a rising estimate (up to +20 %) needs no new pool.
	pcaPoolMargin = 1.44
)

// Texture strength ξ of a patch is the energy of its gradients, taken with
// the kernel [-1/2, 0, 1/2] inside the patch, horizontally and vertically
// (Liu, Tanaka & Okutomi 2013). For a flat patch with white noise of
// variance σ², ξ/σ² is close to Gamma(shape r/2, scale 2·tr(DᵀD)/r), with D
// the stacked gradient operators, tr(DᵀD) = p(p−2) and r = rank(DᵀD) = p²−4
// (its null space: patches constant on each of the four (x mod 2, y mod 2)
// classes). Patches whose ξ is below σ²·pcaTau0 count as weak texture.
var pcaTau0 = func() float64 {
	const p = pcaPatch
	tr := float64(p * (p - 2))
	r := float64(p*p - 4)
	return mathext.GammaIncRegCompInv(r/2, 1-pcaConfidence) * 2 * tr / r
}()

// pcaConfidence is the probability that a flat noisy patch passes the weak
// texture test.
const pcaConfidence = 1 - 1e-6

// PCA estimates the standard deviation of white Gaussian noise in channel c
// by the weak-texture PCA method of Liu, Tanaka & Okutomi (2013): 7×7
// patches are weak texture when their gradient energy is below what noise
// of the current estimate alone exceeds with probability 10⁻⁶; the noise
// variance is the smallest eigenvalue of the covariance of the weak-texture
// patches; selection and estimate are iterated to a fixed point.
//
// What differs from the paper, for speed: the iteration starts from the
// Wavelet estimate (not from all patches), and when many patches are weak
// texture they are taken on a grid whose step keeps about 60 000 of them
// (a coarser grid first, until the estimate settles to 1 %).
//
// The smallest eigenvalue of the covariance of k patches of pure noise
// falls near the lower edge σ²(1−√(n/k))² of the Marchenko–Pastur law
// (V. A. Marchenko, L. A. Pastur, "Distribution of eigenvalues for some
// sets of random matrices", Math. USSR-Sbornik 1(4), 1967), 17 % below σ
// at k = 36n (a 48×48 frame); the estimate is divided by 1−√(n/k). With
// fewer than 8n = 392 weak-texture patches (small or densely textured
// frames) the edge is too far and too uncertain, and PCA returns the
// Wavelet estimate instead. PCA panics if c is out of range.
func PCA(img *patches.Image, c int) float64 {
	checkChannel(img, c)
	return pcaEstimate(img, c)
}

type texPatch struct {
	xi  float64
	pos int // y0·w + x0
}

func pcaEstimate(img *patches.Image, c int) float64 {
	const p, n = pcaPatch, pcaDim
	w, h := img.W, img.H
	if w < p || h < p || (w-p+1)*(h-p+1) < pcaMinPatches {
		return Wavelet(img, c)
	}
	plane := img.Plane(c)
	tex := newTextureMap(plane, w, h)
	var mean float64
	for _, v := range plane {
		mean += float64(v)
	}
	mean /= float64(len(plane))

	wav := Wavelet(img, c)
	sigma := wav // mostly an overestimate in textured images
	step, rebuilds := 0, 0
	var pool []texPatch
	var bound float64
	var acc *covAcc
	// Coarse to fine: iterate on a sparse grid (a quarter of the target)
	// until the estimate settles to 1 %, then on the full one to 0.01 %.
	target, tol := pcaTarget/4, 1e-2
	for it := 0; it < pcaMaxIter; it++ {
		tau := sigma * sigma * pcaTau0
		// (Re)build the pool when the grid would hold far more or far fewer
		// weak-texture patches than the target, or lacks some below tau.
		want := tex.step(tau, target)
		if step == 0 || tau > bound || (want != step && rebuilds < 3) {
			if step != 0 {
				rebuilds++
			}
			step = want
			bound = tau * pcaPoolMargin
			pool = tex.pool(step, bound)
			acc = newCovAcc(plane, w, mean)
		}
		if tex.count(pool, tau) < pcaMinPatches {
			// A coarse grid may lack patches the full one has.
			if step > 1 && tex.countAll(tau) >= pcaMinPatches {
				step, bound = 1, tau*pcaPoolMargin
				pool = tex.pool(step, bound)
				acc = newCovAcc(plane, w, mean)
			} else {
				return wav
			}
		}
		acc.moveTo(pool, tau)
		s := acc.sigma()
		settled := math.Abs(s-sigma) <= tol*sigma
		sigma = s
		if settled {
			if target == pcaTarget {
				break
			}
			target, tol = pcaTarget, 1e-4
		}
	}
	return sigma
}

// textureMap holds ξ of the patch at every position (corner x0, y0).
type textureMap struct {
	w, nx, ny int
	xi        []float64 // nx×ny
}

// newTextureMap computes ξ from summed-area tables of the squared
// gradients: horizontal differences at columns x0+1 … x0+p−2 of the patch,
// vertical ones at rows y0+1 … y0+p−2.
func newTextureMap(plane []float32, w, h int) *textureMap {
	const p = pcaPatch
	sw := w + 1
	sh, sv := make([]float64, sw*(h+1)), make([]float64, sw*(h+1))
	for y := 0; y < h; y++ {
		var rh, rv float64
		row := plane[y*w : (y+1)*w]
		ph, pv := sh[y*sw:], sv[y*sw:]
		ch, cv := sh[(y+1)*sw:], sv[(y+1)*sw:]
		for x := 0; x < w; x++ {
			if x >= 1 && x < w-1 {
				g := 0.5 * (float64(row[x+1]) - float64(row[x-1]))
				rh += g * g
			}
			if y >= 1 && y < h-1 {
				g := 0.5 * (float64(plane[(y+1)*w+x]) - float64(plane[(y-1)*w+x]))
				rv += g * g
			}
			ch[x+1] = ph[x+1] + rh
			cv[x+1] = pv[x+1] + rv
		}
	}
	t := &textureMap{w: w, nx: w - p + 1, ny: h - p + 1}
	t.xi = make([]float64, t.nx*t.ny)
	for y0 := 0; y0 < t.ny; y0++ {
		// Horizontal part: rows y0 … y0+p−1, columns x0+1 … x0+p−2.
		h0, h1 := sh[y0*sw:], sh[(y0+p)*sw:]
		// Vertical part: rows y0+1 … y0+p−2, columns x0 … x0+p−1.
		v0, v1 := sv[(y0+1)*sw:], sv[(y0+p-1)*sw:]
		out := t.xi[y0*t.nx : (y0+1)*t.nx]
		for x0 := range out {
			hx := h1[x0+p-1] - h0[x0+p-1] - h1[x0+1] + h0[x0+1]
			vx := v1[x0+p] - v0[x0+p] - v1[x0] + v0[x0]
			out[x0] = hx + vx
		}
	}
	return t
}

// step is the grid step that keeps about target of the patches with ξ ≤ tau.
func (t *textureMap) step(tau float64, target int) int {
	return max(1, int(math.Round(math.Sqrt(float64(t.countAll(tau))/float64(target)))))
}

// pool returns the grid patches with ξ ≤ bound.
func (t *textureMap) pool(step int, bound float64) []texPatch {
	var out []texPatch
	for y := 0; y < t.ny; y += step {
		row := t.xi[y*t.nx : (y+1)*t.nx]
		for x := 0; x < t.nx; x += step {
			if v := row[x]; v <= bound {
				out = append(out, texPatch{v, y*t.w + x})
			}
		}
	}
	return out
}

// countAll counts the patches with ξ ≤ tau at every position.
func (t *textureMap) countAll(tau float64) int {
	k := 0
	for _, v := range t.xi {
		if v <= tau {
			k++
		}
	}
	return k
}

func (t *textureMap) count(pool []texPatch, tau float64) int {
	k := 0
	for _, q := range pool {
		if q.xi <= tau {
			k++
		}
	}
	return k
}

// covAcc accumulates the covariance of a changing set of patches. Each
// patch x is split into its mean x̄ (after the plane mean is taken off) and
// its zero-mean part x̃ = x − x̄·1; Σx̃x̃ᵀ, the bulk of the work, is
// accumulated per batch in float32 (x̃ is small: weak texture and noise) and
// summed in float64; the terms with x̄ are kept in float64.
type covAcc struct {
	plane []float32
	w     int
	mean  float64
	k     int
	tau   float64 // the set is the pool patches with ξ ≤ tau
	list  []texPatch

	sDD  [pcaDim * pcaDim]float64 // Σ x̃x̃ᵀ, upper triangle
	sMX  [pcaDim]float64          // Σ x̄·x̃
	sX   [pcaDim]float64          // Σ x̃
	sMM  float64                  // Σ x̄²
	sM   float64                  // Σ x̄
	buf  []float32                // pcaDim rows of pcaBatch: x̃ of a batch
	bm   []float64                // x̄ of a batch
	c32  []float32
	eig  mat.EigenSym
	vals []float64
}

func newCovAcc(plane []float32, w int, mean float64) *covAcc {
	return &covAcc{plane: plane, w: w, mean: mean, tau: -1,
		buf: make([]float32, pcaDim*pcaBatch), bm: make([]float64, pcaBatch),
		c32: make([]float32, pcaDim*pcaDim)}
}

// moveTo makes the accumulated set the pool patches with ξ ≤ tau, adding or
// removing only those between the old and the new threshold.
func (a *covAcc) moveTo(pool []texPatch, tau float64) {
	lo, hi, sign := a.tau, tau, 1.0
	if tau < a.tau {
		lo, hi, sign = tau, a.tau, -1
	}
	a.list = a.list[:0]
	for _, q := range pool {
		if q.xi > lo && q.xi <= hi {
			a.list = append(a.list, q)
		}
	}
	a.update(a.list, sign)
	a.k += int(sign) * len(a.list)
	a.tau = tau
}

func (a *covAcc) update(list []texPatch, sign float64) {
	const p, n = pcaPatch, pcaDim
	for len(list) > 0 {
		b := min(len(list), pcaBatch)
		batch := list[:b]
		// Offset by offset, so that writes are sequential and neighbouring
		// offsets read the same cache lines.
		bm := a.bm[:b]
		clear(bm)
		for dy := 0; dy < p; dy++ {
			for dx := 0; dx < p; dx++ {
				pl := a.plane[dy*a.w+dx:]
				for j, t := range batch {
					bm[j] += float64(pl[t.pos])
				}
			}
		}
		for j := range bm {
			bm[j] /= n
		}
		var mm, m1 float64
		for _, m := range bm {
			m -= a.mean
			mm += m * m
			m1 += m
		}
		a.sMM += sign * mm
		a.sM += sign * m1
		for dy := 0; dy < p; dy++ {
			for dx := 0; dx < p; dx++ {
				i := dy*p + dx
				pl := a.plane[dy*a.w+dx:]
				dst := a.buf[i*pcaBatch : i*pcaBatch+b]
				var sx, smx float64
				for j, t := range batch {
					v := float32(float64(pl[t.pos]) - bm[j])
					dst[j] = v
					sx += float64(v)
					smx += (bm[j] - a.mean) * float64(v)
				}
				a.sX[i] += sign * sx
				a.sMX[i] += sign * smx
			}
		}
		blas32.Syrk(blas.NoTrans, 1,
			blas32.General{Rows: n, Cols: b, Stride: pcaBatch, Data: a.buf},
			0, blas32.Symmetric{N: n, Stride: n, Data: a.c32, Uplo: blas.Upper})
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				a.sDD[i*n+j] += sign * float64(a.c32[i*n+j])
			}
		}
		list = list[b:]
	}
}

// sigma returns the noise estimate of the current patch set: the square
// root of the smallest eigenvalue of its covariance.
func (a *covAcc) sigma() float64 {
	const n = pcaDim
	cov := mat.NewSymDense(n, nil)
	k := float64(a.k)
	// Σ(x−x̄ₛ)(x−x̄ₛ)ᵀ with x = x̄·1 + x̃, term by term, each centred.
	mm := a.sMM - a.sM*a.sM/k
	var mx [n]float64
	for i := range mx {
		mx[i] = a.sMX[i] - a.sM*a.sX[i]/k
	}
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			dd := a.sDD[i*n+j] - a.sX[i]*a.sX[j]/k
			cov.SetSym(i, j, (dd+mx[i]+mx[j]+mm)/(k-1))
		}
	}
	if !a.eig.Factorize(cov, false) {
		return 0
	}
	a.vals = a.eig.Values(a.vals)
	// Undo the Marchenko–Pastur edge: √λmin ≈ σ(1−√(n/k)).
	return math.Sqrt(math.Max(0, slices.Min(a.vals))) / (1 - math.Sqrt(n/k))
}
