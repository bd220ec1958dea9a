package main

import (
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
)

// A specimen is a soil thin section laid out in pixel coordinates: a clay
// groundmass holding sand and silt grains, resin-filled pores (rounded
// vughs and winding channels), roots in the channels and in cross-section,
// and thin root hairs. The same layout renders in transmitted light (gray or
// stained colour) and as autofluorescence.

type material int

const (
	matGround material = iota
	matQuartz
	matFeldspar
	matMica
	matCalcite
	matOpaque
	matResin
	matWall  // plant cell walls
	matLumen // plant cell interiors
	matFibre // root hairs
	nMat
)

// palette maps materials to a transmitted-light colour (0..255) and a
// relative fluorescence yield.
type palette struct {
	col  [nMat][3]float64
	fluo [nMat]float64
}

func grayPalette() *palette {
	p := &palette{}
	for m, v := range [nMat]float64{118, 214, 190, 96, 170, 24, 238, 66, 142, 70} {
		p.col[m] = [3]float64{v, v, v}
	}
	p.fluo = [nMat]float64{4.5, 0.4, 0.9, 0.7, 1.6, 0.1, 0.8, 30, 7, 32}
	return p
}

// stainedPalette: blue-dyed resin in the pores and carbonate stained pink.
func stainedPalette() *palette {
	p := grayPalette()
	p.col = [nMat][3]float64{
		{156, 114, 76},  // groundmass
		{232, 229, 219}, // quartz
		{216, 206, 192}, // feldspar
		{128, 84, 44},   // mica
		{226, 146, 158}, // calcite
		{30, 25, 22},    // opaque
		{96, 146, 222},  // resin
		{92, 52, 28},    // cell walls
		{182, 128, 74},  // cell interiors
		{86, 48, 26},    // root hairs
	}
	return p
}

type grain struct {
	cx, cy, r     float64
	cos, sin, asp float64
	amp, ph       [4]float64
	mat           material
	shade, relief float64
	cleave, space float64
	cracks        [][2][2]float64
	bound         float64
	rootSection   bool
	gate          noise
	roughAmp      float64
	poly          [][2]float64 // outline vertices in grain units, by angle
	polyAng       []float64
	round         float64
}

type path struct {
	pts   [][2]float64
	cum   []float64
	hw    []float64
	maxW  float64
	boxes []segRun
	root  bool
	wn    noise // a root fills the middle of this channel
}

type specimen struct {
	w, h     float64
	channels []*path
	fibres   []*path
	vughs    []*grain
	silt     []*grain
	grains   []*grain
	tex      noise
	fine     noise
}

func newGrain(r *rand.Rand, cx, cy, rad float64, m material) *grain {
	g := &grain{cx: cx, cy: cy, r: rad, mat: m}
	a := r.Float64() * math.Pi
	g.cos, g.sin = math.Cos(a), math.Sin(a)
	g.asp = 0.6 + 0.4*r.Float64()
	if m == matMica {
		g.asp = 0.22 + 0.16*r.Float64()
	}
	sum := 0.0
	for k := range g.amp {
		g.amp[k] = 0.14 * r.Float64() / float64(k+1)
		g.ph[k] = 2 * math.Pi * r.Float64()
		sum += g.amp[k]
	}
	g.shade = r.NormFloat64()
	g.relief = [nMat]float64{0, 0.5, 0.55, 0.6, 0.65, 0, 0, 0.2, 0.2, 0}[m]
	g.cleave = r.Float64() * math.Pi
	g.space = 4 + 4*r.Float64()
	if m == matMica {
		g.cleave = a + math.Pi/2 // lines run along the long axis
		g.space = 2.4 + 1.2*r.Float64()
	}
	g.gate = noise(r.Uint64())
	g.roughAmp = 0.25 + 0.5*r.Float64()
	if m != matMica && m != matResin && m != matWall && r.IntN(10) < 7 {
		// Subangular sand: a jittered polygon, its corners part-rounded.
		n := 5 + r.IntN(5)
		for i := range n {
			a := (float64(i)+0.7*r.Float64())/float64(n)*2*math.Pi - math.Pi
			rr := min(max(1+0.16*r.NormFloat64(), 0.7), 1.3)
			g.polyAng = append(g.polyAng, a)
			g.poly = append(g.poly, [2]float64{rr * math.Cos(a), rr * math.Sin(a)})
		}
		g.round = 0.5 * r.Float64()
		for k := range g.amp {
			g.amp[k] *= 0.3
		}
		sum = 0.3*sum + 0.3
	}
	g.bound = rad*(1+sum) + 3
	nCracks := 0
	switch m {
	case matQuartz:
		nCracks = r.IntN(4)
	case matFeldspar, matCalcite:
		nCracks = r.IntN(2)
	}
	for range nCracks {
		x, y := cx+(r.Float64()-0.5)*rad, cy+(r.Float64()-0.5)*rad
		dir := r.Float64() * 2 * math.Pi
		for range 4 {
			step := rad * (0.3 + 0.3*r.Float64())
			nx, ny := x+step*math.Cos(dir), y+step*math.Sin(dir)
			g.cracks = append(g.cracks, [2][2]float64{{x, y}, {nx, ny}})
			x, y = nx, ny
			dir += r.NormFloat64() * 0.5
		}
	}
	return g
}

// depth is the approximate distance (pixels) from (x, y) inward to the
// grain's outline: positive inside, negative outside.
func (g *grain) depth(x, y float64, rough noise) float64 {
	dx, dy := x-g.cx, y-g.cy
	if math.Abs(dx) > g.bound || math.Abs(dy) > g.bound {
		return -1e9
	}
	u := dx*g.cos + dy*g.sin
	v := (-dx*g.sin + dy*g.cos) / g.asp
	rho := math.Hypot(u, v)
	th := math.Atan2(v, u)
	R := 1.0
	if g.poly != nil {
		R = lerp(g.polyRadius(th), 1, g.round)
	}
	for k := range g.amp {
		R += g.amp[k] * math.Cos(float64(k+2)*th+g.ph[k])
	}
	R *= g.r
	c, s := math.Cos(th), math.Sin(th)
	scale := math.Sqrt(c*c + s*s/(g.asp*g.asp))
	return (R-rho)/scale + g.roughAmp*rough.at(x/5, y/5)
}

// polyRadius is the distance from the centre to the outline polygon along
// direction th.
func (g *grain) polyRadius(th float64) float64 {
	n := len(g.poly)
	j := n - 1 // the edge from the last vertex wraps round through ±π
	for i := range n {
		if g.polyAng[i] > th {
			j = (i + n - 1) % n
			break
		}
	}
	p, q := g.poly[j], g.poly[(j+1)%n]
	ex, ey := q[0]-p[0], q[1]-p[1]
	dx, dy := math.Cos(th), math.Sin(th)
	return (p[0]*ey - p[1]*ex) / (dx*ey - dy*ex)
}

// walk makes a wandering path of n steps with smoothly varying half width.
func walk(r *rand.Rand, x, y, heading, step float64, n int, wiggle, hw0, hwVar float64) *path {
	p := &path{}
	turn := 0.0
	wn := noise(r.Uint64())
	p.wn = wn
	for i := 0; i < n; i++ {
		p.pts = append(p.pts, [2]float64{x, y})
		hw := hw0 * (1 + hwVar*wn.fbm(float64(i)*0.13, 0.5, 3))
		p.hw = append(p.hw, hw)
		p.maxW = max(p.maxW, hw)
		turn = 0.75*turn + r.NormFloat64()*wiggle
		heading += turn
		x += step * math.Cos(heading)
		y += step * math.Sin(heading)
	}
	p.cum = make([]float64, len(p.pts))
	for i := 1; i < len(p.pts); i++ {
		p.cum[i] = p.cum[i-1] + math.Hypot(p.pts[i][0]-p.pts[i-1][0], p.pts[i][1]-p.pts[i-1][1])
	}
	p.index()
	return p
}

// nearest returns the distance from (x, y) to the centreline, the arc length
// s and signed offset t of the closest point, and the half width there.
// ok is false when the point is far from the path.
func (p *path) nearest(x, y float64) (d, s, t, hw float64, ok bool) {
	d = math.Inf(1)
	for _, bx := range p.boxes {
		if x < bx.x0 || x > bx.x1 || y < bx.y0 || y > bx.y1 {
			continue
		}
		for i := max(bx.from, 1); i < bx.to; i++ {
			a, b := p.pts[i-1], p.pts[i]
			seg := p.cum[i] - p.cum[i-1]
			dx, dy := b[0]-a[0], b[1]-a[1]
			u := clamp01(((x-a[0])*dx + (y-a[1])*dy) / (seg * seg))
			px, py := a[0]+u*dx, a[1]+u*dy
			if dd := math.Hypot(x-px, y-py); dd < d {
				d = dd
				s = p.cum[i-1] + u*seg
				t = ((x-a[0])*dy - (y-a[1])*dx) / seg
				hw = lerp(p.hw[i-1], p.hw[i], u)
				ok = true
			}
		}
	}
	return d, s, t, hw, ok
}

// index groups the segments into runs with bounding boxes, widened so that
// everything nearest cares about (width plus the coating fringe) is inside.
func (p *path) index() {
	const run = 8
	reach := p.maxW + 6
	for from := 0; from < len(p.pts); from += run {
		to := min(from+run+1, len(p.pts))
		b := rect{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}
		for _, q := range p.pts[from:to] {
			b.x0, b.y0 = min(b.x0, q[0]-reach), min(b.y0, q[1]-reach)
			b.x1, b.y1 = max(b.x1, q[0]+reach), max(b.y1, q[1]+reach)
		}
		p.boxes = append(p.boxes, segRun{b, from, to})
	}
}

type segRun struct {
	rect
	from, to int
}

func newSpecimen(r *rand.Rand, w, h float64) *specimen {
	s := &specimen{w: w, h: h, tex: noise(r.Uint64()), fine: noise(r.Uint64())}
	// Channels enter at the left edge and wander across.
	for i := range 1 + r.IntN(2) {
		y := h * (0.25 + 0.5*r.Float64())
		c := walk(r, -20, y, (r.Float64()-0.5)*0.8, 5, int(w*1.5/5), 0.06, 7+5*r.Float64(), 0.45)
		c.root = i == 0 || r.IntN(2) == 0
		s.channels = append(s.channels, c)
	}
	inPore := func(x, y, margin float64) bool {
		for _, c := range s.channels {
			if d, _, _, hw, ok := c.nearest(x, y); ok && d < hw+margin {
				return true
			}
		}
		for _, v := range s.vughs {
			if v.depth(x, y, s.fine) > -margin {
				return true
			}
		}
		return false
	}
	for range 3 + r.IntN(3) {
		for range 50 {
			x, y := w*r.Float64(), h*r.Float64()
			rad := 8 + 14*r.Float64()
			if inPore(x, y, rad+4) {
				continue
			}
			v := newGrain(r, x, y, rad, matResin)
			v.asp = 0.45 + 0.5*r.Float64()
			for k := range v.amp {
				v.amp[k] *= 1.8
			}
			s.vughs = append(s.vughs, v)
			break
		}
	}
	// Sand grains and root cross-sections, placed without much overlap.
	area := 0.0
	fits := func(x, y, e float64) bool {
		if inPore(x, y, e*0.6) {
			return false
		}
		for _, g := range s.grains {
			ge := g.r * (0.5 + 0.5*g.asp)
			if math.Hypot(x-g.cx, y-g.cy) < 0.85*(e+ge) {
				return false
			}
		}
		return true
	}
	for range 1 + r.IntN(2) {
		for range 200 {
			x, y, rad := w*r.Float64(), h*r.Float64(), 12+8*r.Float64()
			if fits(x, y, rad) && !inPore(x, y, rad+3) {
				g := newGrain(r, x, y, rad, matWall)
				g.rootSection, g.asp, g.relief = true, 0.8+0.2*g.asp, 0.15
				for k := range g.amp {
					g.amp[k] *= 0.4
				}
				s.grains = append(s.grains, g)
				break
			}
		}
	}
	for try := 0; try < 4000 && area < 0.42*w*h; try++ {
		x, y := -10+(w+20)*r.Float64(), -10+(h+20)*r.Float64()
		rad := 6 + 24*math.Pow(r.Float64(), 2.2)
		m := matQuartz
		switch u := r.Float64(); {
		case u < 0.2:
			m = matFeldspar
		case u < 0.28:
			m = matMica
			rad *= 1.4
		case u < 0.38:
			m = matCalcite
		case u < 0.45:
			m = matOpaque
			rad = 3 + 4*r.Float64()
		}
		g := newGrain(r, x, y, rad, m)
		e := rad * (0.5 + 0.5*g.asp)
		if !fits(x, y, e) {
			continue
		}
		s.grains = append(s.grains, g)
		area += math.Pi * rad * rad * g.asp
	}
	// Silt: many tiny grains in the groundmass.
	for range int(w * h / 160) {
		x, y := w*r.Float64(), h*r.Float64()
		rad := 1 + 1.6*r.Float64()
		if inPore(x, y, rad+1) {
			continue
		}
		clash := false
		for _, g := range s.grains {
			if g.depth(x, y, s.fine) > -rad-1 {
				clash = true
				break
			}
		}
		if clash {
			continue
		}
		m := matQuartz
		switch r.IntN(10) {
		case 0, 1:
			m = matOpaque
		case 2:
			m = matFibre // organic fragments
		}
		g := newGrain(r, x, y, rad, m)
		g.cracks, g.roughAmp, g.relief = nil, 0.3, 0.3
		s.silt = append(s.silt, g)
	}
	// Root hairs: thin threads, many starting at a channel.
	for range 8 + r.IntN(6) {
		x, y := w*r.Float64(), h*r.Float64()
		if len(s.channels) > 0 && r.IntN(3) > 0 {
			c := s.channels[r.IntN(len(s.channels))]
			p := c.pts[r.IntN(len(c.pts))]
			x, y = p[0], p[1]
		}
		f := walk(r, x, y, 2*math.Pi*r.Float64(), 2, 30+r.IntN(70), 0.09, 0.55+0.5*r.Float64(), 0.3)
		s.fibres = append(s.fibres, f)
	}
	return s
}

// cleavage is 1 on a family of parallel lines at angle a, spacing sp pixels.
func cleavage(x, y, a, sp float64, wob noise) float64 {
	q := (x*math.Cos(a)+y*math.Sin(a))/sp + 0.15*wob.at(x/9, y/9)
	f := q - math.Floor(q)
	dpx := min(f, 1-f) * sp
	return 1 - smoothstep(0.25, 0.85, dpx)
}

// tissue shades plant cells: wall weight 1 on the walls, 0 inside the cells.
func tissue(n noise, u, v, su, sv float64) float64 {
	f1, f2 := n.cells(u/su, v/sv)
	return 1 - smoothstep(0.35, 0.9, (f2-f1)*min(su, sv)/2)
}

type sample struct {
	c [3]float64
	f float64
}

func (p *sample) over(c [3]float64, f, k, a float64) {
	if a <= 0 {
		return
	}
	for i := range p.c {
		p.c[i] = lerp(p.c[i], c[i]*k, a)
	}
	p.f = lerp(p.f, f, a)
}

func (s *specimen) grainColour(g *grain, x, y, d float64, p *palette) ([3]float64, float64, float64) {
	k := 1 + 0.04*g.shade
	f := p.fluo[g.mat]
	switch g.mat {
	case matQuartz:
		k += 0.025*s.tex.fbm(x/9, y/9, 3) + 0.05*((x-g.cx)*math.Cos(g.cleave)+(y-g.cy)*math.Sin(g.cleave))/g.r
		if s.fine.at(x/1.2, y/1.2) > 0.5 && s.tex.at(x/14+3, y/14) > 0.25 {
			k *= 0.82 // trails of fluid inclusions
		}
	case matFeldspar:
		k += 0.07 * s.tex.fbm(x/6, y/6, 3)
		k -= 0.22 * cleavage(x, y, g.cleave, g.space, g.gate) * smoothstep(-0.1, 0.3, g.gate.at(x/8, y/8))
		k -= 0.14 * cleavage(x, y, g.cleave+math.Pi/2, g.space*1.5, g.gate) * smoothstep(0, 0.4, g.gate.at(y/8, x/8))
		f *= 1 + 0.5*s.tex.fbm(x/6, y/6, 2)
	case matMica:
		k += 0.08 * s.tex.at(x/6, y/6)
		k -= 0.35 * cleavage(x, y, g.cleave, g.space, g.gate)
	case matCalcite:
		k -= 0.22 * cleavage(x, y, g.cleave, g.space, g.gate)
		k -= 0.22 * cleavage(x, y, g.cleave+1.31, g.space, g.gate)
		k += 0.04 * math.Sin((x*math.Cos(g.cleave+0.65)+y*math.Sin(g.cleave+0.65))*1.3)
	case matOpaque:
		k += 0.25 * s.fine.at(x/2, y/2)
	}
	if g.rootSection {
		c, fl := s.rootSection(g, x, y, d, p)
		return c, fl, k * (1 - g.relief*math.Exp(-d/1.5))
	}
	for _, cr := range g.cracks {
		dd := segDist(x, y, cr[0][0], cr[0][1], cr[1][0], cr[1][1])
		k *= 1 - 0.35*clamp01(1.1-dd)
	}
	k *= 1 - g.relief*math.Exp(-d/1.5)
	return p.col[g.mat], f, k
}

// rootSection draws a root cut across: a dark skin, a ring of large cortex
// cells and a core of small cells.
func (s *specimen) rootSection(g *grain, x, y, d float64, p *palette) ([3]float64, float64) {
	core := math.Hypot(x-g.cx, y-g.cy) < 0.33*g.r
	var wall float64
	switch {
	case d < 1.6:
		wall = 1
	case core:
		wall = tissue(g.gate, x, y, 1.9, 1.9)
	default:
		wall = tissue(g.gate, x, y, 4.3, 4.3)
	}
	return mixCol(p.col[matLumen], p.col[matWall], wall), lerp(p.fluo[matLumen], p.fluo[matWall], wall)
}

func mixCol(a, b [3]float64, t float64) [3]float64 {
	return [3]float64{lerp(a[0], b[0], t), lerp(a[1], b[1], t), lerp(a[2], b[2], t)}
}

// at renders the specimen at (x, y).
func (s *specimen) at(x, y float64, p *palette) sample {
	// Groundmass: mottled clay with iron-stained patches and fine speckle.
	k := 1 + 0.10*s.tex.fbm(x/22, y/22, 4) + 0.08*s.tex.fbm(x/5+70, y/5, 2) + 0.14*s.fine.at(x/1.6, y/1.6)
	iron := smoothstep(0.3, 0.6, s.tex.fbm(x/13+40, y/13, 3))
	k -= 0.28 * iron
	out := sample{f: p.fluo[matGround] * max(1+0.8*s.tex.fbm(x/10, y/10, 3)-0.6*iron, 0.1)}
	// Clay coatings darken the groundmass along pore walls.
	type hit struct {
		d, along, t, hw float64
		ok              bool
	}
	var near [2]hit
	coat := 0.0
	for i, c := range s.channels {
		d, along, t, hw, ok := c.nearest(x, y)
		near[i] = hit{d, along, t, hw, ok}
		if ok {
			coat = max(coat, math.Exp(-(d-hw)/1.6))
		}
	}
	for _, v := range s.vughs {
		if d := v.depth(x, y, s.fine); d > -8 {
			coat = max(coat, math.Exp(d/1.6))
		}
	}
	k *= 1 - 0.3*min(coat, 1)
	out.c = p.col[matGround]
	for i := range out.c {
		out.c[i] *= k
	}
	resin := func(a float64) {
		out.over(p.col[matResin], p.fluo[matResin], 1+0.012*s.tex.at(x/5, y/5), a)
	}
	for _, v := range s.vughs {
		resin(clamp01(v.depth(x, y, s.fine) + 0.5))
	}
	for i, c := range s.channels {
		d, along, t, hw, ok := near[i].d, near[i].along, near[i].t, near[i].hw, near[i].ok
		if !ok {
			continue
		}
		resin(clamp01(hw - d + 0.5))
		if c.root {
			// The root wanders inside its channel, thicker in places,
			// pressed against one wall or the other.
			rw := hw * (0.55 + 0.15*c.wn.at(along/40, 3.5))
			off := (hw - rw) * 0.9 * c.wn.at(along/55, 9.5)
			dr := math.Abs(t - off)
			if a := clamp01(rw - dr + 0.5); a > 0 {
				wall := tissue(c.wn, along, t-off+rw, 11, 3.6)
				if rw-dr < 1.5 {
					wall = 1
				}
				col := mixCol(p.col[matLumen], p.col[matWall], wall)
				out.over(col, lerp(p.fluo[matLumen], p.fluo[matWall], wall), 1, a)
			}
		}
	}
	for _, g := range s.silt {
		if d := g.depth(x, y, s.fine); d > -1 {
			c, f, kk := s.grainColour(g, x, y, d, p)
			out.over(c, f, kk, clamp01(d+0.5))
		}
	}
	// A faint bright line hugs the outside of each sand grain (the
	// Becke line of a grain whose index differs from the resin's).
	halo, inside := 0.0, 0.0
	for _, g := range s.grains {
		d := g.depth(x, y, s.fine)
		if d > -4 && !g.rootSection {
			halo = max(halo, math.Exp(min(d, 0)/1.2)*g.relief)
		}
		if d > -1 {
			c, f, kk := s.grainColour(g, x, y, d, p)
			a := clamp01(d + 0.5)
			inside = max(inside, a)
			out.over(c, f, kk, a)
		}
	}
	for i := range out.c {
		out.c[i] *= 1 + 0.25*halo*(1-inside)
	}
	for _, fb := range s.fibres {
		if d, _, _, hw, ok := fb.nearest(x, y); ok {
			out.over(p.col[matFibre], p.fluo[matFibre], 1, clamp01(hw-d+0.5))
		}
	}
	return out
}

// render samples a w×h window whose top-left corner is at (x0, y0), with
// the gentle fall-off of brightness towards the corners that a microscope
// lamp gives. It returns one grid per colour channel and the fluorescence.
func (s *specimen) render(w, h int, x0, y0 float64, p *palette) (rgb [3]*grid, fl *grid) {
	for i := range rgb {
		rgb[i] = newGrid(w, h, 0)
	}
	fl = newGrid(w, h, 0)
	// Rows are independent, so workers change the time, not the bytes.
	var wg sync.WaitGroup
	workers := runtime.GOMAXPROCS(0)
	for wk := range workers {
		wg.Go(func() {
			for y := wk; y < h; y += workers {
				for x := 0; x < w; x++ {
					px, py := x0+float64(x), y0+float64(y)
					v := s.at(px, py, p)
					rx, ry := (px/s.w-0.5)*2, (py/s.h-0.5)*2
					lamp := 1 - 0.05*(rx*rx+ry*ry)
					for c := range rgb {
						rgb[c].v[y*w+x] = v.c[c] * lamp
					}
					fl.v[y*w+x] = v.f * lamp
				}
			}
		})
	}
	wg.Wait()
	return rgb, fl
}
