// Package imgfile reads and writes the image files of the tessera binary.
//
// Decode sniffs the format from the first bytes of the content, never from
// the file name, and returns the stored samples exactly: 16-bit files stay
// 16-bit, colour samples are never premultiplied by alpha, and alpha is
// carried beside the image untouched. The specifications followed:
//
//   - PNG: W3C Recommendation "Portable Network Graphics (PNG) Specification
//     (Second Edition)", also ISO/IEC 15948:2004. Read with image/png; written
//     by a small encoder here so that gray+alpha stays gray+alpha and 16-bit
//     samples are stored as given (adaptive filtering by the minimum sum of
//     absolute differences, the heuristic the specification suggests).
//   - TIFF: Adobe "TIFF Revision 6.0" (1992). Read with golang.org/x/image/tiff
//     (first page only); written as a baseline TIFF here: chunky samples,
//     Deflate compression with the horizontal predictor, unassociated alpha.
//   - Netpbm: the PGM (P5) and PPM (P6) format descriptions of the Netpbm
//     project. Samples are bytes when maxval < 256 and big-endian 16-bit words
//     otherwise. A maxval other than 255 or 65535 is scaled to the full 8- or
//     16-bit range (rounded half up), so maxval stays white; such a file is
//     written back with maxval 255 or 65535. Plain (ASCII) P1-P3, P4 bitmaps
//     and PAM are rejected with an UnsupportedError.
//   - JPEG: ITU-T Recommendation T.81 (ISO/IEC 10918-1) with the JFIF colour
//     equations, through image/jpeg; 8-bit gray and colour only.
//
// Two rules from the TIFF specification need a decision here: associated
// (premultiplied) alpha is converted to unassociated alpha by dividing and
// rounding half up, and a gray image with one alpha sample is read by this
// package itself around x/image/tiff, which does not take extra samples on
// gray images.
//
// Samples are returned in stored order: TIFF Orientation and EXIF
// orientation are not applied, and colour profiles and gamma chunks are
// ignored.
//
// Errors: a corrupt, truncated or inconsistent file gives a *FormatError; a
// valid file that uses a feature this package does not read (or an image
// over the pixel limit, or an output format that cannot hold the image)
// gives an *UnsupportedError. Both print one line naming the file, the
// problem and the fix.
package imgfile
