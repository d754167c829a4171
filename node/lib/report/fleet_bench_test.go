package report

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// minuteStore fills a store with days of minute records (as a node keeps them after its second
// records expire), a session record naming the node and its position, and events that every
// node of the array hears a second apart from the next.
func minuteStore(tb testing.TB, path string, node int, start time.Time, days int) {
	tb.Helper()
	end := start.Add(time.Duration(days) * 24 * time.Hour)
	st, add := fillStore(tb, path, end)
	id := fmt.Sprintf("wendle-cross-%02d", node+1)
	add(&record.Session{At: start, SoftwareVersion: "bench", SensitivityDBFS: -26, SampleRate: 48000, Device: "bench", TimeZone: "UTC",
		NodeID: id, Site: "Harrowby Lane " + strconv.Itoa(node+1), Latitude: 47 + 0.001*float64(node%7), Longitude: -30 + 0.0015*float64(node/7)})
	offset := 0.5 * float64(node%9)
	spec := make([]float64, 31)
	for m := start; m.Before(end); m = m.Add(time.Minute) {
		l := hourLevel(m.Hour()) + offset
		var h dsp.Histogram
		for _, o := range []float64{-3, -1, 0, 1, 4} {
			for range 120 {
				h.Add(l + o)
			}
		}
		for i := range spec {
			spec[i] = l - 8 - 0.1*float64((i-17)*(i-17))/4
		}
		first, counts := h.Span()
		add(&record.Minute{Start: m, LAeq: l, LCeq: l + 6, LZeq: l + 8, LAFmax: l + 4, LAFmin: l - 3, LAF10: h.Exceeded(10), LAF90: h.Exceeded(90),
			LAImax: l + 5.5, LAE: l + 17.8, LCpeak: l + 20, Spectrum: append([]float64(nil), spec...), FirstBand: -17,
			Histogram: record.LevelHistogram{First: first, Counts: append([]uint32(nil), counts...)}, ValidSeconds: 60, ValidDuration: time.Minute})
		if m.Minute() == 17 && m.Hour()%2 == 0 { // twelve happenings a day
			s := m.Add(time.Duration(node%5) * time.Second)
			add(&record.Event{Start: s, End: s.Add(4 * time.Second), LAFmax: 82 - float64(node%5), LAeq: 76, LAE: 76 + 10*math.Log10(4), LCpeak: 99})
		}
	}
	if err := st.Close(); err != nil {
		tb.Fatal(err)
	}
}

// BenchmarkFleetReport computes and writes a fleet report over LEQNODE_FLEET_NODES stores
// (default 3) of LEQNODE_FLEET_DAYS days of minute records (default 2); `make bench` runs the
// goal's size, 50 nodes and 30 days (goal: under 60 s). With LEQNODE_FLEET_DIR=DIR the stores
// are built there once and reused by later runs.
func BenchmarkFleetReport(b *testing.B) {
	size := func(name string, def int) int {
		if v := os.Getenv(name); v != "" {
			n, err := strconv.Atoi(v)
			if err != nil || n < 1 {
				b.Fatalf("%s=%q: give a whole number above 0", name, v)
			}
			return n
		}
		return def
	}
	nodes, days := size("LEQNODE_FLEET_NODES", 3), size("LEQNODE_FLEET_DAYS", 2)
	start := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	dir := os.Getenv("LEQNODE_FLEET_DIR")
	if dir == "" {
		dir = b.TempDir()
	}
	var stores []string
	for i := range nodes {
		p := filepath.Join(dir, fmt.Sprintf("n%02d-%dd.db", i, days))
		if _, err := os.Stat(p); err != nil {
			minuteStore(b, p, i, start, days)
		}
		stores = append(stores, p)
	}
	prof := loadProfile(b, "eu-lden")
	out := b.TempDir()
	b.ResetTimer()
	for range b.N {
		f, err := ComputeFleet(context.Background(), FleetConfig{
			Config: Config{Profile: prof, Location: time.UTC, From: start, To: start.Add(time.Duration(days) * 24 * time.Hour)},
			Stores: stores,
		})
		if err != nil {
			b.Fatal(err)
		}
		if len(f.Happenings) != 12*days && nodes > 1 {
			b.Fatalf("%d happenings, want %d", len(f.Happenings), 12*days)
		}
		if err := WriteFleet(out, f, FleetMeta{Created: start}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(nodes), "nodes")
	b.ReportMetric(float64(days), "days")
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/report")
}
