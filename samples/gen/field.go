package main

import "math"

// grid is a row-major float raster.
type grid struct {
	w, h int
	v    []float64
}

func newGrid(w, h int, fill float64) *grid {
	g := &grid{w: w, h: h, v: make([]float64, w*h)}
	for i := range g.v {
		g.v[i] = fill
	}
	return g
}

// blur applies a separable Gaussian with clamped edges: the optics of
// microscopes and scanners never deliver a perfectly sharp edge.
func (g *grid) blur(sigma float64) {
	rad := int(math.Ceil(3 * sigma))
	k := make([]float64, 2*rad+1)
	var sum float64
	for i := range k {
		d := float64(i - rad)
		k[i] = math.Exp(-d * d / (2 * sigma * sigma))
		sum += k[i]
	}
	for i := range k {
		k[i] /= sum
	}
	tmp := make([]float64, len(g.v))
	clamp := func(i, n int) int { return min(max(i, 0), n-1) }
	for y := 0; y < g.h; y++ {
		for x := 0; x < g.w; x++ {
			var s float64
			for i, kv := range k {
				s += kv * g.v[y*g.w+clamp(x+i-rad, g.w)]
			}
			tmp[y*g.w+x] = s
		}
	}
	for y := 0; y < g.h; y++ {
		for x := 0; x < g.w; x++ {
			var s float64
			for i, kv := range k {
				s += kv * tmp[clamp(y+i-rad, g.h)*g.w+x]
			}
			g.v[y*g.w+x] = s
		}
	}
}

// segment paints a round-capped segment of radius r into g, keeping the
// larger of the old value and val·coverage (overlapping ink does not stack).
func (g *grid) segment(x0, y0, x1, y1, r, val float64) {
	xa := max(int(math.Floor(min(x0, x1)-r-1)), 0)
	xb := min(int(math.Ceil(max(x0, x1)+r+1)), g.w-1)
	ya := max(int(math.Floor(min(y0, y1)-r-1)), 0)
	yb := min(int(math.Ceil(max(y0, y1)+r+1)), g.h-1)
	for y := ya; y <= yb; y++ {
		for x := xa; x <= xb; x++ {
			d := segDist(float64(x), float64(y), x0, y0, x1, y1)
			if c := clamp01(r + 0.5 - d); c > 0 {
				i := y*g.w + x
				g.v[i] = max(g.v[i], val*c)
			}
		}
	}
}

// polyline paints consecutive segments through pts.
func (g *grid) polyline(pts [][2]float64, r, val float64) {
	for i := 1; i < len(pts); i++ {
		g.segment(pts[i-1][0], pts[i-1][1], pts[i][0], pts[i][1], r, val)
	}
}

func segDist(px, py, x0, y0, x1, y1 float64) float64 {
	dx, dy := x1-x0, y1-y0
	l2 := dx*dx + dy*dy
	t := 0.0
	if l2 > 0 {
		t = clamp01(((px-x0)*dx + (py-y0)*dy) / l2)
	}
	return math.Hypot(px-x0-t*dx, py-y0-t*dy)
}

func clamp01(v float64) float64 { return min(max(v, 0), 1) }

func lerp(a, b, t float64) float64 { return a + (b-a)*t }

func smoothstep(e0, e1, x float64) float64 {
	t := clamp01((x - e0) / (e1 - e0))
	return t * t * (3 - 2*t)
}

// noise is a seeded 2-D gradient noise; the value is the seed.
type noise uint64

func (n noise) hash(ix, iy int64) uint64 {
	h := uint64(ix)*0x9E3779B97F4A7C15 ^ uint64(iy)*0xC2B2AE3D27D4EB4F ^ uint64(n)*0x165667B19E3779F9
	h ^= h >> 31
	h *= 0xBF58476D1CE4E5B9
	h ^= h >> 27
	h *= 0x94D049BB133111EB
	h ^= h >> 31
	return h
}

const s2 = 0.70710678118654752

var grads = [8][2]float64{{1, 0}, {-1, 0}, {0, 1}, {0, -1}, {s2, s2}, {-s2, s2}, {s2, -s2}, {-s2, -s2}}

// at returns gradient noise at (x, y), roughly within [-1, 1].
func (n noise) at(x, y float64) float64 {
	x0, y0 := math.Floor(x), math.Floor(y)
	fx, fy := x-x0, y-y0
	ix, iy := int64(x0), int64(y0)
	dot := func(i, j int64, dx, dy float64) float64 {
		g := grads[n.hash(ix+i, iy+j)&7]
		return g[0]*dx + g[1]*dy
	}
	fade := func(t float64) float64 { return t * t * t * (t*(t*6-15) + 10) }
	u, v := fade(fx), fade(fy)
	a := dot(0, 0, fx, fy)
	b := dot(1, 0, fx-1, fy)
	c := dot(0, 1, fx, fy-1)
	d := dot(1, 1, fx-1, fy-1)
	return 1.5 * lerp(lerp(a, b, u), lerp(c, d, u), v)
}

// fbm sums octaves of noise, normalised to about [-1, 1].
func (n noise) fbm(x, y float64, octaves int) float64 {
	var s, amp, norm float64 = 0, 1, 0
	for o := 0; o < octaves; o++ {
		s += amp * (n+noise(o)*7919).at(x+float64(o)*17.3, y-float64(o)*11.1)
		norm += amp
		amp *= 0.5
		x, y = x*2.03, y*2.03
	}
	return s / norm
}

// unit returns a hash of (ix, iy) as a float in [0, 1).
func (n noise) unit(ix, iy int64) float64 {
	return float64(n.hash(ix, iy)>>11) / (1 << 53)
}

// cells is Worley's cellular noise: the distances to the nearest and the
// second nearest of one jittered point per unit cell. F2−F1 is small on the
// walls between cells, which is how plant tissue is drawn.
func (n noise) cells(x, y float64) (f1, f2 float64) {
	cx, cy := int64(math.Floor(x)), int64(math.Floor(y))
	f1, f2 = 9, 9
	for j := int64(-1); j <= 1; j++ {
		for i := int64(-1); i <= 1; i++ {
			h := n.hash(cx+i, cy+j)
			px := float64(cx+i) + 0.1 + 0.8*float64(h&0xffff)/65535
			py := float64(cy+j) + 0.1 + 0.8*float64((h>>16)&0xffff)/65535
			d := math.Hypot(x-px, y-py)
			if d < f1 {
				f1, f2 = d, f1
			} else if d < f2 {
				f2 = d
			}
		}
	}
	return f1, f2
}
