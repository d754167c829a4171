package buffer

import (
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// The node appends from its processing goroutine while the publisher, the status page and the
// commands read: run them together (meaningful under `go test -race`) and check that the
// publisher saw every record once, in order.
func TestConcurrentUse(t *testing.T) {
	clk := &clock{t: t0}
	s := openTest(t, filepath.Join(t.TempDir(), "node.db"), &Options{Now: clk.Now, CommitInterval: 5 * time.Second})
	defer s.Close()
	const n = 3000
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(3)
	go func() { // the node
		defer wg.Done()
		defer close(done)
		for i := range n {
			clk.Add(time.Second)
			if _, err := s.Append(second(t0.Add(time.Duration(i)*time.Second), 50)); err != nil {
				t.Error(err)
				return
			}
		}
		if err := s.Flush(); err != nil {
			t.Error(err)
		}
	}()
	var got []uint64
	go func() { // the publisher
		defer wg.Done()
		for {
			recs, err := s.Pending("mqtt", record.KindSecond, 100)
			if err != nil {
				t.Error(err)
				return
			}
			for _, r := range recs {
				got = append(got, r.Seq())
			}
			if len(recs) > 0 {
				if err := s.Ack("mqtt", record.KindSecond, recs[len(recs)-1].Seq()); err != nil {
					t.Error(err)
					return
				}
				continue
			}
			select {
			case <-done:
				if len(got) == n {
					return
				}
			default:
				time.Sleep(time.Millisecond)
			}
		}
	}()
	go func() { // readers
		defer wg.Done()
		for {
			select {
			case <-done:
				return
			default:
			}
			if _, err := s.Stats(); err != nil {
				t.Error(err)
			}
			if _, err := s.Recent(record.KindSecond, s.LastSeq(record.KindSecond)-10, 20); err != nil {
				t.Error(err)
			}
			prev := time.Time{}
			err := s.Range(record.KindSecond, t0, t0.Add(time.Hour), func(r record.Record) error {
				if r.Time().Before(prev) {
					t.Errorf("Range out of order")
				}
				prev = r.Time()
				return nil
			})
			if err != nil {
				t.Error(err)
			}
		}
	}()
	wg.Wait()
	for i, seq := range got {
		if seq != uint64(i+1) {
			t.Fatalf("publisher saw %d at position %d", seq, i)
		}
	}
}
