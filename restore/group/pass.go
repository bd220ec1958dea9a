package group

import (
	"math"
	"runtime"

	"tessera/learn"
	"tessera/patches"
	"tessera/restore"
)

// chunkGroups is the number of groups coded per SOMP call: a few ten
// thousand patches, whose codes are put back before the next chunk.
const chunkGroups = 2048

// passIn is what one pass codes.
type passIn struct {
	img   *patches.Image // the image whose patches are coded (0–255)
	pilot *patches.Image // under SecondWiener, the first estimate
	g     *grouping
	sigma float64 // noise σ of img (0–255)
	bound float64 // C of ε = n(Cσ)²
	d0    *learn.Dict
	// rounds of dictionary training from d0 (the DCT when nil)
	rounds int
	stage  string
}

// runPass learns a dictionary on the groups of in.img, codes every group
// with SOMP (on the pilot under SecondWiener, followed by the Wiener step)
// and averages the patches back. It returns the estimate, the dictionary
// and the mean number of atoms per coded patch.
func runPass(in passIn, opt restore.Options, pr Params, rep *reporter) (*patches.Image, *learn.Dict, float64) {
	img, pilot, g := in.img, in.pilot, in.g
	p := opt.Patch
	n := img.C * p * p
	s2 := in.sigma * in.sigma
	sopt := learn.SOMPOptions{Eps: float64(n) * in.bound * in.bound * s2, MaxAtoms: n / 2, Rule: pr.Rule}
	if pilot != nil {
		sopt.Eps = float64(n) * pr.PilotBound * pr.PilotBound * s2
	}
	d := in.d0
	if d == nil {
		d = learn.DCTAtoms(p, opt.Atoms, img.C)
	}
	if in.rounds > 0 {
		src := img
		if pilot != nil {
			src = pilot
		}
		X, offs := trainingGroups(src, g, p, opt.Train, learn.SubSeed(opt.Seed, in.stage, "train"))
		d, _ = learn.KSVDGroups(d, X, offs, sopt, learn.KSVDOptions{
			Rounds: in.rounds, Workers: opt.Workers, Single: true,
			Progress: func(learn.RoundStats) { rep.trained() },
		})
	}
	coder := learn.NewCoder(d)
	coder.Workers = opt.Workers
	coder.Single = true
	lambda := opt.Lambda
	if lambda == 0 {
		lambda = 30 / in.sigma
	}
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}

	W := img.W
	acc := patches.NewAccumulator(img.W, img.H, img.C, p)
	nref := len(g.refs)
	chunks := (nref + chunkGroups - 1) / chunkGroups
	// slot maps an image position to its row in the chunk's pool; stamp
	// says for which chunk it is valid.
	slot := make([]int32, img.W*img.H)
	stamp := make([]int32, img.W*img.H)
	var pool, noisy, rec []float64
	var pmean, nmean, emean []float64
	var members []int32
	offs := make([]int32, 0, chunkGroups+1)
	wsum := make([]float64, chunkGroups)
	ws := newWiener(n / 2)
	atoms, coded := 0, 0
	for ci, r0 := 0, 0; r0 < nref; ci, r0 = ci+1, r0+chunkGroups {
		r1 := min(r0+chunkGroups, nref)
		entries := g.member[g.start[r0]:g.start[r1]]
		m := len(entries)
		offs = offs[:0]
		for r := r0; r <= r1; r++ {
			offs = append(offs, g.start[r]-g.start[r0])
		}
		// The chunk's distinct patches, in order of first use.
		members = members[:0]
		mp := 0
		for _, q := range entries {
			if stamp[q] != int32(ci+1) {
				stamp[q], slot[q] = int32(ci+1), int32(mp)
				mp++
			}
			members = append(members, slot[q])
		}
		pool = grow(pool, mp*n)
		pmean = grow(pmean, mp)
		if pilot != nil {
			noisy = grow(noisy, mp*n)
			nmean = grow(nmean, mp)
		}
		for i, q := range entries {
			r := int(members[i])
			if stamp[q] != int32(ci+1) {
				continue
			}
			stamp[q] = -int32(ci + 1) // extracted
			x, y := int(q)%W, int(q)/W
			if pilot != nil {
				pmean[r] = patches.Extract(pilot, x, y, p, pool[r*n:(r+1)*n], true)
				nmean[r] = patches.Extract(img, x, y, p, noisy[r*n:(r+1)*n], true)
			} else {
				pmean[r] = patches.Extract(img, x, y, p, pool[r*n:(r+1)*n], true)
			}
		}
		codes := coder.SOMPShared(pool[:mp*n], members, offs, sopt)
		emean = grow(emean, m)
		for i, r := range members {
			if pilot != nil {
				emean[i] = nmean[r]
			} else {
				emean[i] = pmean[r]
			}
		}
		if pilot != nil {
			for r := r0; r < r1; r++ {
				wsum[r-r0] = ws.filter(codes, d, coder.G, int(offs[r-r0]), int(offs[r-r0+1]),
					members, noisy, s2, emean, pmean)
			}
		}
		atoms += len(codes.Idx)
		coded += m
		rec = grow(rec, m*n)
		reconstruct(codes, d, emean, rec, workers)
		for r := r0; r < r1; r++ {
			a, b := int(offs[r-r0]), int(offs[r-r0+1])
			w := pr.PatchWeight
			switch {
			case !pr.Sparse:
			case pilot != nil:
				// 1/(σ²‖w‖²) for a Wiener group (Dabov et al. 2007), per
				// member and relative to σ².
				w /= math.Max(1, wsum[r-r0]/float64(b-a))
			default:
				// 1/(number of coefficients) per member (ibid., for hard
				// thresholding).
				w /= float64(max(1, codes.Atoms(a)))
			}
			for i := a; i < b; i++ {
				q := int(entries[i])
				acc.Add(q%W, q/W, rec[i*n:(i+1)*n], w)
			}
		}
		rep.coded(chunks)
	}
	return acc.Blend(img, lambda), d, float64(atoms) / float64(max(1, coded))
}

func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

// reconstructBlock is the number of codes one task reconstructs.
const reconstructBlock = 1024

// reconstruct writes Dαᵢ + meanᵢ of every code into out (row i), in fixed
// blocks over the workers.
func reconstruct(codes *learn.Codes, d *learn.Dict, means, out []float64, workers int) {
	m, n := codes.Len(), d.N
	nb := (m + reconstructBlock - 1) / reconstructBlock
	learn.Blocks(nb, workers, nil, func(b int, _ struct{}) {
		for i := b * reconstructBlock; i < min((b+1)*reconstructBlock, m); i++ {
			r := out[i*n : (i+1)*n]
			codes.Reconstruct(d, i, r)
			for j := range r {
				r[j] += means[i]
			}
		}
	})
}

// trainingGroups draws whole groups in a seeded order until they hold at
// least want patches, and returns them mean-removed, group after group.
func trainingGroups(img *patches.Image, g *grouping, p, want int, seed uint64) ([]float64, []int32) {
	order := learn.NewRand(seed).Perm(len(g.refs))
	n := img.C * p * p
	offs := []int32{0}
	total := 0
	for _, ref := range order {
		if total >= want {
			break
		}
		total += g.size(ref)
		offs = append(offs, int32(total))
	}
	X := make([]float64, total*n)
	i := 0
	for _, ref := range order[:len(offs)-1] {
		for _, q := range g.member[g.start[ref]:g.start[ref+1]] {
			patches.Extract(img, int(q)%g.w, int(q)/g.w, p, X[i*n:(i+1)*n], true)
			i++
		}
	}
	return X, offs
}
