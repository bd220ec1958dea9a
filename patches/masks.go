package patches

import (
	"image"
	"image/color"
	"math/rand/v2"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/math/fixed"
)

// RandomMask marks each of w×h pixels missing with probability frac,
// from a generator seeded by seed: the random pixel loss of inpainting
// experiments.
func RandomMask(w, h int, frac float64, seed uint64) []bool {
	r := rand.New(rand.NewPCG(seed, 0x6d61736b))
	m := make([]bool, w*h)
	for i := range m {
		m[i] = r.Float64() < frac
	}
	return m
}

// maskWords are the words of TextMask: catalogue stamps and labels, the
// kind of overlay archive scans carry.
var maskWords = []string{"PLATE", "SERIES", "NO.", "ARCHIVE", "COPY", "SAMPLE", "RECEIVED", "FILED",
	"PROOF", "LOT", "SECTION", "DO NOT REMOVE", "SHELF", "BOX", "SHEET", "VOL."}

// TextMask draws lines of text over a w×h frame, one every 40 rows, in a
// 7×13 bitmap font doubled to strokes 2 pixels wide, and returns the
// covered pixels: a structured mask, thin but long, that random loss does
// not test. Words and digits follow from seed.
func TextMask(w, h int, seed uint64) []bool {
	r := rand.New(rand.NewPCG(seed, 0x74657874))
	const scale, pitch = 2, 40
	small := image.NewAlpha(image.Rect(0, 0, (w+scale-1)/scale, (h+scale-1)/scale))
	d := &font.Drawer{Dst: small, Src: image.NewUniform(color.Alpha{A: 255}), Face: basicfont.Face7x13}
	for y := pitch / 2; y < h; y += pitch {
		line := ""
		for len(line)*7*scale < w+7*scale {
			line += maskWords[r.IntN(len(maskWords))] + " " + string(rune('0'+r.IntN(10))) + string(rune('0'+r.IntN(10))) + " "
		}
		d.Dot = fixed.P(r.IntN(7), y/scale)
		d.DrawString(line)
	}
	m := make([]bool, w*h)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			m[y*w+x] = small.AlphaAt(x/scale, y/scale).A >= 128
		}
	}
	return m
}
