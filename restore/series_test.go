package restore

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"testing"
	"time"

	"tessera/learn"
	"tessera/patches"
)

// scene is an invented specimen: soft-edged grains and thin curved fibres
// on a smooth background, all drifting by drift pixels (per axis) so that
// frames of a series differ a little. It is gray, 0–255, deterministic in
// seed, with feature counts in proportion to the area.
type scene struct {
	grains []grain
	fibres []fibre
	w, h   int
	seed   uint64
}

type grain struct{ x, y, rx, ry, angle, level float64 }

type fibre struct {
	pts   [][2]float64
	width float64
	level float64
}

func newScene(w, h int, seed uint64) *scene {
	r := learn.NewRand(seed)
	s := &scene{w: w, h: h, seed: seed}
	area := float64(w*h) / (96 * 96)
	for i := 0; i < int(40*area); i++ {
		rx := 1.5 + 4*r.Float64()
		s.grains = append(s.grains, grain{x: r.Float64() * float64(w), y: r.Float64() * float64(h),
			rx: rx, ry: rx * (0.5 + 0.5*r.Float64()), angle: math.Pi * r.Float64(),
			level: 70 * (r.Float64() - 0.35)})
	}
	for i := 0; i < int(6*area)+1; i++ {
		x, y := r.Float64()*float64(w), r.Float64()*float64(h)
		dir := 2 * math.Pi * r.Float64()
		f := fibre{width: 0.6 + 1.2*r.Float64(), level: 60 * (r.Float64() - 0.5)}
		for k := 0; k < 12+r.IntN(20); k++ {
			f.pts = append(f.pts, [2]float64{x, y})
			dir += 0.35 * (r.Float64() - 0.5)
			x += 5 * math.Cos(dir)
			y += 5 * math.Sin(dir)
		}
		s.fibres = append(s.fibres, f)
	}
	return s
}

// frame renders the scene shifted by (0.6, 0.35)·t pixels.
func (s *scene) frame(t float64) *patches.Image {
	img := patches.New(s.w, s.h, 1, 8)
	dx, dy := 0.6*t, 0.35*t
	for y := 0; y < s.h; y++ {
		for x := 0; x < s.w; x++ {
			X, Y := float64(x)-dx, float64(y)-dy
			img.Pix[y*s.w+x] = float32(110 + 25*math.Sin(X/37+0.3*math.Cos(Y/53)) + 15*math.Cos(Y/29))
		}
	}
	for _, g := range s.grains {
		cx, cy := g.x+dx, g.y+dy
		c, sn := math.Cos(g.angle), math.Sin(g.angle)
		rad := g.rx + 2
		for y := max(0, int(cy-rad)); y <= min(s.h-1, int(cy+rad)); y++ {
			for x := max(0, int(cx-rad)); x <= min(s.w-1, int(cx+rad)); x++ {
				u := (float64(x)-cx)*c + (float64(y)-cy)*sn
				v := -(float64(x)-cx)*sn + (float64(y)-cy)*c
				d := math.Sqrt(u*u/(g.rx*g.rx)+v*v/(g.ry*g.ry)) - 1
				// A soft edge about a pixel wide.
				img.Pix[y*s.w+x] += float32(g.level / (1 + math.Exp(4*d*g.ry)))
			}
		}
	}
	for _, f := range s.fibres {
		// The profile is that of the nearest segment: the largest value
		// over segments, gathered in the fibre's box, then added once.
		pad := f.width + 2
		x0, y0, x1, y1 := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
		for _, q := range f.pts {
			x0, y0 = math.Min(x0, q[0]+dx-pad), math.Min(y0, q[1]+dy-pad)
			x1, y1 = math.Max(x1, q[0]+dx+pad), math.Max(y1, q[1]+dy+pad)
		}
		bx0, by0 := max(0, int(x0)), max(0, int(y0))
		bx1, by1 := min(s.w-1, int(x1)), min(s.h-1, int(y1))
		if bx1 < bx0 || by1 < by0 {
			continue
		}
		bw := bx1 - bx0 + 1
		prof := make([]float64, bw*(by1-by0+1))
		for k := 0; k+1 < len(f.pts); k++ {
			ax, ay := f.pts[k][0]+dx, f.pts[k][1]+dy
			bx, by := f.pts[k+1][0]+dx, f.pts[k+1][1]+dy
			for y := max(by0, int(math.Min(ay, by)-pad)); y <= min(by1, int(math.Max(ay, by)+pad)); y++ {
				for x := max(bx0, int(math.Min(ax, bx)-pad)); x <= min(bx1, int(math.Max(ax, bx)+pad)); x++ {
					d := segDist(float64(x), float64(y), ax, ay, bx, by)
					i := (y-by0)*bw + x - bx0
					prof[i] = math.Max(prof[i], math.Exp(-d*d/(2*f.width*f.width)))
				}
			}
		}
		for i, v := range prof {
			if v > 0 {
				img.Pix[(by0+i/bw)*s.w+bx0+i%bw] += float32(f.level * v)
			}
		}
	}
	for i, v := range img.Pix {
		img.Pix[i] = float32(math.Min(255, math.Max(0, float64(v))))
	}
	return img
}

func segDist(px, py, ax, ay, bx, by float64) float64 {
	vx, vy := bx-ax, by-ay
	l := vx*vx + vy*vy
	t := 0.0
	if l > 0 {
		t = math.Max(0, math.Min(1, ((px-ax)*vx+(py-ay)*vy)/l))
	}
	return math.Hypot(px-ax-t*vx, py-ay-t*vy)
}

func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	return s[len(s)/2]
}

// One dictionary learned on 20 frames of a drifting series codes 20 later
// frames about as well as training on each frame (within 0.3 dB PSNR), at a
// fraction of the work: no training rounds per frame. The 0.3 dB and 3×
// are the acceptance figures of the project's series issue; that a
// dictionary trained on similar images serves nearly as well is the
// finding of Elad & Aharon (2006, section V, the "global" dictionary
// trained on a set of images).
func TestSeriesDictionary(t *testing.T) {
	const sigma, frames = 20, 20
	sc := newScene(96, 96, 7)
	noisy := func(k int) (*patches.Image, *patches.Image) {
		clean := sc.frame(float64(k))
		return clean, AddNoise(clean, sigma, 1, fmt.Sprint("frame", k))
	}
	learnOpt := Defaults(sigma)
	learnOpt.Train = 20000
	t0 := time.Now()
	tr, err := Train(frames, func(i int) (*patches.Image, float64, error) {
		_, n := noisy(i)
		return n, sigma, nil
	}, learnOpt)
	if err != nil {
		t.Fatal(err)
	}
	learnTime := time.Since(t0)
	total := 0
	for _, u := range tr.Uses {
		total += u
	}
	// Every atom use belongs to a patch: the counts add up to the codes.
	if want := int(math.Round(tr.MeanAtoms * float64(tr.Patches))); total != want || tr.Patches != learnOpt.Train {
		t.Fatalf("uses add up to %d, codes hold %d; %d patches drawn of %d", total, want, tr.Patches, learnOpt.Train)
	}
	d := tr.Dict

	per := Defaults(sigma)
	per.Train, per.Rounds = 4000, 5
	ser := Defaults(sigma)
	ser.Dict, ser.Rounds = d, 0
	var pPer, pSer, tPer, tSer []float64
	var workPer, workSer int
	for k := frames; k < 2*frames; k++ {
		clean, n := noisy(k)
		for _, c := range []struct {
			opt  Options
			p, s *[]float64
			work *int
		}{{per, &pPer, &tPer, &workPer}, {ser, &pSer, &tSer, &workSer}} {
			o := c.opt
			o.Seed = learn.SubSeed(1, fmt.Sprint("frame", k))
			// Work: training signals coded per round, then every patch once.
			o.Progress = func(s Stage) {
				if s.Name == "train" {
					*c.work += o.Train
				} else if s.Done == s.Total {
					*c.work += len(patches.Positions(n.W, o.Patch, 1)) * len(patches.Positions(n.H, o.Patch, 1))
				}
			}
			t1 := time.Now()
			out, _, err := Denoise(n, sigma, o)
			if err != nil {
				t.Fatal(err)
			}
			*c.s = append(*c.s, time.Since(t1).Seconds())
			*c.p = append(*c.p, psnr(t, clean, out))
		}
	}
	mean := func(v []float64) float64 {
		s := 0.0
		for _, x := range v {
			s += x
		}
		return s / float64(len(v))
	}
	mp, ms := mean(pPer), mean(pSer)
	speed := median(tPer) / median(tSer)
	workRatio := float64(workPer) / float64(workSer)
	t.Logf("learned once on %d frames in %.2f s (%d patches, %d rounds)", frames, learnTime.Seconds(), learnOpt.Train, learnOpt.Rounds)
	t.Logf("per-frame training: %.2f dB, median %.3f s/frame; series dictionary: %.2f dB, median %.3f s/frame", mp, median(tPer), ms, median(tSer))
	t.Logf("speed-up %.2f× in time, %.2f× in signals coded (%d vs %d)", speed, workRatio, workPer, workSer)
	if ms < mp-0.3 {
		t.Errorf("series dictionary %.2f dB is more than 0.3 dB below per-frame training %.2f dB", ms, mp)
	}
	// Time on a shared machine is noisy: the check is on the work done.
	if workRatio < 3 {
		t.Errorf("series dictionary codes %.2f× fewer signals per frame, want ≥ 3×", workRatio)
	}
}

// Colour series: per-channel coding gives one dictionary of gray atoms
// that Denoise accepts for colour images; joint coding gives colour atoms.
func TestTrainColour(t *testing.T) {
	sc := newScene(64, 48, 3)
	frame := func(k int) *patches.Image {
		img := patches.New(64, 48, 3, 8)
		for c := 0; c < 3; c++ {
			copy(img.Plane(c), sc.frame(float64(k+c)).Pix)
		}
		return AddNoise(img, 15, 1, fmt.Sprint("colour", k))
	}
	for _, mode := range []ColorMode{ColorSeparate, ColorJoint} {
		opt := Defaults(15)
		opt.Color, opt.Train, opt.Rounds, opt.Atoms = mode, 3000, 2, 64
		tr, err := Train(4, func(i int) (*patches.Image, float64, error) { return frame(i), 15, nil }, opt)
		if err != nil {
			t.Fatal(err)
		}
		want := 3
		if mode == ColorSeparate {
			want = 1
		}
		if tr.Dict.Channels != want || tr.Dict.N != want*64 || tr.ImageChannels != 3 || tr.Patches != 3000 {
			t.Fatalf("mode %d: atoms of %d channels (N %d), image channels %d, %d patches", mode, tr.Dict.Channels, tr.Dict.N, tr.ImageChannels, tr.Patches)
		}
		o := opt
		o.Dict, o.Rounds = tr.Dict, 0
		if _, _, err := Denoise(frame(9), 15, o); err != nil {
			t.Fatalf("mode %d: Denoise with the trained dictionary: %v", mode, err)
		}
	}
	// Mixed channel counts are refused.
	_, err := Train(2, func(i int) (*patches.Image, float64, error) {
		if i == 1 {
			return sc.frame(0), 15, nil
		}
		return frame(0), 15, nil
	}, Defaults(15))
	var oe *OptionError
	if !errors.As(err, &oe) || oe.Field != "images" {
		t.Errorf("gray after colour: %v", err)
	}
}
