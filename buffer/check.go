package buffer

import (
	"encoding/binary"
	"errors"
	"fmt"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
)

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
		for _, k := range record.Kinds() {
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
				r, err := record.Decode(k, v)
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
