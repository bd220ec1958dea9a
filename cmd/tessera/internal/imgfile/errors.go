package imgfile

import (
	"errors"
	"image/jpeg"
	"image/png"
	"io"
	"io/fs"
	"strings"
	"syscall"

	"golang.org/x/image/tiff"
)

// FormatError reports a file that is not a valid image: corrupt, truncated
// or inconsistent.
type FormatError struct {
	Path   string // file name as given to Decode
	Reason string // what is wrong, e.g. "truncated or corrupt TIFF (unexpected EOF)"
	Err    error  // the underlying decoder error, if any
}

func (e *FormatError) Error() string {
	return prefix(e.Path) + e.Reason + "; re-export the file or check the copy"
}

func (e *FormatError) Unwrap() error { return e.Err }

// UnsupportedError reports a valid image that uses a feature this package
// does not handle, or an image that the chosen output format cannot hold.
type UnsupportedError struct {
	Path    string // file name, when known
	Feature string // e.g. "CMYK JPEG"
	Fix     string // what to do instead; "" gives the default advice to convert the file
}

func (e *UnsupportedError) Error() string {
	fix := e.Fix
	if fix == "" {
		fix = "convert it to an 8- or 16-bit PNG or TIFF"
	}
	return prefix(e.Path) + e.Feature + " is not supported; " + fix
}

func prefix(path string) string {
	if path == "" {
		return ""
	}
	return path + ": "
}

// decodeErr turns an error of a standard decoder into one of this package's
// types. I/O errors of the file system pass through unchanged.
func decodeErr(name, kind string, err error) error {
	var pe *fs.PathError
	var errno syscall.Errno
	if errors.As(err, &pe) || errors.As(err, &errno) {
		return err
	}
	var feature string
	var pu png.UnsupportedError
	var ju jpeg.UnsupportedError
	var tu tiff.UnsupportedError
	switch {
	case errors.As(err, &pu):
		feature = string(pu)
	case errors.As(err, &ju):
		feature = string(ju)
	case errors.As(err, &tu):
		feature = string(tu)
	}
	if feature != "" {
		return &UnsupportedError{Path: name, Feature: kind + " " + oneLine(feature)}
	}
	if errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, io.EOF) {
		return &FormatError{Path: name, Reason: "truncated or corrupt " + kind + " (unexpected EOF)", Err: err}
	}
	msg := err.Error()
	var pf png.FormatError
	var jf jpeg.FormatError
	var tf tiff.FormatError
	switch {
	case errors.As(err, &pf):
		msg = string(pf)
	case errors.As(err, &jf):
		msg = string(jf)
	case errors.As(err, &tf):
		msg = string(tf)
	}
	return &FormatError{Path: name, Reason: "corrupt " + kind + " (" + oneLine(msg) + ")", Err: err}
}

func oneLine(s string) string { return strings.Join(strings.Fields(s), " ") }
