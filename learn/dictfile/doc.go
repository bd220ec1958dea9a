// Package dictfile stores a learned dictionary in tessera's own file
// format, so that a dictionary learned once on a series of frames can code
// every later frame without training again.
//
// # Format, version 1
//
// All integers are little-endian. A file is a 48-byte header, a payload,
// and nothing after it.
//
//	offset size  field
//	     0    8  magic, the bytes "TSRDICT" followed by 0x1A
//	     8    2  version, 1
//	    10    2  flags: bit 0 set when use counts are stored; other bits 0
//	    12    2  patch side p, 1..255 (0: the atoms are not image patches)
//	    14    2  channels c, 1..16 (0 exactly when p is 0)
//	    16    4  N, atom length, 1..65536; N = c·p² when p > 0
//	    20    4  K, number of atoms, 1..65536; N·K ≤ 2²⁴
//	    24    4  M, length of the metadata, 0..65536 bytes
//	    28    4  reserved, 0
//	    32    8  payload length: M + 8K (when use counts are stored) + 8NK
//	    40    4  CRC-32C (Castagnoli) of the payload
//	    44    4  CRC-32C of header bytes 0..43
//
// The payload is, in this order:
//
//   - M bytes of metadata: a UTF-8 JSON object describing the training
//     (see Training); readers ignore members they do not know;
//   - when flag bit 0 is set, K use counts as uint64;
//   - the K atoms, atom after atom, N IEEE-754 float64 values each
//     (sample order of patches.Extract: channel, row, column). Every value
//     is finite.
//
// A reader checks the magic, the version, the header checksum and every
// size in the header before it allocates anything for the payload, and
// reads the payload in pieces, so that a damaged or hostile header costs no
// more memory than the file holds. Problems are reported as *FormatError
// whose Err is one of ErrForeign, ErrVersion, ErrTruncated, ErrChecksum
// and ErrCorrupt.
//
// A newer, incompatible layout gets a new version number; fields are never
// reinterpreted within a version.
//
// The checksum is CRC-32C as specified in RFC 3720 (iSCSI), section 12.1,
// computed with hash/crc32's Castagnoli table.
package dictfile
