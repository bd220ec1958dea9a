package patches

import (
	"fmt"
	"math"
)

// Image is a float image in its own units (0..255 for 8-bit, 0..65535 for
// 16-bit). Channels are stored as planes: sample (x, y) of channel c is
// Pix[c*W*H + y*W + x]. Planes keep per-channel loops contiguous, which is
// what patch extraction and the noise estimators want.
type Image struct {
	W, H, C int
	Pix     []float32
	// Depth is the bit depth of the source samples (8 or 16); it fixes the
	// peak value used for clipping and for PSNR.
	Depth int
}

// New returns a zeroed image. It panics on non-positive sizes: sizes come
// from decoders, which must check them first.
func New(w, h, c, depth int) *Image {
	if w <= 0 || h <= 0 || c <= 0 {
		panic(fmt.Sprintf("patches: bad image size %dx%dx%d", w, h, c))
	}
	return &Image{W: w, H: h, C: c, Pix: make([]float32, w*h*c), Depth: depth}
}

// Peak is the largest sample value of the image's bit depth.
func (m *Image) Peak() float64 {
	if m.Depth <= 0 {
		return 255
	}
	return float64(uint64(1)<<uint(m.Depth) - 1)
}

// Plane returns channel c as a slice into Pix.
func (m *Image) Plane(c int) []float32 {
	n := m.W * m.H
	return m.Pix[c*n : (c+1)*n]
}

// At returns sample (x, y) of channel c.
func (m *Image) At(x, y, c int) float32 { return m.Pix[c*m.W*m.H+y*m.W+x] }

// Clone returns a deep copy.
func (m *Image) Clone() *Image {
	out := *m
	out.Pix = append([]float32(nil), m.Pix...)
	return &out
}

// Crop returns a copy of the rectangle [x0, x0+w) × [y0, y0+h).
func (m *Image) Crop(x0, y0, w, h int) *Image {
	out := New(w, h, m.C, m.Depth)
	for c := 0; c < m.C; c++ {
		src, dst := m.Plane(c), out.Plane(c)
		for y := 0; y < h; y++ {
			copy(dst[y*w:(y+1)*w], src[(y0+y)*m.W+x0:(y0+y)*m.W+x0+w])
		}
	}
	return out
}

// Scaled returns a copy with every sample multiplied by s.
func (m *Image) Scaled(s float64) *Image {
	out := m.Clone()
	if s == 1 {
		return out
	}
	for i, v := range out.Pix {
		out.Pix[i] = float32(float64(v) * s)
	}
	return out
}

// Channel returns channel c as a one-channel copy.
func (m *Image) Channel(c int) *Image {
	out := New(m.W, m.H, 1, m.Depth)
	copy(out.Pix, m.Plane(c))
	return out
}

// Quantize rounds every sample half up and clips it to [0, Peak], as an
// encoder would store it.
func (m *Image) Quantize() {
	peak := m.Peak()
	for i, v := range m.Pix {
		q := math.Floor(float64(v) + 0.5)
		if q < 0 {
			q = 0
		} else if q > peak {
			q = peak
		}
		m.Pix[i] = float32(q)
	}
}
