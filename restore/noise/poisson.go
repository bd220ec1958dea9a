package noise

import (
	"cmp"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"

	"tessera/patches"
)

// Poisson–Gaussian fit settings.
const (
	pgTile = 8 // tile side, in Haar coefficients (16 pixels)
	// pgSmallTile is the side on images of fewer than pgMinTiles tiles of
	// pgTile: more, smaller tiles follow thin bright structure better.
	pgSmallTile = 4
	pgMinTiles  = 1024
	pgLevel     = 0.005 // each smoothness ratio is tested two-sided at this level
	pgMinBin    = 12    // tiles per level set, at least
	pgMaxBins   = 32
	pgClip      = 3 // level sets this many deviations off the line are dropped
	// pgQuantile of the tile variances in a level set estimates its noise
	// variance.
	pgQuantile = 0.25
)

// pgBounds are the F-quantiles that the ratios of the three smoothness
// variances (horizontal, vertical detail; plane-fit residual of the
// approximation) to the diagonal-detail variance must lie between.
var pgBounds = map[int][3][2]float64{pgTile: fBounds(pgTile), pgSmallTile: fBounds(pgSmallTile)}

func fBounds(t int) (b [3][2]float64) {
	n := float64(t * t)
	for i, d := range []float64{n - 1, n - 1, n - 3} {
		f := distuv.F{D1: d, D2: n}
		b[i] = [2]float64{f.Quantile(pgLevel), f.Quantile(1 - pgLevel)}
	}
	return b
}

// tileSide is the tile side, in Haar coefficients, for a w×h image.
func tileSide(w, h int) int {
	if (w/(2*pgTile))*(h/(2*pgTile)) < pgMinTiles {
		return pgSmallTile
	}
	return pgTile
}

// EstimatePoisson fits the Poisson–Gaussian model Var[z] = α·E[z] + σ² to
// channel c, returning α and σ in the image's units.
//
// The method follows Foi, Trimeche, Katkovnik & Egiazarian (2008, IEEE TIP
// 17(10)) in a simplified form. The image is split into 2×2 Haar blocks:
// the block mean A estimates y, and the orthonormal diagonal detail
// (a−b−c+d)/2 has variance exactly α·ȳ + σ² wherever y is smooth. Blocks
// are grouped into tiles of 8×8 (4×4 on images of fewer than 1024 such
// tiles, i.e. under 512×512 pixels, so that thin bright structure still
// yields tiles); a tile is kept when its horizontal and vertical detail
// variances and the residual variance of a plane fitted to A (×4) agree
// with its diagonal variance at the two-sided 0.5 % F-test level, i.e.
// when nothing but noise is seen. Kept tiles are sorted by mean into level
// sets; each gives a lower quantile of its tiles' variances (corrected for
// the quantile's bias under χ²); a line is fitted to them by weighted
// least squares, weights from the fitted variance (iterated), level sets
// more than 3 deviations off dropped.
//
// Clipping: when many samples sit exactly at 0 (or at the peak) and none
// beyond, the data count as clipped there, and, as in the paper, each
// level set's mean and variance are taken as those of a normal variable
// of mean μ and variance α·μ + σ² censored to the bounds; α and σ² are
// then fitted to the observed variances by iteratively reweighted least
// squares (a Nelder–Mead search each step), dropping the worst level set
// while it is more than 3 deviations off, up to three times.
//
// Differences from the paper: tiles and F-tests instead of its edge
// detection and erosion for the smooth-region mask; quantiles of tiles
// instead of its estimators with analytic bias terms; least squares with
// estimated weights instead of its maximum-likelihood fit.
//
// A negative fitted σ² gives σ = 0 (and α refitted through the origin); a
// negative slope gives α = 0. Images with fewer than two tiles return
// α = 0 and σ from PCA. EstimatePoisson panics if c is out of range.
func EstimatePoisson(img *patches.Image, c int) (alpha, sigma float64) {
	checkChannel(img, c)
	plane := img.Plane(c)
	t := tileSide(img.W, img.H)
	stats := smoothTiles(plane, img.W, img.H, t)
	if len(stats) < 2 {
		return 0, PCA(img, c)
	}
	var a, b float64
	if lo, hi := clipBounds(plane, img.Peak()); lo || hi {
		l, h := math.Inf(-1), math.Inf(1)
		if lo {
			l = 0
		}
		if hi {
			h = img.Peak()
		}
		a, b = fitClipped(levelSets(stats, t), l, h)
	} else {
		a, b = fitLine(levelSets(stats, t))
	}
	return a, math.Sqrt(b)
}

type tileStat struct{ mean, v float64 }

// smoothTiles returns mean and diagonal-detail variance of every tile that
// passes the smoothness tests.
func smoothTiles(p []float32, w, h, t int) []tileStat {
	n := t * t
	nf := float64(n)
	tx, ty := w/(2*t), h/(2*t)
	var out []tileStat
	aa, hh, hl, lh := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	bounds := pgBounds[t]
	// Plane fit on the centred grid u, v ∈ {−(t−1)/2 … (t−1)/2}:
	// Σu² = Σv² = n·(t²−1)/12.
	suu := nf * float64(t*t-1) / 12
	for j := 0; j < ty; j++ {
		for i := 0; i < tx; i++ {
			for bj := 0; bj < t; bj++ {
				y := 2 * (j*t + bj)
				r0, r1 := p[y*w:], p[(y+1)*w:]
				for bi := 0; bi < t; bi++ {
					x := 2 * (i*t + bi)
					a, b := float64(r0[x]), float64(r0[x+1])
					cc, d := float64(r1[x]), float64(r1[x+1])
					k := bj*t + bi
					aa[k] = (a + b + cc + d) / 4
					hh[k] = (a - b - cc + d) / 2
					hl[k] = (a - b + cc - d) / 2
					lh[k] = (a + b - cc - d) / 2
				}
			}
			var mA, sHH, mHL, mLH float64
			for k := 0; k < n; k++ {
				mA += aa[k]
				sHH += hh[k] * hh[k]
				mHL += hl[k]
				mLH += lh[k]
			}
			mA /= nf
			mHL /= nf
			mLH /= nf
			var vHL, vLH, rA, su, sv float64
			for k := 0; k < n; k++ {
				u := float64(k%t) - float64(t-1)/2
				v := float64(k/t) - float64(t-1)/2
				dA := aa[k] - mA
				rA += dA * dA
				su += u * dA
				sv += v * dA
				vHL += (hl[k] - mHL) * (hl[k] - mHL)
				vLH += (lh[k] - mLH) * (lh[k] - mLH)
			}
			rA = math.Max(0, rA-su*su/suu-sv*sv/suu)
			vHH := sHH / nf
			ratios := [3]float64{vHL / (nf - 1), vLH / (nf - 1), 4 * rA / (nf - 3)}
			if vHH == 0 {
				if ratios == [3]float64{} {
					out = append(out, tileStat{mA, 0}) // noise-free and flat
				}
				continue
			}
			ok := true
			for q, r := range ratios {
				r /= vHH
				if r < bounds[q][0] || r > bounds[q][1] {
					ok = false
					break
				}
			}
			if ok {
				out = append(out, tileStat{mA, vHH})
			}
		}
	}
	return out
}

type levelSet struct {
	y, v, n float64 // mean, variance estimate, tile count
	k       float64 // coefficients per tile
	keep    bool
}

// pgRelVar is the relative variance of a level set's variance estimate:
// q(1−q)/φ(z)² · (2/k)/n, the sample quantile's variance under the normal
// approximation.
func pgRelVar(s levelSet) float64 {
	z := distuv.UnitNormal.Quantile(pgQuantile)
	phi := distuv.UnitNormal.Prob(z)
	return pgQuantile * (1 - pgQuantile) / (phi * phi) * 2 / s.k / s.n
}

// levelSets sorts the tiles by mean and groups them into level sets.
func levelSets(stats []tileStat, t int) []levelSet {
	k := float64(t * t)
	slices.SortFunc(stats, func(p, q tileStat) int { return cmp.Compare(p.mean, q.mean) })
	nb := max(1, min(pgMaxBins, len(stats)/pgMinBin))
	// Texture that slips through the tests only adds variance, so each
	// level set takes a lower quantile of its tiles' variances, divided by
	// the same quantile of χ²_k/k (Wilson–Hilferty approximation).
	z := distuv.UnitNormal.Quantile(pgQuantile)
	qBias := math.Pow(1-2.0/(9*k)+z*math.Sqrt(2.0/(9*k)), 3)
	sets := make([]levelSet, 0, nb)
	vs := make([]float64, 0, len(stats)/nb+1)
	for i := 0; i < nb; i++ {
		part := stats[i*len(stats)/nb : (i+1)*len(stats)/nb]
		vs = vs[:0]
		var ym float64
		for _, s := range part {
			ym += s.mean
			vs = append(vs, s.v)
		}
		sets = append(sets, levelSet{y: ym / float64(len(part)), v: quantile(vs, pgQuantile) / qBias,
			n: float64(len(part)), k: k, keep: true})
	}
	return sets
}

// fitLine fits v = a·y + b to the level sets by weighted least squares,
// dropping outlying sets.
func fitLine(sets []levelSet) (a, b float64) {
	relVar := pgRelVar
	fit := func() {
		// Weights 1/Var from the current line (the estimates themselves
		// at first), iterated.
		a, b = wls(sets, func(s levelSet) float64 { return s.v })
		for range 4 {
			a, b = wls(sets, func(s levelSet) float64 { return a*s.y + b })
		}
	}
	fit()
	for range 3 {
		dropped := false
		for i, s := range sets {
			f := a*s.y + b
			if s.keep && f > 0 && math.Abs(s.v-f) > pgClip*f*math.Sqrt(relVar(s)) {
				sets[i].keep = false
				dropped = true
			}
		}
		if !dropped {
			break
		}
		fit()
	}
	if a < 0 {
		a = 0
		_, b = wlsFixed(sets, 0)
	}
	if b < 0 {
		b = 0
		a, _ = wlsFixed(sets, 1)
	}
	return a, b
}

// wls is weighted least squares of v on y over the kept level sets with
// weights n/model², model(s) the variance the weight assumes.
func wls(sets []levelSet, model func(levelSet) float64) (a, b float64) {
	var sw, sy, sv, syy, syv float64
	for _, s := range sets {
		if !s.keep {
			continue
		}
		m := math.Max(model(s), 1e-12)
		wt := s.n / (m * m)
		sw += wt
		sy += wt * s.y
		sv += wt * s.v
		syy += wt * s.y * s.y
		syv += wt * s.y * s.v
	}
	if sw == 0 {
		return 0, 0
	}
	det := sw*syy - sy*sy
	if det <= 1e-12*sw*syy {
		return 0, sv / sw // one level only: no slope
	}
	a = (sw*syv - sy*sv) / det
	b = (sv - a*sy) / sw
	return a, b
}

// wlsFixed fits one parameter with the other fixed at zero: kind 0 fits the
// intercept alone (v = b), kind 1 the slope alone (v = a·y). Weights are
// from the estimates.
func wlsFixed(sets []levelSet, kind int) (a, b float64) {
	var num, den float64
	for _, s := range sets {
		if !s.keep {
			continue
		}
		m := math.Max(s.v, 1e-12)
		wt := s.n / (m * m)
		if kind == 0 {
			num += wt * s.v
			den += wt
		} else {
			num += wt * s.y * s.v
			den += wt * s.y * s.y
		}
	}
	if den == 0 {
		return 0, 0
	}
	if kind == 0 {
		return 0, num / den
	}
	return num / den, 0
}

// quantile is the q-quantile of a with linear interpolation (numpy's
// default); it reorders a.
func quantile(a []float64, q float64) float64 {
	pos := q * float64(len(a)-1)
	i := int(pos)
	lo := selectKth(a, i)
	if i+1 >= len(a) {
		return lo
	}
	hi := slices.Min(a[i+1:])
	return lo + (pos-float64(i))*(hi-lo)
}
