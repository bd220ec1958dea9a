package imgfile

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"syscall"
	"testing"

	"golang.org/x/image/tiff"
)

// Every file of ../shared/formats against manifest.json, whose values were
// made with libtiff 4.5 tools and checked with tifffile (chessboard_* and
// truncated.jpg are scikit-image 0.19.3 test data).
func TestSharedFormats(t *testing.T) {
	dir := filepath.Join(sharedDir(t), "formats")
	raw, err := os.ReadFile(filepath.Join(dir, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var man struct {
		Files map[string]struct {
			Expect string
			W      int    `json:"width"`
			H      int    `json:"height"`
			C      int    `json:"channels"`
			Depth  int    `json:"bit_depth"`
			Sha256 string `json:"pixels_sha256"`
		}
	}
	if err := json.Unmarshal(raw, &man); err != nil {
		t.Fatal(err)
	}
	if len(man.Files) < 20 {
		t.Fatalf("manifest lists %d files, expected the full set", len(man.Files))
	}
	for name, want := range man.Files {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(dir, name)
			f, err := DecodeFile(path, 1<<24)
			if want.Expect == "error" {
				var fe *FormatError
				var ue *UnsupportedError
				if err == nil || !(errors.As(err, &fe) || errors.As(err, &ue)) {
					t.Fatalf("got %v, want a FormatError or UnsupportedError", err)
				}
				msg := err.Error()
				if !strings.Contains(msg, name) || strings.Contains(msg, "\n") {
					t.Fatalf("message %q should be one line naming the file", msg)
				}
				t.Log(msg)
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			m := f.Img
			if m.W != want.W || m.H != want.H || m.C != want.C || m.Depth != want.Depth {
				t.Fatalf("got %dx%d, %d channels, %d-bit; manifest says %dx%d, %d, %d-bit",
					m.W, m.H, m.C, m.Depth, want.W, want.H, want.C, want.Depth)
			}
			if got := samplesHash(f); got != want.Sha256 {
				t.Fatalf("decoded samples hash %s, manifest %s", got, want.Sha256)
			}
			if f.Alpha != nil {
				t.Fatal("unexpected alpha")
			}
			if ext, _ := FormatFromExt(name); ext != f.Format {
				t.Fatalf("Format %q, extension says %q", f.Format, ext)
			}
		})
	}
}

// PNG decoding against the decoded-pixel hashes of reference.json
// (kodak_pixels: 8-bit RGB interleaved, row-major), and the gray PNGs
// against the recipe of reference.json gray_conversion (ITU-R BT.601 luma
// 0.299 R + 0.587 G + 0.114 B, rounded half up).
func TestKodakPNG(t *testing.T) {
	shared := sharedDir(t)
	raw, err := os.ReadFile(filepath.Join(shared, "reference", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Kodak map[string]struct {
			W   int    `json:"width"`
			H   int    `json:"height"`
			Sha string `json:"rgb8_sha256"`
		} `json:"kodak_pixels"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"kodim03.png", "kodim04.png"} {
		want, ok := ref.Kodak[name]
		if !ok {
			t.Fatalf("%s missing from reference.json", name)
		}
		f, err := DecodeFile(filepath.Join(shared, "kodak", name), 0)
		if err != nil {
			t.Fatal(err)
		}
		if f.Img.W != want.W || f.Img.H != want.H || f.Img.C != 3 || f.Img.Depth != 8 || f.Format != "png" {
			t.Fatalf("%s: got %dx%dx%d %d-bit %s", name, f.Img.W, f.Img.H, f.Img.C, f.Img.Depth, f.Format)
		}
		if got := samplesHash(f); got != want.Sha {
			t.Fatalf("%s: samples hash %s, reference %s", name, got, want.Sha)
		}
		if name != "kodim03.png" {
			continue
		}
		g, err := DecodeFile(filepath.Join(shared, "reference", "metrics", "kodim03_gray.png"), 0)
		if err != nil {
			t.Fatal(err)
		}
		if g.Img.C != 1 || g.Img.W != f.Img.W || g.Img.H != f.Img.H {
			t.Fatalf("gray: got %dx%dx%d", g.Img.W, g.Img.H, g.Img.C)
		}
		n := f.Img.W * f.Img.H
		bad := 0
		for i := 0; i < n; i++ {
			r, gr, b := float64(f.Img.Pix[i]), float64(f.Img.Pix[n+i]), float64(f.Img.Pix[2*n+i])
			if y := math.Floor(0.299*r + 0.587*gr + 0.114*b + 0.5); float32(y) != g.Img.Pix[i] {
				bad++
			}
		}
		if bad != 0 {
			t.Fatalf("gray PNG differs from BT.601 of the colour PNG at %d of %d pixels", bad, n)
		}
	}
}

// Bit-exact round trips through this package's encoders and decoders.
func TestRoundTrip(t *testing.T) {
	for _, format := range []string{"png", "tiff", "pgm", "ppm"} {
		for _, depth := range []int{8, 16} {
			for _, c := range []int{1, 3} {
				for _, alpha := range []bool{false, true} {
					if alpha && (format == "pgm" || format == "ppm") {
						continue
					}
					what := fmt.Sprintf("%s %d-bit %dch alpha=%v", format, depth, c, alpha)
					// 37 wide: odd row lengths; 300 rows: several TIFF strips at 16-bit RGBA.
					want := randomFile(37, 300, c, depth, alpha, uint64(depth*10+c))
					got, err := Decode(bytes.NewReader(encodeBytes(t, want, format)), what, 0)
					if err != nil {
						t.Fatalf("%s: %v", what, err)
					}
					sameFile(t, what, got, want)
					wantFormat := format
					if format == "pgm" || format == "ppm" {
						wantFormat = map[int]string{1: "pgm", 3: "ppm"}[c]
					}
					if got.Format != wantFormat {
						t.Fatalf("%s: Format %q", what, got.Format)
					}
				}
			}
		}
	}
}

// The encoders checked with decoders that are not this package's: image/png
// and x/image/tiff must see exactly the stored samples.
func TestEncodersAgainstOtherDecoders(t *testing.T) {
	f := randomFile(5, 4, 3, 16, true, 1)
	f.Alpha[1], f.Img.Pix[1] = 1, 65535 // colour under nearly zero alpha survives only unpremultiplied
	img, err := png.Decode(bytes.NewReader(encodeBytes(t, f, "png")))
	if err != nil {
		t.Fatal(err)
	}
	m, ok := img.(*image.NRGBA64)
	if !ok {
		t.Fatalf("image/png gave %T for 16-bit RGBA", img)
	}
	n := 20
	for i := 0; i < n; i++ {
		px := m.NRGBA64At(i%5, i/5)
		if float32(px.R) != f.Img.Pix[i] || float32(px.G) != f.Img.Pix[n+i] || float32(px.B) != f.Img.Pix[2*n+i] || px.A != f.Alpha[i] {
			t.Fatalf("pixel %d: image/png read %v", i, px)
		}
	}
	// 16-bit RGB TIFF without alpha must be three samples per pixel.
	g := randomFile(6, 3, 3, 16, false, 2)
	b := encodeBytes(t, g, "tiff")
	d, err := parseTIFFDir(b)
	if err != nil {
		t.Fatal(err)
	}
	if spp, _ := d.val(b, tagSamples, 0); spp != 3 {
		t.Fatalf("SamplesPerPixel %d, want 3", spp)
	}
	if _, ok := d.ent[tagExtraSamples]; ok {
		t.Fatal("ExtraSamples written for an image without alpha")
	}
	timg, err := tiff.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	rm, ok := timg.(*image.RGBA64)
	if !ok {
		t.Fatalf("x/image/tiff gave %T", timg)
	}
	for i := 0; i < 18; i++ {
		px := rm.RGBA64At(i%6, i/6)
		if float32(px.R) != g.Img.Pix[i] || float32(px.G) != g.Img.Pix[18+i] || float32(px.B) != g.Img.Pix[36+i] {
			t.Fatalf("pixel %d: x/image/tiff read %v", i, px)
		}
	}
}

// Files from another encoder (x/image/tiff) read through this package.
func TestTIFFFromOtherEncoder(t *testing.T) {
	// NRGBA is written with ExtraSamples = 2 (unassociated): kept as stored.
	src := image.NewNRGBA64(image.Rect(0, 0, 3, 2))
	for i := range src.Pix {
		src.Pix[i] = byte(i*37 + 1)
	}
	var b bytes.Buffer
	if err := tiff.Encode(&b, src, nil); err != nil {
		t.Fatal(err)
	}
	f, err := Decode(&b, "nrgba.tif", 0)
	if err != nil {
		t.Fatal(err)
	}
	if f.Img.C != 3 || f.Img.Depth != 16 || f.Alpha == nil {
		t.Fatalf("got %d channels, %d-bit, alpha %v", f.Img.C, f.Img.Depth, f.Alpha != nil)
	}
	for i := 0; i < 6; i++ {
		px := src.NRGBA64At(i%3, i/3)
		if float32(px.R) != f.Img.Pix[i] || float32(px.B) != f.Img.Pix[12+i] || px.A != f.Alpha[i] {
			t.Fatalf("pixel %d: got r=%v b=%v a=%d, stored %v", i, f.Img.Pix[i], f.Img.Pix[12+i], f.Alpha[i], px)
		}
	}
	// A palette TIFF expands to 8-bit RGB.
	pal := image.NewPaletted(image.Rect(0, 0, 2, 2), color.Palette{color.RGBA{10, 20, 30, 255}, color.RGBA{200, 100, 0, 255}})
	pal.Pix = []byte{0, 1, 1, 0}
	b.Reset()
	if err := tiff.Encode(&b, pal, nil); err != nil {
		t.Fatal(err)
	}
	if f, err = Decode(&b, "pal.tif", 0); err != nil {
		t.Fatal(err)
	}
	want := []float32{10, 200, 200, 10, 20, 100, 100, 20, 30, 0, 0, 30}
	if f.Img.C != 3 || f.Img.Depth != 8 || fmt.Sprint(f.Img.Pix) != fmt.Sprint(want) {
		t.Fatalf("palette TIFF: %dch %d-bit %v, want %v", f.Img.C, f.Img.Depth, f.Img.Pix, want)
	}
}

// Hand-made PNGs (PNG specification, sections 11.2-11.3): the stored
// samples come back whatever the colour type.
func TestPNGColourTypes(t *testing.T) {
	// 16-bit gray+alpha, 2x1: (0x1234, 0x0001) and (0xffff, 0x8000).
	ga := pngFile(2, 1, 16, pngGrayAlpha, []byte{0, 0x12, 0x34, 0x00, 0x01, 0xff, 0xff, 0x80, 0x00})
	f, err := Decode(bytes.NewReader(ga), "ga.png", 0)
	if err != nil {
		t.Fatal(err)
	}
	if f.Img.C != 1 || f.Img.Depth != 16 || fmt.Sprint(f.Img.Pix, f.Alpha) != "[4660 65535] [1 32768]" {
		t.Fatalf("gray+alpha: %dch %d-bit %v %v", f.Img.C, f.Img.Depth, f.Img.Pix, f.Alpha)
	}
	// 8-bit palette with tRNS, 3x1, indices 2 0 1.
	p := pngFile(3, 1, 8, pngPalette, []byte{0, 2, 0, 1},
		[]byte("PLTE"), []byte{1, 2, 3, 40, 50, 60, 250, 251, 252}, []byte("tRNS"), []byte{0, 128})
	if f, err = Decode(bytes.NewReader(p), "pal.png", 0); err != nil {
		t.Fatal(err)
	}
	if f.Img.C != 3 || f.Img.Depth != 8 || fmt.Sprint(f.Img.Pix, f.Alpha) != "[250 1 40 251 2 50 252 3 60] [255 0 128]" {
		t.Fatalf("palette: %dch %d-bit %v %v", f.Img.C, f.Img.Depth, f.Img.Pix, f.Alpha)
	}
	// 16-bit RGB, 1x1, opaque: no alpha.
	rgb := pngFile(1, 1, 16, pngRGB, []byte{0, 0xab, 0xcd, 0x00, 0x01, 0xff, 0xfe})
	if f, err = Decode(bytes.NewReader(rgb), "rgb.png", 0); err != nil {
		t.Fatal(err)
	}
	if f.Alpha != nil || fmt.Sprint(f.Img.Pix) != "[43981 1 65534]" {
		t.Fatalf("rgb16: %v alpha %v", f.Img.Pix, f.Alpha)
	}
	// 2-bit gray scales to 8-bit: 0,1,2,3 -> 0,85,170,255.
	g2 := pngFile(4, 1, 2, pngGray, []byte{0, 0b00011011})
	if f, err = Decode(bytes.NewReader(g2), "g2.png", 0); err != nil {
		t.Fatal(err)
	}
	if f.Img.Depth != 8 || fmt.Sprint(f.Img.Pix) != "[0 85 170 255]" {
		t.Fatalf("2-bit gray: %v", f.Img.Pix)
	}
}

// Hand-made TIFFs for the cases the gray+alpha path handles itself: TIFF 6.0
// WhiteIsZero (section 4) and associated alpha (ExtraSamples = 1, section 18).
func TestTIFFGrayAlphaHandMade(t *testing.T) {
	le, be := binary.LittleEndian, binary.BigEndian
	// 2x1, 8-bit, WhiteIsZero, associated alpha; stored (gray, alpha) pairs.
	pix := []byte{55, 255, 200, 100}
	tags := []tiffTag{
		{tagWidth, typeShort, []uint32{2}}, {tagHeight, typeShort, []uint32{1}},
		{tagBitsPerSample, typeShort, []uint32{8, 8}}, {tagCompression, typeShort, []uint32{1}},
		{tagPhotometric, typeShort, []uint32{photoWhiteIsZero}}, {tagStripOffsets, typeLong, nil},
		{tagSamples, typeShort, []uint32{2}}, {tagRowsPerStrip, typeLong, []uint32{1}},
		{tagStripCounts, typeLong, []uint32{4}}, {tagExtraSamples, typeShort, []uint32{extraAssociated}},
	}
	for _, bo := range []byteOrder{le, be} {
		f, err := Decode(bytes.NewReader(tiffFile(bo, pix, tags)), "ga.tif", 0)
		if err != nil {
			t.Fatal(err)
		}
		// Pixel 0: 255-55 = 200 at full alpha. Pixel 1: 255-200 = 55 premultiplied
		// by 100/255, so 55*255/100 = 140.25 -> 140.
		if f.Img.C != 1 || fmt.Sprint(f.Img.Pix, f.Alpha) != "[200 140] [255 100]" {
			t.Fatalf("%v: got %dch %v %v", bo, f.Img.C, f.Img.Pix, f.Alpha)
		}
	}
	// Separate colour planes are refused, not misread.
	planar := append([]tiffTag{}, tags[:10]...)
	planar[4].v = []uint32{photoBlackIsZero}
	planar = append(planar[:9], tiffTag{tagPlanar, typeShort, []uint32{2}}, planar[9])
	_, err := Decode(bytes.NewReader(tiffFile(le, pix, planar)), "planar.tif", 0)
	var ue *UnsupportedError
	if !errors.As(err, &ue) || !strings.Contains(err.Error(), "planar.tif") {
		t.Fatalf("planar TIFF: %v", err)
	}
}

// A header claiming 100000x100000 must be refused before any pixel buffer
// exists; the allocation bound is far below the 10^10 pixels claimed.
func TestMaxPixelsGuard(t *testing.T) {
	huge := map[string][]byte{
		"huge.png": pngFile(100000, 100000, 8, pngGray, nil),
		"huge.pgm": []byte("P5\n100000 100000\n255\n\x00\x00"),
		"huge.tif": tiffFile(binary.LittleEndian, []byte{0}, []tiffTag{
			{tagWidth, typeLong, []uint32{100000}}, {tagHeight, typeLong, []uint32{100000}},
			{tagBitsPerSample, typeShort, []uint32{8}}, {tagPhotometric, typeShort, []uint32{1}},
			{tagStripOffsets, typeLong, nil}, {tagStripCounts, typeLong, []uint32{1}}}),
		// SOI, a JFIF APP0, then a baseline SOF0 for 65535x65535 with one
		// component (ITU T.81, B.2.2).
		"huge.jpg": append([]byte("\xff\xd8\xff\xe0\x00\x10JFIF\x00\x01\x01\x00\x00\x01\x00\x01\x00\x00"),
			0xff, 0xc0, 0, 11, 8, 0xff, 0xff, 0xff, 0xff, 1, 1, 0x11, 0),
	}
	for name, b := range huge {
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		_, err := Decode(bytes.NewReader(b), name, 1e8)
		runtime.ReadMemStats(&after)
		var ue *UnsupportedError
		if !errors.As(err, &ue) || !strings.Contains(err.Error(), "limit") || !strings.HasPrefix(err.Error(), name+": ") {
			t.Fatalf("%s: got %v, want the pixel limit error", name, err)
		}
		if a := after.TotalAlloc - before.TotalAlloc; a > 1<<20 {
			t.Fatalf("%s: allocated %d bytes before refusing", name, a)
		}
	}
	// Within the limit the same kind of small file is just truncated.
	_, err := Decode(bytes.NewReader([]byte("P5\n1000 1000\n255\n\x00")), "short.pgm", 1e8)
	var fe *FormatError
	if !errors.As(err, &fe) {
		t.Fatalf("short PGM: %v", err)
	}
}

func TestZeroSize(t *testing.T) {
	cases := map[string][]byte{
		"zero.png": pngFile(0, 5, 8, pngGray, []byte{}),
		"zero.pgm": []byte("P5 0 5 255\n"),
		"zero.tif": tiffFile(binary.BigEndian, []byte{0}, []tiffTag{
			{tagWidth, typeShort, []uint32{0}}, {tagHeight, typeShort, []uint32{5}},
			{tagStripOffsets, typeLong, nil}}),
		"empty.png": {},
	}
	for name, b := range cases {
		_, err := Decode(bytes.NewReader(b), name, 0)
		var fe *FormatError
		if !errors.As(err, &fe) || !strings.HasPrefix(err.Error(), name+": ") {
			t.Fatalf("%s: got %v, want a FormatError naming the file", name, err)
		}
	}
}

// Every cut of a valid file must fail cleanly with a FormatError.
func TestTruncated(t *testing.T) {
	for _, format := range []string{"png", "tiff", "pgm", "jpeg"} {
		b := encodeBytes(t, randomFile(20, 9, 3, 8, false, 3), format)
		for cut := 1; cut < len(b); cut += 1 + len(b)/97 {
			_, err := Decode(bytes.NewReader(b[:cut]), "cut."+format, 0)
			var fe *FormatError
			if !errors.As(err, &fe) {
				t.Fatalf("%s cut at %d of %d: got %v", format, cut, len(b), err)
			}
		}
	}
}

func TestNetpbmHeaderAndMaxval(t *testing.T) {
	cases := []struct {
		in    string
		depth int
		want  string
	}{
		// maxval 15 scales to 8-bit: v*255/15, rounded half up.
		{"P5\n# comment\n3 1\n15\n\x00\x07\x0f", 8, "[0 119 255]"},
		// maxval 1000 scales to 16-bit: 500*65535/1000 = 32767.5 -> 32768.
		{"P5 3 1 1000\n\x00\x00\x01\xf4\x03\xe8", 16, "[0 32768 65535]"},
		// 16-bit samples are big-endian (Netpbm PGM description).
		{"P5\n1 1\n65535\n\x12\x34", 16, "[4660]"},
		// P6 interleaves R, G, B; comment right after a number.
		{"P6\n1#c\n1\n255\n\x01\x02\x03", 8, "[1 2 3]"},
	}
	for _, c := range cases {
		f, err := Decode(strings.NewReader(c.in), "t.pnm", 0)
		if err != nil {
			t.Fatalf("%q: %v", c.in, err)
		}
		if f.Img.Depth != c.depth || fmt.Sprint(f.Img.Pix) != c.want {
			t.Fatalf("%q: %d-bit %v, want %d-bit %s", c.in, f.Img.Depth, f.Img.Pix, c.depth, c.want)
		}
	}
	bad := map[string]bool{ // true: UnsupportedError, false: FormatError
		"P2\n2 1\n255\n0 255\n": true, "P3\n1 1\n255\n0 0 0\n": true, "P4\n8 1\n\x00": true,
		"P7\nWIDTH 1\n": true, "P5\n2 1\n10\n\x00\x0b": false, "P5\n2 1\n0\n\x00\x00": false,
		"P5\n2 1\n70000\n": false, "P5\n2 x\n255\n": false, "P5\n1 1\n255": false,
	}
	for in, unsupported := range bad {
		_, err := Decode(strings.NewReader(in), "bad.pgm", 0)
		var fe *FormatError
		var ue *UnsupportedError
		if unsupported && !errors.As(err, &ue) || !unsupported && !errors.As(err, &fe) {
			t.Fatalf("%q: got %v (%T)", in, err, err)
		}
	}
}

func TestErrorMessages(t *testing.T) {
	// The one-line form: file, problem, fix.
	got := decodeErr("scan7.tif", "TIFF", io.ErrUnexpectedEOF).Error()
	if want := "scan7.tif: truncated or corrupt TIFF (unexpected EOF); re-export the file or check the copy"; got != want {
		t.Fatalf("got %q\nwant %q", got, want)
	}
	f := randomFile(4, 4, 1, 16, false, 4)
	err := Encode(io.Discard, f, "jpeg")
	var ue *UnsupportedError
	if !errors.As(err, &ue) || !strings.Contains(err.Error(), "--format png or tiff") {
		t.Fatalf("16-bit JPEG: %v", err)
	}
	f = randomFile(4, 4, 3, 8, true, 5)
	for _, format := range []string{"pgm", "ppm", "jpeg"} {
		if err := Encode(io.Discard, f, format); !errors.As(err, &ue) || !strings.Contains(err.Error(), "--format png or tiff") {
			t.Fatalf("alpha in %s: %v", format, err)
		}
	}
	if err := Encode(io.Discard, f, "bmp"); !errors.As(err, &ue) {
		t.Fatalf("unknown format: %v", err)
	}
	if _, err := Decode(strings.NewReader("GIF89a......"), "a.gif", 0); !errors.As(err, &ue) || err.Error() != "a.gif: GIF is not supported; convert it to an 8- or 16-bit PNG or TIFF" {
		t.Fatalf("GIF: %v", err)
	}
}

// Callers quantize; Encode still rounds half up and clips.
func TestEncodeClips(t *testing.T) {
	f := newFile(5, 1, 1, 8, false)
	copy(f.Img.Pix, []float32{-5, 300.7, float32(math.NaN()), 254.5, 3.49})
	for _, format := range []string{"png", "tiff", "pgm"} {
		g, err := Decode(bytes.NewReader(encodeBytes(t, f, format)), format, 0)
		if err != nil {
			t.Fatal(err)
		}
		if fmt.Sprint(g.Img.Pix) != "[0 255 0 255 3]" {
			t.Fatalf("%s: %v", format, g.Img.Pix)
		}
	}
}

// JPEG is lossy: a smooth 8-bit image must come back close (PSNR > 40 dB at
// quality 95 is a rule of thumb for smooth content, not a standard).
func TestJPEGRoundTrip(t *testing.T) {
	for _, c := range []int{1, 3} {
		f := newFile(64, 48, c, 8, false)
		for i := range f.Img.Pix {
			x, y := i%64, (i/64)%48
			f.Img.Pix[i] = float32(40 + 2*x + y + 20*(i/(64*48)))
		}
		g, err := Decode(bytes.NewReader(encodeBytes(t, f, "jpeg")), "j.jpg", 0)
		if err != nil {
			t.Fatal(err)
		}
		if g.Img.C != c || g.Format != "jpeg" {
			t.Fatalf("got %d channels, %s", g.Img.C, g.Format)
		}
		var se float64
		for i, v := range f.Img.Pix {
			d := float64(v - g.Img.Pix[i])
			se += d * d
		}
		psnr := 10 * math.Log10(255*255/(se/float64(len(f.Img.Pix))))
		t.Logf("%d channels: PSNR %.1f dB", c, psnr)
		if psnr < 40 {
			t.Fatalf("%d channels: PSNR %.1f dB", c, psnr)
		}
	}
}

func TestWriteFileAtomic(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.tif")
	f := randomFile(9, 7, 3, 16, true, 6)
	if err := WriteFileAtomic(path, f, "tiff"); err != nil {
		t.Fatal(err)
	}
	g, err := DecodeFile(path, 0)
	if err != nil {
		t.Fatal(err)
	}
	sameFile(t, "written", g, f)
	before, _ := os.ReadFile(path)
	// A failing encode leaves the old file and no temporary file.
	err = WriteFileAtomic(path, f, "ppm")
	var ue *UnsupportedError
	if !errors.As(err, &ue) || !strings.HasPrefix(err.Error(), path+": ") {
		t.Fatalf("got %v", err)
	}
	after, _ := os.ReadFile(path)
	if !bytes.Equal(before, after) {
		t.Fatal("failed write changed the file")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Fatalf("folder holds %d entries, want only out.tif", len(ents))
	}
	// Into a folder that does not exist: an error naming the file.
	if err := WriteFileAtomic(filepath.Join(dir, "no", "x.png"), f, "png"); err == nil || !strings.Contains(err.Error(), "x.png") {
		t.Fatalf("missing folder: %v", err)
	}
	// A full disk is reported with its fix.
	msg := writeErr("o.png", &os.PathError{Op: "write", Path: ".o.png.1.tmp", Err: syscall.ENOSPC}).Error()
	if !strings.HasPrefix(msg, "o.png: disk full") || !strings.Contains(msg, "free some space") || !errors.Is(writeErr("o.png", syscall.ENOSPC), syscall.ENOSPC) {
		t.Fatalf("ENOSPC message %q", msg)
	}
}

func TestNames(t *testing.T) {
	for name, want := range map[string]string{
		"a.png": "png", "B.TIF": "tiff", "c.tiff": "tiff", "d.JPG": "jpeg", "e.jpeg": "jpeg",
		"f.pgm": "pgm", "g.ppm": "ppm", "h.PNM": "ppm", "i.gif": "", "noext": "", "dir.png/x": "",
	} {
		got, ok := FormatFromExt(name)
		if got != want || ok != (want != "") || IsImageName(name) != ok {
			t.Fatalf("%s: FormatFromExt = %q, %v; IsImageName = %v", name, got, ok, IsImageName(name))
		}
	}
	for _, c := range []struct {
		format string
		ch     int
		want   string
	}{{"png", 3, ".png"}, {"tiff", 1, ".tif"}, {"jpeg", 3, ".jpg"}, {"pgm", 3, ".ppm"}, {"ppm", 1, ".pgm"}, {"bmp", 1, ""}} {
		if got := ExtFor(c.format, c.ch); got != c.want {
			t.Fatalf("ExtFor(%s, %d) = %q", c.format, c.ch, got)
		}
	}
}

func TestEncodePanicsOnMalformedFile(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Fatal("no panic")
		}
	}()
	f := randomFile(2, 2, 1, 8, false, 7)
	f.Img.Pix = f.Img.Pix[:3]
	Encode(io.Discard, f, "png")
}
