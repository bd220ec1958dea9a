package dictfile

import (
	"bytes"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"math"
	"testing"

	"tessera/learn"
)

// FuzzRead feeds arbitrary bytes to Read: it must never panic, must fail
// with a *FormatError on anything but a valid file, and what it accepts
// must survive a write and a read unchanged (the metadata's JSON spelling
// may differ, so bytes are not compared).
func FuzzRead(f *testing.F) {
	var b bytes.Buffer
	Write(&b, sample(true))
	f.Add(b.Bytes())
	b.Reset()
	d := learn.NewDict(2, 1)
	d.Atoms[0] = 1
	Write(&b, &File{Dict: d})
	f.Add(b.Bytes())
	f.Add([]byte(Magic))
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		check(t, data)
		// Random bytes almost never pass the checksums; a copy with them
		// recomputed reaches the size and value checks behind them.
		if len(data) >= headerSize {
			fixed := append([]byte(nil), data...)
			binary.LittleEndian.PutUint32(fixed[40:], crc32.Checksum(fixed[headerSize:], castagnoli))
			reseal(fixed)
			check(t, fixed)
		}
	})
}

func check(t *testing.T, data []byte) {
	got, err := Read(bytes.NewReader(data))
	if err != nil {
		var fe *FormatError
		if !errors.As(err, &fe) {
			t.Fatalf("error of type %T: %v", err, err)
		}
		return
	}
	for _, v := range got.Dict.Atoms {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatal("accepted a non-finite atom value")
		}
	}
	var out bytes.Buffer
	if err := Write(&out, got); err != nil {
		t.Fatalf("cannot write what was read: %v", err)
	}
	back, err := Read(bytes.NewReader(out.Bytes()))
	if err != nil {
		t.Fatalf("cannot read what was written: %v", err)
	}
	if back.Dict.N != got.Dict.N || back.Dict.K != got.Dict.K || len(back.Uses) != len(got.Uses) || back.Training != got.Training {
		t.Fatal("write and read back changed the content")
	}
	for i := range got.Dict.Atoms {
		if math.Float64bits(back.Dict.Atoms[i]) != math.Float64bits(got.Dict.Atoms[i]) {
			t.Fatal("write and read back changed an atom")
		}
	}
}
