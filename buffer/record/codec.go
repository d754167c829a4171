package record

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"time"
)

// Levels are stored as signed 16-bit integers in hundredths of a decibel, so a level survives
// float64 → store → float64 within 0.005 dB (half a step).
const (
	// noLevel is the stored value of "no level" (NaN): digital silence, or not measured.
	noLevel = math.MinInt16
	// MaxStoredLevel and MinStoredLevel bound the levels a store keeps; a level outside them is
	// stored as the nearest bound. Both lie far outside any physical sound level in dB re 20 µPa.
	MaxStoredLevel = math.MaxInt16 / 100.0
	MinStoredLevel = -MaxStoredLevel
)

// ErrNewerRecord is returned (wrapped) when a record was written by a newer format version than
// this build understands.
var ErrNewerRecord = errors.New("record written by a newer leqnode")

// ErrCorruptRecord is returned (wrapped) when a stored value cannot be decoded.
var ErrCorruptRecord = errors.New("corrupt record")

// levelCode converts a level in dB to its stored form: round(100·L), saturated to the int16
// range; NaN and -Inf become noLevel.
func levelCode(l float64) int16 {
	switch {
	case math.IsNaN(l) || math.IsInf(l, -1):
		return noLevel
	case l >= MaxStoredLevel:
		return math.MaxInt16
	case l <= MinStoredLevel:
		return -math.MaxInt16
	}
	return int16(math.Round(l * 100))
}

// levelValue is the inverse of levelCode.
func levelValue(c int16) float64 {
	if c == noLevel {
		return math.NaN()
	}
	return float64(c) / 100
}

// enc appends the primitive values of the record encodings to a byte slice.
type enc struct{ b []byte }

func (e *enc) byte1(v byte)        { e.b = append(e.b, v) }
func (e *enc) uvarint(v uint64)    { e.b = binary.AppendUvarint(e.b, v) }
func (e *enc) varint(v int64)      { e.b = binary.AppendVarint(e.b, v) }
func (e *enc) level(l float64)     { e.b = binary.LittleEndian.AppendUint16(e.b, uint16(levelCode(l))) }
func (e *enc) float(v float64)     { e.b = binary.LittleEndian.AppendUint64(e.b, math.Float64bits(v)) }
func (e *enc) flags(f Flags)       { e.uvarint(uint64(f)) }
func (e *enc) time(t time.Time)    { e.varint(t.UnixMicro()) }
func (e *enc) dur(d time.Duration) { e.varint(int64(d)) }
func (e *enc) str(s string) {
	e.uvarint(uint64(len(s)))
	e.b = append(e.b, s...)
}
func (e *enc) spectrum(first int, s []float64) {
	e.varint(int64(first))
	e.uvarint(uint64(len(s)))
	for _, l := range s {
		e.level(l)
	}
}

// dec reads what enc wrote. The first failure sticks: later reads return zero values, and err
// says what went wrong and where.
type dec struct {
	b    []byte
	off  int
	err  error
	what string // the record type being decoded, for messages
}

func (d *dec) fail(format string, a ...any) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: %s at byte %d: %s", ErrCorruptRecord, d.what, d.off, fmt.Sprintf(format, a...))
	}
}

func (d *dec) byte1() byte {
	if d.err != nil {
		return 0
	}
	if d.off >= len(d.b) {
		d.fail("truncated")
		return 0
	}
	v := d.b[d.off]
	d.off++
	return v
}

func (d *dec) uvarint() uint64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Uvarint(d.b[d.off:])
	if n <= 0 {
		d.fail("bad or truncated varint")
		return 0
	}
	d.off += n
	return v
}

func (d *dec) varint() int64 {
	if d.err != nil {
		return 0
	}
	v, n := binary.Varint(d.b[d.off:])
	if n <= 0 {
		d.fail("bad or truncated varint")
		return 0
	}
	d.off += n
	return v
}

func (d *dec) fixed(n int) []byte {
	if d.err != nil {
		return nil
	}
	if len(d.b)-d.off < n {
		d.fail("truncated")
		return nil
	}
	v := d.b[d.off : d.off+n]
	d.off += n
	return v
}

func (d *dec) level() float64 {
	p := d.fixed(2)
	if p == nil {
		return math.NaN()
	}
	return levelValue(int16(binary.LittleEndian.Uint16(p)))
}

func (d *dec) float() float64 {
	p := d.fixed(8)
	if p == nil {
		return math.NaN()
	}
	return math.Float64frombits(binary.LittleEndian.Uint64(p))
}

func (d *dec) flags() Flags {
	v := d.uvarint()
	if v > math.MaxUint32 {
		d.fail("flags out of range")
		return 0
	}
	return Flags(v)
}

func (d *dec) time() time.Time {
	v := d.varint()
	if d.err != nil {
		return time.Time{}
	}
	return time.UnixMicro(v).UTC()
}

func (d *dec) dur() time.Duration { return time.Duration(d.varint()) }

// count reads a length and checks that at least min·n bytes remain, so a garbled length cannot
// make the decoder allocate more than the value's size.
func (d *dec) count(min int) int {
	n := d.uvarint()
	if d.err != nil {
		return 0
	}
	if n > uint64(len(d.b)-d.off)/uint64(min) {
		d.fail("length %d exceeds the value", n)
		return 0
	}
	return int(n)
}

func (d *dec) str() string {
	n := d.count(1)
	p := d.fixed(n)
	return string(p)
}

func (d *dec) spectrum() (first int, s []float64) {
	f := d.varint()
	if f < math.MinInt32 || f > math.MaxInt32 {
		d.fail("band number out of range")
		return 0, nil
	}
	n := d.count(2)
	if d.err != nil || n == 0 {
		return int(f), nil
	}
	s = make([]float64, n)
	for i := range s {
		s[i] = d.level()
	}
	return int(f), s
}

// version reads the version byte and refuses versions newer than max.
func (d *dec) version(max byte) byte {
	v := d.byte1()
	if d.err != nil {
		return 0
	}
	if v == 0 {
		d.fail("version 0")
		return 0
	}
	if v > max {
		d.err = fmt.Errorf("%w: %s record version %d, this build reads up to version %d: upgrade leqnode to read it",
			ErrNewerRecord, d.what, v, max)
		return 0
	}
	return v
}

// end reports the sticky error, or an error if bytes remain.
func (d *dec) end() error {
	if d.err == nil && d.off != len(d.b) {
		d.fail("%d trailing bytes", len(d.b)-d.off)
	}
	return d.err
}
