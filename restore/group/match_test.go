package group

import (
	"fmt"
	"math"
	"testing"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
)

// naiveDist is the squared distance of two patches summed sample by sample.
func naiveDist(img *patches.Image, a, b, p int) float64 {
	W := img.W
	s := 0.0
	for c := 0; c < img.C; c++ {
		pl := img.Plane(c)
		for v := 0; v < p; v++ {
			for u := 0; u < p; u++ {
				d := float64(pl[(a/W+v)*W+a%W+u]) - float64(pl[(b/W+v)*W+b%W+u])
				s += d * d
			}
		}
	}
	return s
}

func noiseImage(w, h, c int, seed uint64) *patches.Image {
	img := patches.New(w, h, c, 8)
	r := learn.NewRand(seed)
	for i := range img.Pix {
		x := i % w
		img.Pix[i] = float32(100 + 60*math.Sin(float64(x)/4) + 20*r.NormFloat64())
	}
	return img
}

// The box-sum search finds the groups that an exhaustive search over the
// window finds: the same sizes, each member inside the window and the
// distance bound, and no patch left out that is nearer than the farthest
// member (up to float32 rounding of the sums).
func TestMatchEqualsExhaustiveSearch(t *testing.T) {
	for _, c := range []int{1, 3} {
		img := noiseImage(45, 38, c, uint64(c))
		mp := matchParams{p: 6, step: 4, radius: 7, size: 9, maxDist: float32(2 * 2 * 36 * float64(c) * 400)}
		g := match(img, mp, 3)
		W, H, p := img.W, img.H, mp.p
		for r, ref := range g.refs {
			rx, ry := int(ref)%W, int(ref)/W
			var cands []float64
			for y := max(0, ry-mp.radius); y <= min(H-p, ry+mp.radius); y++ {
				for x := max(0, rx-mp.radius); x <= min(W-p, rx+mp.radius); x++ {
					if d := naiveDist(img, int(ref), y*W+x, p); d <= float64(mp.maxDist) {
						cands = append(cands, d)
					}
				}
			}
			want := min(len(cands), mp.size)
			mem := g.member[g.start[r]:g.start[r+1]]
			if len(mem) != want {
				t.Fatalf("channels %d ref (%d,%d): %d members, want %d", c, rx, ry, len(mem), want)
			}
			if mem[0] != ref {
				t.Errorf("ref (%d,%d): first member is %d, not itself", rx, ry, mem[0])
			}
			worst := 0.0
			for _, q := range mem {
				qx, qy := int(q)%W, int(q)/W
				if abs(qx-rx) > mp.radius || abs(qy-ry) > mp.radius {
					t.Errorf("ref (%d,%d): member (%d,%d) outside the window", rx, ry, qx, qy)
				}
				worst = math.Max(worst, naiveDist(img, int(ref), int(q), p))
			}
			left := 0
			for _, d := range cands {
				if d < worst*(1-1e-5) {
					left++
				}
			}
			if left > len(mem)-1 {
				t.Errorf("ref (%d,%d): %d candidates nearer than the farthest member, %d members", rx, ry, left, len(mem))
			}
		}
	}
}

func abs(a int) int {
	if a < 0 {
		return -a
	}
	return a
}

// BenchmarkMatch times the box-sum search against a direct one (every
// distance summed over its p² samples) on a 256×256 Kodak crop with the
// σ = 25 settings, at reference steps 2 and 3, one worker:
//
//	go test ./restore/group -run '^$' -bench Match
func BenchmarkMatch(b *testing.B) {
	for _, step := range []int{2, 3} {
		b.Run(fmt.Sprint("step", step), func(b *testing.B) { benchMatch(b, step) })
	}
}

func benchMatch(b *testing.B, step int) {
	img := restore.AddNoise(centreCrop(kodakGray(b, "kodim19.png"), 256, 256), 25, 1, "kodim19.png")
	pr := DefaultParams(25)
	mp := matchParams{p: 8, step: step, radius: pr.Window / 2, size: pr.Group, maxDist: float32(pr.Match * 2 * 64 * 625)}
	b.Run("boxsum", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			match(img, mp, 1)
		}
	})
	b.Run("direct", func(b *testing.B) {
		xs := patches.Positions(img.W, 8, mp.step)
		ys := patches.Positions(img.H, 8, mp.step)
		pl := img.Plane(0)
		W := img.W
		for i := 0; i < b.N; i++ {
			for _, ry := range ys {
				for _, rx := range xs {
					d := make([]float32, mp.size)
					p := make([]int32, mp.size)
					var n int32
					for y := max(0, ry-mp.radius); y <= min(img.H-8, ry+mp.radius); y++ {
						for x := max(0, rx-mp.radius); x <= min(img.W-8, rx+mp.radius); x++ {
							s := float32(0)
							for v := 0; v < 8; v++ {
								a := pl[(ry+v)*W+rx : (ry+v)*W+rx+8]
								c := pl[(y+v)*W+x : (y+v)*W+x+8]
								for u := range a {
									e := a[u] - c[u]
									s += e * e
								}
							}
							if s <= mp.maxDist {
								push(d, p, &n, s, int32(y*W+x))
							}
						}
					}
				}
			}
		}
	})
}
