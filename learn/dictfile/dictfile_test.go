package dictfile

import (
	"bytes"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"tessera/learn"
)

// sample is a small trained-looking dictionary with every field set.
func sample(uses bool) *File {
	d := learn.OvercompleteDCT(4, 5, 3) // 25 atoms of 3·4² = 48
	d.Atoms[7] = -0.0                   // the sign of zero must survive too
	d.Atoms[8] = math.SmallestNonzeroFloat64
	f := &File{Dict: d, Training: Training{Program: "tessera learn", Images: 20, ImageChannels: 3, Patches: 4000,
		Rounds: 5, Train: 4000, Bound: 1.15, Seed: 1<<64 - 1, SigmaMin: 19.5, SigmaMax: 20.25}}
	if uses {
		f.Uses = make([]uint64, d.K)
		for i := range f.Uses {
			f.Uses[i] = uint64(i*i) + 1<<40
		}
	}
	return f
}

func encode(t testing.TB, f *File) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := Write(&b, f); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func sameFile(t *testing.T, got, want *File) {
	t.Helper()
	g, w := got.Dict, want.Dict
	if g.N != w.N || g.K != w.K || g.Patch != w.Patch || g.Channels != w.Channels {
		t.Fatalf("shape %d×%d p%d c%d, want %d×%d p%d c%d", g.N, g.K, g.Patch, g.Channels, w.N, w.K, w.Patch, w.Channels)
	}
	for i := range w.Atoms {
		if math.Float64bits(g.Atoms[i]) != math.Float64bits(w.Atoms[i]) {
			t.Fatalf("value %d: %v, want %v (bit for bit)", i, g.Atoms[i], w.Atoms[i])
		}
	}
	if (got.Uses == nil) != (want.Uses == nil) || len(got.Uses) != len(want.Uses) {
		t.Fatalf("uses %v, want %v", got.Uses, want.Uses)
	}
	for i := range want.Uses {
		if got.Uses[i] != want.Uses[i] {
			t.Fatalf("use %d: %d, want %d", i, got.Uses[i], want.Uses[i])
		}
	}
	if got.Training != want.Training {
		t.Fatalf("training %+v, want %+v", got.Training, want.Training)
	}
}

func TestRoundTrip(t *testing.T) {
	for _, uses := range []bool{false, true} {
		want := sample(uses)
		raw := encode(t, want)
		got, err := Read(bytes.NewReader(raw))
		if err != nil {
			t.Fatal(err)
		}
		sameFile(t, got, want)
		// The layout of doc.go: header, metadata, counts, atoms.
		n := headerSize + 8*want.Dict.N*want.Dict.K + len(mustJSON(t, want.Training))
		if uses {
			n += 8 * want.Dict.K
		}
		if len(raw) != n {
			t.Errorf("file is %d bytes, the layout gives %d", len(raw), n)
		}
		if !bytes.Equal(encode(t, got), raw) {
			t.Error("writing what was read does not give the same bytes")
		}
	}
	// A dictionary that is not for patches, with no training record.
	d := learn.NewDict(3, 2)
	copy(d.Atoms, []float64{1, 0, 0, 0, 0.6, 0.8})
	got, err := Read(bytes.NewReader(encode(t, &File{Dict: d})))
	if err != nil {
		t.Fatal(err)
	}
	sameFile(t, got, &File{Dict: d})
}

func mustJSON(t *testing.T, tr Training) []byte {
	var b bytes.Buffer
	Write(&b, &File{Dict: learn.NewDict(1, 1), Training: tr})
	return b.Bytes()[headerSize : len(b.Bytes())-8]
}

// The header fields sit where doc.go says; a reader written from the
// documentation alone finds them.
func TestHeaderLayout(t *testing.T) {
	f := sample(true)
	raw := encode(t, f)
	le := binary.LittleEndian
	meta := int(le.Uint32(raw[24:]))
	checks := []struct {
		name      string
		got, want uint64
	}{
		{"version", uint64(le.Uint16(raw[8:])), 1},
		{"flags", uint64(le.Uint16(raw[10:])), 1},
		{"patch", uint64(le.Uint16(raw[12:])), 4},
		{"channels", uint64(le.Uint16(raw[14:])), 3},
		{"N", uint64(le.Uint32(raw[16:])), 48},
		{"K", uint64(le.Uint32(raw[20:])), 25},
		{"payload", le.Uint64(raw[32:]), uint64(len(raw) - headerSize)},
		// CRC-32C with the Castagnoli polynomial (RFC 3720 §12.1).
		{"payload crc", uint64(le.Uint32(raw[40:])), uint64(crc32.Checksum(raw[headerSize:], crc32.MakeTable(crc32.Castagnoli)))},
		{"first count", le.Uint64(raw[headerSize+meta:]), f.Uses[0]},
		{"first atom value", le.Uint64(raw[headerSize+meta+8*25:]), math.Float64bits(f.Dict.Atoms[0])},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s: %d, want %d", c.name, c.got, c.want)
		}
	}
	if string(raw[:8]) != Magic || !strings.HasPrefix(string(raw[headerSize:]), `{"program":"tessera learn"`) {
		t.Errorf("magic %q, metadata %q", raw[:8], raw[headerSize:headerSize+30])
	}
	// The check value of CRC-32C ("CRC-32/ISCSI") over "123456789" is
	// 0xE3069283 in the catalogue of parametrised CRC algorithms (value from
	// memory).
	if v := crc32.Checksum([]byte("123456789"), castagnoli); v != 0xE3069283 {
		t.Errorf("CRC-32C check value %#x", v)
	}
}

func wantKind(t *testing.T, what string, err, kind error) *FormatError {
	t.Helper()
	var fe *FormatError
	if !errors.As(err, &fe) || !errors.Is(err, kind) {
		t.Fatalf("%s: got %v, want a *FormatError of kind %q", what, err, kind)
	}
	return fe
}

// Every single flipped byte is caught: in the magic as a foreign file, in
// the version as a version error, anywhere else by a checksum.
func TestFlippedByte(t *testing.T) {
	raw := encode(t, sample(true))
	for i := range raw {
		for _, bit := range []byte{0x01, 0x80} {
			b := append([]byte(nil), raw...)
			b[i] ^= bit
			_, err := Read(bytes.NewReader(b))
			switch {
			case i < 8:
				wantKind(t, "magic byte", err, ErrForeign)
			case i < 10:
				wantKind(t, "version byte", err, ErrVersion)
			default:
				fe := wantKind(t, "byte", err, ErrChecksum)
				if i == 500 && !strings.Contains(fe.Error(), "payload checksum mismatch") {
					t.Errorf("message %q", fe)
				}
			}
		}
	}
}

func TestTruncatedAndTrailing(t *testing.T) {
	raw := encode(t, sample(true))
	for n := 0; n < len(raw); n++ {
		_, err := Read(bytes.NewReader(raw[:n]))
		wantKind(t, "truncated", err, ErrTruncated)
	}
	_, err := Read(bytes.NewReader(append(append([]byte(nil), raw...), 0)))
	wantKind(t, "trailing byte", err, ErrCorrupt)
}

func TestForeignFiles(t *testing.T) {
	for _, head := range []string{
		"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR",
		"P5\n10 10\n255\n",
		"II*\x00\x08\x00\x00\x00",
		"hello, dictionary",
		"TSRx", // shorter than the magic, and not its start
	} {
		_, err := Read(strings.NewReader(head))
		fe := wantKind(t, head, err, ErrForeign)
		if !strings.Contains(fe.Error(), "not a tessera dictionary file") {
			t.Errorf("%q: message %q", head, fe)
		}
	}
	// A newer version is named as such, not as damage.
	raw := encode(t, sample(false))
	binary.LittleEndian.PutUint16(raw[8:], 2)
	fe := wantKind(t, "version 2", func() error { _, err := Read(bytes.NewReader(raw)); return err }(), ErrVersion)
	if !strings.Contains(fe.Error(), "version 2") {
		t.Errorf("message %q", fe)
	}
}

// reseal rewrites the header checksum after a deliberate edit, as a
// hostile writer would.
func reseal(h []byte) {
	binary.LittleEndian.PutUint32(h[44:], crc32.Checksum(h[:44], castagnoli))
}

// A header that claims the largest sizes, with valid checksum but almost no
// payload, is refused as truncated after allocating about what the file
// holds, not the 128 MiB it claims.
func TestHostileHeaderAllocatesLittle(t *testing.T) {
	raw := encode(t, &File{Dict: learn.NewDict(1, 1)})[:headerSize]
	le := binary.LittleEndian
	le.PutUint16(raw[12:], 0)
	le.PutUint32(raw[16:], 256)
	le.PutUint32(raw[20:], 65536)
	le.PutUint32(raw[24:], 0)
	le.PutUint64(raw[32:], 8*256*65536)
	reseal(raw)
	file := append(raw, make([]byte, 1000)...)
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	_, err := Read(bytes.NewReader(file))
	runtime.ReadMemStats(&after)
	wantKind(t, "hostile sizes", err, ErrTruncated)
	if a := after.TotalAlloc - before.TotalAlloc; a > 1<<20 {
		t.Errorf("allocated %d bytes for a %d-byte file", a, len(file))
	}

	bad := map[string]func(h []byte){
		"N over the limit":     func(h []byte) { le.PutUint32(h[16:], MaxN+1) },
		"K zero":               func(h []byte) { le.PutUint32(h[20:], 0) },
		"N·K over the limit":   func(h []byte) { le.PutUint32(h[16:], 4096); le.PutUint32(h[20:], 8192) },
		"metadata too long":    func(h []byte) { le.PutUint32(h[24:], MaxMeta+1) },
		"patch without chans":  func(h []byte) { le.PutUint16(h[12:], 4) },
		"N not c·p²":           func(h []byte) { le.PutUint16(h[12:], 4); le.PutUint16(h[14:], 1) },
		"unknown flag":         func(h []byte) { le.PutUint16(h[10:], 2) },
		"reserved set":         func(h []byte) { le.PutUint32(h[28:], 1) },
		"payload length wrong": func(h []byte) { le.PutUint64(h[32:], 1<<62) },
	}
	for name, edit := range bad {
		h := encode(t, &File{Dict: learn.NewDict(1, 1)})
		edit(h)
		reseal(h)
		_, err := Read(bytes.NewReader(h))
		wantKind(t, name, err, ErrCorrupt)
	}
}

func TestBadValues(t *testing.T) {
	f := sample(false)
	f.Dict.Atoms[3] = math.NaN()
	var b bytes.Buffer
	wantKind(t, "write NaN", Write(&b, f), ErrCorrupt)

	// A NaN smuggled in with valid checksums is refused on reading.
	raw := encode(t, sample(false))
	meta := int(binary.LittleEndian.Uint32(raw[24:]))
	binary.LittleEndian.PutUint64(raw[headerSize+meta+8*5:], math.Float64bits(math.Inf(-1)))
	binary.LittleEndian.PutUint32(raw[40:], crc32.Checksum(raw[headerSize:], castagnoli))
	reseal(raw)
	_, err := Read(bytes.NewReader(raw))
	wantKind(t, "read -Inf", err, ErrCorrupt)

	// Metadata that is not one JSON object.
	raw = encode(t, sample(false))
	raw[headerSize] = '['
	binary.LittleEndian.PutUint32(raw[40:], crc32.Checksum(raw[headerSize:], castagnoli))
	reseal(raw)
	_, err = Read(bytes.NewReader(raw))
	wantKind(t, "metadata", err, ErrCorrupt)

	d := learn.NewDict(5, 2)
	d.Patch, d.Channels = 2, 1 // 5 ≠ 1·2²
	wantKind(t, "shape", Write(&b, &File{Dict: d}), ErrCorrupt)
}

func TestWritePanicsOnMalformedDict(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("no panic for Atoms shorter than N·K")
		}
	}()
	d := learn.NewDict(4, 4)
	d.Atoms = d.Atoms[:5]
	Write(new(bytes.Buffer), &File{Dict: d})
}

func TestFiles(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "d.tdict")
	want := sample(true)
	if err := WriteFile(p, want); err != nil {
		t.Fatal(err)
	}
	got, err := ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	sameFile(t, got, want)
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("%d entries in the folder, want the file alone", len(ents))
	}
	os.WriteFile(p, []byte("P5\n1 1\n255\n\x00"), 0o644)
	_, err = ReadFile(p)
	fe := wantKind(t, "foreign", err, ErrForeign)
	if !strings.HasPrefix(fe.Error(), p+": not a tessera dictionary file") {
		t.Errorf("message %q does not start with the path", fe)
	}
	if _, err := ReadFile(dir); !errors.Is(err, ErrForeign) {
		t.Errorf("folder: %v", err)
	}
}
