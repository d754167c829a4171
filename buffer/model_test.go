package buffer

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// Range must return exactly the stored records whose time lies in [from, to), in (time, seq)
// order, whatever the history: clock steps back and forward, late events, age retention and the
// size cap trimming runs of the index. The truth is read record by record through After and
// Recent (sequence order, no index); the check is a brute-force sort.
func TestRangeMatchesModel(t *testing.T) {
	for _, seed := range []uint64{1, 2} {
		t.Run(fmt.Sprint(seed), func(t *testing.T) {
			rng := rand.New(rand.NewPCG(seed, 99))
			clk := &clock{t: t0}
			path := filepath.Join(t.TempDir(), "node.db")
			s := openTest(t, path, &Options{Now: clk.Now, CommitInterval: 10 * time.Second, MaxBytes: 1 << 20,
				Retention: map[record.Kind]time.Duration{record.KindSecond: 3 * time.Hour, record.KindEvent: 2 * time.Hour}})
			defer s.Close()
			wall := t0 // the node's idea of the time, which steps
			for i := range 20000 {
				clk.Add(time.Second)
				wall = wall.Add(time.Second)
				switch r := rng.Float64(); {
				case r < 0.002:
					wall = wall.Add(-time.Duration(rng.IntN(900)) * time.Second)
				case r < 0.004:
					wall = wall.Add(time.Duration(rng.IntN(900)) * time.Second)
				}
				if _, err := s.Append(second(wall, 40+float64(i%300)/10)); err != nil {
					t.Fatal(err)
				}
				if rng.Float64() < 0.01 {
					start := wall.Add(-time.Duration(rng.IntN(300)) * time.Second)
					if _, err := s.Append(&record.Event{Start: start, End: wall, LAFmax: 80}); err != nil {
						t.Fatal(err)
					}
				}
			}
			if err := s.Check(); err != nil {
				t.Fatal(err)
			}
			st, _ := s.Stats()
			t.Logf("seconds stored %d, removed by age %d, by size %d", st.Kinds[record.KindSecond].Count,
				st.Kinds[record.KindSecond].RemovedByAge, st.Kinds[record.KindSecond].RemovedBySize)
			for _, k := range []record.Kind{record.KindSecond, record.KindEvent} {
				var truth []keyed
				var last uint64
				for {
					recs, err := s.Recent(k, last, 5000)
					if err != nil {
						t.Fatal(err)
					}
					if len(recs) == 0 {
						break
					}
					for _, r := range recs {
						truth = append(truth, keyed{timeKey(r.Time()), r.Seq(), r})
						last = r.Seq()
					}
				}
				slices.SortFunc(truth, func(a, b keyed) int {
					if a.less(b) {
						return -1
					}
					if b.less(a) {
						return 1
					}
					return 0
				})
				lo, hi := truth[0].rec.Time(), truth[len(truth)-1].rec.Time()
				for range 20 {
					from := lo.Add(time.Duration(rng.Int64N(int64(hi.Sub(lo)))))
					to := from.Add(time.Duration(rng.Int64N(int64(2 * time.Hour))))
					var want []uint64
					for _, kr := range truth {
						if tt := kr.rec.Time(); !tt.Before(from) && tt.Before(to) {
							want = append(want, kr.seq)
						}
					}
					got := seqs(collect(t, s, k, from, to))
					if !slices.Equal(got, want) {
						t.Fatalf("%s range [%v, %v): got %d records, want %d\ngot  %v\nwant %v", k, from, to, len(got), len(want), head(got), head(want))
					}
				}
				all := seqs(collect(t, s, k, lo, hi.Add(time.Microsecond)))
				if len(all) != len(truth) {
					t.Fatalf("%s: the full range holds %d records, the store %d", k, len(all), len(truth))
				}
			}
		})
	}
}

func head(s []uint64) []uint64 { return s[:min(len(s), 20)] }
