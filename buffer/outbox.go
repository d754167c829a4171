package buffer

import (
	"bytes"
	"encoding/binary"
	"fmt"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
)

func checkStream(stream string) error {
	if stream == "" || len(stream) > 128 || bytes.IndexByte([]byte(stream), 0) >= 0 {
		return fmt.Errorf("stream name %q: use 1 to 128 bytes without NUL", stream)
	}
	return nil
}

// Pending returns up to limit committed records of kind k that stream has not acknowledged, in
// sequence order. A stream seen for the first time starts before the oldest stored record. The
// records are copies; no transaction is held after Pending returns.
func (s *Store) Pending(stream string, k record.Kind, limit int) ([]record.Record, error) {
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
func (s *Store) After(k record.Kind, seq uint64, limit int) ([]record.Record, error) {
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
func (s *Store) Recent(k record.Kind, seq uint64, limit int) ([]record.Record, error) {
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
	var mem []record.Record
	for _, h := range s.held {
		if h.kind != k || h.seq <= max(seq, upto) || len(mem) >= limit {
			continue
		}
		r, err := record.Decode(k, h.value)
		if err != nil {
			s.mu.Unlock()
			return nil, err
		}
		r.SetSeq(h.seq)
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

func (s *Store) after(k record.Kind, after, upto uint64, limit int) ([]record.Record, error) {
	var out []record.Record
	err := s.view(func(tx *bolt.Tx) error {
		cur := tx.Bucket(recBucket(k)).Cursor()
		for key, v := cur.Seek(seqKey(after + 1)); key != nil && len(out) < limit; key, v = cur.Next() {
			seq := binary.BigEndian.Uint64(key)
			if seq > upto {
				break
			}
			r, err := record.Decode(k, v)
			if err != nil {
				return fmt.Errorf("store %s: %s record %d: %w", s.path, k, seq, err)
			}
			r.SetSeq(seq)
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
func (s *Store) Ack(stream string, k record.Kind, seq uint64) error {
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
func (s *Store) LastSeq(k record.Kind) uint64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	if !k.Valid() {
		return 0
	}
	return s.nextSeq[k] - 1
}

// LastCommitted returns the last committed sequence number of kind k, 0 if none: what a
// consumer of the outbox can have received.
func (s *Store) LastCommitted(k record.Kind) uint64 {
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
func (s *Store) FirstSeq(k record.Kind) uint64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	if !k.Valid() {
		return 0
	}
	return s.firstSeq[k]
}

// Last returns the record of kind k with the highest sequence number (held or committed), or nil
// when the kind holds none.
func (s *Store) Last(k record.Kind) (record.Record, error) {
	if !k.Valid() {
		return nil, fmt.Errorf("unknown record kind %d", uint8(k))
	}
	s.mu.Lock()
	for i := len(s.held) - 1; i >= 0; i-- {
		if h := s.held[i]; h.kind == k {
			s.mu.Unlock()
			r, err := record.Decode(k, h.value)
			if err == nil {
				r.SetSeq(h.seq)
			}
			return r, err
		}
	}
	s.mu.Unlock()
	var out record.Record
	err := s.view(func(tx *bolt.Tx) error {
		key, v := tx.Bucket(recBucket(k)).Cursor().Last()
		if key == nil {
			return nil
		}
		r, err := record.Decode(k, v)
		if err != nil {
			return fmt.Errorf("store %s: %s record %d: %w", s.path, k, binary.BigEndian.Uint64(key), err)
		}
		r.SetSeq(binary.BigEndian.Uint64(key))
		out = r
		return nil
	})
	return out, err
}
