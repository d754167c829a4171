package buffer

import (
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	bolt "go.etcd.io/bbolt"
)

// The store meets damaged, cut-short, foreign and locked files, and commits that fail: it
// reports each in one line, moves a damaged file aside and loses nothing it was given.

func TestDamagedFileMovedAside(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "node.db")
	s := openTest(t, path, nil)
	oldID := s.ID()
	s.Append(second(t0, 50))
	s.Close()
	garbage := make([]byte, 64<<10)
	for i := range garbage {
		garbage[i] = byte(i*7 + i>>8)
	}
	if err := os.WriteFile(path, garbage, 0o600); err != nil {
		t.Fatal(err)
	}
	// A read-only open reports the damage and leaves the file alone.
	if _, err := OpenReadOnly(path, 0); !errors.Is(err, ErrDamaged) {
		t.Errorf("read-only open of garbage: %v", err)
	}
	s = openTest(t, path, nil)
	defer s.Close()
	if s.Recovered() == "" || !strings.HasPrefix(filepath.Base(s.Recovered()), "node.db.damaged-") {
		t.Fatalf("Recovered() = %q", s.Recovered())
	}
	moved, err := os.ReadFile(s.Recovered())
	if err != nil || string(moved) != string(garbage) {
		t.Errorf("damaged file not kept intact: %v", err)
	}
	if s.ID() == oldID || s.ID() == "" {
		t.Errorf("fresh store kept id %q", s.ID())
	}
	if _, err := s.Append(second(t0, 50)); err != nil {
		t.Fatal(err)
	}
}

// A store cut short (as a file system repair may leave it) would make bbolt touch pages beyond the
// end of the file and the process die of SIGBUS; it must be moved aside instead.
func TestTruncatedFileMovedAside(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, nil)
	for i := range 20000 {
		s.Append(second(t0.Add(time.Duration(i)*time.Second), 50))
	}
	oldID := s.ID()
	s.Close()
	fi, _ := os.Stat(path)
	if err := os.Truncate(path, fi.Size()/2); err != nil {
		t.Fatal(err)
	}
	if _, err := OpenReadOnly(path, 0); !errors.Is(err, ErrDamaged) || !strings.Contains(err.Error(), "cut short") {
		t.Errorf("read-only open of a truncated store: %v", err)
	}
	s = openTest(t, path, nil)
	defer s.Close()
	if s.Recovered() == "" || s.ID() == oldID {
		t.Fatalf("truncated store not replaced: recovered %q, id %s (was %s)", s.Recovered(), s.ID(), oldID)
	}
	if moved, err := os.Stat(s.Recovered()); err != nil || moved.Size() != fi.Size()/2 {
		t.Errorf("the moved file is not the truncated store: %v", err)
	}
}

func TestNotAStore(t *testing.T) {
	path := filepath.Join(t.TempDir(), "other.db")
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	db.Update(func(tx *bolt.Tx) error { _, err := tx.CreateBucket([]byte("accounts")); return err })
	db.Close()
	if _, err := Open(path, &Options{Logger: quietLogger()}); !errors.Is(err, ErrNotStore) {
		t.Errorf("open of a foreign bbolt file: %v", err)
	}
	if _, err := os.Stat(path); err != nil {
		t.Errorf("foreign file touched: %v", err)
	}
}

func TestLockedStore(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, nil)
	defer s.Close()
	t1 := time.Now()
	_, err := OpenReadOnly(path, 200*time.Millisecond)
	if !errors.Is(err, ErrLocked) || !strings.Contains(err.Error(), "control socket") || strings.Contains(err.Error(), "\n") {
		t.Errorf("read-only open of a held store: %v", err)
	}
	if time.Since(t1) > 10*time.Second {
		t.Errorf("read-only open waited %v", time.Since(t1))
	}
	if _, err := Open(path, &Options{LockTimeout: 100 * time.Millisecond, Logger: quietLogger()}); !errors.Is(err, ErrLocked) {
		t.Errorf("second writer: %v", err)
	}
	if _, err := OpenReadOnly(filepath.Join(t.TempDir(), "missing.db"), 0); err == nil || !strings.Contains(err.Error(), "no store") {
		t.Errorf("missing file: %v", err)
	}
}

// Damaged pages inside a file whose meta pages are intact (bit rot on a card): reading commands
// report the damage in an error, never crash, and an Open with CheckOnOpen moves the file aside.
func TestDamagedPagesReported(t *testing.T) {
	for seed := range uint64(12) {
		path := filepath.Join(t.TempDir(), "node.db")
		s := openTest(t, path, nil)
		for i := range 3000 {
			s.Append(second(t0.Add(time.Duration(i)*time.Second), 50))
		}
		s.Close()
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		rng := rand.New(rand.NewPCG(seed, 1))
		for range 20 { // flip bytes in data pages, never in the two meta pages
			p := 2 + rng.IntN(len(b)/4096-2)
			b[p*4096+rng.IntN(4096)] ^= byte(1 + rng.IntN(255))
		}
		if err := os.WriteFile(path, b, 0o600); err != nil {
			t.Fatal(err)
		}
		r, err := OpenReadOnly(path, 0)
		if err == nil {
			err = r.Check()
			r.Close()
		}
		if !errors.Is(err, ErrDamaged) {
			t.Errorf("seed %d: damaged pages gave %v, want an error wrapping ErrDamaged", seed, err)
			continue
		}
		w, err := Open(path, &Options{CheckOnOpen: true, NoSync: true, Logger: quietLogger(), Now: func() time.Time { return t0.Add(time.Hour) }})
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		if w.Recovered() == "" {
			t.Errorf("seed %d: CheckOnOpen kept a damaged file", seed)
		}
		w.Close()
	}
}

// When commits fail (here: the file closed under the store), records stay held, the failure is
// reported in Stats, and once MaxHeld records are held Append refuses more instead of growing.
func TestCommitFailureHoldsRecords(t *testing.T) {
	clk := &clock{t: t0}
	s := openTest(t, filepath.Join(t.TempDir(), "node.db"), &Options{Now: clk.Now, MaxHeld: 5})
	if _, err := s.Append(second(t0, 50)); err != nil {
		t.Fatal(err)
	}
	s.db.Close()
	var errs int
	for i := 1; i <= 8; i++ {
		clk.Add(time.Minute) // every append is due to commit
		if _, err := s.Append(second(t0.Add(time.Duration(i)*time.Second), 50)); err != nil {
			errs++
		}
	}
	st, _ := s.Stats()
	if errs != 8 || st.CommitError == "" || st.Held != 5 {
		t.Errorf("%d append errors, commit error %q, %d held; want 8, an error, 5", errs, st.CommitError, st.Held)
	}
	if n := s.LastSeq(record.KindSecond); n != 6 { // one committed, five held, three refused
		t.Errorf("last number handed out %d, want 6", n)
	}
}
