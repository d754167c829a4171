package record_test

import (
	"bytes"
	"errors"
	"testing"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/buffer/record/recordtest"
)

// FuzzDecode feeds arbitrary bytes to every record decoder: a truncated or garbled value must
// give an error, never a panic or a huge allocation, and a value that decodes must re-encode to
// a value that decodes to the same record (the encoding is canonical after one round).
//
// `go test` runs the seed corpus only; `go test -fuzz=FuzzDecode ./buffer/` explores.
func FuzzDecode(f *testing.F) {
	for _, r := range recordtest.Samples() {
		b, err := r.AppendBinary(nil)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(byte(r.Kind()), b)
		f.Add(byte(r.Kind()), b[:len(b)/2])
		g := bytes.Clone(b)
		g[len(g)/3] ^= 0xff
		f.Add(byte(r.Kind()), g)
	}
	f.Add(byte(record.KindMinute), []byte{1, 0, 0, 0, 0xff, 0xff, 0xff, 0xff, 0x0f})
	f.Add(byte(record.KindHealth), []byte{1, 0, 0xff, 0xff, 0xff, 0xff, 0x0f})
	f.Add(byte(0), []byte{1})
	f.Fuzz(func(t *testing.T, kind byte, data []byte) {
		r, err := record.Decode(record.Kind(kind), data)
		if err != nil {
			if record.Kind(kind).Valid() && !errors.Is(err, record.ErrCorruptRecord) && !errors.Is(err, record.ErrNewerRecord) {
				t.Fatalf("error %v wraps neither record.ErrCorruptRecord nor record.ErrNewerRecord", err)
			}
			return
		}
		b, err := r.AppendBinary(nil)
		if err != nil {
			return // decodable but outside what the encoder accepts (e.g. a year 1 time)
		}
		r2, err := record.Decode(record.Kind(kind), b)
		if err != nil {
			t.Fatalf("re-encoded record does not decode: %v", err)
		}
		b2, _ := r2.AppendBinary(nil)
		if !bytes.Equal(b, b2) {
			t.Fatalf("encoding not stable:\n%x\n%x", b, b2)
		}
	})
}
