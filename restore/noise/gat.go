package noise

import (
	"fmt"
	"math"

	"tessera/patches"
)

// Photon-limited noise model: z = α·p + n with p ~ Poisson(y/α) and
// n ~ N(0, σ²), so that E[z] = y and Var[z] = α·y + σ².

// GAT is the generalized Anscombe transform (Murtagh, Starck & Bijaoui
// 1995, as written in Mäkitalo & Foi 2013, IEEE TIP 22(1), with zero
// Gaussian mean):
//
//	f(z) = (2/α)·√max(0, α·z + (3/8)·α² + σ²)
//
// which makes Poisson–Gaussian data of gain α and Gaussian deviation σ
// approximately unit-variance Gaussian. GAT panics unless α > 0.
func GAT(z, alpha, sigma float64) float64 {
	checkAlpha(alpha)
	return 2 / alpha * math.Sqrt(math.Max(0, alpha*z+0.375*alpha*alpha+sigma*sigma))
}

// gatFloor is f(0) of the pure Poisson transform, 2·√(3/8): the closed-form
// inverse below is 0 there and increasing above, and it turns back up (not
// monotone) below, so smaller values map to 0.
var gatFloor = 2 * math.Sqrt(0.375)

// InverseGAT is the closed-form approximation of the exact unbiased inverse
// of GAT (Mäkitalo & Foi 2011, IEEE TIP 20(9); extended to
// Poisson–Gaussian data in Mäkitalo & Foi 2013): with σ̃ = σ/α,
//
//	I(D) = ¼D² + ¼√(3/2)·D⁻¹ − (11/8)·D⁻² + (5/8)√(3/2)·D⁻³ − ⅛ − σ̃²,
//
// and z = α·max(0, I(D)). Values D < 2√(3/8) return 0 (see gatFloor; the
// clamp to 0 is the published one, extended to where the approximation
// stops being monotone). InverseGAT panics unless α > 0.
func InverseGAT(d, alpha, sigma float64) float64 {
	checkAlpha(alpha)
	if !(d >= gatFloor) {
		return 0
	}
	s := sigma / alpha
	r := math.Sqrt(1.5)
	d2 := d * d
	v := 0.25*d2 + 0.25*r/d - 11.0/8/d2 + 5.0/8*r/(d2*d) - 0.125 - s*s
	return alpha * math.Max(0, v)
}

// GATImage applies GAT to every sample of img. The result keeps img's size
// and depth but is in stabilised units (noise of unit deviation), not in
// the image's units.
func GATImage(img *patches.Image, alpha, sigma float64) *patches.Image {
	checkAlpha(alpha)
	out := img.Clone()
	for i, v := range out.Pix {
		out.Pix[i] = float32(GAT(float64(v), alpha, sigma))
	}
	return out
}

// InverseGATImage applies InverseGAT to every sample of a stabilised image,
// returning values in the original image's units.
func InverseGATImage(img *patches.Image, alpha, sigma float64) *patches.Image {
	checkAlpha(alpha)
	out := img.Clone()
	for i, v := range out.Pix {
		out.Pix[i] = float32(InverseGAT(float64(v), alpha, sigma))
	}
	return out
}

func checkAlpha(alpha float64) {
	if !(alpha > 0) || math.IsInf(alpha, 1) {
		panic(fmt.Sprintf("noise: Anscombe gain α = %v, must be positive and finite", alpha))
	}
}
