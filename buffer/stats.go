package buffer

import (
	"encoding/binary"
	"fmt"
	"os"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
)

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
	Kinds     map[record.Kind]KindStats
	Streams   map[string]map[record.Kind]StreamStats
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
		Recovered: s.recovered, Kinds: map[record.Kind]KindStats{}, Streams: map[string]map[record.Kind]StreamStats{},
	}
	if s.commitErr != nil {
		st.CommitError = s.commitErr.Error()
	}
	for _, k := range record.Kinds() {
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
		for _, k := range record.Kinds() {
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
			st.Streams[sk.stream] = map[record.Kind]StreamStats{}
		}
		st.Streams[sk.stream][sk.kind] = ss
	}
	if fi, err := os.Stat(s.path); err == nil {
		st.FileBytes = fi.Size()
	}
	return st, nil
}

// putKindStats writes the per-kind counters that differ from the committed ones.
func (s *Store) putKindStats(tx *bolt.Tx, kstat *[record.KindSession + 1]kindStat) error {
	kb := tx.Bucket(bucketKinds)
	for _, k := range record.Kinds() {
		if kstat[k] == s.kstat[k] {
			continue
		}
		v := make([]byte, 40)
		binary.BigEndian.PutUint64(v[32:], kstat[k].reserved)
		binary.BigEndian.PutUint64(v, kstat[k].count)
		binary.BigEndian.PutUint64(v[8:], kstat[k].bytes)
		binary.BigEndian.PutUint64(v[16:], kstat[k].removedAge)
		binary.BigEndian.PutUint64(v[24:], kstat[k].removedSize)
		if err := kb.Put([]byte{byte(k)}, v); err != nil {
			return err
		}
	}
	return nil
}
