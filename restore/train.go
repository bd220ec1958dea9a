package restore

import (
	"fmt"
	"strconv"

	"tessera/learn"
	"tessera/patches"
)

// Train learns one dictionary with K-SVD from patches drawn from n images,
// for coding later images with Options.Dict and Rounds = 0. image(i)
// returns image i (i = 0..n−1, asked once each, in order) and its noise σ
// in the image's own units; Train keeps only the patches it draws, so
// memory holds one image at a time. opt.Train patches are shared evenly
// among the images (a share an image is too small for passes to the next),
// drawn without repeats with seeds derived from opt.Seed and i, and coded
// against each image's own bound n·(C·σᵢ)² on the 0–255 scale.
//
// Colour images with ColorSeparate give what Denoise codes them with: one
// dictionary of one-channel atoms, trained on patches drawn evenly from the
// three opponent channels (the transform is orthonormal, so σ is the same
// in each). With ColorJoint the atoms hold all channels.
//
// An error of image is returned as it is; bad options and images that do
// not fit them are *OptionError.
func Train(n int, image func(i int) (*patches.Image, float64, error), opt Options) (*Trained, error) {
	if n < 1 {
		return nil, &OptionError{"images", "no images to learn from"}
	}
	p := opt.Patch
	var X, eps []float64
	channels, planes := 0, 0
	carry := 0
	for i := 0; i < n; i++ {
		img, sigma, err := image(i)
		if err != nil {
			return nil, err
		}
		if err := opt.check(img, sigma); err != nil {
			return nil, err
		}
		if channels == 0 {
			channels = img.C
		} else if img.C != channels {
			return nil, &OptionError{"images", fmt.Sprintf("image %d has %d channels and the first has %d; one dictionary serves one channel count", i+1, img.C, channels)}
		}
		want := opt.Train/n + carry
		if i < opt.Train%n {
			want++
		}
		scale := 255 / img.Peak()
		s255 := sigma * scale
		// The signals: the image itself (scaled on the fly), or its
		// opponent channels one by one.
		srcs := []*patches.Image{img}
		if img.C > 1 && opt.Color == ColorSeparate {
			op := ToOpponent(img.Scaled(scale))
			scale = 1
			srcs = srcs[:0]
			for c := 0; c < op.C; c++ {
				srcs = append(srcs, &patches.Image{W: op.W, H: op.H, C: 1, Pix: op.Plane(c), Depth: op.Depth})
			}
		}
		planes = srcs[0].C
		sn := planes * p * p
		e := float64(sn) * (opt.Bound * s255) * (opt.Bound * s255)
		nx := img.W - p + 1
		total := nx * (img.H - p + 1)
		got := 0
		for c, src := range srcs {
			share := want / len(srcs)
			if c < want%len(srcs) {
				share++
			}
			m := min(share, total)
			at := len(X)
			X = append(X, make([]float64, m*sn)...)
			seed := learn.SubSeed(opt.Seed, "train", strconv.Itoa(i), strconv.Itoa(c))
			for j, pos := range samplePositions(total, m, seed) {
				extractScaled(src, pos%nx, pos/nx, p, scale, X[at+j*sn:at+(j+1)*sn])
			}
			for j := 0; j < m; j++ {
				eps = append(eps, e)
			}
			got += m
		}
		carry = want - got
	}
	sn := planes * p * p
	m := len(eps)
	d := opt.Dict
	if d == nil {
		d = learn.DCTAtoms(p, opt.Atoms, planes)
	}
	var codes *learn.Codes
	if opt.Rounds > 0 {
		d, codes = opt.ksvd(d, X, m, learn.KSVDOptions{EpsEach: eps, MaxAtoms: sn / 2})
	} else {
		codes = opt.coder(d).Code(X, m, 0, eps, sn/2)
	}
	tr := &Trained{Dict: d, Uses: make([]int, d.K), Patches: m, ImageChannels: channels}
	for _, a := range codes.Idx {
		tr.Uses[a]++
	}
	if m > 0 {
		tr.MeanAtoms = float64(len(codes.Idx)) / float64(m)
	}
	return tr, nil
}

// Trained is the outcome of Train.
type Trained struct {
	Dict *learn.Dict
	// Uses counts, per atom, the training patches whose code in the last
	// round used it.
	Uses []int
	// Patches is the number of training patches drawn; MeanAtoms the mean
	// number of atoms in their last-round codes.
	Patches   int
	MeanAtoms float64
	// ImageChannels is the channel count of the images (3 for colour
	// images even when the atoms have one channel).
	ImageChannels int
}

// samplePositions draws m distinct indices of 0..total−1 by a partial
// Fisher–Yates shuffle. Only displaced entries are stored, so memory grows
// with m, not with total, and the draw equals that of trainingSet for the
// same seed.
func samplePositions(total, m int, seed uint64) []int {
	r := learn.NewRand(seed)
	moved := make(map[int]int, m)
	at := func(i int) int {
		if v, ok := moved[i]; ok {
			return v
		}
		return i
	}
	out := make([]int, m)
	for i := 0; i < m; i++ {
		j := i + r.IntN(total-i)
		vi, vj := at(i), at(j)
		moved[i], moved[j] = vj, vi
		out[i] = vj
	}
	return out
}

// extractScaled is patches.Extract (mean removed) of the image scaled by s
// with the rounding of scaled: each sample goes through float32 first.
func extractScaled(img *patches.Image, x, y, p int, s float64, dst []float64) float64 {
	wh := img.W * img.H
	i := 0
	sum := 0.0
	for c := 0; c < img.C; c++ {
		base := c*wh + y*img.W + x
		for r := 0; r < p; r++ {
			for _, v := range img.Pix[base+r*img.W : base+r*img.W+p] {
				if s != 1 {
					v = float32(float64(v) * s)
				}
				dst[i] = float64(v)
				sum += float64(v)
				i++
			}
		}
	}
	mean := sum / float64(i)
	for j := 0; j < i; j++ {
		dst[j] -= mean
	}
	return mean
}

// ksvd trains d on the m signals of X with ko's stopping rule and opt's
// rounds, workers and progress, on the float32 correlation path.
func (opt Options) ksvd(d *learn.Dict, X []float64, m int, ko learn.KSVDOptions) (*learn.Dict, *learn.Codes) {
	ko.Rounds, ko.Workers, ko.Single = opt.Rounds, opt.Workers, true
	ko.Progress = func(s learn.RoundStats) {
		if opt.Progress != nil {
			opt.Progress(Stage{Name: "train", Round: s.Round, Rounds: s.Rounds})
		}
	}
	return learn.KSVD(d, X, m, ko)
}

// coder codes with d on opt's workers, on the float32 correlation path.
func (opt Options) coder(d *learn.Dict) *learn.Coder {
	c := learn.NewCoder(d)
	c.Workers, c.Single = opt.Workers, true
	return c
}
