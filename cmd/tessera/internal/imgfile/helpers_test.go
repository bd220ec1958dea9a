package imgfile

import (
	"bytes"
	"compress/zlib"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"hash/crc32"
	"math/rand/v2"
	"testing"

	"tessera/patches/patchtest"
)

// sharedDir returns ../shared or skips the test.
func sharedDir(t testing.TB) string {
	t.Helper()
	return patchtest.SharedPath(t)
}

// samplesHash is the SHA-256 of the samples row-major with channels
// interleaved, 8-bit as bytes and 16-bit as big-endian words: the layout of
// the hashes in ../shared (formats/manifest.json, reference.json).
func samplesHash(f *File) string {
	m := f.Img
	n := m.W * m.H
	b := make([]byte, 0, n*m.C*m.Depth/8)
	for i := 0; i < n; i++ {
		for c := 0; c < m.C; c++ {
			v := uint16(m.Pix[c*n+i])
			if m.Depth == 16 {
				b = append(b, byte(v>>8))
			}
			b = append(b, byte(v))
		}
	}
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// randomFile makes an image with random samples, including 0 and the peak.
func randomFile(w, h, c, depth int, alpha bool, seed uint64) *File {
	r := rand.New(rand.NewPCG(seed, 7))
	f := newFile(w, h, c, depth, alpha)
	peak := int(f.Img.Peak())
	for i := range f.Img.Pix {
		f.Img.Pix[i] = float32(r.IntN(peak + 1))
	}
	f.Img.Pix[0], f.Img.Pix[len(f.Img.Pix)-1] = 0, float32(peak)
	for i := range f.Alpha {
		f.Alpha[i] = uint16(r.IntN(peak + 1))
	}
	if alpha {
		f.Alpha[0], f.Alpha[len(f.Alpha)-1] = 0, uint16(peak)
	}
	return f
}

// pngFile builds a PNG by hand (PNG specification, section 5): signature,
// IHDR, the extra chunks, one IDAT of rows with filter type 0, IEND.
func pngFile(w, h int, depth, ctype byte, rows []byte, extra ...[]byte) []byte {
	chunk := func(typ string, data []byte) []byte {
		b := binary.BigEndian.AppendUint32(nil, uint32(len(data)))
		b = append(append(b, typ...), data...)
		return binary.BigEndian.AppendUint32(b, crc32.ChecksumIEEE(b[4:]))
	}
	out := []byte("\x89PNG\r\n\x1a\n")
	ihdr := binary.BigEndian.AppendUint32(nil, uint32(w))
	ihdr = binary.BigEndian.AppendUint32(ihdr, uint32(h))
	out = append(out, chunk("IHDR", append(ihdr, depth, ctype, 0, 0, 0))...)
	for i := 0; i+1 < len(extra); i += 2 {
		out = append(out, chunk(string(extra[i]), extra[i+1])...)
	}
	if rows != nil {
		var z bytes.Buffer
		zw := zlib.NewWriter(&z)
		zw.Write(rows)
		zw.Close()
		out = append(out, chunk("IDAT", z.Bytes())...)
		out = append(out, chunk("IEND", nil)...)
	}
	return out
}

type tiffTag struct {
	tag, typ uint16
	v        []uint32
}

// tiffFile builds a one-strip uncompressed TIFF by hand (TIFF 6.0, section
// 2): header, pixel data, then the directory; tags must be sorted and the
// StripOffsets value is filled in here.
type byteOrder interface {
	binary.ByteOrder
	binary.AppendByteOrder
}

func tiffFile(bo byteOrder, pix []byte, tags []tiffTag) []byte {
	out := []byte("II*\x00")
	if bo.String() == binary.BigEndian.String() {
		out = []byte("MM\x00*")
	}
	ifdAt := 8 + len(pix) + len(pix)%2
	out = bo.AppendUint32(out, uint32(ifdAt))
	out = append(out, pix...)
	if len(pix)%2 == 1 {
		out = append(out, 0)
	}
	extraAt := ifdAt + 2 + 12*len(tags) + 4
	var extra []byte
	out = bo.AppendUint16(out, uint16(len(tags)))
	for _, e := range tags {
		if e.tag == tagStripOffsets {
			e.v = []uint32{8}
		}
		var val []byte
		for _, v := range e.v {
			if e.typ == typeShort {
				val = bo.AppendUint16(val, uint16(v))
			} else {
				val = bo.AppendUint32(val, v)
			}
		}
		out = bo.AppendUint16(out, e.tag)
		out = bo.AppendUint16(out, e.typ)
		out = bo.AppendUint32(out, uint32(len(e.v)))
		if len(val) <= 4 {
			out = append(out, append(val, make([]byte, 4-len(val))...)...)
		} else {
			out = bo.AppendUint32(out, uint32(extraAt+len(extra)))
			extra = append(extra, val...)
		}
	}
	out = bo.AppendUint32(out, 0)
	return append(out, extra...)
}

func encodeBytes(t testing.TB, f *File, format string) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := Encode(&b, f, format); err != nil {
		t.Fatalf("Encode %s: %v", format, err)
	}
	return b.Bytes()
}

func sameFile(t *testing.T, what string, got, want *File) {
	t.Helper()
	g, w := got.Img, want.Img
	if g.W != w.W || g.H != w.H || g.C != w.C || g.Depth != w.Depth {
		t.Fatalf("%s: got %dx%dx%d depth %d, want %dx%dx%d depth %d", what, g.W, g.H, g.C, g.Depth, w.W, w.H, w.C, w.Depth)
	}
	for i := range w.Pix {
		if g.Pix[i] != w.Pix[i] {
			t.Fatalf("%s: sample %d is %v, want %v", what, i, g.Pix[i], w.Pix[i])
		}
	}
	if (got.Alpha == nil) != (want.Alpha == nil) {
		t.Fatalf("%s: alpha present %v, want %v", what, got.Alpha != nil, want.Alpha != nil)
	}
	for i := range want.Alpha {
		if got.Alpha[i] != want.Alpha[i] {
			t.Fatalf("%s: alpha %d is %d, want %d", what, i, got.Alpha[i], want.Alpha[i])
		}
	}
}
