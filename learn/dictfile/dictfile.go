package dictfile

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"os"
	"path/filepath"

	"tessera/learn"
)

// Magic opens every dictionary file.
const Magic = "TSRDICT\x1a"

// Version is the layout this package writes.
const Version = 1

// Limits of version 1; a header beyond them is refused before allocation.
const (
	MaxPatch    = 255
	MaxChannels = 16
	MaxN        = 1 << 16
	MaxK        = 1 << 16
	MaxValues   = 1 << 24 // N·K
	MaxMeta     = 1 << 16
)

const headerSize = 48

const flagUses = 1

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// Training describes how a dictionary was learned. Every field is
// optional; zero values are left out of the file.
type Training struct {
	Program string `json:"program,omitempty"` // e.g. "tessera learn"
	Images  int    `json:"images,omitempty"`  // images the patches came from
	// ImageChannels is the channel count of those images; the atoms have
	// fewer when colour channels were coded apart.
	ImageChannels int     `json:"image_channels,omitempty"`
	Patches       int     `json:"patches,omitempty"` // training patches drawn in all
	Rounds        int     `json:"rounds,omitempty"`  // K-SVD rounds
	Train         int     `json:"train,omitempty"`   // training patches asked for
	Bound         float64 `json:"bound,omitempty"`   // C of the coding bound n·(C·σ)²
	Seed          uint64  `json:"seed,omitempty"`
	// Sigma is σ as given, in the images' own units; 0 when it was
	// estimated per image.
	Sigma float64 `json:"sigma,omitempty"`
	// SigmaMin and SigmaMax are the smallest and largest σ of the images on
	// the 0–255 scale.
	SigmaMin float64 `json:"sigma255_min,omitempty"`
	SigmaMax float64 `json:"sigma255_max,omitempty"`
}

// File is the content of a dictionary file.
type File struct {
	Dict *learn.Dict
	// Uses holds, per atom, how many training patches used it (in the last
	// training round); nil when not recorded.
	Uses     []uint64
	Training Training
}

// Sentinel causes of a FormatError, for errors.Is.
var (
	ErrForeign   = errors.New("not a tessera dictionary file")
	ErrVersion   = errors.New("unsupported dictionary file version")
	ErrTruncated = errors.New("truncated dictionary file")
	ErrChecksum  = errors.New("dictionary file checksum mismatch")
	ErrCorrupt   = errors.New("corrupt dictionary file")
)

// FormatError reports a file that cannot be read as a dictionary, or a
// dictionary that cannot be written.
type FormatError struct {
	Path   string // file name, when known
	Reason string // what is wrong, in words
	Err    error  // one of the sentinel errors above
}

func (e *FormatError) Error() string {
	p := ""
	if e.Path != "" {
		p = e.Path + ": "
	}
	fix := "; learn it again or check the copy"
	if e.Err == ErrForeign {
		fix = "; give a file written by tessera learn"
	}
	if e.Err == ErrVersion {
		fix = "; read it with the tessera version that wrote it, or learn it again"
	}
	return p + e.Reason + fix
}

func (e *FormatError) Unwrap() error { return e.Err }

func fail(kind error, format string, a ...any) error {
	return &FormatError{Reason: fmt.Sprintf(format, a...), Err: kind}
}

// Write stores f in the version-1 format. It panics when f.Dict is
// malformed (Atoms not N·K long, or Uses not K long), which is a bug of
// the caller; values the format cannot hold (sizes over its limits,
// non-finite atoms) are a *FormatError with Err ErrCorrupt.
func Write(w io.Writer, f *File) error {
	d := f.Dict
	if d == nil || d.N <= 0 || d.K <= 0 || len(d.Atoms) != d.N*d.K {
		panic("dictfile: Write needs a dictionary with len(Atoms) = N·K")
	}
	if f.Uses != nil && len(f.Uses) != d.K {
		panic("dictfile: Write needs one use count per atom")
	}
	if why := checkShape(d.Patch, d.Channels, d.N, d.K); why != "" {
		return fail(ErrCorrupt, "cannot store the dictionary: %s", why)
	}
	for i, v := range d.Atoms {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fail(ErrCorrupt, "atom %d holds a non-finite value (%g)", i/d.N, v)
		}
	}
	meta, err := json.Marshal(f.Training)
	if err != nil {
		return fail(ErrCorrupt, "cannot encode the training description (%v)", err)
	}
	if len(meta) > MaxMeta {
		return fail(ErrCorrupt, "the training description is %d bytes, over the limit of %d", len(meta), MaxMeta)
	}
	var flags uint16
	payload := len(meta) + 8*d.N*d.K
	if f.Uses != nil {
		flags |= flagUses
		payload += 8 * d.K
	}
	body := make([]byte, 0, payload)
	body = append(body, meta...)
	for _, u := range f.Uses {
		body = binary.LittleEndian.AppendUint64(body, u)
	}
	for _, v := range d.Atoms {
		body = binary.LittleEndian.AppendUint64(body, math.Float64bits(v))
	}
	h := make([]byte, headerSize)
	copy(h, Magic)
	le := binary.LittleEndian
	le.PutUint16(h[8:], Version)
	le.PutUint16(h[10:], flags)
	le.PutUint16(h[12:], uint16(d.Patch))
	le.PutUint16(h[14:], uint16(d.Channels))
	le.PutUint32(h[16:], uint32(d.N))
	le.PutUint32(h[20:], uint32(d.K))
	le.PutUint32(h[24:], uint32(len(meta)))
	le.PutUint64(h[32:], uint64(len(body)))
	le.PutUint32(h[40:], crc32.Checksum(body, castagnoli))
	le.PutUint32(h[44:], crc32.Checksum(h[:44], castagnoli))
	if _, err := w.Write(h); err != nil {
		return err
	}
	_, err = w.Write(body)
	return err
}

// checkShape applies the size rules of the header and says what breaks
// them ("" when nothing does).
func checkShape(p, c, n, k int) string {
	switch {
	case p < 0 || p > MaxPatch:
		return fmt.Sprintf("patch side %d is outside 0..%d", p, MaxPatch)
	case c < 0 || c > MaxChannels:
		return fmt.Sprintf("%d channels is outside 0..%d", c, MaxChannels)
	case (p == 0) != (c == 0):
		return fmt.Sprintf("patch side %d with %d channels (both must be 0, or neither)", p, c)
	case n < 1 || n > MaxN:
		return fmt.Sprintf("atom length %d is outside 1..%d", n, MaxN)
	case k < 1 || k > MaxK:
		return fmt.Sprintf("%d atoms is outside 1..%d", k, MaxK)
	case int64(n)*int64(k) > MaxValues:
		return fmt.Sprintf("%d atoms of length %d exceed the limit of %d values", k, n, MaxValues)
	case p > 0 && n != c*p*p:
		return fmt.Sprintf("atom length %d does not match %d channels of %d×%d patches (%d)", n, c, p, p, c*p*p)
	}
	return ""
}

// Read reads one dictionary file from r; any byte after it is an error.
// Errors about the content are *FormatError.
func Read(r io.Reader) (*File, error) {
	h := make([]byte, headerSize)
	got, err := io.ReadFull(r, h)
	short := err == io.EOF || err == io.ErrUnexpectedEOF
	if err != nil && !short {
		return nil, err
	}
	if sig := min(got, len(Magic)); string(h[:sig]) != Magic[:sig] {
		return nil, fail(ErrForeign, "not a tessera dictionary file (no %q signature)", Magic[:7])
	}
	switch {
	case got == 0:
		return nil, fail(ErrTruncated, "empty file")
	case short:
		return nil, fail(ErrTruncated, "truncated dictionary file (%d of %d header bytes)", got, headerSize)
	}
	le := binary.LittleEndian
	if v := le.Uint16(h[8:]); v != Version {
		return nil, fail(ErrVersion, "dictionary file version %d; this program reads version %d", v, Version)
	}
	if crc32.Checksum(h[:44], castagnoli) != le.Uint32(h[44:]) {
		return nil, fail(ErrChecksum, "damaged dictionary file (header checksum mismatch)")
	}
	flags := le.Uint16(h[10:])
	p, c := int(le.Uint16(h[12:])), int(le.Uint16(h[14:]))
	n, k := int64(le.Uint32(h[16:])), int64(le.Uint32(h[20:]))
	m := int64(le.Uint32(h[24:]))
	switch {
	case flags&^flagUses != 0:
		return nil, fail(ErrCorrupt, "corrupt dictionary file (unknown flags %#x)", flags)
	case le.Uint32(h[28:]) != 0:
		return nil, fail(ErrCorrupt, "corrupt dictionary file (reserved field is not 0)")
	case n > MaxN || k > MaxK:
		return nil, fail(ErrCorrupt, "corrupt dictionary file (%d atoms of length %d; the limits are %d and %d)", k, n, MaxK, MaxN)
	case m > MaxMeta:
		return nil, fail(ErrCorrupt, "corrupt dictionary file (%d metadata bytes, over the limit of %d)", m, MaxMeta)
	}
	if why := checkShape(p, c, int(n), int(k)); why != "" {
		return nil, fail(ErrCorrupt, "corrupt dictionary file (%s)", why)
	}
	want := m + 8*n*k
	if flags&flagUses != 0 {
		want += 8 * k
	}
	if pl := le.Uint64(h[32:]); pl != uint64(want) {
		return nil, fail(ErrCorrupt, "corrupt dictionary file (payload length %d, the sizes give %d)", pl, want)
	}
	// ReadAll grows with what arrives, so a short file never makes us
	// allocate what its header claims.
	body, err := io.ReadAll(io.LimitReader(r, want+1))
	if err != nil {
		return nil, err
	}
	if int64(len(body)) < want {
		return nil, fail(ErrTruncated, "truncated dictionary file (%d of %d payload bytes)", len(body), want)
	}
	if int64(len(body)) > want {
		return nil, fail(ErrCorrupt, "corrupt dictionary file (data after the last atom)")
	}
	if crc32.Checksum(body, castagnoli) != le.Uint32(h[40:]) {
		return nil, fail(ErrChecksum, "damaged dictionary file (payload checksum mismatch)")
	}
	f := &File{}
	meta := body[:m]
	body = body[m:]
	if m > 0 {
		dec := json.NewDecoder(bytes.NewReader(meta))
		if err := dec.Decode(&f.Training); err != nil || dec.More() {
			return nil, fail(ErrCorrupt, "corrupt dictionary file (the training description is not a JSON object)")
		}
	}
	if flags&flagUses != 0 {
		f.Uses = make([]uint64, k)
		for i := range f.Uses {
			f.Uses[i] = le.Uint64(body[8*i:])
		}
		body = body[8*k:]
	}
	d := learn.NewDict(int(n), int(k))
	d.Patch, d.Channels = p, c
	for i := range d.Atoms {
		v := math.Float64frombits(le.Uint64(body[8*i:]))
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fail(ErrCorrupt, "corrupt dictionary file (atom %d holds %g)", int64(i)/n, v)
		}
		d.Atoms[i] = v
	}
	f.Dict = d
	return f, nil
}

// ReadFile reads the dictionary file at path; errors name the path.
func ReadFile(path string) (*File, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	if st, err := fh.Stat(); err == nil && st.IsDir() {
		return nil, &FormatError{Path: path, Reason: "is a folder, not a dictionary file", Err: ErrForeign}
	}
	f, err := Read(bufio.NewReader(fh))
	var fe *FormatError
	if errors.As(err, &fe) {
		fe.Path = path
	}
	return f, err
}

// WriteFile writes f to path through a temporary file in the same folder
// that is flushed and renamed, so path holds its old content or the whole
// new file. The temporary file is removed on any error.
func WriteFile(path string, f *File) (err error) {
	var buf bytes.Buffer
	if err := Write(&buf, f); err != nil {
		var fe *FormatError
		if errors.As(err, &fe) {
			fe.Path = path
		}
		return err
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	if _, err = tmp.Write(buf.Bytes()); err != nil {
		return err
	}
	if err = tmp.Chmod(0o644); err != nil {
		return err
	}
	if err = tmp.Sync(); err != nil {
		return err
	}
	if err = tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}
