package imgfile

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"fmt"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"io"
	"os"

	"tessera/patches"
)

// File is a decoded image file.
type File struct {
	// Img holds the samples in their own units; Depth is 8 or 16, C is 1 or 3.
	Img *patches.Image
	// Alpha is nil when the file has no alpha; otherwise one value per pixel,
	// row-major, in the units of Img.Depth, carried through untouched.
	Alpha []uint16
	// Format is the format the file was read from: "png", "tiff", "jpeg",
	// "pgm" or "ppm".
	Format string
}

// DecodeFile reads the image file at path; see Decode.
func DecodeFile(path string, maxPixels int64) (*File, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	if st, err := fh.Stat(); err == nil && st.IsDir() {
		return nil, fmt.Errorf("%s: is a folder, not an image file", path)
	}
	return Decode(fh, path, maxPixels)
}

// Decode reads one image from r, recognising PNG, TIFF, JPEG, PGM and PPM by
// their content. name is used in error messages only. An image with more
// than maxPixels pixels is refused from its header, before any pixel buffer
// is allocated; maxPixels <= 0 means no limit.
func Decode(r io.Reader, name string, maxPixels int64) (*File, error) {
	br := bufio.NewReaderSize(r, 4096)
	head, _ := br.Peek(16)
	switch {
	case len(head) == 0:
		return nil, &FormatError{Path: name, Reason: "empty file"}
	case bytes.HasPrefix(head, []byte("\x89PNG\r\n\x1a\n")):
		return decodePNG(br, name, maxPixels)
	case bytes.HasPrefix(head, []byte("II*\x00")), bytes.HasPrefix(head, []byte("MM\x00*")):
		data, err := io.ReadAll(br)
		if err != nil {
			return nil, decodeErr(name, "TIFF", err)
		}
		return decodeTIFF(data, name, maxPixels)
	case bytes.HasPrefix(head, []byte("II+\x00")), bytes.HasPrefix(head, []byte("MM\x00+")):
		return nil, &UnsupportedError{Path: name, Feature: "BigTIFF"}
	case bytes.HasPrefix(head, []byte("\xff\xd8")):
		return decodeJPEG(br, name, maxPixels)
	case len(head) >= 2 && head[0] == 'P' && bytes.IndexByte([]byte("1234567fF"), head[1]) >= 0:
		return decodePNM(br, name, maxPixels)
	case bytes.HasPrefix(head, []byte("GIF8")):
		return nil, &UnsupportedError{Path: name, Feature: "GIF"}
	case bytes.HasPrefix(head, []byte("BM")):
		return nil, &UnsupportedError{Path: name, Feature: "BMP"}
	case len(head) >= 12 && string(head[:4]) == "RIFF" && string(head[8:12]) == "WEBP":
		return nil, &UnsupportedError{Path: name, Feature: "WebP"}
	}
	return nil, &FormatError{Path: name, Reason: "not a PNG, TIFF, JPEG, PGM or PPM file"}
}

// checkSize refuses empty images and images over the pixel limit.
func checkSize(name, kind string, w, h, maxPixels int64) error {
	if w <= 0 || h <= 0 {
		return &FormatError{Path: name, Reason: fmt.Sprintf("%s header gives a %dx%d image (zero width or height)", kind, w, h)}
	}
	if w > 1<<31-1 || h > 1<<31-1 || (maxPixels > 0 && w*h > maxPixels) {
		lim := ""
		if maxPixels > 0 {
			lim = fmt.Sprintf(", over the limit of %d", maxPixels)
		}
		return &UnsupportedError{Path: name,
			Feature: fmt.Sprintf("an image of %dx%d pixels%s", w, h, lim),
			Fix:     "crop or scale it down, or raise the pixel limit"}
	}
	return nil
}

// PNG colour types (PNG specification, table 11.1).
const (
	pngGray      = 0
	pngRGB       = 2
	pngPalette   = 3
	pngGrayAlpha = 4
	pngRGBA      = 6
)

func decodePNG(br *bufio.Reader, name string, maxPixels int64) (*File, error) {
	// Signature (8), then the IHDR chunk: length, type, width, height, depth, colour type.
	h, err := br.Peek(8 + 8 + 13)
	if err != nil {
		return nil, &FormatError{Path: name, Reason: "truncated PNG (no complete header)", Err: err}
	}
	if string(h[12:16]) != "IHDR" || binary.BigEndian.Uint32(h[8:12]) != 13 {
		return nil, &FormatError{Path: name, Reason: "corrupt PNG (first chunk is not IHDR)"}
	}
	w := int64(binary.BigEndian.Uint32(h[16:20]))
	ht := int64(binary.BigEndian.Uint32(h[20:24]))
	if err := checkSize(name, "PNG", w, ht, maxPixels); err != nil {
		return nil, err
	}
	c := 3
	if ct := h[25]; ct == pngGray || ct == pngGrayAlpha {
		c = 1
	}
	img, err := png.Decode(br)
	if err != nil {
		return nil, decodeErr(name, "PNG", err)
	}
	f, err := fromImage(img, c, name)
	if err != nil {
		return nil, err
	}
	f.Format = "png"
	return f, nil
}

func decodeJPEG(br *bufio.Reader, name string, maxPixels int64) (*File, error) {
	var head bytes.Buffer
	cfg, err := jpeg.DecodeConfig(io.TeeReader(br, &head))
	if err != nil {
		return nil, decodeErr(name, "JPEG", err)
	}
	c := 3
	switch cfg.ColorModel {
	case color.GrayModel:
		c = 1
	case color.CMYKModel:
		return nil, &UnsupportedError{Path: name, Feature: "CMYK JPEG"}
	}
	if err := checkSize(name, "JPEG", int64(cfg.Width), int64(cfg.Height), maxPixels); err != nil {
		return nil, err
	}
	img, err := jpeg.Decode(io.MultiReader(&head, br))
	if err != nil {
		return nil, decodeErr(name, "JPEG", err)
	}
	f, err := fromImage(img, c, name)
	if err != nil {
		return nil, err
	}
	f.Format = "jpeg"
	return f, nil
}

// fromImage copies a decoded image into a File with c colour channels,
// reading the stored samples of each concrete type (never through
// color.Color.RGBA, which premultiplies).
func fromImage(img image.Image, c int, name string) (*File, error) {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	if w <= 0 || h <= 0 {
		return nil, &FormatError{Path: name, Reason: "decoded image is empty"}
	}
	rgb := []int{0, 1, 2}
	if c == 1 {
		rgb = []int{0}
	}
	switch m := img.(type) {
	case *image.Gray:
		return unpack(m.Pix, m.Stride, w, h, 1, 1, []int{0}, -1), nil
	case *image.Gray16:
		return unpack(m.Pix, m.Stride, w, h, 1, 2, []int{0}, -1), nil
	case *image.RGBA: // opaque in every case that reaches here
		return unpack(m.Pix, m.Stride, w, h, 4, 1, rgb, -1), nil
	case *image.RGBA64:
		return unpack(m.Pix, m.Stride, w, h, 4, 2, rgb, -1), nil
	case *image.NRGBA:
		return unpack(m.Pix, m.Stride, w, h, 4, 1, rgb, 3), nil
	case *image.NRGBA64:
		return unpack(m.Pix, m.Stride, w, h, 4, 2, rgb, 3), nil
	case *image.YCbCr:
		f := newFile(w, h, 3, 8, false)
		pl := f.Img.Pix
		n := w * h
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				yc := m.YCbCrAt(b.Min.X+x, b.Min.Y+y)
				r, g, bl := color.YCbCrToRGB(yc.Y, yc.Cb, yc.Cr)
				i := y*w + x
				pl[i], pl[n+i], pl[2*n+i] = float32(r), float32(g), float32(bl)
			}
		}
		return f, nil
	case *image.Paletted:
		return fromPaletted(m, w, h), nil
	}
	return nil, &UnsupportedError{Path: name, Feature: fmt.Sprintf("image layout %T", img)}
}

func newFile(w, h, c, depth int, alpha bool) *File {
	f := &File{Img: patches.New(w, h, c, depth)}
	if alpha {
		f.Alpha = make([]uint16, w*h)
	}
	return f
}

// unpack copies interleaved samples (n per pixel, bps bytes each, big-endian
// as package image stores them) into planes; chans picks the colour samples
// and ai the alpha sample (-1: none).
func unpack(pix []byte, stride, w, h, n, bps int, chans []int, ai int) *File {
	f := newFile(w, h, len(chans), 8*bps, ai >= 0)
	np := w * h
	for y := 0; y < h; y++ {
		row := pix[y*stride:]
		for x := 0; x < w; x++ {
			px := row[x*n*bps:]
			i := y*w + x
			for ci, s := range chans {
				f.Img.Pix[ci*np+i] = float32(sample(px, s, bps))
			}
			if ai >= 0 {
				f.Alpha[i] = sample(px, ai, bps)
			}
		}
	}
	return f
}

func sample(px []byte, s, bps int) uint16 {
	if bps == 1 {
		return uint16(px[s])
	}
	return uint16(px[2*s])<<8 | uint16(px[2*s+1])
}

// fromPaletted expands a palette image to RGB: 8-bit for 8-bit palettes
// (PNG), 16-bit when a TIFF colour map holds values that are not 8-bit
// values times 257.
func fromPaletted(m *image.Paletted, w, h int) *File {
	type entry struct {
		c    [4]uint16 // r, g, b, a
		wide bool      // c is in 16-bit units
	}
	pal := make([]entry, len(m.Palette))
	depth, alpha := 8, false
	for i, col := range m.Palette {
		switch v := col.(type) {
		case color.RGBA:
			pal[i].c = [4]uint16{uint16(v.R), uint16(v.G), uint16(v.B), 0xff}
		case color.NRGBA:
			pal[i].c = [4]uint16{uint16(v.R), uint16(v.G), uint16(v.B), uint16(v.A)}
			alpha = true
		default: // TIFF colour maps: 16-bit and opaque
			r, g, b, _ := v.RGBA()
			pal[i] = entry{[4]uint16{uint16(r), uint16(g), uint16(b), 0xffff}, true}
			if r%257 != 0 || g%257 != 0 || b%257 != 0 {
				depth = 16
			}
		}
	}
	for i := range pal {
		e := &pal[i]
		for k := range e.c {
			switch {
			case e.wide && depth == 8:
				e.c[k] /= 257
			case !e.wide && depth == 16:
				e.c[k] *= 257
			}
		}
	}
	f := newFile(w, h, 3, depth, alpha)
	n := w * h
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			i := y*w + x
			idx := int(m.Pix[y*m.Stride+x])
			if idx >= len(pal) { // decoders reject this; stay opaque black
				if alpha {
					f.Alpha[i] = uint16(f.Img.Peak())
				}
				continue
			}
			e := pal[idx].c
			f.Img.Pix[i], f.Img.Pix[n+i], f.Img.Pix[2*n+i] = float32(e[0]), float32(e[1]), float32(e[2])
			if alpha {
				f.Alpha[i] = e[3]
			}
		}
	}
	return f
}
