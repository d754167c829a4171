package buffer_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

// A node appends one second record per second; the store commits them in groups. The demo
// scenario: node "mill-lane-3" in the invented town of Wexcombe.
func ExampleStore_Append() {
	dir, _ := os.MkdirTemp("", "leqnode-example")
	defer os.RemoveAll(dir)
	start := time.Date(2026, 3, 14, 7, 0, 0, 0, time.UTC)
	s, err := buffer.Open(filepath.Join(dir, "mill-lane-3.db"), &buffer.Options{
		Now: func() time.Time { return start.Add(time.Hour) },
	})
	if err != nil {
		log.Fatal(err)
	}
	defer s.Close()
	s.Append(&record.Session{At: start, SoftwareVersion: "0.1.0", SensitivityDBFS: -26, SampleRate: 48000, TimeZone: "Europe/London"})
	for i := range 3 {
		seq, err := s.Append(&record.Second{
			Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second,
			LAeq: 52.3 + float64(i), LAFmax: 55.1 + float64(i),
		})
		if err != nil {
			log.Fatal(err)
		}
		fmt.Println("second record", seq)
	}
	// Output:
	// second record 1
	// second record 2
	// second record 3
}

// A publisher reads what its stream has not acknowledged, sends it, and acknowledges it. After a
// restart it resumes from the persisted cursor.
func ExampleStore_Pending() {
	dir, _ := os.MkdirTemp("", "leqnode-example")
	defer os.RemoveAll(dir)
	start := time.Date(2026, 3, 14, 7, 0, 0, 0, time.UTC)
	s, _ := buffer.Open(filepath.Join(dir, "mill-lane-3.db"), &buffer.Options{Now: func() time.Time { return start }})
	defer s.Close()
	for i := range 5 {
		s.Append(&record.Second{Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 50})
	}
	s.Flush()
	recs, _ := s.Pending("mqtt", record.KindSecond, 3)
	for _, r := range recs {
		fmt.Println("send", r.Kind(), r.Seq(), r.Time().Format(time.TimeOnly))
	}
	s.Ack("mqtt", record.KindSecond, recs[len(recs)-1].Seq())
	recs, _ = s.Pending("mqtt", record.KindSecond, 3)
	fmt.Println("still pending:", len(recs))
	// Output:
	// send second 1 07:00:00
	// send second 2 07:00:01
	// send second 3 07:00:02
	// still pending: 2
}

// Range reads by time, in time order, with annotations applied.
func ExampleStore_Range() {
	dir, _ := os.MkdirTemp("", "leqnode-example")
	defer os.RemoveAll(dir)
	start := time.Date(2026, 3, 14, 7, 0, 0, 0, time.UTC)
	s, _ := buffer.Open(filepath.Join(dir, "mill-lane-3.db"), &buffer.Options{Now: func() time.Time { return start }})
	defer s.Close()
	for i := range 4 {
		s.Append(&record.Second{Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 50 + float64(i)})
	}
	s.Append(&record.Annotation{From: start.Add(2 * time.Second), To: start.Add(time.Hour), Flags: record.Excluded,
		Reason: "bin lorry parked beside the mast"})
	err := s.Range(record.KindSecond, start.Add(time.Second), start.Add(time.Minute), func(r record.Record) error {
		sec := r.(*record.Second)
		fmt.Printf("%s LAeq %.1f dB flags=%q\n", sec.Start.Format(time.TimeOnly), sec.LAeq, sec.Flags)
		return nil
	})
	if err != nil {
		log.Fatal(err)
	}
	// Output:
	// 07:00:01 LAeq 51.0 dB flags=""
	// 07:00:02 LAeq 52.0 dB flags="excluded"
	// 07:00:03 LAeq 53.0 dB flags="excluded"
}

// A reading command opens the store read-only; while the daemon holds it, the error says so.
func ExampleOpenReadOnly() {
	dir, _ := os.MkdirTemp("", "leqnode-example")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "mill-lane-3.db")
	w, _ := buffer.Open(path, nil)
	_, err := buffer.OpenReadOnly(path, 100*time.Millisecond)
	fmt.Println(err != nil)
	w.Close()
	r, err := buffer.OpenReadOnly(path, 0)
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	st, _ := r.Stats()
	fmt.Println(len(st.ID), st.Kinds[record.KindSecond].Count)
	// Output:
	// true
	// 16 0
}

func ExampleFlags_String() {
	f := record.Settling | record.ClockUnsynced
	fmt.Println(f)
	// Output: settling|clock-unsynced
}

// A live publisher sends held records at once with Recent instead of waiting for the commit;
// After returns only what is durable.
func ExampleStore_Recent() {
	dir, _ := os.MkdirTemp("", "leqnode-example")
	defer os.RemoveAll(dir)
	start := time.Date(2026, 3, 14, 7, 0, 0, 0, time.UTC)
	s, _ := buffer.Open(filepath.Join(dir, "mill-lane-3.db"), &buffer.Options{Now: func() time.Time { return start }})
	defer s.Close()
	for i := range 3 {
		s.Append(&record.Second{Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 48})
	}
	durable, _ := s.After(record.KindSecond, 0, 10)
	live, _ := s.Recent(record.KindSecond, 0, 10)
	fmt.Println(len(durable), "committed,", len(live), "including held")
	// Output: 1 committed, 3 including held
}

// Check verifies the whole file; Stats summarises it.
func ExampleStore_Check() {
	dir, _ := os.MkdirTemp("", "leqnode-example")
	defer os.RemoveAll(dir)
	start := time.Date(2026, 3, 14, 7, 0, 0, 0, time.UTC)
	s, _ := buffer.Open(filepath.Join(dir, "mill-lane-3.db"), &buffer.Options{Now: func() time.Time { return start }})
	defer s.Close()
	s.Append(&record.Gap{From: start, To: start.Add(90 * time.Second), Reason: "audio device lost"})
	s.Flush()
	fmt.Println(s.Check())
	st, _ := s.Stats()
	fmt.Println(st.Kinds[record.KindGap].Count, st.Kinds[record.KindGap].Oldest.Format(time.RFC3339))
	// Output:
	// <nil>
	// 1 2026-03-14T07:00:00Z
}
