package buffer

import (
	"bytes"
	"crypto/rand"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"runtime/debug"
	"sync"
	"syscall"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
	berrors "go.etcd.io/bbolt/errors"
)

// Errors returned by the store. Messages returned to callers wrap them and name the file.
var (
	// ErrLocked: another process (normally the running daemon) holds the file.
	ErrLocked = errors.New("store is in use by another process")
	// ErrReadOnly: a write on a store opened with OpenReadOnly.
	ErrReadOnly = errors.New("store is open read-only")
	// ErrClosed: a call on a closed store.
	ErrClosed = errors.New("store is closed")
	// ErrNotStore: the file is a bbolt database but not a leqnode store.
	ErrNotStore = errors.New("not a leqnode store")
	// ErrNoStore: OpenReadOnly found no file at the path.
	ErrNoStore = errors.New("no store")
	// ErrDamaged: the file cannot be read as a store.
	ErrDamaged = errors.New("store file is damaged")
	// ErrNotCommitted: Append kept the record in memory, but the commit it was due for failed
	// (a full disk, an I/O error). The record is written with the next commit that succeeds;
	// commits are retried with back-off. Nothing is lost unless the process ends first.
	ErrNotCommitted = errors.New("record held in memory: the store could not commit")
	// ErrRefused: Append did not take the record: Options.MaxHeld records are already held
	// while commits fail. The caller should account for what it could not keep (the node
	// writes a gap record once the store accepts records again).
	ErrRefused = errors.New("record refused: the store holds as many records as it may while commits fail")
)

// formatVersion is the version of the bucket layout.
const formatVersion = 1

// Bucket layout:
//
//	meta           "id" → 16 hex digits, "created" → RFC 3339, "format" → one byte
//	rec/<kind>     seq (8 bytes, big-endian) → encoded record; bucket sequence = last seq
//	runs/<kind>    first seq of a run (8) → its time key (8); see runs.go
//	kinds          kind (1) → count, bytes, removed by age, removed by size, reserved seq (5 × uint64)
//	outbox         stream ‖ 0 ‖ kind → acknowledged seq, dropped count (2 × uint64)
var (
	bucketMeta   = []byte("meta")
	bucketKinds  = []byte("kinds")
	bucketOutbox = []byte("outbox")
)

func recBucket(k record.Kind) []byte { return []byte("rec/" + k.String()) }

// fillPercent packs pages full: records are appended at the right edge of their B+trees, so
// half-empty pages would only waste space and writes.
const fillPercent = 1.0

type kindStat struct {
	count, bytes, removedAge, removedSize uint64
	// reserved is the highest sequence number that may have been handed out: Append never
	// assigns more than MaxHeld numbers between commits, and each commit reserves that many
	// ahead, so after a crash numbering resumes above every number a held record may have had.
	reserved uint64
}

type streamKind struct {
	stream string
	kind   record.Kind
}

type cursor struct {
	acked, dropped uint64
	dirty          bool
}

// held is a record appended but not yet committed.
type held struct {
	kind   record.Kind
	seq    uint64
	tkey   uint64
	newRun bool // the record starts a run of the time index
	value  []byte
}

// Store is a ring buffer of records in one bbolt file. Its methods are safe for concurrent use.
type Store struct {
	mu       sync.Mutex
	db       *bolt.DB
	path     string
	id       string
	opts     Options
	readOnly bool
	closed   bool
	pageSize int // bbolt's page size, read once at open (DB.Info races with a remap)

	held        []held
	nextSeq     [record.KindSession + 1]uint64 // next sequence number to assign
	committed   [record.KindSession + 1]uint64 // last committed sequence number
	firstSeq    [record.KindSession + 1]uint64 // the first number this opening assigns
	kstat       [record.KindSession + 1]kindStat
	lastTkey    [record.KindSession + 1]uint64 // time key of the last record appended
	runsEmpty   [record.KindSession + 1]bool   // the kind has no run: the next record starts one
	cursors     map[streamKind]*cursor
	lastCommit  time.Time
	lastRetain  time.Time
	commits     uint64
	commitErr   error
	retryAt     time.Time     // after a failed commit, the next attempt is not before this
	backoff     time.Duration // the wait after the last failed commit
	spaceCap    int64         // a cap lower than MaxBytes, set when the file system was full
	recovered   string
	firstCommit bool
}

// Open opens the store at path for writing, creating it if needed. bbolt's exclusive lock keeps
// other processes out until Close.
//
// A file that bbolt cannot open (or that fails the check of Options.CheckOnOpen) is renamed to
// path.damaged-<UTC time stamp>, never deleted; a fresh store with a new identity is created in
// its place, the error is logged, and Recovered returns the moved file's name. A file that is a
// valid bbolt database but not a store is refused with ErrNotStore.
func Open(path string, opts *Options) (*Store, error) {
	o := opts.resolved()
	fresh := func() *Store {
		return &Store{path: path, opts: o, cursors: map[streamKind]*cursor{}, firstCommit: true}
	}
	s := fresh()
	err := s.open()
	if err != nil && errors.Is(err, ErrDamaged) {
		moved, merr := moveAside(path, o.Now())
		if merr != nil {
			return nil, fmt.Errorf("store %s is damaged (%v) and could not be moved aside: %w", path, err, merr)
		}
		o.Logger.Error("store file damaged: moved aside, starting a fresh store",
			"path", path, "moved_to", moved, "err", err)
		s = fresh() // nothing of the damaged file's state carries over
		s.recovered = moved
		err = s.open()
	}
	if err != nil {
		return nil, err
	}
	return s, nil
}

// OpenReadOnly opens the store at path for reading, waiting at most timeout (0 means
// DefaultLockTimeout) for a writer to release it. When the daemon holds the file, the error wraps
// ErrLocked and says, in one line, to read through the daemon's control socket instead.
// A damaged file is reported (ErrDamaged) and left alone.
func OpenReadOnly(path string, timeout time.Duration) (*Store, error) {
	o := (&Options{LockTimeout: timeout}).resolved()
	if _, err := os.Stat(path); err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%w at %s: check the path given with --db or the store path in the config", ErrNoStore, path)
		}
		return nil, fmt.Errorf("store %s: %w", path, err)
	}
	s := &Store{path: path, opts: o, cursors: map[streamKind]*cursor{}, readOnly: true}
	if err := s.open(); err != nil {
		return nil, err
	}
	return s, nil
}

// open opens the bbolt file and loads or creates the store's state.
func (s *Store) open() (err error) {
	bo := &bolt.Options{
		Timeout:        s.opts.LockTimeout,
		ReadOnly:       s.readOnly,
		FreelistType:   bolt.FreelistMapType,
		NoFreelistSync: s.opts.NoFreelistSync,
		NoSync:         s.opts.NoSync,
	}
	defer func() {
		if p := recover(); p != nil {
			if s.db != nil {
				_ = s.db.Close()
				s.db = nil
			}
			err = fmt.Errorf("store %s: %w: %v", s.path, ErrDamaged, p)
		}
	}()
	if err := precheck(s.path); err != nil {
		if s.readOnly && errors.Is(err, ErrDamaged) {
			return fmt.Errorf("%w: the daemon moves it aside at its next start", err)
		}
		return err
	}
	db, err := bolt.Open(s.path, 0o600, bo)
	if err != nil {
		switch {
		case errors.Is(err, berrors.ErrTimeout):
			if s.readOnly {
				return fmt.Errorf("store %s is held by the running leqnode daemon: read it through the daemon's control socket (give --config) or stop the daemon: %w", s.path, ErrLocked)
			}
			return fmt.Errorf("store %s is held by another process (a leqnode daemon already running?): stop it first: %w", s.path, ErrLocked)
		case errors.Is(err, berrors.ErrInvalid), errors.Is(err, berrors.ErrVersionMismatch),
			errors.Is(err, berrors.ErrChecksum), isFormatError(err):
			if s.readOnly {
				return fmt.Errorf("store %s is damaged (%v): the daemon moves it aside at its next start: %w", s.path, err, ErrDamaged)
			}
			return fmt.Errorf("store %s: %w: %v", s.path, ErrDamaged, err)
		}
		return fmt.Errorf("store %s: %w", s.path, err)
	}
	s.db = db
	s.pageSize = db.Info().PageSize
	if s.readOnly {
		err = db.View(s.load)
	} else {
		err = db.Update(s.init)
		if err == nil {
			err = db.View(s.load)
		}
		if err == nil && s.opts.CheckOnOpen {
			if cerr := s.check(); cerr != nil {
				err = fmt.Errorf("store %s: %w: %v", s.path, ErrDamaged, cerr)
			}
		}
	}
	if err != nil {
		_ = db.Close()
		s.db = nil
		return err
	}
	s.lastCommit = s.opts.Now()
	return nil
}

// init creates the buckets of a new store, or checks that an existing file is a store.
func (s *Store) init(tx *bolt.Tx) error {
	if tx.Bucket(bucketMeta) == nil {
		empty := true
		_ = tx.ForEach(func([]byte, *bolt.Bucket) error { empty = false; return nil })
		if !empty {
			return fmt.Errorf("%s holds a bbolt database that is %w: give the path of a leqnode store", s.path, ErrNotStore)
		}
		meta, err := tx.CreateBucket(bucketMeta)
		if err != nil {
			return err
		}
		var id [8]byte
		if _, err := rand.Read(id[:]); err != nil {
			return fmt.Errorf("making a store id: %w", err)
		}
		_ = meta.Put([]byte("id"), []byte(hex.EncodeToString(id[:])))
		_ = meta.Put([]byte("created"), []byte(s.opts.Now().UTC().Format(time.RFC3339)))
		_ = meta.Put([]byte("format"), []byte{formatVersion})
	}
	meta := tx.Bucket(bucketMeta)
	if f := meta.Get([]byte("format")); len(f) != 1 || f[0] > formatVersion {
		return fmt.Errorf("store %s has layout version %v, this build reads version %d: upgrade leqnode", s.path, f, formatVersion)
	}
	for _, name := range [][]byte{bucketKinds, bucketOutbox} {
		if _, err := tx.CreateBucketIfNotExists(name); err != nil {
			return err
		}
	}
	for _, k := range record.Kinds() {
		if _, err := tx.CreateBucketIfNotExists(recBucket(k)); err != nil {
			return err
		}
		if _, err := tx.CreateBucketIfNotExists(runsBucket(k)); err != nil {
			return err
		}
	}
	return nil
}

// load reads the store's identity, sequence numbers, counters and cursors.
func (s *Store) load(tx *bolt.Tx) error {
	meta := tx.Bucket(bucketMeta)
	if meta == nil {
		return fmt.Errorf("%s holds a bbolt database that is %w: give the path of a leqnode store", s.path, ErrNotStore)
	}
	s.id = string(meta.Get([]byte("id")))
	for _, k := range record.Kinds() {
		b, rb := tx.Bucket(recBucket(k)), tx.Bucket(runsBucket(k))
		if b == nil || rb == nil {
			return fmt.Errorf("store %s: %w: buckets of kind %s missing", s.path, ErrDamaged, k)
		}
		s.committed[k] = b.Sequence()
		s.nextSeq[k] = s.committed[k] + 1
		if key, _ := rb.Cursor().First(); key == nil {
			s.runsEmpty[k] = true
		}
		if key, v := b.Cursor().Last(); key != nil {
			tk, err := timeOf(k, v)
			if err != nil {
				return fmt.Errorf("store %s: last %s record: %w", s.path, k, err)
			}
			s.lastTkey[k] = tk
		}
	}
	if b := tx.Bucket(bucketKinds); b != nil {
		_ = b.ForEach(func(k, v []byte) error {
			if len(k) == 1 && record.Kind(k[0]).Valid() && len(v) >= 40 {
				ks := kindStat{
					count: binary.BigEndian.Uint64(v), bytes: binary.BigEndian.Uint64(v[8:]),
					removedAge: binary.BigEndian.Uint64(v[16:]), removedSize: binary.BigEndian.Uint64(v[24:]),
					reserved: binary.BigEndian.Uint64(v[32:]),
				}
				s.kstat[k[0]] = ks
				s.nextSeq[k[0]] = max(s.nextSeq[k[0]], ks.reserved+1)
			}
			return nil
		})
	}
	s.firstSeq = s.nextSeq
	if b := tx.Bucket(bucketOutbox); b != nil {
		_ = b.ForEach(func(k, v []byte) error {
			i := bytes.IndexByte(k, 0)
			if i < 0 || i+2 != len(k) || len(v) != 16 {
				return nil
			}
			s.cursors[streamKind{string(k[:i]), record.Kind(k[i+1])}] = &cursor{
				acked: binary.BigEndian.Uint64(v), dropped: binary.BigEndian.Uint64(v[8:]),
			}
			return nil
		})
	}
	return nil
}

// ID returns the store's identity: 16 hex digits made at random when the store was created.
func (s *Store) ID() string { return s.id }

// Path returns the file's path.
func (s *Store) Path() string { return s.path }

// Recovered returns the path a damaged file was moved to when this Open replaced it with a
// fresh store, or "" when the file opened normally. A node raises a health flag on it.
func (s *Store) Recovered() string { return s.recovered }

func seqKey(seq uint64) []byte {
	var b [8]byte
	binary.BigEndian.PutUint64(b[:], seq)
	return b[:]
}

func timeKey(t time.Time) uint64 { return uint64(t.UnixMicro()) ^ 1<<63 }

// Append assigns rec the next sequence number of its kind, holds it in memory, and commits the
// held records when a commit is due: on the first record after Open, when CommitInterval has
// passed since the last commit, or when MaxHeld records are held. It returns the sequence
// number. Numbers are never reused in the store, even for a record lost in a crash before its
// commit (the numbers such records had are skipped after the restart).
//
// The record is encoded at once; rec is not retained and may be reused. When a due commit fails
// the record stays held and the error is returned; the commit is retried on later calls, and
// once MaxHeld records are held, Append refuses new ones.
func (s *Store) Append(rec record.Record) (seq uint64, err error) {
	k := rec.Kind()
	value, err := rec.AppendBinary(nil)
	if err != nil {
		return 0, err
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if err := s.writable(); err != nil {
		return 0, err
	}
	if len(s.held) >= s.opts.MaxHeld && s.commitErr != nil {
		err := s.commitErr
		if !s.opts.Now().Before(s.retryAt) {
			err = s.commit(false)
		}
		if err != nil {
			return 0, fmt.Errorf("store %s: %d records held: %w (%w)", s.path, len(s.held), ErrRefused, err)
		}
	}
	seq = s.nextSeq[k]
	s.nextSeq[k]++
	rec.SetSeq(seq)
	tk := timeKey(rec.Time())
	newRun := s.runsEmpty[k] || tk < s.lastTkey[k]
	s.runsEmpty[k], s.lastTkey[k] = false, tk
	s.held = append(s.held, held{kind: k, seq: seq, tkey: tk, newRun: newRun, value: value})
	if err := s.maybeCommit(); err != nil {
		return seq, fmt.Errorf("%w: %w", ErrNotCommitted, err)
	}
	return seq, nil
}

func (s *Store) writable() error {
	if s.closed {
		return ErrClosed
	}
	if s.readOnly {
		return fmt.Errorf("store %s: %w", s.path, ErrReadOnly)
	}
	return nil
}

// maybeCommit commits when a commit is due; after a failed commit, not before its back-off has
// passed. The caller holds s.mu.
func (s *Store) maybeCommit() error {
	now := s.opts.Now()
	if s.commitErr != nil && now.Before(s.retryAt) {
		return s.commitErr
	}
	if s.firstCommit && len(s.held) > 0 || len(s.held) >= s.opts.MaxHeld ||
		now.Sub(s.lastCommit) >= s.opts.CommitInterval || s.commitErr != nil {
		return s.commit(false)
	}
	return nil
}

// Flush commits the held records and acknowledgements now.
func (s *Store) Flush() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return ErrClosed
	}
	if s.readOnly {
		return nil
	}
	return s.commit(false)
}

// Close flushes and closes the store. The store cannot be used afterwards.
func (s *Store) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return nil
	}
	var err error
	if !s.readOnly {
		err = s.commit(true)
	}
	s.closed = true
	if cerr := s.db.Close(); err == nil {
		err = cerr
	}
	return err
}

func (s *Store) dirtyCursors() bool {
	for _, c := range s.cursors {
		if c.dirty {
			return true
		}
	}
	return false
}

// commit writes the held records, the dirty cursors and the counters in one transaction, and
// applies retention. The caller holds s.mu.
func (s *Store) commit(final bool) error {
	now := s.opts.Now()
	retain := now.Sub(s.lastRetain) >= retentionEvery || s.lastRetain.IsZero()
	// Reserve the sequence numbers Append may hand out before the next commit; the last commit
	// before Close reserves none, so a clean restart leaves no gap.
	var reserved [record.KindSession + 1]uint64
	reserve := false
	for _, k := range record.Kinds() {
		reserved[k] = s.nextSeq[k] - 1
		if !final {
			reserved[k] += uint64(s.opts.MaxHeld)
		}
		reserve = reserve || reserved[k] != s.kstat[k].reserved
	}
	if len(s.held) == 0 && !s.dirtyCursors() && !retain && !reserve {
		s.lastCommit = now
		return nil
	}
	// Counters are updated on copies so that a failed commit leaves the memory state intact.
	kstat := s.kstat
	for _, k := range record.Kinds() {
		kstat[k].reserved = reserved[k]
	}
	cursors := make(map[streamKind]cursor, len(s.cursors))
	for sk, c := range s.cursors {
		cursors[sk] = *c
	}
	var last [record.KindSession + 1]uint64
	var runsEmpty [record.KindSession + 1]bool
	err := s.update(func(tx *bolt.Tx) error {
		for _, h := range s.held {
			rb := tx.Bucket(recBucket(h.kind))
			rb.FillPercent = fillPercent
			if err := rb.Put(seqKey(h.seq), h.value); err != nil {
				return err
			}
			if h.newRun {
				if err := putRun(tx.Bucket(runsBucket(h.kind)), h.seq, h.tkey); err != nil {
					return err
				}
			}
			kstat[h.kind].count++
			kstat[h.kind].bytes += uint64(len(h.value))
			last[h.kind] = h.seq
		}
		for _, k := range record.Kinds() {
			if last[k] != 0 {
				if err := tx.Bucket(recBucket(k)).SetSequence(last[k]); err != nil {
					return err
				}
			}
		}
		if retain {
			if err := s.retainByAge(tx, now, &kstat, cursors); err != nil {
				return err
			}
		}
		if err := s.retainBySize(tx, &kstat, cursors); err != nil {
			return err
		}
		for _, k := range record.Kinds() {
			key, _ := tx.Bucket(runsBucket(k)).Cursor().First()
			runsEmpty[k] = key == nil
		}
		if err := s.putKindStats(tx, &kstat); err != nil {
			return err
		}
		ob := tx.Bucket(bucketOutbox)
		for sk, c := range cursors {
			if !c.dirty {
				continue
			}
			v := make([]byte, 16)
			binary.BigEndian.PutUint64(v, c.acked)
			binary.BigEndian.PutUint64(v[8:], c.dropped)
			if err := ob.Put(outboxKey(sk), v); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil && errors.Is(err, syscall.ENOSPC) && s.makeRoom() {
		return s.commit(final) // room was made inside the file: try once more at once
	}
	if err != nil {
		if s.commitErr == nil {
			s.opts.Logger.Error("store commit failed; records held for the next attempt", "path", s.path, "held", len(s.held), "err", err)
		}
		s.commitErr = fmt.Errorf("store %s: commit: %w", s.path, err)
		s.backoff = min(max(2*s.backoff, time.Second), time.Minute)
		s.retryAt = now.Add(s.backoff)
		return s.commitErr
	}
	if s.commitErr != nil {
		s.opts.Logger.Info("store commits again", "path", s.path, "held", len(s.held))
	}
	s.commitErr, s.backoff = nil, 0
	s.kstat = kstat
	for sk, c := range cursors {
		c.dirty = false
		s.cursors[sk] = &c
	}
	for _, k := range record.Kinds() {
		if last[k] != 0 {
			s.committed[k] = last[k]
		}
	}
	// Retention may have emptied a kind: its next record starts a run.
	s.runsEmpty = runsEmpty
	s.held = s.held[:0]
	s.lastCommit = now
	if retain {
		s.lastRetain = now
	}
	s.firstCommit = false
	s.commits++
	return nil
}

// update runs fn in a write transaction; a panic or memory fault on a damaged page rolls the
// transaction back (bbolt's Update does so on a panic) and becomes an error wrapping ErrDamaged.
// The store stays open; a node that sees ErrDamaged should Close it and Open it again with
// CheckOnOpen, which moves the damaged file aside.
func (s *Store) update(fn func(tx *bolt.Tx) error) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer s.recoverDamage(&err)
	return s.db.Update(fn)
}

func outboxKey(sk streamKind) []byte {
	return append(append([]byte(sk.stream), 0), byte(sk.kind))
}

// view runs fn in a read transaction, turning a bbolt panic on a damaged page, or a memory fault
// on a page pointer beyond the mapped file, into an error wrapping ErrDamaged.
func (s *Store) view(fn func(tx *bolt.Tx) error) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer s.recoverDamage(&err)
	return s.db.View(fn)
}
