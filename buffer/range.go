package buffer

import (
	"encoding/binary"
	"fmt"
	"math"
	"slices"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
)

// rangeChunk is the number of records a Range reads per read transaction and run.
const rangeChunk = 1024

type keyed struct {
	tkey, seq uint64
	rec       record.Record
}

func (a keyed) less(b keyed) bool { return a.tkey < b.tkey || a.tkey == b.tkey && a.seq < b.seq }

// source is the part of one run that a Range reads: sequence numbers [next, end).
type source struct {
	next, end uint64
	buf       []keyed
}

// Range calls fn for each record of kind k whose Time lies in [from, to), in time order (records
// with equal times in sequence order), through the run index: a record written late with an
// early time, or written after the clock stepped back, is found where its time puts it. Records
// held in memory and not yet committed are included. The flags of annotations overlapping a
// second, minute or event record are ORed into the copy passed to fn.
//
// Range reads in chunks, each in its own short read transaction, and calls fn outside any
// transaction with a copy; fn may call other methods of the store. An error from fn stops the
// iteration and is returned.
func (s *Store) Range(k record.Kind, from, to time.Time, fn func(record.Record) error) error {
	if !k.Valid() {
		return fmt.Errorf("unknown record kind %d", uint8(k))
	}
	if !from.Before(to) {
		return nil
	}
	lo, hi := timeKey(from), timeKey(to)
	// Snapshot the held records. Records committed after the snapshot have sequence numbers
	// from memFirst on and are skipped in the file, so a commit during the iteration neither
	// repeats nor loses one.
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return ErrClosed
	}
	memFirst := s.nextSeq[k]
	var mem []keyed
	var memAnn []*record.Annotation
	annotated := k == record.KindSecond || k == record.KindMinute || k == record.KindEvent
	for _, h := range s.held {
		if h.kind == record.KindAnnotation && annotated {
			a := new(record.Annotation)
			if err := a.UnmarshalBinary(h.value); err == nil {
				memAnn = append(memAnn, a)
			}
		}
		if h.kind != k {
			continue
		}
		memFirst = min(memFirst, h.seq)
		if h.tkey < lo || h.tkey >= hi {
			continue
		}
		r, err := record.Decode(k, h.value)
		if err != nil {
			s.mu.Unlock()
			return err
		}
		r.SetSeq(h.seq)
		mem = append(mem, keyed{h.tkey, h.seq, r})
	}
	s.mu.Unlock()
	slices.SortFunc(mem, func(a, b keyed) int {
		if a.less(b) {
			return -1
		}
		if b.less(a) {
			return 1
		}
		return 0
	})

	var anns []*record.Annotation
	if annotated {
		var err error
		if anns, err = s.annotations(); err != nil {
			return err
		}
		anns = append(anns, memAnn...)
	}

	// Find, in each run, the sequence numbers whose times lie in [from, to).
	var srcs []*source
	err := s.view(func(tx *bolt.Tx) error {
		c := tx.Bucket(recBucket(k)).Cursor()
		for _, r := range loadRuns(tx, k) {
			if r.start >= memFirst {
				break
			}
			a, err := lowerBound(c, k, r, memFirst, lo)
			if err != nil {
				return fmt.Errorf("store %s: %w", s.path, err)
			}
			b, err := lowerBound(c, k, r, memFirst, hi)
			if err != nil {
				return fmt.Errorf("store %s: %w", s.path, err)
			}
			if a < b {
				srcs = append(srcs, &source{next: a, end: b})
			}
		}
		return nil
	})
	if err != nil {
		return err
	}

	fill := func(src *source) error {
		return s.view(func(tx *bolt.Tx) error {
			c := tx.Bucket(recBucket(k)).Cursor()
			for key, v := c.Seek(seqKey(src.next)); key != nil && len(src.buf) < rangeChunk; key, v = c.Next() {
				seq := binary.BigEndian.Uint64(key)
				if seq >= src.end {
					break
				}
				r, err := record.Decode(k, v)
				if err != nil {
					return fmt.Errorf("store %s: %s record %d: %w", s.path, k, seq, err)
				}
				r.SetSeq(seq)
				src.buf = append(src.buf, keyed{timeKey(r.Time()), seq, r})
				src.next = seq + 1
			}
			if len(src.buf) == 0 {
				src.next = src.end // retention removed the rest
			}
			return nil
		})
	}
	for {
		// Pick the smallest head among the runs and the held records.
		var best *source
		for _, src := range srcs {
			if len(src.buf) == 0 && src.next < src.end {
				if err := fill(src); err != nil {
					return err
				}
			}
			if len(src.buf) > 0 && (best == nil || src.buf[0].less(best.buf[0])) {
				best = src
			}
		}
		var rec record.Record
		switch {
		case len(mem) > 0 && (best == nil || mem[0].less(best.buf[0])):
			rec, mem = mem[0].rec, mem[1:]
		case best != nil:
			rec, best.buf = best.buf[0].rec, best.buf[1:]
		default:
			return nil
		}
		applyAnnotations(rec, anns)
		if err := fn(rec); err != nil {
			return err
		}
	}
}

// annotations reads every committed annotation. Annotations are few (a handful a month).
func (s *Store) annotations() ([]*record.Annotation, error) {
	var out []*record.Annotation
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(recBucket(record.KindAnnotation)).ForEach(func(key, v []byte) error {
			a := new(record.Annotation)
			if err := a.UnmarshalBinary(v); err != nil {
				return fmt.Errorf("store %s: annotation %d: %w", s.path, binary.BigEndian.Uint64(key), err)
			}
			out = append(out, a)
			return nil
		})
	})
	return out, err
}

// applyAnnotations ORs into r the flags of the annotations whose range overlaps r's interval.
func applyAnnotations(r record.Record, anns []*record.Annotation) {
	if len(anns) == 0 {
		return
	}
	var start, end time.Time
	var flags *record.Flags
	switch v := r.(type) {
	case *record.Second:
		start, end, flags = v.Start, v.Start.Add(v.Duration), &v.Flags
	case *record.Minute:
		// A minute record cannot be split: an annotation that covers only part of it acts on
		// the second records (the node's own calibration marks are already inside the minute,
		// which it builds only after they are known), and flags the minute only when it
		// covers the whole minute.
		for _, a := range anns {
			if !a.From.After(v.Start) && !a.To.Before(v.Start.Add(time.Minute)) {
				v.Flags |= a.Flags
			}
		}
		return
	case *record.Event:
		start, end, flags = v.Start, v.End, &v.Flags
	default:
		return
	}
	if !end.After(start) {
		end = start.Add(time.Microsecond)
	}
	for _, a := range anns {
		if a.From.Before(end) && start.Before(a.To) {
			*flags |= a.Flags
		}
	}
}

// timeSpan returns the earliest and latest record time of kind k: the first record of the
// oldest run and the last record of the newest one.
func timeSpan(tx *bolt.Tx, k record.Kind) (oldest, newest time.Time, err error) {
	c := tx.Bucket(recBucket(k)).Cursor()
	var lo, hi uint64
	found := false
	for _, r := range loadRuns(tx, k) {
		var key, v []byte
		if r.end == math.MaxUint64 {
			key, v = c.Last()
		} else if key, _ = c.Seek(seqKey(r.end)); key != nil {
			key, v = c.Prev()
		} else {
			key, v = c.Last()
		}
		if key == nil || binary.BigEndian.Uint64(key) < r.start {
			continue
		}
		last, err := timeOf(k, v)
		if err != nil {
			return oldest, newest, fmt.Errorf("%s record %d: %w", k, binary.BigEndian.Uint64(key), err)
		}
		if !found || r.tkey < lo {
			lo = r.tkey
		}
		if !found || last > hi {
			hi = last
		}
		found = true
	}
	if !found {
		return
	}
	return fromTimeKey(lo), fromTimeKey(hi), nil
}

func fromTimeKey(tk uint64) time.Time { return time.UnixMicro(int64(tk ^ 1<<63)).UTC() }
