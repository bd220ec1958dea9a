package imgfile

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"fmt"
	"image"
	"io"

	"golang.org/x/image/tiff"
)

// TIFF tags and values used here (TIFF 6.0, section 8 and appendix A).
const (
	tagWidth         = 256
	tagHeight        = 257
	tagBitsPerSample = 258
	tagCompression   = 259
	tagPhotometric   = 262
	tagFillOrder     = 266
	tagStripOffsets  = 273
	tagSamples       = 277
	tagRowsPerStrip  = 278
	tagStripCounts   = 279
	tagXResolution   = 282
	tagYResolution   = 283
	tagPlanar        = 284
	tagResUnit       = 296
	tagPredictor     = 317
	tagTileWidth     = 322
	tagExtraSamples  = 338

	typeShort    = 3
	typeLong     = 4
	typeRational = 5

	photoWhiteIsZero = 0
	photoBlackIsZero = 1
	photoRGB         = 2
	compDeflate      = 8
	predHorizontal   = 2
	extraAssociated  = 1
	extraUnassoc     = 2
)

// tiffDir is the first image file directory of a TIFF.
type tiffDir struct {
	bo  binary.ByteOrder
	ent map[uint16]int // tag -> offset of its 12-byte entry
}

func parseTIFFDir(b []byte) (*tiffDir, error) {
	if len(b) < 8 {
		return nil, io.ErrUnexpectedEOF
	}
	d := &tiffDir{bo: binary.LittleEndian, ent: map[uint16]int{}}
	if b[0] == 'M' {
		d.bo = binary.BigEndian
	}
	off := int64(d.bo.Uint32(b[4:8]))
	if off+2 > int64(len(b)) {
		return nil, io.ErrUnexpectedEOF
	}
	n := int64(d.bo.Uint16(b[off:]))
	if off+2+12*n > int64(len(b)) {
		return nil, io.ErrUnexpectedEOF
	}
	for i := int64(0); i < n; i++ {
		p := int(off + 2 + 12*i)
		d.ent[d.bo.Uint16(b[p:])] = p
	}
	return d, nil
}

// vals returns up to max values of a BYTE, SHORT or LONG tag; ok is false
// when the tag is absent.
func (d *tiffDir) vals(b []byte, tag uint16, max int) (v []uint32, ok bool, err error) {
	p, ok := d.ent[tag]
	if !ok {
		return nil, false, nil
	}
	typ, count := d.bo.Uint16(b[p+2:]), int64(d.bo.Uint32(b[p+4:]))
	size := map[uint16]int64{1: 1, typeShort: 2, typeLong: 4}[typ]
	if size == 0 {
		return nil, true, fmt.Errorf("tag %d has data type %d", tag, typ)
	}
	data := b[p+8 : p+12]
	inline := count*size <= 4 // decided by the full count, as readers must
	count = min(count, int64(max))
	if !inline {
		at := int64(d.bo.Uint32(b[p+8:]))
		if at+count*size > int64(len(b)) {
			return nil, true, io.ErrUnexpectedEOF
		}
		data = b[at : at+count*size]
	}
	for i := int64(0); i < count; i++ {
		switch size {
		case 1:
			v = append(v, uint32(data[i]))
		case 2:
			v = append(v, uint32(d.bo.Uint16(data[2*i:])))
		default:
			v = append(v, d.bo.Uint32(data[4*i:]))
		}
	}
	return v, true, nil
}

// val returns the first value of tag, or def when the tag is absent.
func (d *tiffDir) val(b []byte, tag uint16, def uint32) (uint32, error) {
	v, ok, err := d.vals(b, tag, 1)
	if err != nil || !ok || len(v) == 0 {
		return def, err
	}
	return v[0], nil
}

// put rewrites tag in place as a single inline SHORT or LONG value.
func (d *tiffDir) put(b []byte, tag uint16, v uint32) {
	p, ok := d.ent[tag]
	if !ok {
		return
	}
	d.bo.PutUint32(b[p+4:], 1)
	if v > 0xffff {
		d.bo.PutUint16(b[p+2:], typeLong)
		d.bo.PutUint32(b[p+8:], v)
		return
	}
	d.bo.PutUint16(b[p+2:], typeShort)
	d.bo.PutUint16(b[p+8:], uint16(v))
	b[p+10], b[p+11] = 0, 0
}

func decodeTIFF(data []byte, name string, maxPixels int64) (*File, error) {
	d, err := parseTIFFDir(data)
	if err != nil {
		return nil, &FormatError{Path: name, Reason: "truncated or corrupt TIFF (the image directory lies past the end of the file)", Err: err}
	}
	var w, h, spp, photo, planar, pred, extra, comp, fill uint32
	var bps []uint32
	for _, q := range []struct {
		p   *uint32
		tag uint16
		def uint32
	}{{&w, tagWidth, 0}, {&h, tagHeight, 0}, {&spp, tagSamples, 1}, {&photo, tagPhotometric, photoWhiteIsZero},
		{&planar, tagPlanar, 1}, {&pred, tagPredictor, 1}, {&extra, tagExtraSamples, 0},
		{&comp, tagCompression, 1}, {&fill, tagFillOrder, 1}} {
		if *q.p, err = d.val(data, q.tag, q.def); err != nil {
			return nil, decodeErr(name, "TIFF", err)
		}
	}
	if bps, _, err = d.vals(data, tagBitsPerSample, 16); err != nil {
		return nil, decodeErr(name, "TIFF", err)
	}
	if err := checkSize(name, "TIFF", int64(w), int64(h), maxPixels); err != nil {
		return nil, err
	}
	// x/image/tiff would misread these rather than refuse them.
	if planar != 1 && max(int(spp), len(bps)) > 1 {
		return nil, &UnsupportedError{Path: name, Feature: "TIFF with separate colour planes (PlanarConfiguration 2)"}
	}
	if fill == 2 && len(bps) > 0 && bps[0] < 8 && comp != 3 && comp != 4 {
		return nil, &UnsupportedError{Path: name, Feature: "TIFF with reversed bit order (FillOrder 2)"}
	}
	if kind, ok := map[uint32]string{4: "transparency mask", 5: "CMYK", 6: "YCbCr", 8: "CIELab", 9: "ICCLab", 10: "ITULab"}[photo]; ok {
		return nil, &UnsupportedError{Path: name, Feature: kind + " TIFF"}
	}
	if photo == photoRGB && len(bps) > 4 {
		return nil, &UnsupportedError{Path: name, Feature: fmt.Sprintf("RGB TIFF with %d samples per pixel", len(bps))}
	}
	if pred != 1 && pred != predHorizontal {
		return nil, &UnsupportedError{Path: name, Feature: fmt.Sprintf("TIFF predictor %d", pred)}
	}
	if len(bps) == 1 && spp == 2 { // one value for all samples: common in practice
		bps = append(bps, bps[0])
	}
	if (photo == photoWhiteIsZero || photo == photoBlackIsZero) && len(bps) == 2 {
		return decodeTIFFGrayAlpha(data, d, name, int(w), int(h), bps, photo, pred, extra)
	}
	img, err := xDecode(data, name, int(w), int(h))
	if err != nil {
		return nil, err
	}
	var f *File
	switch m := img.(type) {
	case *image.RGBA: // associated alpha when there are four samples
		if len(bps) == 4 {
			f = unpack(m.Pix, m.Stride, int(w), int(h), 4, 1, []int{0, 1, 2}, 3)
		}
	case *image.RGBA64:
		if len(bps) == 4 {
			f = unpack(m.Pix, m.Stride, int(w), int(h), 4, 2, []int{0, 1, 2}, 3)
		}
	}
	if f != nil {
		unpremultiply(f)
	} else if f, err = fromImage(img, 3, name); err != nil {
		return nil, err
	}
	f.Format = "tiff"
	return f, nil
}

// decodeTIFFGrayAlpha reads gray+alpha through x/image/tiff, which takes no
// extra samples on gray images: a copy of the directory describes the
// chunky samples as a gray image twice as wide, with the predictor and the
// photometric inversion turned off and undone here.
func decodeTIFFGrayAlpha(data []byte, d *tiffDir, name string, w, h int, bps []uint32, photo, pred, extra uint32) (*File, error) {
	if len(bps) != 2 || bps[0] != bps[1] || (bps[0] != 8 && bps[0] != 16) {
		return nil, &UnsupportedError{Path: name, Feature: fmt.Sprintf("gray+alpha TIFF with %v bits per sample", bps)}
	}
	if extra != extraAssociated && extra != extraUnassoc {
		return nil, &UnsupportedError{Path: name, Feature: "gray TIFF with an extra sample that is not alpha"}
	}
	tw, err := d.val(data, tagTileWidth, uint32(w))
	if err != nil {
		return nil, decodeErr(name, "TIFF", err)
	}
	if tw == 0 || tw > 1<<30 {
		return nil, &FormatError{Path: name, Reason: fmt.Sprintf("corrupt TIFF (tile width %d)", tw)}
	}
	b := bytes.Clone(data)
	d.put(b, tagSamples, 1)
	d.put(b, tagBitsPerSample, bps[0])
	d.put(b, tagWidth, uint32(2*w))
	d.put(b, tagTileWidth, 2*tw)
	d.put(b, tagPredictor, 1)
	d.put(b, tagPhotometric, photoBlackIsZero)
	img, err := xDecode(b, name, 2*w, h)
	if err != nil {
		return nil, err
	}
	var s []uint16 // gray, alpha interleaved, row-major
	switch m := img.(type) {
	case *image.Gray:
		s = make([]uint16, 0, 2*w*h)
		for y := 0; y < h; y++ {
			for _, v := range m.Pix[y*m.Stride : y*m.Stride+2*w] {
				s = append(s, uint16(v))
			}
		}
	case *image.Gray16:
		s = make([]uint16, 0, 2*w*h)
		for y := 0; y < h; y++ {
			row := m.Pix[y*m.Stride : y*m.Stride+4*w]
			for i := 0; i < len(row); i += 2 {
				s = append(s, uint16(row[i])<<8|uint16(row[i+1]))
			}
		}
	default:
		return nil, &FormatError{Path: name, Reason: "corrupt TIFF (gray+alpha samples did not decode as gray)"}
	}
	if pred == predHorizontal { // differences restart at every strip or tile row (TIFF 6.0, section 14)
		mask := uint16(1<<bps[0] - 1)
		for y := 0; y < h; y++ {
			row := s[2*w*y : 2*w*(y+1)]
			for x0 := 0; x0 < w; x0 += int(tw) {
				seg := row[2*x0 : 2*min(x0+int(tw), w)]
				for i := 2; i < len(seg); i++ {
					seg[i] = (seg[i] + seg[i-2]) & mask
				}
			}
		}
	}
	f := newFile(w, h, 1, int(bps[0]), true)
	peak := uint16(f.Img.Peak())
	for i := range f.Alpha {
		g := s[2*i]
		if photo == photoWhiteIsZero {
			g = peak - g
		}
		f.Img.Pix[i], f.Alpha[i] = float32(g), s[2*i+1]
	}
	if extra == extraAssociated {
		unpremultiply(f)
	}
	f.Format = "tiff"
	return f, nil
}

// xDecode runs x/image/tiff once its own reading of the size agrees with
// the one checked against the pixel limit.
func xDecode(b []byte, name string, w, h int) (image.Image, error) {
	cfg, err := tiff.DecodeConfig(bytes.NewReader(b))
	if err != nil {
		return nil, decodeErr(name, "TIFF", err)
	}
	if cfg.Width != w || cfg.Height != h {
		return nil, &FormatError{Path: name, Reason: "corrupt TIFF (inconsistent image directory)"}
	}
	img, err := tiff.Decode(bytes.NewReader(b))
	if err != nil {
		return nil, decodeErr(name, "TIFF", err)
	}
	if img.Bounds() != image.Rect(0, 0, w, h) {
		return nil, &FormatError{Path: name, Reason: "corrupt TIFF (inconsistent image directory)"}
	}
	return img, nil
}

// unpremultiply turns associated alpha into unassociated alpha, rounding
// half up; colour under zero alpha becomes 0.
func unpremultiply(f *File) {
	peak := uint32(f.Img.Peak())
	n := len(f.Alpha)
	for c := 0; c < f.Img.C; c++ {
		pl := f.Img.Pix[c*n : (c+1)*n]
		for i, a := range f.Alpha {
			switch a32 := uint32(a); {
			case a32 == 0:
				pl[i] = 0
			case a32 < peak:
				v := (uint64(pl[i])*uint64(peak)*2 + uint64(a32)) / (2 * uint64(a32))
				pl[i] = float32(min(v, uint64(peak)))
			}
		}
	}
}

// encodeTIFF writes a baseline TIFF: little-endian, chunky samples in
// Deflate-compressed strips with the horizontal predictor, alpha as an
// unassociated extra sample.
func encodeTIFF(w io.Writer, f *File) error {
	m := f.Img
	spp := m.C
	if f.Alpha != nil {
		spp++
	}
	bytesPer := m.Depth / 8
	rowLen := m.W * spp // samples per row
	rowsPerStrip := max(1, (64<<10)/(rowLen*bytesPer))
	var strips [][]byte
	var total int64 = 8
	row := make([]uint16, rowLen)
	raw := make([]byte, 0, rowsPerStrip*rowLen*bytesPer)
	for y0 := 0; y0 < m.H; y0 += rowsPerStrip {
		raw = raw[:0]
		for y := y0; y < min(y0+rowsPerStrip, m.H); y++ {
			interleaveRow(f, y, row)
			mask := uint16(1<<m.Depth - 1)
			for i := len(row) - 1; i >= spp; i-- {
				row[i] = (row[i] - row[i-spp]) & mask
			}
			for _, v := range row {
				if bytesPer == 1 {
					raw = append(raw, byte(v))
				} else {
					raw = binary.LittleEndian.AppendUint16(raw, v)
				}
			}
		}
		var buf bytes.Buffer
		zw := zlib.NewWriter(&buf)
		zw.Write(raw)
		if err := zw.Close(); err != nil {
			return err
		}
		strips = append(strips, buf.Bytes())
		total += int64(buf.Len())
	}
	if total > 1<<32-1<<20 {
		return &UnsupportedError{Feature: "an image this large in a classic TIFF", Fix: "choose --format png"}
	}

	photo := uint32(photoBlackIsZero)
	if m.C == 3 {
		photo = photoRGB
	}
	bits := make([]uint32, spp)
	for i := range bits {
		bits[i] = uint32(m.Depth)
	}
	offsets := make([]uint32, len(strips))
	counts := make([]uint32, len(strips))
	at := uint32(8)
	for i, s := range strips {
		offsets[i], counts[i] = at, uint32(len(s))
		at += uint32(len(s))
	}
	type entry struct {
		tag, typ uint16
		v        []uint32 // a RATIONAL takes two
	}
	ents := []entry{
		{tagWidth, typeLong, []uint32{uint32(m.W)}},
		{tagHeight, typeLong, []uint32{uint32(m.H)}},
		{tagBitsPerSample, typeShort, bits},
		{tagCompression, typeShort, []uint32{compDeflate}},
		{tagPhotometric, typeShort, []uint32{photo}},
		{tagStripOffsets, typeLong, offsets},
		{tagSamples, typeShort, []uint32{uint32(spp)}},
		{tagRowsPerStrip, typeLong, []uint32{uint32(rowsPerStrip)}},
		{tagStripCounts, typeLong, counts},
		{tagXResolution, typeRational, []uint32{72, 1}},
		{tagYResolution, typeRational, []uint32{72, 1}},
		{tagPlanar, typeShort, []uint32{1}},
		{tagResUnit, typeShort, []uint32{2}}, // inch; 72 dpi is the common default
		{tagPredictor, typeShort, []uint32{predHorizontal}},
	}
	if f.Alpha != nil {
		ents = append(ents, entry{tagExtraSamples, typeShort, []uint32{extraUnassoc}})
	}
	// Out-of-line values, then the directory last: a file cut anywhere loses
	// its directory and reads as truncated.
	extraAt := at + at%2 // word boundary
	le := binary.LittleEndian
	var extraData, ifd []byte
	ifd = le.AppendUint16(ifd, uint16(len(ents)))
	for _, e := range ents {
		var val []byte
		for _, v := range e.v {
			if e.typ == typeShort {
				val = le.AppendUint16(val, uint16(v))
			} else {
				val = le.AppendUint32(val, v)
			}
		}
		count := len(e.v)
		if e.typ == typeRational {
			count /= 2
		}
		ifd = le.AppendUint16(ifd, e.tag)
		ifd = le.AppendUint16(ifd, e.typ)
		ifd = le.AppendUint32(ifd, uint32(count))
		if len(val) <= 4 {
			ifd = append(ifd, append(val, make([]byte, 4-len(val))...)...)
		} else {
			ifd = le.AppendUint32(ifd, extraAt+uint32(len(extraData)))
			extraData = append(extraData, val...) // every value here is an even length
		}
	}
	ifd = le.AppendUint32(ifd, 0) // no next directory
	ifdAt := extraAt + uint32(len(extraData))

	out := [][]byte{le.AppendUint32([]byte("II*\x00"), ifdAt)}
	out = append(out, strips...)
	if at%2 == 1 {
		out = append(out, []byte{0})
	}
	for _, b := range append(out, extraData, ifd) {
		if _, err := w.Write(b); err != nil {
			return err
		}
	}
	return nil
}
