package noise

import (
	"math"
	"math/rand/v2"
	"testing"

	"tessera/patches"
)

// poissonRand draws from Poisson(lambda): Knuth's product of uniforms for
// small means, Hörmann's transformed rejection (PTRS, 1993) from 10 on.
func poissonRand(rng *rand.Rand, lambda float64) float64 {
	if lambda <= 0 {
		return 0
	}
	if lambda >= 10 {
		return poissonPTRS(rng, lambda)
	}
	l := math.Exp(-lambda)
	k, p := 0, rng.Float64()
	for p > l {
		k++
		p *= rng.Float64()
	}
	return float64(k)
}

// poissonPTRS: W. Hörmann, "The transformed rejection method for
// generating Poisson random variables", Insurance: Mathematics and
// Economics 12 (1993).
func poissonPTRS(rng *rand.Rand, lambda float64) float64 {
	slam, loglam := math.Sqrt(lambda), math.Log(lambda)
	b := 0.931 + 2.53*slam
	a := -0.059 + 0.02483*b
	invAlpha := 1.1239 + 1.1328/(b-3.4)
	vr := 0.9277 - 3.6224/(b-2)
	for {
		u := rng.Float64() - 0.5
		v := rng.Float64()
		us := 0.5 - math.Abs(u)
		k := math.Floor((2*a/us+b)*u + lambda + 0.43)
		if us >= 0.07 && v <= vr {
			return k
		}
		if k < 0 || (us < 0.013 && v > us) {
			continue
		}
		lg, _ := math.Lgamma(k + 1)
		if math.Log(v)+math.Log(invAlpha)-math.Log(a/(us*us)+b) <= -lambda+k*loglam-lg {
			return k
		}
	}
}

// The sampler itself: mean and variance of Poisson(λ) are both λ.
func TestPoissonSampler(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for _, lam := range []float64{0.7, 4, 9.9, 10, 37, 250} {
		const n = 200000
		var s, s2 float64
		for range n {
			v := poissonRand(rng, lam)
			s += v
			s2 += v * v
		}
		m := s / n
		v := s2/n - m*m
		// 5 standard errors: sd(mean) = √(λ/n), sd(var) ≈ λ·√(2/n) (+ the
		// fourth-cumulant term λ/n, small here).
		if math.Abs(m-lam) > 5*math.Sqrt(lam/n) || math.Abs(v-lam) > 5*math.Sqrt((2*lam*lam+lam)/n) {
			t.Errorf("Poisson(%v): sample mean %.4f, variance %.4f", lam, m, v)
		}
	}
}

// The formulas written a second time, in another form.
// Source: Mäkitalo & Foi (2013), IEEE TIP 22(1), "Optimal inversion of the
// generalized Anscombe transformation for Poisson-Gaussian noise":
// f(z) = (2/α)·√(αz + 3α²/8 + σ²) = 2·√(z/α + 3/8 + (σ/α)²).
func gatRef(z, alpha, sigma float64) float64 {
	u := z/alpha + 3.0/8 + (sigma/alpha)*(sigma/alpha)
	if u < 0 {
		return 0
	}
	return 2 * math.Sqrt(u)
}

// Source: Mäkitalo & Foi (2011), IEEE TIP 20(9), closed-form approximation
// of the exact unbiased inverse, and its Poisson–Gaussian form in Mäkitalo &
// Foi (2013), written over the common denominator 8D³:
// I = (2D⁵ − D³ + 2√(3/2)·D² − 11D + 5√(3/2))/(8D³) − σ̃².
func inverseRef(d, alpha, sigma float64) float64 {
	r := math.Sqrt(1.5)
	num := 2*math.Pow(d, 5) - math.Pow(d, 3) + 2*r*d*d - 11*d + 5*r
	v := num/(8*math.Pow(d, 3)) - (sigma/alpha)*(sigma/alpha)
	return alpha * math.Max(0, v)
}

func TestGATFormulas(t *testing.T) {
	for _, alpha := range []float64{0.5, 1, 2, 7.5} {
		for _, sigma := range []float64{0, 0.3, 3, 12} {
			for _, z := range []float64{-20, -1, 0, 0.5, 1, 3, 10, 77, 255, 4000} {
				got, want := GAT(z, alpha, sigma), gatRef(z, alpha, sigma)
				if math.Abs(got-want) > 1e-12*math.Max(1, want) {
					t.Errorf("GAT(%v, %v, %v) = %.15g, formula %.15g", z, alpha, sigma, got, want)
				}
			}
			for _, d := range []float64{1.3, 1.7, 2, 3.5, 10, 31.6, 200} {
				got, want := InverseGAT(d, alpha, sigma), inverseRef(d, alpha, sigma)
				if math.Abs(got-want) > 1e-10*math.Max(1, want) {
					t.Errorf("InverseGAT(%v, %v, %v) = %.15g, formula %.15g", d, alpha, sigma, got, want)
				}
			}
		}
	}
	// Below f(0) = 2√(3/8) the inverse is 0 (this package's documented rule).
	for _, d := range []float64{-1, 0, 0.3, 0.6, 1.2} {
		if v := InverseGAT(d, 1, 0); v != 0 {
			t.Errorf("InverseGAT(%v) = %v, want 0", d, v)
		}
	}
}

// The inverse is (approximately) exactly unbiased: applied to E[f(z) | y] it
// gives back y. E[f(z)] is computed here by summing the Poisson law (and
// integrating the Gaussian on a fine grid). The closed form is an
// approximation; its published purpose is to be close to the exact inverse
// (Mäkitalo & Foi 2011); the 0.05 tolerance is this project's.
func TestInverseGATUnbiased(t *testing.T) {
	for _, st := range []float64{0, 0.5, 1.5, 3} {
		for _, y := range []float64{0.5, 1, 2, 5, 10, 50, 100} {
			var e float64
			p := math.Exp(-y)
			for k := 0; k < 600; k++ {
				if st == 0 {
					e += p * GAT(float64(k), 1, 0)
				} else {
					var g float64
					const dt = 0.02
					for u := -8.0; u <= 8; u += dt {
						g += math.Exp(-u*u/2) / math.Sqrt(2*math.Pi) * dt * GAT(float64(k)+st*u, 1, st)
					}
					e += p * g
				}
				p *= y / float64(k+1)
			}
			if got := InverseGAT(e, 1, st); math.Abs(got-y) > 0.05 {
				t.Errorf("σ̃ = %v, y = %v: InverseGAT(E[f(z)]) = %.4f", st, y, got)
			}
		}
	}
	// With a gain: z = α·Poisson(y/α) scales as the normalised case.
	if got, want := InverseGAT(GAT(20, 2, 3), 2, 3), 2*InverseGAT(GAT(10, 1, 1.5), 1, 1.5); math.Abs(got-want) > 1e-9 {
		t.Errorf("scaled inverse %v, want %v", got, want)
	}
}

// Source: Mäkitalo & Foi (2011, 2013): the Anscombe transform of Poisson
// data has variance close to 1 for means above a few counts (computed from
// the Poisson law: 0.983 at y = 3, within 0.2 % of 1 from y = 4 on).
func TestAnscombeStabilisesPoisson(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	const n = 6000
	for y := 1; y <= 100; y++ {
		var s, s2 float64
		for range n {
			v := GAT(poissonRand(rng, float64(y)), 1, 0)
			s += v
			s2 += v * v
		}
		m := s / n
		variance := (s2 - n*m*m) / (n - 1)
		if y >= 3 && math.Abs(variance-1) > 0.1 {
			t.Errorf("mean %d: stabilised variance %.3f, want 1 ± 0.1", y, variance)
		}
		if y == 1 && variance > 0.9 {
			// Below a few counts the stabilisation fails (0.72 from the
			// Poisson law): the check can tell.
			t.Errorf("mean 1: stabilised variance %.3f, expected well below 1", variance)
		}
	}
}

// pgSceneN is an invented gray scene, peak about 200: a dim shaded ground,
// soft blobs, and thin bright fibres (texture the estimator must ignore).
// fibres sets how many.
func pgSceneN(w, h int, seed uint64, fibres int) []float64 {
	rng := rand.New(rand.NewPCG(seed, 1))
	y := make([]float64, w*h)
	for j := 0; j < h; j++ {
		for i := 0; i < w; i++ {
			y[j*w+i] = 6 + 24*float64(i)/float64(w) + 8*float64(j)/float64(h)
		}
	}
	for range 14 {
		cx, cy := rng.Float64()*float64(w), rng.Float64()*float64(h)
		r := 15 + 45*rng.Float64()
		amp := 15 + 90*rng.Float64()
		for j := 0; j < h; j++ {
			for i := 0; i < w; i++ {
				dx, dy := float64(i)-cx, float64(j)-cy
				y[j*w+i] += amp * math.Exp(-(dx*dx+dy*dy)/(2*r*r))
			}
		}
	}
	for range fibres {
		y0, a := rng.Float64()*float64(h), 10+40*rng.Float64()
		period, phase := 60+200*rng.Float64(), 2*math.Pi*rng.Float64()
		amp := 20 + 30*rng.Float64()
		for i := 0; i < w; i++ {
			c := y0 + a*math.Sin(2*math.Pi*float64(i)/period+phase)
			for j := int(c) - 3; j <= int(c)+3; j++ {
				if j >= 0 && j < h {
					d := float64(j) - c
					y[j*w+i] += amp * math.Exp(-d*d/(2*0.8*0.8))
				}
			}
		}
	}
	return y
}

func pgNoisy(y []float64, w, h int, alpha, sigma float64, seed uint64) *patches.Image {
	rng := rand.New(rand.NewPCG(seed, 2))
	img := patches.New(w, h, 1, 8)
	for i, v := range y {
		img.Pix[i] = float32(alpha*poissonRand(rng, v/alpha) + sigma*rng.NormFloat64())
	}
	return img
}

// Truth α = 2, σ = 3 on the invented scene (and two other mixes); the
// 20 % tolerance is the project's acceptance level for a single-image fit.
func TestEstimatePoisson(t *testing.T) {
	const w, h = 768, 512
	y := pgSceneN(w, h, 21, 12)
	var peak float64
	for _, v := range y {
		peak = math.Max(peak, v)
	}
	if peak < 150 || peak > 250 {
		t.Fatalf("scene peak %.0f, meant to be about 200", peak)
	}
	for _, tc := range []struct {
		alpha, sigma float64
		checkSigma   bool
	}{
		{2, 3, true},
		{0.5, 6, true},
		// σ² = 2.25 is under a tenth of the variance in the darkest parts
		// (α·y ≈ 25): only α is well determined.
		{4, 1.5, false},
	} {
		img := pgNoisy(y, w, h, tc.alpha, tc.sigma, 22)
		a, s := EstimatePoisson(img, 0)
		t.Logf("peak %.0f: truth α=%.2f σ=%.2f, estimate α=%.3f σ=%.3f", peak, tc.alpha, tc.sigma, a, s)
		if math.Abs(a-tc.alpha) > 0.2*tc.alpha || (tc.checkSigma && math.Abs(s-tc.sigma) > 0.2*tc.sigma) {
			t.Errorf("α=%v σ=%v: estimate α=%.3f σ=%.3f, want within 20 %%", tc.alpha, tc.sigma, a, s)
		}
	}
	// Pure Gaussian noise: α ≈ 0, σ as added.
	img := patches.New(w, h, 1, 8)
	rng := rand.New(rand.NewPCG(23, 24))
	for i, v := range y {
		img.Pix[i] = float32(v + 5*rng.NormFloat64())
	}
	a, s := EstimatePoisson(img, 0)
	t.Logf("Gaussian only σ=5: estimate α=%.4f σ=%.3f", a, s)
	if a > 0.1 || math.Abs(s-5) > 0.5 {
		t.Errorf("Gaussian σ=5: estimate α=%.4f σ=%.3f", a, s)
	}
	// Known limit, logged: texture that is weak against the noise and
	// everywhere (40 fibres) passes the smoothness tests and raises α.
	dense := pgNoisy(pgSceneN(w, h, 21, 40), w, h, 2, 3, 22)
	a, s = EstimatePoisson(dense, 0)
	t.Logf("dense fibres, truth α=2 σ=3: estimate α=%.3f σ=%.3f", a, s)
}
