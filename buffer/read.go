package buffer

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"runtime/debug"
	"slices"
	"time"

	bolt "go.etcd.io/bbolt"
)

// view runs fn in a read transaction, turning a bbolt panic on a damaged page, or a memory fault
// on a page pointer beyond the mapped file, into an error wrapping ErrDamaged.
func (s *Store) view(fn func(tx *bolt.Tx) error) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer s.recoverDamage(&err)
	return s.db.View(fn)
}

// recoverDamage turns a panic into an error wrapping ErrDamaged; deferred by view and commit.
func (s *Store) recoverDamage(err *error) {
	if p := recover(); p != nil {
		*err = fmt.Errorf("store %s: %w: %v", s.path, ErrDamaged, p)
	}
}

func checkStream(stream string) error {
	if stream == "" || len(stream) > 128 || bytes.IndexByte([]byte(stream), 0) >= 0 {
		return fmt.Errorf("stream name %q: use 1 to 128 bytes without NUL", stream)
	}
	return nil
}

// Pending returns up to limit committed records of kind k that stream has not acknowledged, in
// sequence order. A stream seen for the first time starts before the oldest stored record. The
// records are copies; no transaction is held after Pending returns.
func (s *Store) Pending(stream string, k Kind, limit int) ([]Record, error) {
	if err := checkStream(stream); err != nil {
		return nil, err
	}
	if !k.Valid() {
		return nil, fmt.Errorf("unknown record kind %d", uint8(k))
	}
	if limit <= 0 {
		return nil, nil
	}
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil, ErrClosed
	}
	sk := streamKind{stream, k}
	c := s.cursors[sk]
	if c == nil {
		c = &cursor{}
		if !s.readOnly {
			c.dirty = true
			s.cursors[sk] = c
		}
	}
	after, upto := c.acked, s.committed[k]
	s.mu.Unlock()
	return s.after(k, after, upto, limit)
}

// After returns up to limit committed records of kind k with sequence numbers greater than seq,
// in sequence order, as copies. It moves no cursor.
func (s *Store) After(k Kind, seq uint64, limit int) ([]Record, error) {
	if !k.Valid() {
		return nil, fmt.Errorf("unknown record kind %d", uint8(k))
	}
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil, ErrClosed
	}
	upto := s.committed[k]
	s.mu.Unlock()
	if limit <= 0 {
		return nil, nil
	}
	return s.after(k, seq, upto, limit)
}

// Recent is After including the records held in memory: it returns up to limit records of kind k
// with sequence numbers greater than seq, committed or not, in sequence order. A consumer that
// publishes live results uses it to avoid waiting up to a commit interval.
//
// Danger: a held record is not durable. A crash before its commit loses it, and its number is
// then skipped (numbers are never reused), so a consumer may have delivered a record that the
// store no longer holds. Use After where only durable records may leave the node.
func (s *Store) Recent(k Kind, seq uint64, limit int) ([]Record, error) {
	if !k.Valid() {
		return nil, fmt.Errorf("unknown record kind %d", uint8(k))
	}
	if limit <= 0 {
		return nil, nil
	}
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil, ErrClosed
	}
	upto := s.committed[k]
	var mem []Record
	for _, h := range s.held {
		if h.kind != k || h.seq <= max(seq, upto) || len(mem) >= limit {
			continue
		}
		r, err := Decode(k, h.value)
		if err != nil {
			s.mu.Unlock()
			return nil, err
		}
		r.setSeq(h.seq)
		mem = append(mem, r)
	}
	s.mu.Unlock()
	out, err := s.after(k, seq, upto, limit)
	if err != nil {
		return nil, err
	}
	out = append(out, mem...)
	return out[:min(len(out), limit)], nil
}

func (s *Store) after(k Kind, after, upto uint64, limit int) ([]Record, error) {
	var out []Record
	err := s.view(func(tx *bolt.Tx) error {
		cur := tx.Bucket(recBucket(k)).Cursor()
		for key, v := cur.Seek(seqKey(after + 1)); key != nil && len(out) < limit; key, v = cur.Next() {
			seq := binary.BigEndian.Uint64(key)
			if seq > upto {
				break
			}
			r, err := Decode(k, v)
			if err != nil {
				return fmt.Errorf("store %s: %s record %d: %w", s.path, k, seq, err)
			}
			r.setSeq(seq)
			out = append(out, r)
		}
		return nil
	})
	return out, err
}

// Ack records that stream has delivered every record of kind k up to and including seq (held
// records, as returned by Recent, may be acknowledged too). The cursor never moves back: an
// older seq is ignored. The cursor is persisted with the next commit,
// so after a crash a stream may see up to one commit interval of records again; consumers
// de-duplicate by (store id, kind, seq).
func (s *Store) Ack(stream string, k Kind, seq uint64) error {
	if err := checkStream(stream); err != nil {
		return err
	}
	if !k.Valid() {
		return fmt.Errorf("unknown record kind %d", uint8(k))
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if err := s.writable(); err != nil {
		return err
	}
	if seq >= s.nextSeq[k] {
		return fmt.Errorf("store %s: ack of %s record %d beyond the last one appended (%d)", s.path, k, seq, s.nextSeq[k]-1)
	}
	sk := streamKind{stream, k}
	c := s.cursors[sk]
	if c == nil {
		c = &cursor{}
		s.cursors[sk] = c
	}
	if seq > c.acked {
		c.acked = seq
		c.dirty = true
	}
	return s.maybeCommit()
}

// LastSeq returns the last sequence number assigned to kind k (committed or held), 0 if none.
func (s *Store) LastSeq(k Kind) uint64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	if !k.Valid() {
		return 0
	}
	return s.nextSeq[k] - 1
}

// LastCommitted returns the last committed sequence number of kind k, 0 if none: what a
// consumer of the outbox can have received.
func (s *Store) LastCommitted(k Kind) uint64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	if !k.Valid() {
		return 0
	}
	return s.committed[k]
}

// FirstSeq returns the first sequence number this opening of the store assigns to kind k.
// After a clean close it follows the last committed number; after a crash it may lie up to
// Options.MaxHeld above it, since numbers handed out before the crash are never used again. A
// consumer that sees the numbers of a kind jump to FirstSeq (the node states it in its session
// records) knows the skipped numbers were never committed: a restart, not a loss.
func (s *Store) FirstSeq(k Kind) uint64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	if !k.Valid() {
		return 0
	}
	return s.firstSeq[k]
}

// Last returns the record of kind k with the highest sequence number (held or committed), or nil
// when the kind holds none.
func (s *Store) Last(k Kind) (Record, error) {
	if !k.Valid() {
		return nil, fmt.Errorf("unknown record kind %d", uint8(k))
	}
	s.mu.Lock()
	for i := len(s.held) - 1; i >= 0; i-- {
		if h := s.held[i]; h.kind == k {
			s.mu.Unlock()
			r, err := Decode(k, h.value)
			if err == nil {
				r.setSeq(h.seq)
			}
			return r, err
		}
	}
	s.mu.Unlock()
	var out Record
	err := s.view(func(tx *bolt.Tx) error {
		key, v := tx.Bucket(recBucket(k)).Cursor().Last()
		if key == nil {
			return nil
		}
		r, err := Decode(k, v)
		if err != nil {
			return fmt.Errorf("store %s: %s record %d: %w", s.path, k, binary.BigEndian.Uint64(key), err)
		}
		r.setSeq(binary.BigEndian.Uint64(key))
		out = r
		return nil
	})
	return out, err
}

// rangeChunk is the number of records a Range reads per read transaction and run.
const rangeChunk = 1024

type keyed struct {
	tkey, seq uint64
	rec       Record
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
func (s *Store) Range(k Kind, from, to time.Time, fn func(Record) error) error {
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
	var memAnn []*Annotation
	annotated := k == KindSecond || k == KindMinute || k == KindEvent
	for _, h := range s.held {
		if h.kind == KindAnnotation && annotated {
			a := new(Annotation)
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
		r, err := Decode(k, h.value)
		if err != nil {
			s.mu.Unlock()
			return err
		}
		r.setSeq(h.seq)
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

	var anns []*Annotation
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
				r, err := Decode(k, v)
				if err != nil {
					return fmt.Errorf("store %s: %s record %d: %w", s.path, k, seq, err)
				}
				r.setSeq(seq)
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
		var rec Record
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
func (s *Store) annotations() ([]*Annotation, error) {
	var out []*Annotation
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(recBucket(KindAnnotation)).ForEach(func(key, v []byte) error {
			a := new(Annotation)
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
func applyAnnotations(r Record, anns []*Annotation) {
	if len(anns) == 0 {
		return
	}
	var start, end time.Time
	var flags *Flags
	switch v := r.(type) {
	case *Second:
		start, end, flags = v.Start, v.Start.Add(v.Duration), &v.Flags
	case *Minute:
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
	case *Event:
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
func timeSpan(tx *bolt.Tx, k Kind) (oldest, newest time.Time, err error) {
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

// KindStats describes the records of one kind.
type KindStats struct {
	Count          uint64    // records stored (committed)
	Bytes          uint64    // bytes of their encoded values
	FirstSeq       uint64    // lowest stored sequence number (0 if none)
	LastSeq        uint64    // highest committed sequence number
	Oldest, Newest time.Time // earliest and latest record time (zero if none)
	RemovedByAge   uint64    // records deleted by retention since the store was created
	RemovedBySize  uint64    // records deleted by the size cap since the store was created
}

// StreamStats describes one consumer stream's cursor on one kind.
type StreamStats struct {
	Acked   uint64 // last acknowledged sequence number
	Pending uint64 // committed records after the cursor (at most this many, if records were removed)
	Dropped uint64 // unacknowledged records deleted by retention or the size cap
}

// Stats describes a store.
type Stats struct {
	ID        string
	Path      string
	FileBytes int64 // size of the file
	UsedBytes int64 // bytes the data occupies (file high-water mark less free pages)
	MaxBytes  int64 // size cap
	Kinds     map[Kind]KindStats
	Streams   map[string]map[Kind]StreamStats
	Held      int    // records held in memory, not yet committed
	Commits   uint64 // commits since Open
	// WrittenBytes counts the bytes bbolt wrote to the file since Open: dirty pages plus one meta
	// page per commit.
	WrittenBytes int64
	Recovered    string // see Store.Recovered
	// CommitError is the error of the last commit when it failed (records are then held in
	// memory and retried), or "". A node raises a health flag on it.
	CommitError string
}

// Stats returns the store's statistics. It reads only the ends of each index.
func (s *Store) Stats() (Stats, error) {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return Stats{}, ErrClosed
	}
	st := Stats{
		ID: s.id, Path: s.path, MaxBytes: s.opts.MaxBytes, Held: len(s.held), Commits: s.commits,
		Recovered: s.recovered, Kinds: map[Kind]KindStats{}, Streams: map[string]map[Kind]StreamStats{},
	}
	if s.commitErr != nil {
		st.CommitError = s.commitErr.Error()
	}
	for _, k := range Kinds() {
		st.Kinds[k] = KindStats{Count: s.kstat[k].count, Bytes: s.kstat[k].bytes, LastSeq: s.committed[k],
			RemovedByAge: s.kstat[k].removedAge, RemovedBySize: s.kstat[k].removedSize}
	}
	cursors := map[streamKind]cursor{}
	for sk, c := range s.cursors {
		cursors[sk] = *c
	}
	s.mu.Unlock()

	dbs := s.db.Stats()
	st.WrittenBytes = dbs.TxStats.GetPageAlloc() + int64(st.Commits)*int64(s.pageSize)
	err := s.view(func(tx *bolt.Tx) error {
		st.UsedBytes = s.usedBytes(tx)
		for _, k := range Kinds() {
			ks := st.Kinds[k]
			if key, _ := tx.Bucket(recBucket(k)).Cursor().First(); key != nil {
				ks.FirstSeq = binary.BigEndian.Uint64(key)
			}
			oldest, newest, err := timeSpan(tx, k)
			if err != nil {
				return fmt.Errorf("store %s: %w", s.path, err)
			}
			ks.Oldest, ks.Newest = oldest, newest
			st.Kinds[k] = ks
		}
		return nil
	})
	if err != nil {
		return st, err
	}
	for sk, c := range cursors {
		ks := st.Kinds[sk.kind]
		ss := StreamStats{Acked: c.acked, Dropped: c.dropped}
		switch {
		case ks.Count == 0 || c.acked >= ks.LastSeq:
		case c.acked < ks.FirstSeq:
			ss.Pending = ks.Count
		default:
			ss.Pending = min(ks.LastSeq-c.acked, ks.Count)
		}
		if st.Streams[sk.stream] == nil {
			st.Streams[sk.stream] = map[Kind]StreamStats{}
		}
		st.Streams[sk.stream][sk.kind] = ss
	}
	if fi, err := os.Stat(s.path); err == nil {
		st.FileBytes = fi.Size()
	}
	return st, nil
}

// Check verifies the store: bbolt's page-level consistency check, then that every record
// decodes, that the time index and the records match one to one, and that the per-kind counts
// agree. It returns nil or an error joining what it found (at most 20 problems).
//
// It reads the whole file in one read transaction: seconds for a large store on a slow card,
// during which a writer that must grow the file waits (bbolt remaps only when no read
// transaction is open).
func (s *Store) Check() error {
	s.mu.Lock()
	closed := s.closed
	s.mu.Unlock()
	if closed {
		return ErrClosed
	}
	return s.check()
}

func (s *Store) check() error {
	var errs []error
	add := func(err error) bool {
		errs = append(errs, err)
		return len(errs) < 20
	}
	// The store's own walk comes first: it runs in this goroutine, where view turns a fault on a
	// damaged page into an error. bbolt's check runs in a goroutine of its own, where a fault
	// would end the process, so it runs only over trees the walk has read safely.
	err := s.view(func(tx *bolt.Tx) error {
		for _, k := range Kinds() {
			rb, xb := tx.Bucket(recBucket(k)), tx.Bucket(runsBucket(k))
			if rb == nil || xb == nil {
				add(fmt.Errorf("buckets of kind %s missing", k))
				continue
			}
			runs := loadRuns(tx, k)
			ri := -1 // the run holding the current record
			var n, prevT uint64
			err := rb.ForEach(func(key, v []byte) error {
				n++
				seq := binary.BigEndian.Uint64(key)
				if seq > rb.Sequence() {
					if !add(fmt.Errorf("%s record %d beyond the kind's sequence %d", k, seq, rb.Sequence())) {
						return errStop
					}
				}
				r, err := Decode(k, v)
				if err != nil {
					if !add(fmt.Errorf("%s record %d: %w", k, seq, err)) {
						return errStop
					}
					return nil
				}
				tk := timeKey(r.Time())
				newRun := false
				for ri+1 < len(runs) && runs[ri+1].start <= seq {
					ri++
					newRun = true
				}
				switch {
				case ri < 0:
					if !add(fmt.Errorf("%s record %d lies before the first run of the time index", k, seq)) {
						return errStop
					}
				case newRun && runs[ri].start != seq:
					if !add(fmt.Errorf("%s run %d of the time index names a missing record", k, runs[ri].start)) {
						return errStop
					}
				case newRun && runs[ri].tkey != tk:
					if !add(fmt.Errorf("%s run %d of the time index has the wrong time", k, seq)) {
						return errStop
					}
				case !newRun && tk < prevT:
					if !add(fmt.Errorf("%s record %d is earlier than the record before it in its run", k, seq)) {
						return errStop
					}
				}
				prevT = tk
				return nil
			})
			if err != nil {
				return nil
			}
			if ri+1 < len(runs) && !add(fmt.Errorf("%s: %d runs of the time index name no record", k, len(runs)-ri-1)) {
				return nil
			}
			s.mu.Lock()
			want := s.kstat[k].count
			s.mu.Unlock()
			if want != n && !add(fmt.Errorf("%s: %d records but the counter says %d", k, n, want)) {
				return nil
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	if len(errs) == 0 {
		err = s.view(func(tx *bolt.Tx) error {
			// Drain the channel: bbolt's check goroutine reads pages of this transaction until
			// it has sent everything.
			for cerr := range tx.Check() {
				if len(errs) < 20 {
					add(fmt.Errorf("bbolt: %w", cerr))
				}
			}
			return nil
		})
		if err != nil {
			return err
		}
	}
	if len(errs) > 0 {
		return fmt.Errorf("store %s: %w: %w", s.path, ErrDamaged, errors.Join(errs...))
	}
	return nil
}

var errStop = errors.New("stop")
