package imgfile

import (
	"bytes"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"testing"

	"tessera/patches/patchtest"
)

// FuzzDecode: Decode must never panic, must fail only with this package's
// error types, and what it returns must be consistent and survive a PNG and
// a TIFF round trip unchanged.
func FuzzDecode(f *testing.F) {
	for i, format := range []string{"png", "tiff", "pgm", "ppm", "jpeg"} {
		for _, depth := range []int{8, 16} {
			for _, c := range []int{1, 3} {
				alpha := format == "png" || format == "tiff"
				if format == "jpeg" && depth == 16 || format == "pgm" && c == 3 || format == "ppm" && c == 1 {
					continue
				}
				f.Add(encodeBytes(f, randomFile(3, 2, c, depth, alpha, uint64(i)), format))
			}
		}
	}
	f.Add(pngFile(3, 1, 8, pngPalette, []byte{0, 2, 0, 1},
		[]byte("PLTE"), []byte{1, 2, 3, 40, 50, 60, 250, 251, 252}, []byte("tRNS"), []byte{0, 128}))
	f.Add(tiffFile(binary.BigEndian, []byte{55, 255, 200, 100}, []tiffTag{
		{tagWidth, typeShort, []uint32{2}}, {tagHeight, typeShort, []uint32{1}},
		{tagBitsPerSample, typeShort, []uint32{8, 8}}, {tagCompression, typeShort, []uint32{1}},
		{tagPhotometric, typeShort, []uint32{photoWhiteIsZero}}, {tagStripOffsets, typeLong, nil},
		{tagSamples, typeShort, []uint32{2}}, {tagRowsPerStrip, typeLong, []uint32{1}},
		{tagStripCounts, typeLong, []uint32{4}}, {tagExtraSamples, typeShort, []uint32{extraAssociated}}}))
	f.Add([]byte("P5\n# c\n3 1\n15\n\x00\x07\x0f"))
	if shared := patchtest.Shared(); shared != "" {
		files, _ := filepath.Glob(filepath.Join(shared, "formats", "*"))
		for _, name := range files {
			if b, err := os.ReadFile(name); err == nil && len(b) < 16<<10 {
				f.Add(b)
			}
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := Decode(bytes.NewReader(data), "fuzz", 1<<16)
		if err != nil {
			var fe *FormatError
			var ue *UnsupportedError
			if !errors.As(err, &fe) && !errors.As(err, &ue) {
				t.Fatalf("error of type %T: %v", err, err)
			}
			return
		}
		m := got.Img
		if m.W <= 0 || m.H <= 0 || int64(m.W)*int64(m.H) > 1<<16 || (m.C != 1 && m.C != 3) ||
			(m.Depth != 8 && m.Depth != 16) || len(m.Pix) != m.W*m.H*m.C ||
			(got.Alpha != nil && len(got.Alpha) != m.W*m.H) {
			t.Fatalf("inconsistent File: %dx%dx%d depth %d, %d samples, %d alpha", m.W, m.H, m.C, m.Depth, len(m.Pix), len(got.Alpha))
		}
		for _, v := range m.Pix {
			if v < 0 || float64(v) > m.Peak() || v != float32(int(v)) {
				t.Fatalf("sample %v outside 0..%v or not whole", v, m.Peak())
			}
		}
		for _, format := range []string{"png", "tiff"} {
			var b bytes.Buffer
			if err := Encode(&b, got, format); err != nil {
				t.Fatal(err)
			}
			again, err := Decode(&b, "again", 0)
			if err != nil {
				t.Fatalf("%s of a decoded file: %v", format, err)
			}
			sameFile(t, format, again, got)
		}
	})
}

// Decoding speed on a 512x512 RGB image, 8-bit PNG and 16-bit TIFF as
// written by Encode.
func BenchmarkDecode(b *testing.B) {
	for _, c := range []struct {
		format string
		depth  int
	}{{"png", 8}, {"tiff", 8}, {"tiff", 16}} {
		f := randomFile(512, 512, 3, c.depth, false, 9)
		// Smooth content compresses like photographs do, unlike noise.
		for i := range f.Img.Pix {
			f.Img.Pix[i] = float32((i%512 + i/512%512) % int(f.Img.Peak()+1))
		}
		data := encodeBytes(b, f, c.format)
		b.Run(c.format+"-"+map[int]string{8: "8bit", 16: "16bit"}[c.depth], func(b *testing.B) {
			b.SetBytes(int64(len(f.Img.Pix) * c.depth / 8)) // decoded sample bytes
			for b.Loop() {
				if _, err := Decode(bytes.NewReader(data), "bench", 0); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkEncode(b *testing.B) {
	f := randomFile(512, 512, 3, 8, false, 9)
	for i := range f.Img.Pix {
		f.Img.Pix[i] = float32((i%512 + i/512%512) % 256)
	}
	for _, format := range []string{"png", "tiff"} {
		b.Run(format, func(b *testing.B) {
			for b.Loop() {
				var w bytes.Buffer
				if err := Encode(&w, f, format); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
