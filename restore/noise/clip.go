package noise

import (
	"math"
)

// Clipped data: a sensor's output saturates at 0 and at the peak, so in
// dark (or bright) parts the observed mean is raised (lowered) and the
// observed variance is lowered. As Foi, Trimeche, Katkovnik &
// Egiazarian (2008) do for raw data, the observation is modelled as a
// normal variable of mean μ and variance α·μ + σ² censored to
// [0, peak]; the line is fitted to the underlying μ, not to the observed
// means.

// pgClipFrac is the share of samples at a bound above which the image
// counts as clipped there.
const pgClipFrac = 1e-3

// clipBounds reports whether the plane is clipped at 0 and at peak: many
// samples sit exactly on the bound and none beyond it.
func clipBounds(p []float32, peak float64) (lo, hi bool) {
	var n0, nP int
	for _, v := range p {
		switch {
		case v < 0 || float64(v) > peak:
			return false, false // not stored data: nothing clipped
		case v == 0:
			n0++
		case float64(v) == peak:
			nP++
		}
	}
	lim := int(pgClipFrac * float64(len(p)))
	return n0 > lim, nP > lim
}

// censored gives the mean and variance of min(hi, max(lo, x)) for x
// normal of mean mu and deviation s; lo = −∞ or hi = +∞ turn a bound off.
func censored(mu, s, lo, hi float64) (m, v float64) {
	if !(s > 0) {
		x := math.Min(hi, math.Max(lo, mu))
		return x, 0
	}
	// Moments of x − mu, then shifted: no cancellation for mu ≫ s.
	var pLo, pHi, fLo, fHi, aLo, aHi float64 // P(x<lo), P(x>hi), φ, a·φ at the bounds
	dLo, dHi := 0.0, 0.0                     // bound − mu
	if !math.IsInf(lo, -1) {
		a := (lo - mu) / s
		pLo = 0.5 * math.Erfc(-a/math.Sqrt2)
		fLo = math.Exp(-a*a/2) / math.Sqrt(2*math.Pi)
		aLo = a * fLo
		dLo = lo - mu
	}
	if !math.IsInf(hi, 1) {
		c := (hi - mu) / s
		pHi = 0.5 * math.Erfc(c/math.Sqrt2)
		fHi = math.Exp(-c*c/2) / math.Sqrt(2*math.Pi)
		aHi = c * fHi
		dHi = hi - mu
	}
	in := 1 - pLo - pHi
	e1 := s*(fLo-fHi) + dLo*pLo + dHi*pHi
	e2 := s*s*(in+aLo-aHi) + dLo*dLo*pLo + dHi*dHi*pHi
	return mu + e1, math.Max(0, e2-e1*e1)
}

// clipModel is the Poisson–Gaussian variance line seen through clipping.
type clipModel struct {
	a, b   float64 // Var = a·μ + b
	lo, hi float64 // bounds, ±Inf when off
}

func (c clipModel) dev(mu float64) float64 { return math.Sqrt(math.Max(0, c.a*mu+c.b)) }

// predict returns the observed variance the model gives at observed mean
// m: the underlying μ ≥ 0 whose censored mean is m is found by bisection
// (the censored mean grows with μ).
func (c clipModel) predict(m float64) float64 {
	mean := func(mu float64) float64 { x, _ := censored(mu, c.dev(mu), c.lo, c.hi); return x }
	lo, hi := 0.0, math.Max(1, 2*m)
	if mean(lo) >= m {
		_, v := censored(0, c.dev(0), c.lo, c.hi)
		return v
	}
	for i := 0; mean(hi) < m && i < 60; i++ {
		hi *= 2
	}
	for range 50 {
		mid := 0.5 * (lo + hi)
		if mean(mid) < m {
			lo = mid
		} else {
			hi = mid
		}
	}
	_, v := censored(0.5*(lo+hi), c.dev(0.5*(lo+hi)), c.lo, c.hi)
	return v
}

// fitClipped fits (a, b) of the clipped model to the level sets by
// iteratively reweighted least squares on the observed variances (weights
// n/model² from the previous fit), each step a Nelder–Mead search started
// from the line fitted to the sets far from the bounds; outlying sets are
// dropped as in fitLine.
func fitClipped(sets []levelSet, lo, hi float64) (a, b float64) {
	var far []levelSet
	for _, s := range sets {
		if d := 3 * math.Sqrt(s.v); s.v > 0 && s.y-d > lo && s.y+d < hi {
			far = append(far, s)
		}
	}
	if len(far) >= 2 {
		a, b = fitLine(far)
	} else {
		a, b = fitLine(sets)
	}
	// Step scales for a start on zero: the variance per unit of mean, and
	// the smallest variance seen.
	var aScale, bScale float64
	for _, s := range sets {
		if s.v > 0 {
			aScale = math.Max(aScale, s.v/math.Max(math.Abs(s.y), 1))
			if bScale == 0 || s.v < bScale {
				bScale = s.v
			}
		}
	}
	for i := range sets {
		// Noise-free tiles (all on a bound, or flat) say nothing here.
		sets[i].keep = sets[i].v > 0
	}
	model := func(a, b float64) clipModel { return clipModel{math.Abs(a), math.Abs(b), lo, hi} }
	pred := make([]float64, len(sets))
	predictAll := func(c clipModel) {
		for i, s := range sets {
			if s.keep {
				pred[i] = c.predict(s.y)
			}
		}
	}
	fit := func() {
		for range 3 {
			predictAll(model(a, b))
			w := make([]float64, len(sets))
			for i, s := range sets {
				if s.keep {
					w[i] = s.n / math.Max(pred[i]*pred[i], 1e-24)
				}
			}
			cost := func(x [2]float64) float64 {
				c := model(x[0], x[1])
				var r float64
				for i, s := range sets {
					if s.keep {
						d := s.v - c.predict(s.y)
						r += w[i] * d * d
					}
				}
				return r
			}
			x := nelderMead(cost, [2]float64{a, b}, [2]float64{0.2 * math.Max(a, aScale), 0.2 * math.Max(b, bScale)})
			a, b = math.Abs(x[0]), math.Abs(x[1])
		}
	}
	fit()
	for range 3 {
		// The worst set beyond pgClip deviations, one at a time.
		predictAll(model(a, b))
		worst, wd := -1, float64(pgClip)
		for i, s := range sets {
			if s.keep && pred[i] > 0 {
				if d := math.Abs(s.v-pred[i]) / (pred[i] * math.Sqrt(pgRelVar(s))); d > wd {
					worst, wd = i, d
				}
			}
		}
		if worst < 0 {
			break
		}
		sets[worst].keep = false
		fit()
	}
	return a, b
}

// nelderMead minimises f over two variables from x0 with initial steps d
// (J. A. Nelder, R. Mead, "A simplex method for function minimization",
// Computer Journal 7, 1965; the usual coefficients 1, 2, ½, ½).
func nelderMead(f func([2]float64) float64, x0, d [2]float64) [2]float64 {
	p := [3][2]float64{x0, {x0[0] + d[0], x0[1]}, {x0[0], x0[1] + d[1]}}
	var fv [3]float64
	for i := range p {
		fv[i] = f(p[i])
	}
	for it := 0; it < 200; it++ {
		// Order best, middle, worst.
		for i := 0; i < 2; i++ {
			for j := i + 1; j < 3; j++ {
				if fv[j] < fv[i] {
					fv[i], fv[j] = fv[j], fv[i]
					p[i], p[j] = p[j], p[i]
				}
			}
		}
		if fv[2]-fv[0] <= 1e-10*(math.Abs(fv[0])+1e-30) {
			break
		}
		c := [2]float64{(p[0][0] + p[1][0]) / 2, (p[0][1] + p[1][1]) / 2}
		at := func(t float64) [2]float64 {
			return [2]float64{c[0] + t*(p[2][0]-c[0]), c[1] + t*(p[2][1]-c[1])}
		}
		r := at(-1)
		fr := f(r)
		switch {
		case fr < fv[0]:
			e := at(-2)
			if fe := f(e); fe < fr {
				p[2], fv[2] = e, fe
			} else {
				p[2], fv[2] = r, fr
			}
		case fr < fv[1]:
			p[2], fv[2] = r, fr
		default:
			k := at(0.5)
			if fr < fv[2] {
				k = at(-0.5)
			}
			if fk := f(k); fk < math.Min(fr, fv[2]) {
				p[2], fv[2] = k, fk
			} else {
				for i := 1; i < 3; i++ {
					p[i] = [2]float64{(p[0][0] + p[i][0]) / 2, (p[0][1] + p[i][1]) / 2}
					fv[i] = f(p[i])
				}
			}
		}
	}
	best := 0
	for i := range fv {
		if fv[i] < fv[best] {
			best = i
		}
	}
	return p[best]
}
