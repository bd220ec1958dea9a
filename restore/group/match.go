package group

import (
	"sort"

	"tessera/learn"
	"tessera/patches"
)

// grouping holds, for each reference patch, its most similar patches.
// Positions are y·W + x of a patch's top-left corner.
type grouping struct {
	w      int
	refs   []int32
	start  []int32 // the group of refs[r] is member[start[r]:start[r+1]]
	member []int32 // nearest first; the reference itself comes first
}

func (g *grouping) size(r int) int { return int(g.start[r+1] - g.start[r]) }

// matchParams describe a search: p×p patches, references every step
// pixels, candidates within ±radius of the reference, at most size per
// group, and only those within maxDist (squared distance over all samples).
type matchParams struct {
	p, step, radius, size int
	maxDist               float32
}

// bandRows is the number of reference rows one task searches: the squared
// differences of a row serve every reference that covers it.
const bandRows = 8

// match groups the patches of img with a box-sum search: for every offset
// of the window, the squared differences of the image and its shifted copy
// are summed along rows at the reference columns, then down the columns at
// the reference rows (the separable form of the integral-image search),
// so a distance costs about p + p/step additions instead of p². The k
// nearest are kept in a bounded heap ordered by (distance, position), so
// the groups do not depend on the order of the search or the worker count.
func match(img *patches.Image, mp matchParams, workers int) *grouping {
	W, H, p := img.W, img.H, mp.p
	xs := patches.Positions(W, p, mp.step)
	ys := patches.Positions(H, p, mp.step)
	nx := len(xs)
	nref := nx * len(ys)
	k := mp.size
	dist := make([]float32, nref*k)
	pos := make([]int32, nref*k)
	cnt := make([]int32, nref)
	nb := (len(ys) + bandRows - 1) / bandRows
	planes := make([][]float32, img.C)
	for c := range planes {
		planes[c] = img.Plane(c)
	}
	type bufs struct {
		diff, hsum, vsum []float32
		prefix           []float64
	}
	rows := (bandRows-1)*mp.step + p
	learn.Blocks(nb, workers, func() *bufs {
		return &bufs{make([]float32, W), make([]float32, rows*nx), make([]float32, nx), make([]float64, W+1)}
	}, func(b int, s *bufs) {
		j0, j1 := b*bandRows, min((b+1)*bandRows, len(ys))
		searchBand(planes, W, H, xs, ys, j0, j1, mp, s.diff, s.hsum, s.vsum, s.prefix, dist, pos, cnt)
	})

	g := &grouping{w: W, refs: make([]int32, nref), start: make([]int32, nref+1)}
	total := 0
	for _, c := range cnt {
		total += int(c)
	}
	g.member = make([]int32, 0, total)
	type cand struct {
		d float32
		p int32
	}
	buf := make([]cand, k)
	for j, y := range ys {
		for i, x := range xs {
			r := j*nx + i
			g.refs[r] = int32(y*W + x)
			c := buf[:cnt[r]]
			for q := range c {
				c[q] = cand{dist[r*k+q], pos[r*k+q]}
			}
			sort.Slice(c, func(a, b int) bool { return less(c[a].d, c[a].p, c[b].d, c[b].p) })
			for _, e := range c {
				g.member = append(g.member, e.p)
			}
			g.start[r+1] = int32(len(g.member))
		}
	}
	return g
}

// less orders candidates by distance, then position.
func less(d1 float32, p1 int32, d2 float32, p2 int32) bool {
	return d1 < d2 || (d1 == d2 && p1 < p2)
}

// searchBand fills the heaps of the references in rows j0..j1−1.
func searchBand(planes [][]float32, W, H int, xs, ys []int, j0, j1 int, mp matchParams, diff, hsum, vsum []float32, prefix []float64, dist []float32, pos, cnt []int32) {
	p, R, k := mp.p, mp.radius, mp.size
	nx := len(xs)
	// The reference is its own nearest (distance −1 keeps it first even
	// among exact copies).
	for j := j0; j < j1; j++ {
		for i, x := range xs {
			r := j*nx + i
			dist[r*k], pos[r*k], cnt[r] = -1, int32(ys[j]*W+x), 1
		}
	}
	y0 := ys[j0]
	for dy := -R; dy <= R; dy++ {
		// References whose shifted patch stays inside the image.
		ja, jb := j0, j1
		for ja < jb && ys[ja]+dy < 0 {
			ja++
		}
		for jb > ja && ys[jb-1]+dy > H-p {
			jb--
		}
		if ja == jb {
			continue
		}
		ra, rb := ys[ja], ys[jb-1]+p // rows whose differences are needed
		for dx := -R; dx <= R; dx++ {
			if dx == 0 && dy == 0 {
				continue
			}
			ia, ib := 0, nx
			for ia < ib && xs[ia]+dx < 0 {
				ia++
			}
			for ib > ia && xs[ib-1]+dx > W-p {
				ib--
			}
			if ia == ib {
				continue
			}
			xa, xb := xs[ia], xs[ib-1]+p
			for y := ra; y < rb; y++ {
				pre := prefix[:xb-xa+1]
				// Row sums over p samples at the reference columns, from
				// prefix sums of the squared differences.
				if len(planes) == 1 {
					// One channel: both in one sweep (the same sums as
					// sumRows).
					pl := planes[0]
					a := pl[y*W+xa : y*W+xb]
					s := pl[(y+dy)*W+xa+dx : (y+dy)*W+xb+dx]
					s = s[:len(a)]
					pre = pre[:len(a)+1]
					acc := 0.0
					for t, v := range a {
						e := v - s[t]
						pre[t] = acc
						acc += float64(e * e)
					}
					pre[len(a)] = acc
				} else {
					sumRows(planes, W, y, dy, dx, xa, xb, diff, pre)
				}
				hrow := hsum[(y-y0)*nx : (y-y0+1)*nx]
				for i := ia; i < ib; i++ {
					o := xs[i] - xa
					hrow[i] = float32(pre[o+p] - pre[o])
				}
			}
			delta := int32(dy*W + dx)
			for j := ja; j < jb; j++ {
				// Column sums of the p rows of this reference row, a row
				// at a time so that the reads are contiguous.
				vs := vsum[ia:ib]
				base := (ys[j] - y0) * nx
				copy(vs, hsum[base+ia:base+ib])
				for q := 1; q < p; q++ {
					row := hsum[base+q*nx+ia : base+q*nx+ib]
					for i, h := range row {
						vs[i] += h
					}
				}
				for i, v := range vs {
					if v > mp.maxDist {
						continue
					}
					r := j*nx + ia + i
					if cnt[r] == int32(k) && v > dist[r*k] {
						continue // beyond a full heap's farthest (push's own test, without the call)
					}
					push(dist[r*k:(r+1)*k], pos[r*k:(r+1)*k], &cnt[r], v, int32(ys[j]*W+xs[ia+i])+delta)
				}
			}
		}
	}
}

// push offers a candidate to a max-heap (by distance, then position) of at
// most len(d) entries.
func push(d []float32, p []int32, n *int32, v float32, q int32) {
	k := int32(len(d))
	if *n < k {
		// Sift up.
		i := *n
		*n++
		for i > 0 {
			par := (i - 1) / 2
			if !less(d[par], p[par], v, q) {
				break
			}
			d[i], p[i] = d[par], p[par]
			i = par
		}
		d[i], p[i] = v, q
		return
	}
	if !less(v, q, d[0], p[0]) {
		return
	}
	// Replace the top and sift down.
	i := int32(0)
	for {
		l := 2*i + 1
		if l >= k {
			break
		}
		c := l
		if r := l + 1; r < k && less(d[l], p[l], d[r], p[r]) {
			c = r
		}
		if !less(v, q, d[c], p[c]) {
			break
		}
		d[i], p[i] = d[c], p[c]
		i = c
	}
	d[i], p[i] = v, q
}

// sumRows fills pre with the prefix sums along row y of the squared
// differences, summed over the channels, between the image and its copy
// shifted by (dx, dy), over columns xa..xb−1 (in float64, so the
// differences of prefix sums stay exact enough along a whole row).
func sumRows(planes [][]float32, W, y, dy, dx, xa, xb int, diff []float32, pre []float64) {
	d := diff[xa:xb]
	for c, pl := range planes {
		a := pl[y*W+xa : y*W+xb]
		s := pl[(y+dy)*W+xa+dx : (y+dy)*W+xb+dx]
		if c == 0 {
			for t, v := range a {
				e := v - s[t]
				d[t] = e * e
			}
		} else {
			for t, v := range a {
				e := v - s[t]
				d[t] += e * e
			}
		}
	}
	acc := 0.0
	for t, v := range d {
		pre[t] = acc
		acc += float64(v)
	}
	pre[len(d)] = acc
}
