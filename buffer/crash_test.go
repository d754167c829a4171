package buffer

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/buffer/record/recordtest"
)

// The crash test re-executes the test binary as a writer child. The child appends records as
// fast as it can, flushes every few records, and after each flush returns writes the last
// committed sequence number to a pipe (file descriptor 3). The parent kills it with SIGKILL at a
// random moment, then checks that the file opens without recovery, passes bbolt's consistency
// check and ours, and holds every record reported committed, in order, with the content the
// child derived from its sequence number.
//
// LEQNODE_CRASH_KILLS sets the number of kills (default 10; the full run is 50:
// `LEQNODE_CRASH_KILLS=50 go test -run TestCrashKill ./buffer/`).
//
// SIGKILL shows that the process may die at any instant; it does not show what a power cut does
// to storage that ignores flushes (see the package documentation).

const crashChildEnv = "LEQNODE_CRASH_CHILD"

// crashSecond is the record with sequence number seq: its content is a function of seq, so the
// parent can verify every record without knowing what the child wrote.
func crashSecond(seq uint64) *record.Second {
	r := second(t0.Add(time.Duration(seq)*time.Second), 30+float64(seq%7000)/100)
	r.DroppedSamples = seq
	return r
}

func TestCrashChild(t *testing.T) {
	path := os.Getenv(crashChildEnv)
	if path == "" {
		t.Skip("runs only as the crash test's child process")
	}
	report := os.NewFile(3, "report")
	s, err := Open(path, &Options{
		Retention: map[record.Kind]time.Duration{record.KindSecond: -1, record.KindMinute: -1},
		Logger:    quietLogger(),
	})
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(3)
	}
	// FirstSeq is the restart marker the node puts in its session records: where this opening's
	// numbers start, above every number an earlier process may have handed out.
	if s.FirstSeq(record.KindSecond) != s.LastSeq(record.KindSecond)+1 {
		fmt.Fprintln(os.Stderr, "FirstSeq", s.FirstSeq(record.KindSecond), "is not the next number", s.LastSeq(record.KindSecond)+1)
		os.Exit(7)
	}
	fmt.Fprintf(report, "start %d\n", s.FirstSeq(record.KindSecond))
	for n := 0; ; n++ {
		seq := s.LastSeq(record.KindSecond) + 1
		r := crashSecond(seq)
		got, err := s.Append(r)
		if err != nil || got != seq {
			fmt.Fprintln(os.Stderr, "append:", got, err)
			os.Exit(4)
		}
		if seq%60 == 0 {
			if _, err := s.Append(&record.Minute{Start: r.Start.Add(-59 * time.Second), LAeq: r.LAeq}); err != nil {
				os.Exit(5)
			}
		}
		if n%8 == 7 {
			if err := s.Flush(); err != nil {
				fmt.Fprintln(os.Stderr, "flush:", err)
				os.Exit(6)
			}
			fmt.Fprintf(report, "%d\n", seq)
			if seq > 100 && n%32 == 31 {
				_ = s.Ack("mqtt", record.KindSecond, seq-100)
			}
		}
	}
}

func TestCrashKill(t *testing.T) {
	if testing.Short() {
		t.Skip("spawns processes")
	}
	kills := 10
	if v := os.Getenv("LEQNODE_CRASH_KILLS"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 {
			t.Fatalf("LEQNODE_CRASH_KILLS=%q: give a positive count", v)
		}
		kills = n
	}
	path := filepath.Join(t.TempDir(), "crash.db")
	rng := rand.New(rand.NewPCG(uint64(time.Now().UnixNano()), 7))
	var reported uint64
	reportedSet := map[uint64]bool{}
	for i := range kills {
		pr, pw, err := os.Pipe()
		if err != nil {
			t.Fatal(err)
		}
		cmd := exec.Command(os.Args[0], "-test.run=^TestCrashChild$", "-test.count=1")
		cmd.Env = append(os.Environ(), crashChildEnv+"="+path)
		cmd.ExtraFiles = []*os.File{pw}
		cmd.Stderr = os.Stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		pw.Close()
		lines := make(chan uint64, 1024)
		starts := make(chan uint64, 1)
		go func() {
			sc := bufio.NewScanner(pr)
			for sc.Scan() {
				if v, ok := strings.CutPrefix(sc.Text(), "start "); ok {
					n, _ := strconv.ParseUint(v, 10, 64)
					starts <- n
				} else if v, err := strconv.ParseUint(sc.Text(), 10, 64); err == nil {
					lines <- v
				}
			}
			close(lines)
		}()
		// Let the child write for a random while (after its first report), then kill it.
		first, ok := <-lines
		if !ok {
			cmd.Wait()
			t.Fatalf("kill %d: child reported nothing (exit %v)", i, cmd.ProcessState)
		}
		// Numbers are never reused: the child starts above every number an earlier child reported.
		start := <-starts
		if start <= reported {
			t.Fatalf("kill %d: the child started numbering at %d, at or below %d reported by an earlier one", i, start, reported)
		}
		reported = max(reported, first)
		reportedSet[first] = true
		time.Sleep(time.Duration(rng.IntN(150)) * time.Millisecond)
		if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		for v := range lines {
			reported = max(reported, v)
			reportedSet[v] = true
		}
		// Every record of this child up to its last report was committed.
		for seq := start; seq <= reported; seq++ {
			reportedSet[seq] = true
		}
		cmd.Wait()
		pr.Close()
		if ws, ok := cmd.ProcessState.Sys().(syscall.WaitStatus); !ok || !ws.Signaled() {
			t.Fatalf("kill %d: child ended by itself: %v", i, cmd.ProcessState)
		}
		verifyCrashStore(t, path, reportedSet, i)
	}
	t.Logf("%d kills; %d second records reported committed (numbers up to %d), all present", kills, len(reportedSet), reported)
}

func verifyCrashStore(t *testing.T, path string, reported map[uint64]bool, kill int) {
	t.Helper()
	// Read-only: a damaged file is reported, not moved aside. (The next child opens it for
	// writing and exits with an error if that fails.)
	s, err := OpenReadOnly(path, time.Second)
	if err != nil {
		t.Fatalf("kill %d: reopen: %v", kill, err)
	}
	defer s.Close()
	if err := s.Check(); err != nil { // bbolt's tx.Check and the store's own invariants
		t.Fatalf("kill %d: %v", kill, err)
	}
	present := map[uint64]bool{}
	var last uint64
	for {
		recs, err := s.After(record.KindSecond, last, 4096)
		if err != nil {
			t.Fatalf("kill %d: %v", kill, err)
		}
		if len(recs) == 0 {
			break
		}
		for _, r := range recs {
			if r.Seq() <= last {
				t.Fatalf("kill %d: record %d after %d: out of order", kill, r.Seq(), last)
			}
			want := crashSecond(r.Seq())
			want.SetSeq(r.Seq())
			if !recordtest.Same(r, want) {
				t.Fatalf("kill %d: record %d has the wrong content: %+v", kill, r.Seq(), r)
			}
			last = r.Seq()
			present[last] = true
		}
	}
	for seq := range reported {
		if !present[seq] {
			t.Fatalf("kill %d: second record %d was reported committed and is missing", kill, seq)
		}
	}
}
