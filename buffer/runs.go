package buffer

import (
	"encoding/binary"
	"fmt"
	"math"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
)

// The time index is a run index. Records of one kind are stored by sequence number; in
// sequence order their times mostly rise, because the node writes results as time passes. A run
// is a maximal stretch of consecutive sequence numbers whose times never fall. A new run starts
// only when a record's time is earlier than the previous record's: after the clock stepped
// back, or for a record written late (an event written at its end, starting before the
// seconds already stored).
//
// The bucket runs/<kind> maps each run's first sequence number to the time of its first record.
// A run holds the stored records from its key up to the next run's key. Inside a run, times are
// sorted, so a time bound is found by binary search over sequence numbers; a query merges the
// runs it touches. Retention deletes the oldest records, which are always a prefix of some run,
// and moves that run's key to its new first record.
//
// Compared with an index entry per record, this writes nothing per commit in normal operation
// (the index changes only when a run starts or retention trims one) and takes no space per
// record: one commit rewrites a third fewer pages (see BenchmarkWriteVolume).

func runsBucket(k record.Kind) []byte { return []byte("runs/" + k.String()) }

// run is one entry of the run index.
type run struct {
	start uint64 // first sequence number of the run
	tkey  uint64 // time key of its first record
	end   uint64 // first sequence number after the run (the next run's start, or MaxUint64)
}

// loadRuns returns the runs of kind k in sequence order.
func loadRuns(tx *bolt.Tx, k record.Kind) []run {
	var rs []run
	_ = tx.Bucket(runsBucket(k)).ForEach(func(key, v []byte) error {
		if len(key) == 8 && len(v) == 8 {
			rs = append(rs, run{start: binary.BigEndian.Uint64(key), tkey: binary.BigEndian.Uint64(v)})
		}
		return nil
	})
	for i := range rs {
		rs[i].end = math.MaxUint64
		if i+1 < len(rs) {
			rs[i].end = rs[i+1].start
		}
	}
	return rs
}

func putRun(b *bolt.Bucket, seq, tkey uint64) error {
	var v [8]byte
	binary.BigEndian.PutUint64(v[:], tkey)
	return b.Put(seqKey(seq), v[:])
}

// timeOf returns the time key of an encoded record of kind k, decoding only what precedes its
// time.
func timeOf(k record.Kind, v []byte) (uint64, error) {
	t, err := record.DecodeTime(k, v)
	if err != nil {
		return 0, err
	}
	return timeKey(t), nil
}

// seekIn returns the first stored record of the run r with sequence number ≥ seq, or ok false.
func seekIn(c *bolt.Cursor, r run, seq uint64) (key, v []byte, ok bool) {
	key, v = c.Seek(seqKey(max(seq, r.start)))
	if key == nil || binary.BigEndian.Uint64(key) >= r.end {
		return nil, nil, false
	}
	return key, v, true
}

// lowerBound returns the first sequence number in run r (bounded by limit) whose record's time
// key is ≥ tkey; the result is min(r.end, limit) when there is none. Records are sorted by
// time within a run, and missing sequence numbers count as the next stored record's time.
func lowerBound(c *bolt.Cursor, k record.Kind, r run, limit, tkey uint64) (uint64, error) {
	lo, hi := r.start, min(r.end, limit)
	for lo < hi {
		mid := lo + (hi-lo)/2
		key, v, ok := seekIn(c, r, mid)
		if !ok || binary.BigEndian.Uint64(key) >= hi {
			hi = mid
			continue
		}
		t, err := timeOf(k, v)
		if err != nil {
			return 0, fmt.Errorf("%s record %d: %w", k, binary.BigEndian.Uint64(key), err)
		}
		if t >= tkey {
			hi = mid
		} else {
			lo = binary.BigEndian.Uint64(key) + 1
		}
	}
	return lo, nil
}

// trimmer deletes the oldest records of one kind, keeping the run index right.
type trimmer struct {
	tx      *bolt.Tx
	k       record.Kind
	rb, idx *bolt.Bucket
	runs    []run
	heads   []uint64 // time key of each run's first record (MaxUint64 when the run is empty)
	cursors map[streamKind]cursor
	stat    *kindStat
}

func newTrimmer(tx *bolt.Tx, k record.Kind, stat *kindStat, cursors map[streamKind]cursor) *trimmer {
	t := &trimmer{tx: tx, k: k, rb: tx.Bucket(recBucket(k)), idx: tx.Bucket(runsBucket(k)),
		runs: loadRuns(tx, k), cursors: cursors, stat: stat}
	t.heads = make([]uint64, len(t.runs))
	for i, r := range t.runs {
		t.heads[i] = r.tkey
	}
	return t
}

// oldest returns the index of the run whose first record is the oldest, or -1.
func (t *trimmer) oldest() int {
	best := -1
	for i, h := range t.heads {
		if h != math.MaxUint64 && (best < 0 || h < t.heads[best]) {
			best = i
		}
	}
	return best
}

// deleteHead deletes the first record of run i and moves the run's key to the next record. It
// returns the bytes of the deleted value, or -1 when the run was empty (its key is removed).
func (t *trimmer) deleteHead(i int) (int, error) {
	r := &t.runs[i]
	key, v, ok := seekIn(t.rb.Cursor(), *r, r.start)
	if !ok {
		t.heads[i] = math.MaxUint64
		return -1, t.idx.Delete(seqKey(r.start))
	}
	seq := binary.BigEndian.Uint64(key)
	n := len(v)
	if err := t.rb.Delete(key); err != nil {
		return 0, err
	}
	for sk, c := range t.cursors {
		if sk.kind == t.k && c.acked < seq {
			c.dropped++
			c.dirty = true
			t.cursors[sk] = c
		}
	}
	t.stat.count--
	t.stat.bytes -= uint64(n)
	if err := t.idx.Delete(seqKey(r.start)); err != nil {
		return 0, err
	}
	nkey, nv, ok := seekIn(t.rb.Cursor(), *r, seq+1)
	if !ok {
		t.heads[i] = math.MaxUint64
		return n, nil
	}
	tk, err := timeOf(t.k, nv)
	if err != nil {
		return 0, fmt.Errorf("%s record %d: %w", t.k, binary.BigEndian.Uint64(nkey), err)
	}
	r.start, r.tkey, t.heads[i] = binary.BigEndian.Uint64(nkey), tk, tk
	return n, putRun(t.idx, r.start, tk)
}
