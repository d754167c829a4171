package web_test

import (
	"encoding/json"
	"io"
	"log/slog"
	"math"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

// testNow is the fixed "now" of the history tests: an invented evening on Harrowby Lane.
func testNow() time.Time { return time.Date(2026, 3, 14, 18, 30, 0, 0, time.UTC) }

// openStore opens a fresh store in a temporary directory. Retention by age is off: the
// history tests store records of a fixed date in the past.
func openStore(t testing.TB) *buffer.Store {
	t.Helper()
	keep := map[record.Kind]time.Duration{}
	for _, k := range record.Kinds() {
		keep[k] = -1
	}
	st, err := buffer.Open(filepath.Join(t.TempDir(), "node.db"), &buffer.Options{CommitInterval: time.Hour, Retention: keep})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	return st
}

// history describes what fillHistory stored, for the checks.
type history struct {
	seconds     int       // second records in the last hour
	clipped     int       // of which flagged clipped
	dropped     int       // of which flagged dropped
	last        time.Time // start of the latest second
	lastLAeq    float64
	firstBand   int
	bands       int
	calibration []float64 // deviations, oldest first
}

// fillHistory stores invented demo data ending at now: 50 minutes of seconds with spectra
// (a street whose traffic swells and fades), the minutes over them, three calibration
// checks, a health snapshot and a gap. The levels are made up; only their bookkeeping is
// checked.
func fillHistory(t testing.TB, st *buffer.Store, now time.Time, spectra bool) history {
	t.Helper()
	h := history{firstBand: -16, bands: 30} // 25 Hz to 20 kHz
	start := now.Add(-50 * time.Minute).Truncate(time.Second)
	for i := 0; i < 50*60; i++ {
		ts := start.Add(time.Duration(i) * time.Second)
		leq := 56 + 7*math.Sin(float64(i)/90) + 3*math.Sin(float64(i)/7)
		sec := &record.Second{Start: ts, Duration: time.Second, LAeq: leq, LCeq: leq + 4, LZeq: leq + 7,
			LAFmax: leq + 4, LAFmin: leq - 3, LASmax: leq + 2, LASmin: leq - 2, LAImax: leq + 5,
			LCpeak: leq + 20, LZpeak: leq + 22, LAE: leq}
		if i%500 == 7 {
			sec.Flags |= record.Clipped | record.Overload
			h.clipped++
		}
		if i%700 == 11 {
			sec.Flags |= record.Dropped
			sec.DroppedSamples = 4800
			h.dropped++
		}
		if spectra {
			sec.FirstBand = h.firstBand
			for b := 0; b < h.bands; b++ {
				sec.Spectrum = append(sec.Spectrum, leq+6-0.4*math.Abs(float64(b-12)))
			}
		}
		if _, err := st.Append(sec); err != nil {
			t.Fatal(err)
		}
		h.seconds++
		h.last, h.lastLAeq = ts, math.Round(leq*100)/100
	}
	for m := 0; m < 50; m++ {
		mr := &record.Minute{Start: start.Add(time.Duration(m) * time.Minute), LAeq: 57, LCeq: 61, LZeq: 64,
			LAFmax: 70, LAFmin: 48, LAF1: 68, LAF5: 65, LAF10: 63, LAF50: 56, LAF90: 50, LAF95: 49, LAF99: 48,
			LAE: 74.8, LCpeak: 90, LAImax: 72, ValidSeconds: 60, FirstBand: h.firstBand}
		for b := 0; b < h.bands; b++ {
			mr.Spectrum = append(mr.Spectrum, 60-0.5*float64(b))
		}
		if _, err := st.Append(mr); err != nil {
			t.Fatal(err)
		}
	}
	for i, dev := range []float64{0.12, -0.05, 0.31} {
		at := now.AddDate(0, 0, -60+25*i)
		c := &record.Calibration{At: at, Reference: 94, Measured: 94 + dev, Deviation: dev, Frequency: 1000,
			Stability: 0.02, SensitivityBefore: -38, SensitivityAfter: -38 - dev, Applied: true, OK: true}
		if _, err := st.Append(c); err != nil {
			t.Fatal(err)
		}
		h.calibration = append(h.calibration, dev)
	}
	health := &record.Health{At: now.Add(-30 * time.Second), Clipped: 12, DCOffset: 0.001, CPU: 9, MemoryMB: 31,
		DiskFreeMB: 5200, StoreBytes: 1 << 20, ClockSynced: true, ClockErrorMs: 2.5, TemperatureC: 47}
	if _, err := st.Append(health); err != nil {
		t.Fatal(err)
	}
	gap := &record.Gap{From: now.Add(-55 * time.Minute), To: now.Add(-50 * time.Minute), Reason: "device lost"}
	if _, err := st.Append(gap); err != nil {
		t.Fatal(err)
	}
	if err := st.Flush(); err != nil {
		t.Fatal(err)
	}
	return h
}

// get requests path from h and returns the response with its body read.
func get(t testing.TB, h http.Handler, method, path string, header ...string) (*http.Response, []byte) {
	t.Helper()
	req := httptest.NewRequest(method, path, nil)
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	res := rec.Result()
	body, _ := io.ReadAll(res.Body)
	return res, body
}

// decode decodes a JSON body into v, failing the test on an error.
func decode(t testing.TB, body []byte, v any) {
	t.Helper()
	if err := json.Unmarshal(body, v); err != nil {
		t.Fatalf("decoding %q: %v", body, err)
	}
}

func debugLogger(w io.Writer) *slog.Logger {
	return slog.New(slog.NewTextHandler(w, &slog.HandlerOptions{Level: slog.LevelDebug}))
}
