package buffer

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/buffer/record/recordtest"
)

// Benchmarks. `make test` runs each once on small data; the sizes grow with environment
// variables for the figures in the README:
//
//	LEQNODE_BENCH_RECORDS  stored records for BenchmarkAppend's large case (default 100000)
//	LEQNODE_BENCH_DAYS     days of second records for BenchmarkRange and BenchmarkWriteVolume
//	                       (default 0.25)
//
// Stores live under /var/tmp (a disk file system here, unlike a tmpfs /tmp) so that the
// write-volume figures include real fsyncs and block-layer writes.

func envFloat(b *testing.B, name string, def float64) float64 {
	v := os.Getenv(name)
	if v == "" {
		return def
	}
	f, err := strconv.ParseFloat(v, 64)
	if err != nil || f <= 0 {
		b.Fatalf("%s=%q: give a positive number", name, v)
	}
	return f
}

func benchDir(b *testing.B) string {
	dir, err := os.MkdirTemp("/var/tmp", "leqnode-bench-")
	if err != nil {
		return b.TempDir()
	}
	b.Cleanup(func() { os.RemoveAll(dir) })
	return dir
}

// minuteRecord is a realistic minute record: spectrum and a 25 dB wide Fast level histogram.
func minuteRecord(start time.Time, laeq float64) *record.Minute {
	m := &record.Minute{Start: start, LAeq: laeq, LCeq: laeq + 6, LZeq: laeq + 9, LAFmax: laeq + 12, LAFmin: laeq - 8,
		LAF1: laeq + 9, LAF5: laeq + 6, LAF10: laeq + 4, LAF50: laeq - 1, LAF90: laeq - 5, LAF95: laeq - 6,
		LAF99: laeq - 7, LAE: laeq + 17.8, LCpeak: laeq + 30, LAImax: laeq + 14,
		Spectrum: recordtest.ThirdOctave(33, laeq-30), FirstBand: -19, ValidSeconds: 60}
	m.Histogram.First = int32(10 * (laeq - 9))
	m.Histogram.Counts = make([]uint32, 250)
	for i := range m.Histogram.Counts {
		x := float64(i-120) / 40
		m.Histogram.Counts[i] = uint32(6000 / 100 * math.Exp(-x*x))
	}
	return m
}

func healthRecord(at time.Time) *record.Health {
	return &record.Health{At: at, CPU: 7.5, MemoryMB: 28, DiskFreeMB: 12000, StoreBytes: 1 << 28, ClockSynced: true,
		ClockErrorMs: 0.4, TemperatureC: 48, DCOffset: 0.001}
}

// fill writes the given duration of node output (a second record per second, a minute and a
// health record per minute) with fsync off and large commits.
func fill(b *testing.B, s *Store, start time.Time, d time.Duration, spectra bool) {
	b.Helper()
	n := int(d / time.Second)
	for i := range n {
		t := start.Add(time.Duration(i) * time.Second)
		r := second(t, 45+float64(i%2000)/100)
		if !spectra {
			r.Spectrum = nil
		}
		if _, err := s.Append(r); err != nil {
			b.Fatal(err)
		}
		if i%60 == 59 {
			m := minuteRecord(t.Add(-59*time.Second), 50)
			if !spectra {
				m.Spectrum = nil
			}
			s.Append(m)
			s.Append(healthRecord(t))
		}
	}
	if err := s.Flush(); err != nil {
		b.Fatal(err)
	}
}

func fillOptions(clk *clock) *Options {
	return &Options{Now: clk.Now, MaxHeld: 50000, CommitInterval: time.Hour, NoSync: true, Logger: quietLogger(),
		Retention: map[record.Kind]time.Duration{record.KindSecond: -1, record.KindHealth: -1}}
}

// BenchmarkAppend measures the cost of one Append (a second record with spectrum, a commit every
// 30 records) on a store holding 1 thousand records and on one holding LEQNODE_BENCH_RECORDS.
// The two stores are written alternately, one commit's worth at a time, so that both figures
// see the same load on a shared machine; the ratio large/small shows whether the cost grows with
// the stored count. fsync is off so that the figure is the store's own work (the fsync cost per
// commit does not depend on the stored count), and the size cap is lifted so that no deletion
// mixes in. Reported per append: ns (small and large store), their ratio, and bytes written.
func BenchmarkAppend(b *testing.B) {
	large := int(envFloat(b, "LEQNODE_BENCH_RECORDS", 100000))
	type fixture struct {
		clk   *clock
		s     *Store
		next  time.Time
		spent time.Duration
		w0    int64
	}
	dir := benchDir(b)
	var fx []*fixture
	for _, stored := range []int{1000, large} {
		clk := &clock{t: t0}
		path := filepath.Join(dir, fmt.Sprintf("append-%d.db", stored))
		o := fillOptions(clk)
		o.MaxBytes = 1 << 40
		s := openTest(b, path, o)
		fill(b, s, t0, time.Duration(stored)*time.Second*60/62, true) // 62 records per minute
		s.Close()
		o.CommitInterval, o.MaxHeld = 30*time.Second, 0
		s = openTest(b, path, o)
		defer s.Close()
		st, _ := s.Stats()
		fx = append(fx, &fixture{clk: clk, s: s, next: t0.Add(time.Duration(stored) * time.Second), w0: st.WrittenBytes})
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; {
		n := min(30, b.N-i)
		for _, f := range fx {
			t1 := time.Now()
			for range n {
				f.clk.Add(time.Second)
				f.next = f.next.Add(time.Second)
				if _, err := f.s.Append(second(f.next, 50)); err != nil {
					b.Fatal(err)
				}
			}
			f.spent += time.Since(t1)
		}
		i += n
	}
	b.StopTimer()
	small, big := float64(fx[0].spent.Nanoseconds())/float64(b.N), float64(fx[1].spent.Nanoseconds())/float64(b.N)
	b.ReportMetric(small, "ns/append-1k")
	b.ReportMetric(big, fmt.Sprintf("ns/append-%d", large))
	b.ReportMetric(big/small, "ratio")
	for j, f := range fx {
		st, _ := f.s.Stats()
		b.ReportMetric(float64(st.WrittenBytes-f.w0)/float64(b.N), []string{"B-written/append-1k", fmt.Sprintf("B-written/append-%d", large)}[j])
	}
}

// BenchmarkRange reads every second record of the stored days through Range (time index, decode,
// annotation check). Reported: ns per record and records per second.
func BenchmarkRange(b *testing.B) {
	days := envFloat(b, "LEQNODE_BENCH_DAYS", 0.25)
	clk := &clock{t: t0}
	path := filepath.Join(benchDir(b), "range.db")
	s := openTest(b, path, fillOptions(clk))
	fill(b, s, t0, time.Duration(days*24*float64(time.Hour)), true)
	s.Close()
	r, err := OpenReadOnly(path, 0)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	b.ResetTimer()
	var n int
	for range b.N {
		n = 0
		err := r.Range(record.KindSecond, t0, t0.Add(time.Duration(days*24*float64(time.Hour))), func(record.Record) error { n++; return nil })
		if err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(n), "ns/record")
	b.ReportMetric(float64(n), "records")
}

// BenchmarkFileBytesPerDay writes an hour of node output (3600 second records, 60 minute and 60
// health records) at default settings and reports the space it takes in the file (pages in use),
// scaled to a day.
func BenchmarkFileBytesPerDay(b *testing.B) {
	for _, spectra := range []bool{true, false} {
		b.Run(fmt.Sprintf("spectra=%v", spectra), func(b *testing.B) {
			var used int64
			for range b.N {
				clk := &clock{t: t0}
				path := filepath.Join(benchDir(b), "size.db")
				o := fillOptions(clk)
				o.CommitInterval, o.MaxHeld = DefaultCommitInterval, 0
				s := openTest(b, path, o)
				st0, _ := s.Stats()
				for i := range 3600 { // commits at the default interval, as a node does
					clk.Add(time.Second)
					fill1(b, s, i, spectra)
				}
				s.Flush()
				st, _ := s.Stats()
				used = st.UsedBytes - st0.UsedBytes
				s.Close()
			}
			// The file itself grows in steps (powers of two up to 16 MiB, then 16 MiB at a time);
			// BenchmarkOpen reports the file size of LEQNODE_BENCH_DAYS days.
			b.ReportMetric(float64(used)*24/1e6, "MB/day")
		})
	}
}

// fill1 appends the records of simulated second i.
func fill1(b *testing.B, s *Store, i int, spectra bool) {
	t := t0.Add(time.Duration(i) * time.Second)
	r := second(t, 45+float64(i%2000)/100)
	if !spectra {
		r.Spectrum = nil
	}
	if _, err := s.Append(r); err != nil {
		b.Fatal(err)
	}
	if i%60 == 59 {
		m := minuteRecord(t.Add(-59*time.Second), 50)
		if !spectra {
			m.Spectrum = nil
		}
		s.Append(m)
		s.Append(healthRecord(t))
	}
}

// diskWriteBytes returns this process's write_bytes from /proc/self/io: bytes sent to the block
// layer (not counting tmpfs).
func diskWriteBytes() (int64, bool) {
	f, err := os.Open("/proc/self/io")
	if err != nil {
		return 0, false
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if v, ok := strings.CutPrefix(sc.Text(), "write_bytes: "); ok {
			n, err := strconv.ParseInt(v, 10, 64)
			return n, err == nil
		}
	}
	return 0, false
}

// BenchmarkWriteVolume simulates one hour of a node per iteration, with fsync on, on a store
// already holding LEQNODE_BENCH_DAYS of data: a second record with spectrum every second, a
// minute and a health record every minute, and a publisher acknowledging every 10 s. It reports
// the bytes written per hour as bbolt counts them (dirty pages plus a meta page per commit) and
// as the block layer counts them, for several commit intervals and both freelist choices.
func BenchmarkWriteVolume(b *testing.B) {
	days := envFloat(b, "LEQNODE_BENCH_DAYS", 0.25)
	clk := &clock{t: t0}
	path := filepath.Join(benchDir(b), "volume.db")
	s := openTest(b, path, fillOptions(clk))
	fill(b, s, t0, time.Duration(days*24*float64(time.Hour)), true)
	s.Close()
	next := int(days * 24 * 3600)
	for _, interval := range []time.Duration{10 * time.Second, 30 * time.Second, 60 * time.Second} {
		for _, syncFreelist := range []bool{false, true} {
			b.Run(fmt.Sprintf("commit=%v/freelist-sync=%v", interval, syncFreelist), func(b *testing.B) {
				s, err := Open(path, &Options{Now: clk.Now, CommitInterval: interval, NoFreelistSync: !syncFreelist,
					Logger: quietLogger(), Retention: map[record.Kind]time.Duration{record.KindSecond: -1, record.KindHealth: -1}})
				if err != nil {
					b.Fatal(err)
				}
				defer s.Close()
				s.Pending("mqtt", record.KindSecond, 1)
				s.Flush()
				st0, _ := s.Stats()
				disk0, diskOK := diskWriteBytes()
				b.ResetTimer()
				for range b.N {
					for j := range 3600 {
						clk.Add(time.Second)
						fill1(b, s, next, true)
						next++
						if j%10 == 9 {
							if c := s.LastSeq(record.KindSecond); c > 0 {
								_ = s.Ack("mqtt", record.KindSecond, s.committedSeq(record.KindSecond))
							}
						}
					}
				}
				b.StopTimer()
				st, _ := s.Stats()
				disk1, _ := diskWriteBytes()
				hours := float64(b.N)
				b.ReportMetric(float64(st.WrittenBytes-st0.WrittenBytes)/hours/1e6, "MB/h")
				if diskOK {
					b.ReportMetric(float64(disk1-disk0)/hours/1e6, "disk-MB/h")
				}
				b.ReportMetric(float64(st.Commits-st0.Commits)/hours, "commits/h")
			})
		}
	}
}

// committedSeq returns the last committed sequence number of kind k (test helper).
func (s *Store) committedSeq(k record.Kind) uint64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.committed[k]
}

// BenchmarkOpen measures Open (for writing) of a store holding LEQNODE_BENCH_DAYS of data, with
// and without a synced freelist: without it, bbolt rebuilds the freelist by scanning every page
// at open, which is the price of the smaller commits measured by BenchmarkWriteVolume.
func BenchmarkOpen(b *testing.B) {
	days := envFloat(b, "LEQNODE_BENCH_DAYS", 0.25)
	clk := &clock{t: t0}
	dir := benchDir(b)
	for _, syncFreelist := range []bool{false, true} {
		path := filepath.Join(dir, fmt.Sprintf("open-%v.db", syncFreelist))
		o := fillOptions(clk)
		o.NoFreelistSync = !syncFreelist
		s := openTest(b, path, o)
		fill(b, s, t0, time.Duration(days*24*float64(time.Hour)), true)
		s.Close()
		b.Run(fmt.Sprintf("freelist-sync=%v", syncFreelist), func(b *testing.B) {
			for range b.N {
				s, err := Open(path, &Options{NoFreelistSync: !syncFreelist, Now: clk.Now, Logger: quietLogger(),
					Retention: map[record.Kind]time.Duration{record.KindSecond: -1, record.KindHealth: -1}})
				if err != nil {
					b.Fatal(err)
				}
				b.StopTimer()
				s.Close()
				b.StartTimer()
			}
			if fi, err := os.Stat(path); err == nil {
				b.ReportMetric(float64(fi.Size())/1e6, "file-MB")
			}
		})
	}
}
