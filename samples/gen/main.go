// Command gen writes tessera's demo data: procedural images of an invented
// soil laboratory, each degraded copy beside its clean original, so that
// restorations can be scored. Run it from the module root:
//
//	go run ./samples/gen
//
// Every image draws from its own PCG stream with a fixed seed, so reruns
// write byte-identical files.
package main

import (
	"bytes"
	"flag"
	"fmt"
	"image"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"

	"golang.org/x/image/tiff"
)

const seed = 0x5011_1AB5

func stream(k uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, k)) }

var out = flag.String("out", "samples", "folder to write into")

func main() {
	flag.Parse()
	if _, err := os.Stat(*out); err != nil {
		fmt.Fprintln(os.Stderr, "gen: run from the module root:", err)
		os.Exit(1)
	}
	if err := run(); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

func run() error {
	gray, stained := grayPalette(), stainedPalette()

	// Thin-section frames, transmitted light, 8-bit gray, σ = 20.
	var first *specimen
	for i := 1; i <= 3; i++ {
		r := stream(uint64(i))
		s := newSpecimen(r, 320, 320)
		if i == 1 {
			first = s
		}
		rgb, _ := s.render(320, 320, 0, 0, gray)
		rgb[0].blur(0.6)
		clean := quantize(rgb[0].v, 255)
		noisy := addGauss(r, clean, 20, 255)
		name := fmt.Sprintf("thin-section/frame%02d.png", i)
		if err := pair(name, gray8(320, 320, clean), gray8(320, 320, noisy)); err != nil {
			return err
		}
	}

	// A stained section in colour, σ = 15 on each channel.
	{
		r := stream(4)
		s := newSpecimen(r, 320, 320)
		rgb, _ := s.render(320, 320, 0, 0, stained)
		var clean, noisy [3][]float64
		for c := range rgb {
			rgb[c].blur(0.6)
			clean[c] = quantize(rgb[c].v, 255)
			noisy[c] = addGauss(r, clean[c], 15, 255)
		}
		if err := pair("stained/frame01.png", rgb8(320, 320, clean), rgb8(320, 320, noisy)); err != nil {
			return err
		}
	}

	// 16-bit gray frames, σ = 20·257 = 5140: one TIFF, one PGM.
	for i, ext := range []string{"tif", "pgm"} {
		r := stream(uint64(5 + i))
		s := newSpecimen(r, 256, 256)
		rgb, _ := s.render(256, 256, 0, 0, gray)
		rgb[0].blur(0.6)
		for j := range rgb[0].v {
			rgb[0].v[j] *= 257
		}
		clean := quantize(rgb[0].v, 65535)
		noisy := addGauss(r, clean, 20*257, 65535)
		name := fmt.Sprintf("thin-section-16/frame%02d.%s", i+1, ext)
		enc := encodeTIFF
		if ext == "pgm" {
			enc = encodePGM
		}
		if err := write(filepath.Join("clean", name), enc(256, 256, clean)); err != nil {
			return err
		}
		if err := write(filepath.Join("noisy", name), enc(256, 256, noisy)); err != nil {
			return err
		}
	}

	// Autofluorescence of the first frame's field: a photon-limited series
	// of four 16-bit frames that drifts a little and bleaches.
	{
		const alpha, read, peak = 40.0, 60.0, 30.0
		r := stream(8)
		scale := 0.0
		for k := range 4 {
			_, fl := first.render(256, 256, 32+0.6*float64(k), 32+0.35*float64(k), gray)
			fl.blur(1.3)
			if k == 0 {
				scale = peak / maxOf(fl.v)
			}
			bleach := math.Pow(0.94, float64(k))
			clean := make([]float64, len(fl.v))
			noisy := make([]float64, len(fl.v))
			for j, v := range fl.v {
				y := v * scale * bleach
				clean[j] = math.Floor(alpha*y + 0.5)
				noisy[j] = clip(math.Floor(alpha*float64(poisson(r, y))+read*r.NormFloat64()+0.5), 65535)
			}
			name := fmt.Sprintf("fluorescence/t%d.png", k+1)
			if err := pair(name, gray16(256, 256, clean), gray16(256, 256, noisy)); err != nil {
				return err
			}
		}
	}

	// The notebook page: defects burnt in, their mask beside.
	{
		const w, h = 320, 384
		page, cov, val := notebook(stream(9), w, h)
		clean := quantize(page.v, 255)
		noisy := make([]float64, len(clean))
		mask := make([]float64, len(clean))
		for i := range clean {
			noisy[i] = clip(math.Floor(lerp(clean[i], val.v[i], cov.v[i])+0.5), 255)
		}
		// Mark every touched pixel and one more around it.
		for y := range h {
			for x := range w {
				for dy := -1; dy <= 1; dy++ {
					for dx := -1; dx <= 1; dx++ {
						xx, yy := x+dx, y+dy
						if xx >= 0 && yy >= 0 && xx < w && yy < h && cov.v[yy*w+xx] > 0 {
							mask[y*w+x] = 255
						}
					}
				}
			}
		}
		if err := pair("notebook/page.png", gray8(w, h, clean), gray8(w, h, noisy)); err != nil {
			return err
		}
		if err := write("masks/notebook/page.png", encodePNG(gray8(w, h, mask))); err != nil {
			return err
		}
	}
	return nil
}

// poisson draws from a Poisson law of mean lam by inversion; means here
// stay below about 40, where exp(−lam) is far from underflow.
func poisson(r *rand.Rand, lam float64) int {
	if lam <= 0 {
		return 0
	}
	p := math.Exp(-lam)
	f, u, k := p, r.Float64(), 0
	for u > f && k < 1000 {
		k++
		p *= lam / float64(k)
		f += p
	}
	return k
}

func clip(v, peak float64) float64 { return min(max(v, 0), peak) }

func quantize(v []float64, peak float64) []float64 {
	q := make([]float64, len(v))
	for i, x := range v {
		q[i] = clip(math.Floor(x+0.5), peak)
	}
	return q
}

// addGauss adds white Gaussian noise to stored values and rounds and clips
// the result, as a sensor's file would hold it.
func addGauss(r *rand.Rand, clean []float64, sigma, peak float64) []float64 {
	n := make([]float64, len(clean))
	for i, v := range clean {
		n[i] = clip(math.Floor(v+sigma*r.NormFloat64()+0.5), peak)
	}
	return n
}

func maxOf(v []float64) float64 {
	m := math.Inf(-1)
	for _, x := range v {
		m = max(m, x)
	}
	return m
}

func gray8(w, h int, v []float64) image.Image {
	m := image.NewGray(image.Rect(0, 0, w, h))
	for i, x := range v {
		m.Pix[i] = uint8(x)
	}
	return m
}

func gray16(w, h int, v []float64) *image.Gray16 {
	m := image.NewGray16(image.Rect(0, 0, w, h))
	for i, x := range v {
		u := uint16(x)
		m.Pix[2*i], m.Pix[2*i+1] = uint8(u>>8), uint8(u)
	}
	return m
}

func rgb8(w, h int, v [3][]float64) image.Image {
	m := image.NewNRGBA(image.Rect(0, 0, w, h))
	for i := range v[0] {
		m.Pix[4*i], m.Pix[4*i+1], m.Pix[4*i+2], m.Pix[4*i+3] = uint8(v[0][i]), uint8(v[1][i]), uint8(v[2][i]), 255
	}
	return m
}

func encodePNG(m image.Image) []byte {
	var b bytes.Buffer
	enc := png.Encoder{CompressionLevel: png.BestCompression}
	if err := enc.Encode(&b, m); err != nil {
		panic(err) // in-memory images of valid sizes always encode
	}
	return b.Bytes()
}

func encodeTIFF(w, h int, v []float64) []byte {
	var b bytes.Buffer
	if err := tiff.Encode(&b, gray16(w, h, v), &tiff.Options{Compression: tiff.Deflate}); err != nil {
		panic(err)
	}
	return b.Bytes()
}

// encodePGM writes binary PGM (P5) with maxval 65535: two bytes per
// sample, most significant first.
func encodePGM(w, h int, v []float64) []byte {
	b := fmt.Appendf(nil, "P5\n%d %d\n65535\n", w, h)
	for _, x := range v {
		u := uint16(x)
		b = append(b, uint8(u>>8), uint8(u))
	}
	return b
}

// pair writes the clean image under clean/ and the degraded one under
// noisy/ with the same relative name.
func pair(name string, clean, noisy image.Image) error {
	if err := write(filepath.Join("clean", name), encodePNG(clean)); err != nil {
		return err
	}
	return write(filepath.Join("noisy", name), encodePNG(noisy))
}

func write(name string, data []byte) error {
	p := filepath.Join(*out, name)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		return err
	}
	if err := os.WriteFile(p, data, 0o644); err != nil {
		return err
	}
	fmt.Printf("%-42s %8d bytes\n", p, len(data))
	return nil
}
