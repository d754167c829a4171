package buffer

import (
	"slices"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
)

// retentionEvery is how often age retention runs inside a commit. Deleting a few expired records
// at every commit would rewrite the head pages of each tree every time; deleting in batches
// frees whole pages at once.
const retentionEvery = 15 * time.Minute

// maxDeletePerCommit bounds the deletions of one commit so that a commit after a long outage or a
// clock jump stays short; the rest follows in later commits.
const maxDeletePerCommit = 50000

// makeRoom answers the first full file system of this opening: the store gives up a tenth of
// its records, oldest first and shortest-lived kinds first, and from then on (until it is opened
// again) keeps its records within 90 % of what they were (spaceCap), so that it lives within
// the pages its file already has. A transaction that only deletes frees those pages for the
// next commit to reuse. It reports whether that transaction committed. It acts once per
// opening: when the space stays taken by something else, the records are held in memory and
// commits retried with back-off (the caller accounts for what the store then refuses). The
// caller holds s.mu.
func (s *Store) makeRoom() bool {
	data := dataBytes(&s.kstat)
	if s.spaceCap > 0 || data < minSpaceCap {
		return false // trimmed once already, or too little to give up: hold and retry
	}
	s.spaceCap = int64(0.9 * float64(data))
	s.opts.Logger.Warn("file system full: the store gives up its oldest tenth and keeps within its file until it is opened again",
		"path", s.path, "records_mb", float64(s.spaceCap)/1e6)
	kstat := s.kstat
	cursors := make(map[streamKind]cursor, len(s.cursors))
	for sk, c := range s.cursors {
		cursors[sk] = *c
	}
	err := s.update(func(tx *bolt.Tx) error {
		if err := s.retainBySize(tx, &kstat, cursors); err != nil {
			return err
		}
		return s.putKindStats(tx, &kstat)
	})
	if err != nil {
		return false
	}
	s.kstat = kstat
	for sk, c := range cursors {
		s.cursors[sk] = &c
	}
	// The held records were indexed against runs that the deletions may have removed: the first
	// held record of each kind starts a run of its own (an extra run entry costs nothing).
	var started [record.KindSession + 1]bool
	for i := range s.held {
		if k := s.held[i].kind; !started[k] {
			s.held[i].newRun, started[k] = true, true
		}
	}
	return true
}

// minSpaceCap is the least data makeRoom trims: a store with less gives up nothing (its
// records would all go), it holds and retries.
const minSpaceCap = 1 << 20

// SpaceCapped reports the cap, in bytes of records, that a full file system set on the store
// (0: none): the store gives up its oldest records to stay within its file. ResetSpaceCap
// lifts it.
func (s *Store) SpaceCapped() int64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.spaceCap
}

// ResetSpaceCap lifts the cap a full file system set, once there is room again: the store
// grows its file again as it needs.
func (s *Store) ResetSpaceCap() {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.spaceCap > 0 {
		s.opts.Logger.Info("file system has room again: the store grows its file as it needs", "path", s.path)
	}
	s.spaceCap = 0
}

// dataBytes estimates the bytes the records take, with the allowance for page packing that
// retainBySize counts when it deletes.
func dataBytes(kstat *[record.KindSession + 1]kindStat) int64 {
	var b int64
	for _, k := range record.Kinds() {
		b += int64(float64(kstat[k].bytes+kstat[k].count*recordOverhead) * 1.1)
	}
	return b
}

// retainByAge deletes the records whose time is older than their kind's retention.
func (s *Store) retainByAge(tx *bolt.Tx, now time.Time, kstat *[record.KindSession + 1]kindStat, cursors map[streamKind]cursor) error {
	budget := maxDeletePerCommit
	for _, k := range record.Kinds() {
		keep := s.opts.Retention[k]
		if keep < 0 {
			continue
		}
		cut := timeKey(now.Add(-keep))
		t := newTrimmer(tx, k, &kstat[k], cursors)
		for i := range t.runs {
			for t.heads[i] < cut && budget > 0 {
				n, err := t.deleteHead(i)
				if err != nil {
					return err
				}
				if n < 0 {
					break
				}
				kstat[k].removedAge++
				budget--
			}
		}
	}
	return nil
}

// Cap thresholds as fractions of MaxBytes: deletion starts above capHigh and goes down to capLow.
const (
	capHigh = 0.90
	capLow  = 0.85
	// recordOverhead approximates the B+tree bytes a record costs beyond its value: its 8-byte
	// key and 16-byte leaf element header.
	recordOverhead = 8 + 16
)

// usedBytes is the space the data occupies: the file's high-water mark less its free pages.
func (s *Store) usedBytes(tx *bolt.Tx) int64 {
	return tx.Size() - int64(s.db.Stats().FreeAlloc)
}

// retainBySize deletes the oldest records, kinds with the shortest retention first, when the used
// space passes capHigh of MaxBytes, until the estimate of freed space brings it to capLow.
func (s *Store) retainBySize(tx *bolt.Tx, kstat *[record.KindSession + 1]kindStat, cursors map[streamKind]cursor) error {
	used, limit := s.usedBytes(tx), s.opts.MaxBytes
	if s.spaceCap > 0 {
		// After a full file system the records' own bytes are held to spaceCap (the file's
		// fixed cost is not the records' to give up).
		used, limit = dataBytes(kstat), s.spaceCap
	}
	if float64(used) <= capHigh*float64(limit) {
		return nil
	}
	need := used - int64(capLow*float64(limit))
	order := record.Kinds()
	slices.SortStableFunc(order, func(a, b record.Kind) int {
		ra, rb := s.opts.Retention[a], s.opts.Retention[b]
		if ra < 0 {
			ra = 1<<63 - 1
		}
		if rb < 0 {
			rb = 1<<63 - 1
		}
		return int(min(max(ra-rb, -1), 1))
	})
	budget := maxDeletePerCommit
	var freed int64
	for _, k := range order {
		t := newTrimmer(tx, k, &kstat[k], cursors)
		for freed < need && budget > 0 {
			i := t.oldest()
			if i < 0 {
				break
			}
			n, err := t.deleteHead(i)
			if err != nil {
				return err
			}
			if n < 0 {
				continue // an empty run was removed
			}
			// Pages are not packed perfectly: count a little more than the bytes removed.
			freed += int64(float64(n+recordOverhead) * 1.1)
			kstat[k].removedSize++
			budget--
		}
		if freed >= need || budget == 0 {
			break
		}
	}
	return nil
}
