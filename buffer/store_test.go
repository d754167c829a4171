package buffer

import (
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/buffer/record/recordtest"
	bolt "go.etcd.io/bbolt"
)

// clock is a settable clock for commit timing and retention.
type clock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *clock) Now() time.Time { c.mu.Lock(); defer c.mu.Unlock(); return c.t }
func (c *clock) Add(d time.Duration) {
	c.mu.Lock()
	c.t = c.t.Add(d)
	c.mu.Unlock()
}

func quietLogger() *slog.Logger { return slog.New(slog.NewTextHandler(io.Discard, nil)) }

func openTest(t testing.TB, path string, o *Options) *Store {
	t.Helper()
	if o == nil {
		o = &Options{}
	}
	if o.Logger == nil {
		o.Logger = quietLogger()
	}
	if o.Now == nil {
		// A fixed clock a day after the test data, so that age retention leaves it alone.
		o.Now = func() time.Time { return t0.Add(24 * time.Hour) }
	}
	o.NoSync = true
	s, err := Open(path, o)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func second(start time.Time, laeq float64) *record.Second {
	return &record.Second{Start: start, Duration: time.Second, LAeq: laeq, LCeq: laeq + 6, LZeq: laeq + 9,
		LAFmax: laeq + 4, LAFmin: laeq - 4, LASmax: laeq + 2, LASmin: laeq - 2, LAImax: laeq + 5,
		LCpeak: laeq + 25, LZpeak: laeq + 27, LAE: laeq, Spectrum: recordtest.ThirdOctave(33, laeq-30), FirstBand: -19}
}

func collect(t testing.TB, s *Store, k record.Kind, from, to time.Time) []record.Record {
	t.Helper()
	var out []record.Record
	if err := s.Range(k, from, to, func(r record.Record) error { out = append(out, r); return nil }); err != nil {
		t.Fatal(err)
	}
	return out
}

func seqs(rs []record.Record) []uint64 {
	out := make([]uint64, len(rs))
	for i, r := range rs {
		out[i] = r.Seq()
	}
	return out
}

func TestAppendReopen(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, nil)
	id := s.ID()
	if len(id) != 16 {
		t.Fatalf("id %q", id)
	}
	var want []record.Record
	for i := range 5 {
		for _, r := range recordtest.Samples() {
			if sec, ok := r.(*record.Second); ok {
				sec.Start = sec.Start.Add(time.Duration(i) * 2 * time.Second)
			}
			seq, err := s.Append(r)
			if err != nil {
				t.Fatal(err)
			}
			if seq != r.Seq() {
				t.Fatalf("seq %d, record says %d", seq, r.Seq())
			}
			want = append(want, r)
		}
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	s = openTest(t, path, nil)
	defer s.Close()
	if s.ID() != id {
		t.Errorf("id changed from %s to %s", id, s.ID())
	}
	if err := s.Check(); err != nil {
		t.Fatal(err)
	}
	for _, k := range record.Kinds() {
		var wk []record.Record
		for _, r := range want {
			if r.Kind() == k {
				wk = append(wk, r)
			}
		}
		got, err := s.Pending("test", k, 1000)
		if err != nil {
			t.Fatal(err)
		}
		if len(got) != len(wk) {
			t.Fatalf("%s: %d records, want %d", k, len(got), len(wk))
		}
		for i := range got {
			if got[i].Seq() != uint64(i+1) || wk[i].Seq() != uint64(i+1) {
				t.Errorf("%s: seq %d at %d", k, got[i].Seq(), i)
			}
		}
	}
	st, err := s.Stats()
	if err != nil {
		t.Fatal(err)
	}
	if st.Kinds[record.KindSecond].Count != 10 || st.Kinds[record.KindMinute].Count != 10 || st.Kinds[record.KindGap].Count != 5 {
		t.Errorf("stats %+v", st.Kinds)
	}
	if st.Streams["test"][record.KindSecond].Pending != 10 {
		t.Errorf("pending %+v", st.Streams["test"])
	}
}

func TestGroupCommit(t *testing.T) {
	clk := &clock{t: t0}
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, &Options{CommitInterval: 10 * time.Second, Now: clk.Now})
	defer s.Close()
	if _, err := s.Append(second(t0, 50)); err != nil {
		t.Fatal(err)
	}
	// The first record after Open is committed at once.
	if got, _ := s.Pending("mqtt", record.KindSecond, 10); len(got) != 1 {
		t.Fatalf("first record: %d pending, want 1 (committed at once)", len(got))
	}
	for i := 1; i < 10; i++ {
		clk.Add(time.Second)
		if _, err := s.Append(second(t0.Add(time.Duration(i)*time.Second), 50)); err != nil {
			t.Fatal(err)
		}
	}
	if got, _ := s.Pending("mqtt", record.KindSecond, 100); len(got) != 1 {
		t.Fatalf("within the interval: %d pending, want 1 (held in memory)", len(got))
	}
	// Held records are visible to Range.
	if got := collect(t, s, record.KindSecond, t0, t0.Add(time.Hour)); len(got) != 10 {
		t.Fatalf("Range sees %d records, want 10 including held ones", len(got))
	}
	clk.Add(time.Second)
	if _, err := s.Append(second(t0.Add(10*time.Second), 50)); err != nil {
		t.Fatal(err)
	}
	if got, _ := s.Pending("mqtt", record.KindSecond, 100); len(got) != 11 {
		t.Fatalf("after the interval: %d pending, want 11", len(got))
	}
	st, _ := s.Stats()
	if st.Commits != 2 {
		t.Errorf("%d commits, want 2", st.Commits)
	}
}

func TestFlushOnClose(t *testing.T) {
	clk := &clock{t: t0}
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, &Options{Now: clk.Now})
	for i := range 100 {
		if _, err := s.Append(second(t0.Add(time.Duration(i)*time.Second), 40)); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Append(second(t0, 1)); !errors.Is(err, ErrClosed) {
		t.Errorf("append after close: %v", err)
	}
	r, err := OpenReadOnly(path, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if got := collect(t, r, record.KindSecond, t0, t0.Add(time.Hour)); len(got) != 100 {
		t.Errorf("%d records after close, want 100", len(got))
	}
	if _, err := r.Append(second(t0, 1)); !errors.Is(err, ErrReadOnly) {
		t.Errorf("append on read-only store: %v", err)
	}
}

// Range works through the time index: a late record with an early start, and records written
// after the clock stepped back, come out in time order and none is lost.
func TestRangeTimeOrder(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, nil)
	defer s.Close()
	var want []string
	add := func(start time.Time) {
		t.Helper()
		if _, err := s.Append(second(start, 50)); err != nil {
			t.Fatal(err)
		}
	}
	for i := range 3000 { // spans several Range chunks
		add(t0.Add(time.Duration(i) * time.Second))
	}
	// The clock steps back 10 minutes: the next seconds repeat earlier start times.
	for i := range 5 {
		add(t0.Add(2990*time.Second + time.Duration(i)*time.Second - 10*time.Minute))
	}
	if err := s.Flush(); err != nil {
		t.Fatal(err)
	}
	// A late event, and one held in memory.
	ev := &record.Event{Start: t0.Add(5 * time.Second), End: t0.Add(8 * time.Second), LAFmax: 80}
	s.Append(ev)
	s.Flush()
	ev2 := &record.Event{Start: t0.Add(2 * time.Second), End: t0.Add(3 * time.Second), LAFmax: 70}
	s.Append(ev2)

	got := collect(t, s, record.KindSecond, t0, t0.Add(time.Hour))
	if len(got) != 3005 {
		t.Fatalf("%d records, want 3005", len(got))
	}
	for i := 1; i < len(got); i++ {
		a, b := got[i-1], got[i]
		if b.Time().Before(a.Time()) || b.Time().Equal(a.Time()) && b.Seq() <= a.Seq() {
			t.Fatalf("out of order at %d: %v/%d then %v/%d", i, a.Time(), a.Seq(), b.Time(), b.Seq())
		}
	}
	// The window around the step holds both the original and the repeated start times.
	w := collect(t, s, record.KindSecond, t0.Add(2390*time.Second), t0.Add(2392*time.Second))
	if fmt.Sprint(seqs(w)) != "[2391 3001 2392 3002]" {
		t.Errorf("window seqs %v", seqs(w))
	}
	evs := collect(t, s, record.KindEvent, t0, t0.Add(time.Minute))
	if fmt.Sprint(seqs(evs)) != "[2 1]" {
		t.Errorf("events in time order: seqs %v, want [2 1]", seqs(evs))
	}
	// Half-open: a record starting exactly at `to` is excluded, at `from` included.
	if n := len(collect(t, s, record.KindSecond, t0.Add(100*time.Second), t0.Add(101*time.Second))); n != 1 {
		t.Errorf("half-open window holds %d records", n)
	}
	_ = want
}

func TestAnnotationsAppliedWhenReading(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, nil)
	defer s.Close()
	for i := range 10 {
		s.Append(second(t0.Add(time.Duration(i)*time.Second), 50))
	}
	s.Append(&record.Annotation{From: t0.Add(3 * time.Second), To: t0.Add(5 * time.Second), Flags: record.Excluded, Reason: "road works"})
	s.Flush()
	s.Append(&record.Annotation{From: t0.Add(4500 * time.Millisecond), To: t0.Add(6 * time.Second), Flags: record.Suspect, Reason: "held"})
	got := collect(t, s, record.KindSecond, t0, t0.Add(time.Minute))
	var flags []string
	for _, r := range got {
		flags = append(flags, r.(*record.Second).Flags.String())
	}
	want := "[   excluded suspect|excluded suspect    ]"
	if fmt.Sprint(flags) != want {
		t.Errorf("flags %q, want %q", fmt.Sprint(flags), want)
	}
	// The stored records are untouched: the outbox delivers them as written.
	p, _ := s.Pending("x", record.KindSecond, 100)
	for _, r := range p {
		if r.(*record.Second).Flags != 0 {
			t.Errorf("stored record %d rewritten: %v", r.Seq(), r.(*record.Second).Flags)
		}
	}
}

// Outbox: a record written late with an early start time is delivered; a clock step backwards
// loses and reorders nothing in sequence order; a restart resumes from the cursor.
func TestOutbox(t *testing.T) {
	clk := &clock{t: t0}
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, &Options{Now: clk.Now})
	start := t0
	for i := range 20 {
		s.Append(second(start.Add(time.Duration(i)*time.Second), 50))
	}
	// The wall clock steps back 30 s; records keep coming with earlier times.
	for i := range 10 {
		s.Append(second(start.Add(time.Duration(i-10)*time.Second), 60))
	}
	// A late event that started before everything else.
	s.Append(&record.Event{Start: t0.Add(-time.Hour), End: t0.Add(-time.Hour + time.Second), LAFmax: 99})
	if err := s.Flush(); err != nil {
		t.Fatal(err)
	}

	delivered := map[record.Kind][]uint64{}
	deliver := func(n int) {
		for _, k := range []record.Kind{record.KindSecond, record.KindEvent} {
			recs, err := s.Pending("mqtt", k, n)
			if err != nil {
				t.Fatal(err)
			}
			for _, r := range recs {
				delivered[k] = append(delivered[k], r.Seq())
			}
			if len(recs) > 0 {
				if err := s.Ack("mqtt", k, recs[len(recs)-1].Seq()); err != nil {
					t.Fatal(err)
				}
			}
		}
	}
	deliver(12)
	// Unacknowledged records are offered again.
	again, _ := s.Pending("mqtt", record.KindSecond, 3)
	if fmt.Sprint(seqs(again)) != "[13 14 15]" {
		t.Errorf("pending after ack of 12: %v", seqs(again))
	}
	if err := s.Close(); err != nil { // persists the cursor
		t.Fatal(err)
	}

	s = openTest(t, path, &Options{Now: clk.Now})
	defer s.Close()
	for range 5 {
		deliver(7)
	}
	var want []uint64
	for i := uint64(1); i <= 30; i++ {
		want = append(want, i)
	}
	if fmt.Sprint(delivered[record.KindSecond]) != fmt.Sprint(want) {
		t.Errorf("seconds delivered %v, want %v", delivered[record.KindSecond], want)
	}
	if fmt.Sprint(delivered[record.KindEvent]) != "[1]" {
		t.Errorf("late event delivered %v", delivered[record.KindEvent])
	}
	if err := s.Ack("mqtt", record.KindSecond, 31); err == nil {
		t.Error("ack beyond the last committed record accepted")
	}
	if err := s.Ack("mqtt", record.KindSecond, 3); err != nil {
		t.Errorf("ack of an old seq: %v", err)
	}
	if st, _ := s.Stats(); st.Streams["mqtt"][record.KindSecond].Acked != 30 {
		t.Errorf("cursor moved back: %+v", st.Streams["mqtt"][record.KindSecond])
	}
	// Several streams keep separate cursors.
	other, _ := s.Pending("upload", record.KindSecond, 100)
	if len(other) != 30 {
		t.Errorf("second stream sees %d records", len(other))
	}
}

// Records older than their retention are deleted, and those a stream had not acknowledged are
// counted as dropped for it.
func TestRetentionByAge(t *testing.T) {
	clk := &clock{t: t0}
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, &Options{Now: clk.Now, Retention: map[record.Kind]time.Duration{record.KindSecond: time.Hour}})
	defer s.Close()
	s.Pending("mqtt", record.KindSecond, 1) // register the stream
	for i := range 7200 {
		s.Append(second(t0.Add(time.Duration(i)*time.Second), 45))
		clk.Add(time.Second)
	}
	if err := s.Ack("mqtt", record.KindSecond, 0); err != nil {
		t.Fatal(err)
	}
	clk.Add(retentionEvery)
	s.Append(&record.Minute{Start: clk.Now()})
	if err := s.Flush(); err != nil {
		t.Fatal(err)
	}
	st, _ := s.Stats()
	ks := st.Kinds[record.KindSecond]
	cut := clk.Now().Add(-time.Hour)
	if ks.Oldest.Before(cut) {
		t.Errorf("oldest second %v is older than the retention cut %v", ks.Oldest, cut)
	}
	if ks.Count+ks.RemovedByAge != 7200 || ks.RemovedByAge == 0 {
		t.Errorf("count %d + removed %d != 7200", ks.Count, ks.RemovedByAge)
	}
	if d := st.Streams["mqtt"][record.KindSecond].Dropped; d != ks.RemovedByAge {
		t.Errorf("dropped for mqtt %d, want %d", d, ks.RemovedByAge)
	}
	if err := s.Check(); err != nil {
		t.Fatal(err)
	}
}

// Writing ten times the capacity keeps the file within 10 % of the cap, and the size cap removes
// the oldest records of the kinds with the shortest retention first.
func TestSizeCap(t *testing.T) {
	const capBytes = 2 << 20
	clk := &clock{t: t0}
	path := filepath.Join(t.TempDir(), "node.db")
	o := &Options{Now: clk.Now, MaxBytes: capBytes, CommitInterval: 30 * time.Second}
	s := openTest(t, path, o)
	s.Pending("mqtt", record.KindSecond, 1)
	written := 0
	var maxFile int64
	i := 0
	for written < 10*capBytes {
		start := t0.Add(time.Duration(i) * time.Second)
		r := second(start, 50)
		b, _ := r.AppendBinary(nil)
		written += len(b)
		s.Append(r)
		if i%60 == 59 {
			s.Append(&record.Minute{Start: start.Add(-59 * time.Second), LAeq: 50})
		}
		clk.Add(time.Second)
		i++
		if i%600 == 0 {
			fi, err := os.Stat(path)
			if err != nil {
				t.Fatal(err)
			}
			maxFile = max(maxFile, fi.Size())
		}
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	fi, _ := os.Stat(path)
	maxFile = max(maxFile, fi.Size())
	t.Logf("wrote %d bytes of record values in %d seconds; largest file %d bytes, cap %d", written, i, maxFile, capBytes)
	if maxFile > capBytes*11/10 {
		t.Errorf("file grew to %d bytes, more than 10 %% over the cap of %d", maxFile, capBytes)
	}
	s = openTest(t, path, o)
	defer s.Close()
	if err := s.Check(); err != nil {
		t.Fatal(err)
	}
	st, _ := s.Stats()
	sec, min := st.Kinds[record.KindSecond], st.Kinds[record.KindMinute]
	if sec.RemovedBySize == 0 || min.RemovedBySize != 0 || min.Count != uint64(i/60) {
		t.Errorf("seconds removed %d, minutes removed %d, minutes kept %d of %d: the shortest retention must go first",
			sec.RemovedBySize, min.RemovedBySize, min.Count, i/60)
	}
	// Oldest first: what is left is the newest contiguous run of seconds.
	if want := t0.Add(time.Duration(i-int(sec.Count)) * time.Second); !sec.Oldest.Equal(want) {
		t.Errorf("oldest kept second %v, want %v (a contiguous newest run)", sec.Oldest, want)
	}
	if d := st.Streams["mqtt"][record.KindSecond].Dropped; d != sec.RemovedBySize {
		t.Errorf("dropped for mqtt %d, want %d", d, sec.RemovedBySize)
	}
}

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

func TestLast(t *testing.T) {
	path := filepath.Join(t.TempDir(), "node.db")
	s := openTest(t, path, nil)
	defer s.Close()
	if r, err := s.Last(record.KindSession); r != nil || err != nil {
		t.Fatalf("empty store: %v %v", r, err)
	}
	s.Append(&record.Session{At: t0, TimeZone: "Europe/Vienna"})
	s.Append(&record.Session{At: t0.Add(-time.Hour), TimeZone: "Asia/Kolkata"})
	r, err := s.Last(record.KindSession)
	if err != nil || r.(*record.Session).TimeZone != "Asia/Kolkata" {
		t.Errorf("last session %+v %v", r, err)
	}
}

// Recent includes held records; Ack accepts them. After a crash (simulated by closing the bbolt
// file under the store without a commit) the held records are gone and their numbers are not
// reused.
func TestRecentAndNoReuseAfterCrash(t *testing.T) {
	clk := &clock{t: t0}
	path := filepath.Join(t.TempDir(), "node.db")
	o := &Options{Now: clk.Now, CommitInterval: time.Minute}
	s := openTest(t, path, o)
	for i := range 10 {
		s.Append(second(t0.Add(time.Duration(i)*time.Second), 50))
		clk.Add(time.Second)
	}
	committed, _ := s.After(record.KindSecond, 0, 100)
	recent, _ := s.Recent(record.KindSecond, 0, 100)
	if len(committed) != 1 || len(recent) != 10 || recent[9].Seq() != 10 {
		t.Fatalf("committed %d, recent %d records", len(committed), len(recent))
	}
	if r, _ := s.Recent(record.KindSecond, 4, 3); fmt.Sprint(seqs(r)) != "[5 6 7]" {
		t.Errorf("Recent after 4, limit 3: %v", seqs(r))
	}
	if err := s.Ack("live", record.KindSecond, 10); err != nil {
		t.Fatalf("ack of a held record: %v", err)
	}
	// Crash: the held records 2 to 10 never reach the file.
	s.db.Close()
	s = openTest(t, path, o)
	if got, _ := s.After(record.KindSecond, 0, 100); len(got) != 1 {
		t.Fatalf("%d records after the crash, want the 1 committed", len(got))
	}
	seq, err := s.Append(second(t0.Add(time.Minute), 50))
	if err != nil {
		t.Fatal(err)
	}
	if seq <= 10 {
		t.Errorf("after the crash a record got number %d, reusing a number a held record had", seq)
	}
	// A clean close reserves nothing: numbering continues without a gap.
	s.Close()
	s = openTest(t, path, o)
	defer s.Close()
	if next, _ := s.Append(second(t0.Add(2*time.Minute), 50)); next != seq+1 {
		t.Errorf("after a clean restart: number %d, want %d", next, seq+1)
	}
	if err := s.Check(); err != nil {
		t.Fatal(err)
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

// bbolt maps the whole file: on 32-bit builds the cap must leave room in a 4 GiB address space.
// The 512 MiB and 1 GiB defaults are the project's decision (common practice for bbolt on
// 32-bit boards), not a published value.
func TestDefaultMaxBytes(t *testing.T) {
	want := int64(1 << 30)
	if strconv.IntSize == 32 {
		want = 512 << 20
	}
	if DefaultMaxBytes != want {
		t.Errorf("DefaultMaxBytes = %d on a %d-bit build, want %d", DefaultMaxBytes, strconv.IntSize, want)
	}
}
