package main

import (
	"math"
	"math/rand/v2"
)

// A scanned field-notebook page: ruled paper, cursive-like handwriting, a
// rubber-stamped box, a pencil sketch of a soil profile, and then dust,
// lint and two scratches from the scanner glass.

// glyph is a cursive letter shape: a pen path in x-height units (x to the
// right in letter widths, y up from the baseline) and lifted extras.
type glyph struct {
	w     float64
	pts   [][2]float64
	extra [][2][2]float64
}

var cursive = []glyph{
	{0.9, [][2]float64{{0, 0.1}, {0.15, 0.9}, {0.2, 0.05}, {0.35, 0.75}, {0.55, 0.9}, {0.65, 0.1}, {0.85, 0.15}}, nil},                                            // n
	{0.85, [][2]float64{{0, 0.9}, {0.05, 0.15}, {0.3, 0.05}, {0.5, 0.9}, {0.55, 0.1}, {0.8, 0.15}}, nil},                                                          // u
	{0.85, [][2]float64{{0, 0.2}, {0.45, 0.9}, {0.15, 0.7}, {0.2, 0.1}, {0.6, 0.2}, {0.5, 0.9}, {0.8, 0.8}}, nil},                                                 // o
	{0.75, [][2]float64{{0, 0.2}, {0.6, 0.55}, {0.45, 0.9}, {0.15, 0.55}, {0.3, 0.05}, {0.75, 0.15}}, nil},                                                        // e
	{0.9, [][2]float64{{0.55, 0.8}, {0.2, 0.85}, {0.05, 0.3}, {0.35, 0.05}, {0.6, 0.8}, {0.62, 0.1}, {0.85, 0.15}}, nil},                                          // a
	{0.7, [][2]float64{{0, 0.1}, {0.35, 1.3}, {0.45, 2.0}, {0.2, 1.9}, {0.2, 0.2}, {0.5, 0.05}, {0.7, 0.15}}, nil},                                                // l
	{0.9, [][2]float64{{0, 0.1}, {0.35, 1.3}, {0.4, 2.0}, {0.15, 1.8}, {0.1, 0}, {0.3, 0.7}, {0.5, 0.85}, {0.6, 0.1}, {0.8, 0.15}}, nil},                          // h
	{0.9, [][2]float64{{0.55, 0.8}, {0.2, 0.85}, {0.05, 0.3}, {0.35, 0.05}, {0.6, 0.8}, {0.6, -0.7}, {0.35, -0.95}, {0.15, -0.6}, {0.6, -0.1}, {0.85, 0.2}}, nil}, // g
	{0.5, [][2]float64{{0, 0.1}, {0.2, 0.9}, {0.25, 0.1}, {0.5, 0.15}}, [][2][2]float64{{{0.27, 1.4}, {0.31, 1.47}}}},                                             // i
	{0.6, [][2]float64{{0, 0.1}, {0.25, 1.5}, {0.3, 0.15}, {0.55, 0.15}}, [][2][2]float64{{{0.0, 0.95}, {0.6, 1.02}}}},                                            // t
	{0.7, [][2]float64{{0, 0.1}, {0.2, 0.85}, {0.3, 0.65}, {0.5, 0.85}, {0.45, 0.05}, {0.7, 0.15}}, nil},                                                          // r
	{0.6, [][2]float64{{0, 0.1}, {0.35, 0.9}, {0.45, 0.4}, {0.2, 0.05}, {0.05, 0.15}, {0.3, 0.1}, {0.6, 0.15}}, nil},                                              // s
	{0.9, [][2]float64{{0.55, 0.8}, {0.2, 0.85}, {0.05, 0.3}, {0.35, 0.05}, {0.6, 0.6}, {0.7, 2.0}, {0.62, 0.1}, {0.85, 0.15}}, nil},                              // d
	{0.8, [][2]float64{{0, 0.9}, {0.05, 0.15}, {0.3, 0.05}, {0.5, 0.9}, {0.45, -0.8}, {0.2, -0.9}, {0.25, -0.4}, {0.7, 0.1}}, nil},                                // y
	{0.7, [][2]float64{{0.55, 0.75}, {0.35, 0.9}, {0.05, 0.5}, {0.2, 0.05}, {0.7, 0.15}}, nil},                                                                    // c
	{1.0, [][2]float64{{0, 0.1}, {0.12, 0.9}, {0.17, 0.05}, {0.3, 0.8}, {0.42, 0.85}, {0.48, 0.05}, {0.6, 0.8}, {0.75, 0.85}, {0.8, 0.1}, {1.0, 0.15}}, nil},      // m
}

// catmull returns a Catmull–Rom spline through pts, n samples per span.
func catmull(pts [][2]float64, n int) [][2]float64 {
	if len(pts) < 2 {
		return pts
	}
	get := func(i int) [2]float64 { return pts[min(max(i, 0), len(pts)-1)] }
	var out [][2]float64
	for i := 0; i < len(pts)-1; i++ {
		p0, p1, p2, p3 := get(i-1), get(i), get(i+1), get(i+2)
		for j := 0; j < n; j++ {
			t := float64(j) / float64(n)
			t2, t3 := t*t, t*t*t
			var q [2]float64
			for c := range q {
				q[c] = 0.5 * (2*p1[c] + (-p0[c]+p2[c])*t + (2*p0[c]-5*p1[c]+4*p2[c]-p3[c])*t2 + (-p0[c]+3*p1[c]-3*p2[c]+p3[c])*t3)
			}
			out = append(out, q)
		}
	}
	return append(out, pts[len(pts)-1])
}

type writer struct {
	r     *rand.Rand
	ink   *grid
	press noise
}

// stroke draws a pen line whose width and ink load wander along it.
func (wr *writer) stroke(pts [][2]float64, r0, load float64) {
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		p := wr.press.at(a[0]/9, a[1]/9)
		wr.ink.segment(a[0], a[1], b[0], b[1], r0*(1+0.25*p), load*(0.9+0.1*p))
	}
}

// word writes n random letters from x on baseline base and returns the end.
func (wr *writer) word(x, base, xh float64, n int, slant float64) float64 {
	r := wr.r
	var pts [][2]float64
	var extras [][2][2]float64
	place := func(lx, px, py float64, g glyph) [2]float64 {
		X := lx + px*g.w*xh
		Y := base - py*xh
		return [2]float64{X + (base-Y)*slant, Y}
	}
	for range n {
		g := cursive[r.IntN(len(cursive))]
		for _, p := range g.pts {
			q := place(x, p[0]+r.NormFloat64()*0.04, p[1]+r.NormFloat64()*0.05, g)
			pts = append(pts, q)
		}
		for _, e := range g.extra {
			extras = append(extras, [2][2]float64{place(x, e[0][0], e[0][1], g), place(x, e[1][0], e[1][1], g)})
		}
		x += g.w * xh * (0.95 + 0.1*r.Float64())
	}
	load := 0.82 + 0.12*r.Float64()
	wr.stroke(catmull(pts, 5), 0.62, load)
	for _, e := range extras {
		wr.stroke([][2]float64{e[0], e[1]}, 0.6, load)
	}
	return x
}

func wordWidth(n int, xh float64) float64 { return float64(n) * 0.8 * xh }

type rect struct{ x0, y0, x1, y1 float64 }

func (a rect) hits(b rect) bool { return a.x0 < b.x1 && b.x0 < a.x1 && a.y0 < b.y1 && b.y0 < a.y1 }

// wobbly returns a hand-drawn line from a to b.
func wobbly(r *rand.Rand, a, b [2]float64, amp float64) [][2]float64 {
	n := int(math.Hypot(b[0]-a[0], b[1]-a[1])/6) + 2
	out := make([][2]float64, n+1)
	off := 0.0
	for i := 0; i <= n; i++ {
		t := float64(i) / float64(n)
		if i > 0 && i < n {
			off = 0.6*off + r.NormFloat64()*amp
		} else {
			off = 0
		}
		dx, dy := b[0]-a[0], b[1]-a[1]
		l := math.Hypot(dx, dy)
		out[i] = [2]float64{a[0] + t*dx - dy/l*off, a[1] + t*dy + dx/l*off}
	}
	return out
}

// Block capitals of the stamp, as 14-segment masks over a unit cell.
var segs = [14][2][2]float64{
	{{0, 1}, {1, 1}}, {{0, 0.5}, {1, 0.5}}, {{0, 0}, {1, 0}}, // top, middle, bottom
	{{0, 0.5}, {0, 1}}, {{0, 0}, {0, 0.5}}, {{1, 0.5}, {1, 1}}, {{1, 0}, {1, 0.5}}, // sides
	{{0, 1}, {0.5, 0.5}}, {{1, 1}, {0.5, 0.5}}, {{0, 0}, {0.5, 0.5}}, {{1, 0}, {0.5, 0.5}}, // diagonals
	{{0.5, 0}, {0.5, 1}}, {{0.5, 0.5}, {1, 0}}, {{0.5, 0.5}, {0.85, 0.15}}, // centre, legs
}

var capitals = map[rune]uint16{
	'A': 1<<0 | 1<<1 | 1<<3 | 1<<4 | 1<<5 | 1<<6,
	'B': 1<<0 | 1<<1 | 1<<2 | 1<<3 | 1<<4 | 1<<5 | 1<<6,
	'D': 1<<0 | 1<<2 | 1<<3 | 1<<4 | 1<<5 | 1<<6,
	'E': 1<<0 | 1<<1 | 1<<2 | 1<<3 | 1<<4,
	'I': 1<<0 | 1<<2 | 1<<11,
	'L': 1<<2 | 1<<3 | 1<<4,
	'N': 1<<3 | 1<<4 | 1<<5 | 1<<6 | 1<<7 | 1<<10,
	'O': 1<<0 | 1<<2 | 1<<3 | 1<<4 | 1<<5 | 1<<6,
	'Q': 1<<0 | 1<<2 | 1<<3 | 1<<4 | 1<<5 | 1<<6 | 1<<13,
	'R': 1<<0 | 1<<1 | 1<<3 | 1<<4 | 1<<5 | 1<<12,
	'S': 1<<0 | 1<<1 | 1<<2 | 1<<3 | 1<<6,
	'U': 1<<2 | 1<<3 | 1<<4 | 1<<5 | 1<<6,
	'0': 1<<0 | 1<<2 | 1<<3 | 1<<4 | 1<<5 | 1<<6 | 1<<8 | 1<<9,
	'.': 0,
}

// notebook renders the clean page and the scan defects: coverage in [0, 1]
// and the value each defect burns in.
func notebook(r *rand.Rand, w, h int) (page, cov, val *grid) {
	tex, fine, fib := noise(r.Uint64()), noise(r.Uint64()), noise(r.Uint64())
	page = newGrid(w, h, 0)
	const ruleGap, ruleTop, margin = 21.0, 62.0, 44.0
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			fx, fy := float64(x), float64(y)
			v := 226 + 7*tex.fbm(fx/90, fy/90, 3)
			v += 2.5*fib.fbm(fx/7, fy/2.2, 2) + 2.5*fib.fbm(fy/6, fx/2.5+50, 2) + 1.8*fine.at(fx/1.3, fy/1.3)
			v -= 28 * math.Exp(-fx/12) // shadow of the binding
			if fy >= ruleTop-2 {
				k := math.Round((fy - ruleTop) / ruleGap)
				d := math.Abs(fy - (ruleTop + k*ruleGap + 0.4*tex.at(fx/60, k)))
				v = lerp(v, 168, 0.75*clamp01(1-d))
			}
			v = lerp(v, 150, 0.8*clamp01(1.2-math.Abs(fx-margin)))
			page.v[y*w+x] = v
		}
	}

	wr := &writer{r: r, ink: newGrid(w, h, 0), press: noise(r.Uint64())}
	stamp := rect{58, 270, 172, 326}
	sketch := rect{214, 228, 302, 350}
	// Heading with an underline.
	x := margin + 10
	for _, n := range []int{5, 3, 6} {
		x = wr.word(x, 36, 9, n, 0.25) + 10
	}
	wr.stroke(wobbly(r, [2]float64{margin + 6, 42}, [2]float64{x - 4, 43}, 0.4), 0.6, 0.85)
	// Running text on the rules, flowing around the stamp and the sketch.
	for line := 0; ruleTop+float64(line)*ruleGap < float64(h)-12; line++ {
		base := ruleTop + float64(line)*ruleGap - 1.5
		if line == 4 || line == 9 {
			continue // paragraph breaks
		}
		end := float64(w) - 14
		if line == 3 || line == 8 || line == 13 {
			end = margin + 60 + 140*r.Float64()
		}
		x := margin + 6 + 3*r.Float64()
		if line == 0 || line == 5 || line == 10 {
			x += 14
		}
		for {
			n := 2 + r.IntN(6)
			ww := wordWidth(n, 7)
			box := rect{x - 2, base - 16, x + ww + 4, base + 8}
			for _, o := range []rect{stamp, sketch} {
				if box.hits(o) {
					x = o.x1 + 6
					box = rect{x - 2, base - 16, x + ww + 4, base + 8}
				}
			}
			if x+ww > end {
				break
			}
			x = wr.word(x, base+r.NormFloat64()*0.3, 7, n, 0.22) + 5 + 3*r.Float64()
		}
	}

	// Pencil sketch: a profile with wavy horizon boundaries, stipple,
	// root dashes and stones. Pencil is paler and grainy.
	pencil := newGrid(w, h, 0)
	draw := func(pts [][2]float64) { pencil.polyline(pts, 0.5, 0.8) }
	sx0, sy0, sx1, sy1 := sketch.x0+6, sketch.y0+6, sketch.x1-6, sketch.y1-6
	draw(wobbly(r, [2]float64{sx0, sy0}, [2]float64{sx1, sy0}, 0.5))
	draw(wobbly(r, [2]float64{sx1, sy0}, [2]float64{sx1, sy1}, 0.5))
	draw(wobbly(r, [2]float64{sx1, sy1}, [2]float64{sx0, sy1}, 0.5))
	draw(wobbly(r, [2]float64{sx0, sy1}, [2]float64{sx0, sy0}, 0.5))
	hz := []float64{sy0 + 30, sy0 + 68}
	for _, yy := range hz {
		var pts [][2]float64
		ph := r.Float64() * 6
		for xx := sx0; xx <= sx1; xx += 2 {
			pts = append(pts, [2]float64{xx, yy + 3*math.Sin(xx/9+ph) + r.NormFloat64()*0.3})
		}
		draw(pts)
	}
	for range 90 {
		px, py := sx0+3+(sx1-sx0-6)*r.Float64(), sy0+3+(hz[0]-sy0-8)*r.Float64()
		pencil.segment(px, py, px+0.3, py+0.2, 0.55, 0.8)
	}
	for range 16 {
		px, py := sx0+4+(sx1-sx0-8)*r.Float64(), hz[0]+6+(hz[1]-hz[0]-14)*r.Float64()
		a := math.Pi/2 + r.NormFloat64()*0.4
		l := 4 + 5*r.Float64()
		pencil.segment(px, py, px+l*math.Cos(a), py+l*math.Sin(a), 0.45, 0.8)
	}
	for range 9 {
		px, py := sx0+6+(sx1-sx0-12)*r.Float64(), hz[1]+8+(sy1-hz[1]-14)*r.Float64()
		rad := 2 + 2.5*r.Float64()
		var pts [][2]float64
		for i := 0; i <= 12; i++ {
			a := float64(i) / 12 * 2 * math.Pi
			rr := rad * (1 + 0.15*math.Sin(3*a+px))
			pts = append(pts, [2]float64{px + rr*math.Cos(a), py + rr*math.Sin(a)})
		}
		draw(pts)
	}

	// Rubber stamp, slightly rotated, with uneven ink.
	stampInk := newGrid(w, h, 0)
	ang := -0.07
	cx, cy := (stamp.x0+stamp.x1)/2, (stamp.y0+stamp.y1)/2
	tr := func(u, v float64) [2]float64 {
		return [2]float64{cx + u*math.Cos(ang) - v*math.Sin(ang), cy + u*math.Sin(ang) + v*math.Cos(ang)}
	}
	hw, hh := (stamp.x1-stamp.x0)/2-4, (stamp.y1-stamp.y0)/2-4
	box := func(inset, rad float64) {
		c := [][2]float64{tr(-hw+inset, -hh+inset), tr(hw-inset, -hh+inset), tr(hw-inset, hh-inset), tr(-hw+inset, hh-inset), tr(-hw+inset, -hh+inset)}
		stampInk.polyline(c, rad, 1)
	}
	box(0, 1.1)
	box(3.5, 0.55)
	text := func(s string, u0, v0, cw, ch float64) {
		for i, c := range s {
			m := capitals[c]
			for k, sg := range segs {
				if m&(1<<k) != 0 {
					a := tr(u0+float64(i)*(cw+2.6)+sg[0][0]*cw, v0-sg[0][1]*ch)
					b := tr(u0+float64(i)*(cw+2.6)+sg[1][0]*cw, v0-sg[1][1]*ch)
					stampInk.segment(a[0], a[1], b[0], b[1], 0.6, 1)
				}
			}
		}
	}
	text("QUARRENDEL", -hw+8, -hh+15, 5.4, 8)
	text("SOIL LAB", -hw+16, -hh+28, 5.4, 8)
	stampInk.polyline([][2]float64{tr(-hw+30, hh-7), tr(hw-8, hh-7)}, 0.5, 1)
	text("NO.", -hw+8, hh-7, 3.6, 5.5)
	// A sample number written over the stamp's field line.
	nw := wr.word(stamp.x0+40, stamp.y1-12, 6, 3, 0.2)
	wr.stroke([][2]float64{{nw + 2, stamp.y1 - 15}, {nw + 8, stamp.y1 - 16}}, 0.55, 0.85)

	for i := range page.v {
		x, y := float64(i%w), float64(i/w)
		v := page.v[i]
		grain := 0.65 + 0.35*fine.at(x/0.9, y/0.9)
		v = lerp(v, 112, pencil.v[i]*clamp01(grain))
		load := clamp01(0.55 + 0.6*tex.fbm(x/5, y/5, 3))
		v = lerp(v, 96, stampInk.v[i]*load)
		v = lerp(v, 38, wr.ink.v[i])
		page.v[i] = v
	}
	page.blur(0.55)

	// Scan defects: dust specks, lint, two scratches.
	cov, val = newGrid(w, h, 0), newGrid(w, h, 0)
	paint := func(x, y, c, v float64) {
		xi, yi := int(x), int(y)
		if xi < 0 || yi < 0 || xi >= w || yi >= h || c <= 0 {
			return
		}
		i := yi*w + xi
		if c > cov.v[i] {
			cov.v[i], val.v[i] = c, v
		}
	}
	seg := func(a, b [2]float64, rad, v float64) {
		for y := int(min(a[1], b[1]) - rad - 2); y <= int(max(a[1], b[1])+rad+2); y++ {
			for x := int(min(a[0], b[0]) - rad - 2); x <= int(max(a[0], b[0])+rad+2); x++ {
				d := segDist(float64(x), float64(y), a[0], a[1], b[0], b[1])
				paint(float64(x), float64(y), clamp01(rad+0.5-d), v)
			}
		}
	}
	for range 26 {
		x0, y0 := float64(w)*r.Float64(), float64(h)*r.Float64()
		rad := 0.6 + 2.2*math.Pow(r.Float64(), 1.5)
		v := 10 + 20*r.Float64()
		if r.IntN(4) == 0 {
			v = 246 + 6*r.Float64()
		}
		ph := r.Float64() * 6
		for y := int(y0 - rad - 3); y <= int(y0+rad+3); y++ {
			for x := int(x0 - rad - 3); x <= int(x0+rad+3); x++ {
				dx, dy := float64(x)-x0, float64(y)-y0
				a := math.Atan2(dy, dx)
				rr := rad * (1 + 0.3*math.Sin(3*a+ph)*math.Cos(2*a-ph))
				paint(float64(x), float64(y), clamp01(rr+0.5-math.Hypot(dx, dy)), v)
			}
		}
	}
	for range 2 {
		p := walk(r, float64(w)*r.Float64(), float64(h)*r.Float64(), r.Float64()*6, 1.5, 12+r.IntN(14), 0.25, 0.4, 0)
		for i := 1; i < len(p.pts); i++ {
			seg(p.pts[i-1], p.pts[i], 0.4, 20)
		}
	}
	scratches := []struct {
		a, b [2]float64
		bend float64
		v    float64
	}{
		{[2]float64{-5, float64(h) * (0.15 + 0.2*r.Float64())}, [2]float64{float64(w) + 5, float64(h) * (0.5 + 0.2*r.Float64())}, 18, 250},
		{[2]float64{float64(w) * (0.55 + 0.2*r.Float64()), -5}, [2]float64{float64(w) * (0.3 + 0.2*r.Float64()), float64(h) + 5}, -12, 16},
	}
	for _, s := range scratches {
		var prev [2]float64
		for i := 0; i <= 80; i++ {
			t := float64(i) / 80
			dx, dy := s.b[0]-s.a[0], s.b[1]-s.a[1]
			l := math.Hypot(dx, dy)
			off := s.bend * 4 * t * (1 - t)
			q := [2]float64{s.a[0] + t*dx - dy/l*off, s.a[1] + t*dy + dx/l*off}
			if i > 0 {
				seg(prev, q, 0.55, s.v)
			}
			prev = q
		}
	}
	return page, cov, val
}
