package imgfile

import (
	"bufio"
	"fmt"
	"io"
)

// decodePNM reads binary PGM (P5) and PPM (P6).
func decodePNM(br *bufio.Reader, name string, maxPixels int64) (*File, error) {
	magic := make([]byte, 2)
	io.ReadFull(br, magic) // Decode has peeked these
	kind, c := "PGM", 1
	switch magic[1] {
	case '5':
	case '6':
		kind, c = "PPM", 3
	case '1', '2', '3':
		return nil, &UnsupportedError{Path: name, Feature: fmt.Sprintf("plain (ASCII) Netpbm P%c", magic[1]),
			Fix: "convert it to binary PGM/PPM (P5/P6) or PNG"}
	case '4':
		return nil, &UnsupportedError{Path: name, Feature: "PBM bitmap (P4)"}
	case '7':
		return nil, &UnsupportedError{Path: name, Feature: "PAM (P7)"}
	default:
		return nil, &UnsupportedError{Path: name, Feature: "floating-point PFM"}
	}
	var hdr [3]int64 // width, height, maxval
	for i := range hdr {
		v, err := pnmNumber(br, i == 2)
		if err != nil {
			return nil, &FormatError{Path: name, Reason: fmt.Sprintf("corrupt %s header (%v)", kind, err), Err: err}
		}
		hdr[i] = v
	}
	w, h, maxval := hdr[0], hdr[1], hdr[2]
	if err := checkSize(name, kind, w, h, maxPixels); err != nil {
		return nil, err
	}
	if maxval < 1 || maxval > 65535 {
		return nil, &FormatError{Path: name, Reason: fmt.Sprintf("corrupt %s header (maxval %d is outside 1..65535)", kind, maxval)}
	}
	depth, bps := 8, int64(1)
	if maxval > 255 {
		depth, bps = 16, 2
	}
	// Read before allocating: a short file with a large header costs only what it holds.
	need := w * h * int64(c) * bps
	raw, err := io.ReadAll(io.LimitReader(br, need))
	if err != nil {
		return nil, decodeErr(name, kind, err)
	}
	if int64(len(raw)) < need {
		return nil, &FormatError{Path: name, Reason: fmt.Sprintf("truncated %s (%d of %d sample bytes)", kind, len(raw), need)}
	}
	f := newFile(int(w), int(h), c, depth, false)
	f.Format = map[int]string{1: "pgm", 3: "ppm"}[c]
	peak := int64(f.Img.Peak())
	np := int(w * h)
	for i := 0; i < np*c; i++ {
		var v int64
		if bps == 1 {
			v = int64(raw[i])
		} else {
			v = int64(raw[2*i])<<8 | int64(raw[2*i+1])
		}
		if v > maxval {
			return nil, &FormatError{Path: name, Reason: fmt.Sprintf("corrupt %s (sample %d exceeds maxval %d)", kind, v, maxval)}
		}
		if maxval != peak {
			v = (2*v*peak + maxval) / (2 * maxval)
		}
		f.Img.Pix[(i%c)*np+i/c] = float32(v)
	}
	return f, nil
}

// pnmNumber reads one header number, skipping white space and comments. The
// last one (maxval) must be followed by exactly one white-space byte, which
// it consumes.
func pnmNumber(br *bufio.Reader, last bool) (int64, error) {
	b, err := br.ReadByte()
	for err == nil && (isSpace(b) || b == '#') {
		if b == '#' {
			_, err = br.ReadString('\n')
			if err != nil {
				break
			}
		}
		b, err = br.ReadByte()
	}
	if err != nil {
		return 0, fmt.Errorf("header ends early")
	}
	var v int64
	for n := 0; ; n++ {
		if b < '0' || b > '9' {
			return 0, fmt.Errorf("unexpected byte %q", b)
		}
		if n == 9 {
			return 0, fmt.Errorf("number too long")
		}
		v = 10*v + int64(b-'0')
		if b, err = br.ReadByte(); err != nil {
			return 0, fmt.Errorf("header ends early")
		}
		if isSpace(b) {
			if !last {
				br.UnreadByte()
			}
			return v, nil
		}
		if b == '#' && !last {
			br.UnreadByte()
			return v, nil
		}
	}
}

func isSpace(b byte) bool {
	return b == ' ' || b == '\t' || b == '\n' || b == '\r' || b == '\v' || b == '\f'
}

// encodePNM writes P5 for gray and P6 for colour, maxval 255 or 65535.
func encodePNM(w io.Writer, f *File) error {
	m := f.Img
	magic := "P5"
	if m.C == 3 {
		magic = "P6"
	}
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "%s\n%d %d\n%d\n", magic, m.W, m.H, int(m.Peak()))
	row := make([]uint16, m.W*m.C)
	for y := 0; y < m.H; y++ {
		interleaveRow(f, y, row)
		for _, v := range row {
			if m.Depth == 16 {
				bw.WriteByte(byte(v >> 8))
			}
			bw.WriteByte(byte(v))
		}
	}
	return bw.Flush()
}
