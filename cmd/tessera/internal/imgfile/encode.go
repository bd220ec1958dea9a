package imgfile

import (
	"bufio"
	"compress/zlib"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"image"
	"image/jpeg"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"syscall"
)

// Encode writes f to w as format: "png", "tiff", "jpeg", or "pgm"/"ppm"
// (either name gives P5 for gray and P6 for colour). 16-bit images stay
// 16-bit; alpha is kept in PNG and TIFF. Formats that cannot hold the image
// (16-bit or alpha in JPEG, alpha in PGM/PPM) and unknown format names give
// an *UnsupportedError. Samples are rounded half up and clipped to the
// range of the bit depth. Encode panics on a malformed File (wrong slice
// lengths, depth or channel count): that is a programming error.
func Encode(w io.Writer, f *File, format string) error {
	checkFile(f)
	switch format {
	case "png":
		return encodePNG(w, f)
	case "tiff":
		return encodeTIFF(w, f)
	case "pgm", "ppm":
		if f.Alpha != nil {
			return &UnsupportedError{Feature: "alpha in PGM/PPM", Fix: "choose --format png or tiff"}
		}
		return encodePNM(w, f)
	case "jpeg":
		if f.Alpha != nil {
			return &UnsupportedError{Feature: "alpha in JPEG", Fix: "choose --format png or tiff"}
		}
		if f.Img.Depth != 8 {
			return &UnsupportedError{Feature: "16-bit JPEG", Fix: "choose --format png or tiff to keep 16 bits"}
		}
		return encodeJPEG(w, f)
	}
	return &UnsupportedError{Feature: fmt.Sprintf("output format %q", format), Fix: "choose png, tiff, jpeg, pgm or ppm"}
}

func checkFile(f *File) {
	if f == nil || f.Img == nil {
		panic("imgfile: Encode of a nil File or image")
	}
	m := f.Img
	if (m.C != 1 && m.C != 3) || (m.Depth != 8 && m.Depth != 16) || m.W <= 0 || m.H <= 0 ||
		len(m.Pix) != m.W*m.H*m.C || (f.Alpha != nil && len(f.Alpha) != m.W*m.H) {
		panic(fmt.Sprintf("imgfile: malformed File (%dx%dx%d, depth %d, %d samples, %d alpha)",
			m.W, m.H, m.C, m.Depth, len(m.Pix), len(f.Alpha)))
	}
}

// interleaveRow fills row with the samples of row y, colour then alpha for
// each pixel, rounded half up and clipped.
func interleaveRow(f *File, y int, row []uint16) {
	m := f.Img
	peak := m.Peak()
	n := m.W * m.H
	spp := m.C
	if f.Alpha != nil {
		spp++
	}
	for x := 0; x < m.W; x++ {
		i := y*m.W + x
		for c := 0; c < m.C; c++ {
			row[x*spp+c] = clip(m.Pix[c*n+i], peak)
		}
		if f.Alpha != nil {
			row[x*spp+m.C] = uint16(min(float64(f.Alpha[i]), peak))
		}
	}
}

func clip(v float32, peak float64) uint16 {
	q := math.Floor(float64(v) + 0.5)
	switch {
	case !(q > 0): // also NaN
		return 0
	case q > peak:
		return uint16(peak)
	}
	return uint16(q)
}

func encodeJPEG(w io.Writer, f *File) error {
	m := f.Img
	r := image.Rect(0, 0, m.W, m.H)
	row := make([]uint16, m.W*m.C)
	var img image.Image
	if m.C == 1 {
		g := image.NewGray(r)
		for y := 0; y < m.H; y++ {
			interleaveRow(f, y, row)
			for x, v := range row {
				g.Pix[y*g.Stride+x] = byte(v)
			}
		}
		img = g
	} else {
		c := image.NewRGBA(r)
		for y := 0; y < m.H; y++ {
			interleaveRow(f, y, row)
			p := c.Pix[y*c.Stride:]
			for x := 0; x < m.W; x++ {
				p[4*x], p[4*x+1], p[4*x+2], p[4*x+3] = byte(row[3*x]), byte(row[3*x+1]), byte(row[3*x+2]), 0xff
			}
		}
		img = c
	}
	return jpeg.Encode(w, img, &jpeg.Options{Quality: 95})
}

// encodePNG writes the samples as stored: colour type by channels and alpha,
// bit depth 8 or 16, no interlace, each row filtered with the filter whose
// output has the least sum of absolute values (PNG specification, 12.8).
func encodePNG(w io.Writer, f *File) error {
	m := f.Img
	ctype, spp := byte(pngGray), m.C
	switch {
	case m.C == 1 && f.Alpha != nil:
		ctype, spp = pngGrayAlpha, 2
	case m.C == 3 && f.Alpha == nil:
		ctype = pngRGB
	case m.C == 3:
		ctype, spp = pngRGBA, 4
	}
	bpp := spp * m.Depth / 8 // bytes per pixel
	cw := &chunkWriter{w: w}
	cw.write("", []byte("\x89PNG\r\n\x1a\n"))
	ihdr := binary.BigEndian.AppendUint32(nil, uint32(m.W))
	ihdr = binary.BigEndian.AppendUint32(ihdr, uint32(m.H))
	ihdr = append(ihdr, byte(m.Depth), ctype, 0, 0, 0)
	cw.write("IHDR", ihdr)

	bw := bufio.NewWriterSize(idatWriter{cw}, 1<<16)
	zw, _ := zlib.NewWriterLevel(bw, zlib.DefaultCompression)
	samples := make([]uint16, m.W*spp)
	prev := make([]byte, m.W*bpp)
	cur := make([]byte, m.W*bpp)
	var cand [5][]byte
	for i := range cand {
		cand[i] = make([]byte, 1+m.W*bpp)
		cand[i][0] = byte(i)
	}
	for y := 0; y < m.H && cw.err == nil; y++ {
		interleaveRow(f, y, samples)
		for i, v := range samples {
			if m.Depth == 8 {
				cur[i] = byte(v)
			} else {
				binary.BigEndian.PutUint16(cur[2*i:], v)
			}
		}
		best, bestSum := 0, -1
		for ft := range cand {
			out := cand[ft][1:]
			sum := 0
			for i := range cur {
				var a, b, c byte
				if i >= bpp {
					a, c = cur[i-bpp], prev[i-bpp]
				}
				b = prev[i]
				var p byte
				switch ft {
				case 1:
					p = a
				case 2:
					p = b
				case 3:
					p = byte((int(a) + int(b)) / 2)
				case 4:
					p = paeth(a, b, c)
				}
				out[i] = cur[i] - p
				if d := int(int8(out[i])); d < 0 {
					sum -= d
				} else {
					sum += d
				}
			}
			if bestSum < 0 || sum < bestSum {
				best, bestSum = ft, sum
			}
		}
		if _, err := zw.Write(cand[best]); err != nil {
			return err
		}
		prev, cur = cur, prev
	}
	if err := zw.Close(); err != nil {
		return err
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	cw.write("IEND", nil)
	return cw.err
}

func paeth(a, b, c byte) byte {
	p := int(a) + int(b) - int(c)
	pa, pb, pc := abs(p-int(a)), abs(p-int(b)), abs(p-int(c))
	switch {
	case pa <= pb && pa <= pc:
		return a
	case pb <= pc:
		return b
	}
	return c
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// chunkWriter writes PNG chunks (length, type, data, CRC of type and data);
// an empty type writes the data bare. It keeps the first error.
type chunkWriter struct {
	w   io.Writer
	err error
}

func (cw *chunkWriter) write(typ string, data []byte) {
	if cw.err != nil {
		return
	}
	if typ == "" {
		_, cw.err = cw.w.Write(data)
		return
	}
	b := binary.BigEndian.AppendUint32(make([]byte, 0, 12+len(data)), uint32(len(data)))
	b = append(append(b, typ...), data...)
	b = binary.BigEndian.AppendUint32(b, crc32.ChecksumIEEE(b[4:]))
	_, cw.err = cw.w.Write(b)
}

type idatWriter struct{ cw *chunkWriter }

func (iw idatWriter) Write(p []byte) (int, error) {
	iw.cw.write("IDAT", p)
	if iw.cw.err != nil {
		return 0, iw.cw.err
	}
	return len(p), nil
}

// WriteFileAtomic encodes f as format into a temporary file in the folder
// of path, flushes it to disk and renames it over path, so path holds
// either its old content or the whole new file. The temporary file is
// removed on any error.
func WriteFileAtomic(path string, f *File, format string) (err error) {
	checkFile(f) // panic before a temporary file exists
	dir := filepath.Dir(path)
	mode := os.FileMode(0o644)
	if st, err := os.Stat(path); err == nil {
		if !st.Mode().IsRegular() {
			return fmt.Errorf("%s: exists and is not a regular file; choose another output name", path)
		}
		mode = st.Mode().Perm()
	}
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return writeErr(path, err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	bw := bufio.NewWriterSize(tmp, 1<<16)
	if err = Encode(bw, f, format); err != nil {
		var ue *UnsupportedError
		if errors.As(err, &ue) && ue.Path == "" {
			ue.Path = path
		}
		return writeErr(path, err)
	}
	if err = bw.Flush(); err != nil {
		return writeErr(path, err)
	}
	if err = tmp.Chmod(mode); err != nil {
		return writeErr(path, err)
	}
	if err = tmp.Sync(); err != nil {
		return writeErr(path, err)
	}
	if err = tmp.Close(); err != nil {
		return writeErr(path, err)
	}
	if err = os.Rename(tmp.Name(), path); err != nil {
		return writeErr(path, err)
	}
	if d, e := os.Open(dir); e == nil { // make the rename itself durable; best effort
		d.Sync()
		d.Close()
	}
	return nil
}

// writeErr names the file in err and gives the fix for a full disk.
func writeErr(path string, err error) error {
	var ue *UnsupportedError
	if errors.As(err, &ue) {
		return err
	}
	if errors.Is(err, syscall.ENOSPC) || errors.Is(err, syscall.EDQUOT) {
		return fmt.Errorf("%s: disk full or over quota while writing (%w); free some space or write to another folder", path, err)
	}
	return fmt.Errorf("%s: cannot write (%w)", path, err)
}

var extFormat = map[string]string{
	".png": "png", ".tif": "tiff", ".tiff": "tiff", ".jpg": "jpeg", ".jpeg": "jpeg",
	".pgm": "pgm", ".ppm": "ppm", ".pnm": "ppm",
}

// FormatFromExt gives the format named by the extension of path, case
// insensitively (".pnm" gives "ppm"; Encode picks P5 or P6 by channels).
func FormatFromExt(path string) (string, bool) {
	f, ok := extFormat[strings.ToLower(filepath.Ext(path))]
	return f, ok
}

// IsImageName reports whether path has an image extension this package
// reads: .png .tif .tiff .jpg .jpeg .pgm .ppm .pnm, in any case.
func IsImageName(path string) bool {
	_, ok := FormatFromExt(path)
	return ok
}

// ExtFor gives the usual extension for format, with channels choosing
// between .pgm and .ppm; it returns "" for an unknown format.
func ExtFor(format string, channels int) string {
	switch format {
	case "png":
		return ".png"
	case "tiff":
		return ".tif"
	case "jpeg":
		return ".jpg"
	case "pgm", "ppm":
		if channels == 1 {
			return ".pgm"
		}
		return ".ppm"
	}
	return ""
}
