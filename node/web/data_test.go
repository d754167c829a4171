package web_test

import (
	"math"
	"net/http"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/web"
)

func TestSeconds(t *testing.T) {
	st := openStore(t)
	hist := fillHistory(t, st, testNow(), true)
	s := newServer(t, web.Options{Store: st})
	type seconds struct {
		From, To string
		Seconds  []struct {
			Start  string   `json:"start"`
			LAeq   *float64 `json:"LAeq"`
			LAFmax *float64 `json:"LAFmax"`
			Flags  []string `json:"flags"`
		}
	}
	for _, tc := range []struct {
		query string
		want  int
	}{
		{"", hist.seconds}, // default: the last hour holds all 50 stored minutes
		{"?minutes=60", hist.seconds},
		{"?minutes=10", 600},
		{"?minutes=1", 60},
		{"?minutes=180", hist.seconds},
	} {
		res, body := get(t, s.Handler(), http.MethodGet, "/api/seconds"+tc.query)
		if res.StatusCode != http.StatusOK {
			t.Fatalf("%s: %d %s", tc.query, res.StatusCode, body)
		}
		var got seconds
		decode(t, body, &got)
		if len(got.Seconds) != tc.want {
			t.Errorf("%s: %d seconds, want %d", tc.query, len(got.Seconds), tc.want)
			continue
		}
		last := got.Seconds[len(got.Seconds)-1]
		if last.Start != hist.last.Format("2006-01-02T15:04:05.000Z07:00") || last.LAeq == nil || *last.LAeq != hist.lastLAeq {
			t.Errorf("%s: last second %+v, want %s LAeq %v", tc.query, last, hist.last, hist.lastLAeq)
		}
		if !slices.IsSortedFunc(got.Seconds, func(a, b struct {
			Start  string   `json:"start"`
			LAeq   *float64 `json:"LAeq"`
			LAFmax *float64 `json:"LAFmax"`
			Flags  []string `json:"flags"`
		}) int {
			return strings.Compare(a.Start, b.Start)
		}) {
			t.Errorf("%s: seconds out of time order", tc.query)
		}
	}
	// "+5" and " 5" passed strconv.Atoi; only decimal digits are a number here (issue 20).
	for _, bad := range []string{"0", "181", "-3", "ten", "1e3", strings.Repeat("9", 40), "+5", "%205", "05%00", ""} {
		res, body := get(t, s.Handler(), http.MethodGet, "/api/seconds?minutes="+bad)
		var e struct{ Error string }
		decode(t, body, &e)
		if res.StatusCode != http.StatusBadRequest || !strings.Contains(e.Error, "minutes=") || !strings.Contains(e.Error, "1 to 180") {
			t.Errorf("minutes=%s: %d %q", bad, res.StatusCode, e.Error)
		}
	}
	// A parameter given twice is refused: net/url's Get took the first.
	res, body := get(t, s.Handler(), http.MethodGet, "/api/seconds?minutes=1&minutes=999")
	var e struct{ Error string }
	decode(t, body, &e)
	if res.StatusCode != http.StatusBadRequest || !strings.Contains(e.Error, "minutes is given 2 times") {
		t.Errorf("minutes given twice: %d %q", res.StatusCode, e.Error)
	}
	// Large answers are compressed for clients that accept it.
	res, _ = get(t, s.Handler(), http.MethodGet, "/api/seconds", "Accept-Encoding", "gzip")
	if res.Header.Get("Content-Encoding") != "gzip" {
		t.Errorf("Content-Encoding %q, want gzip", res.Header.Get("Content-Encoding"))
	}
}

func TestSpectrum(t *testing.T) {
	// Nominal midband frequencies of the one-third-octave bands from band -16 to band 13:
	// IEC 61260-1:2014 Annex E (Table E.1), written out here.
	nominal := []string{"25", "31.5", "40", "50", "63", "80", "100", "125", "160", "200", "250", "315", "400",
		"500", "630", "800", "1000", "1250", "1600", "2000", "2500", "3150", "4000", "5000", "6300", "8000",
		"10000", "12500", "16000", "20000"}
	type spectrum struct {
		Record string `json:"record"`
		Bands  []struct {
			Nominal string   `json:"nominal_hz"`
			LZeq    *float64 `json:"LZeq"`
		} `json:"third_octave_LZeq"`
	}
	for _, tc := range []struct {
		name    string
		spectra bool // second records carry spectra
		record  string
		first   float64 // expected level of the first band
	}{
		{"second spectra", true, "second", -1},
		{"minute spectra only", false, "minute", 60},
	} {
		t.Run(tc.name, func(t *testing.T) {
			st := openStore(t)
			hist := fillHistory(t, st, testNow(), tc.spectra)
			s := newServer(t, web.Options{Store: st})
			_, body := get(t, s.Handler(), http.MethodGet, "/api/spectrum")
			var sp spectrum
			decode(t, body, &sp)
			if sp.Record != tc.record || len(sp.Bands) != hist.bands {
				t.Fatalf("record %q with %d bands, want %q with %d", sp.Record, len(sp.Bands), tc.record, hist.bands)
			}
			for i, b := range sp.Bands {
				if b.Nominal != nominal[i] {
					t.Errorf("band %d named %q, want %q", i, b.Nominal, nominal[i])
				}
			}
			want := tc.first
			if want < 0 {
				want = math.Round((hist.lastLAeq+6-0.4*12)*100) / 100
			}
			if sp.Bands[0].LZeq == nil || math.Abs(*sp.Bands[0].LZeq-want) > 0.011 {
				t.Errorf("first band %v, want %v", sp.Bands[0].LZeq, want)
			}
		})
	}
	// An empty store answers with no bands rather than an error.
	s := newServer(t, web.Options{Store: openStore(t)})
	res, body := get(t, s.Handler(), http.MethodGet, "/api/spectrum")
	var sp spectrum
	decode(t, body, &sp)
	if res.StatusCode != http.StatusOK || sp.Record != "" || len(sp.Bands) != 0 {
		t.Errorf("empty store: %d %s", res.StatusCode, body)
	}
}

func TestCalibrationsAndHealth(t *testing.T) {
	st := openStore(t)
	hist := fillHistory(t, st, testNow(), true)
	synced := false
	s := newServer(t, web.Options{Store: st, Status: func() web.Status {
		return web.Status{NodeID: "wc-harrowby-02", Started: testNow().Add(-2 * time.Hour),
			Calibration: &web.CalibrationStatus{SensitivityDBFS: -38.31, NominalDBFS: -38, SetAt: testNow().AddDate(0, 0, -10)},
			Counters:    &web.Counters{Seconds: 7200, DroppedSamples: 9600, QueueOverflows: 2},
			ClockSynced: &synced,
		}
	}})
	var cal struct {
		State     *web.CalibrationStatus `json:"state"`
		DaysSince *float64               `json:"days_since_last_check"`
		Checks    []struct {
			Deviation float64 `json:"deviation_dB"`
			OK        bool    `json:"ok"`
		} `json:"checks"`
	}
	_, body := get(t, s.Handler(), http.MethodGet, "/api/calibrations")
	decode(t, body, &cal)
	if cal.State == nil || cal.State.SensitivityDBFS != -38.31 {
		t.Errorf("state %+v", cal.State)
	}
	if len(cal.Checks) != len(hist.calibration) {
		t.Fatalf("%d checks, want %d", len(cal.Checks), len(hist.calibration))
	}
	for i, c := range cal.Checks { // newest first
		if want := hist.calibration[len(hist.calibration)-1-i]; c.Deviation != want {
			t.Errorf("check %d: deviation %v, want %v", i, c.Deviation, want)
		}
	}
	if cal.DaysSince == nil || *cal.DaysSince != 10 {
		t.Errorf("days since the last check: %v, want 10", cal.DaysSince)
	}

	var health struct {
		LastHour struct {
			Seconds        int            `json:"seconds"`
			Expected       int            `json:"expected_seconds"`
			DroppedSamples uint64         `json:"dropped_samples"`
			Flagged        map[string]int `json:"flagged_seconds"`
		} `json:"last_hour"`
		Snapshot *struct {
			Clipped    uint64  `json:"clipped_samples"`
			DiskFreeMB float64 `json:"disk_free_mb"`
			AgeSeconds float64 `json:"age_s"`
		} `json:"snapshot"`
		Gaps        []struct{ Reason string } `json:"gaps_last_day"`
		ClockSynced *bool                     `json:"clock_synced"`
		Counters    *web.Counters             `json:"counters"`
		Store       *web.StoreStatus          `json:"store"`
		MQTT        *web.MQTTStatus           `json:"mqtt"`
	}
	_, body = get(t, s.Handler(), http.MethodGet, "/api/health")
	decode(t, body, &health)
	lh := health.LastHour
	if lh.Seconds != hist.seconds || lh.Expected != 3600 || lh.Flagged["clipped"] != hist.clipped ||
		lh.Flagged["overload"] != hist.clipped || lh.Flagged["dropped"] != hist.dropped || lh.DroppedSamples != uint64(4800*hist.dropped) {
		t.Errorf("last hour %+v, want %d seconds, %d clipped, %d dropped", lh, hist.seconds, hist.clipped, hist.dropped)
	}
	if _, ok := lh.Flagged["calibrating"]; !ok {
		t.Error("flags that did not occur are missing from flagged_seconds; want them with 0")
	}
	if health.Snapshot == nil || health.Snapshot.Clipped != 12 || health.Snapshot.DiskFreeMB != 5200 || health.Snapshot.AgeSeconds != 30 {
		t.Errorf("snapshot %+v", health.Snapshot)
	}
	if len(health.Gaps) != 1 || health.Gaps[0].Reason != "device lost" {
		t.Errorf("gaps %+v", health.Gaps)
	}
	// The caller's clock state wins over the stored snapshot's.
	if health.ClockSynced == nil || *health.ClockSynced {
		t.Errorf("clock_synced %v, want false from Status", health.ClockSynced)
	}
	if health.Counters == nil || health.Counters.DroppedSamples != 9600 {
		t.Errorf("counters %+v", health.Counters)
	}
	if health.Store == nil || health.Store.FileBytes <= 0 || health.Store.Records["second"] != uint64(hist.seconds) {
		t.Errorf("store %+v", health.Store)
	}
	if health.MQTT != nil {
		t.Errorf("mqtt %+v, want null when the caller has no publisher", health.MQTT)
	}
}

// Without a Status function and a store the page still gets valid JSON: everything it
// cannot know is absent, and the page shows "not available".
func TestNothingKnown(t *testing.T) {
	s := newServer(t, web.Options{})
	for _, path := range []string{"/api/status", "/api/seconds", "/api/spectrum", "/api/calibrations", "/api/health"} {
		res, body := get(t, s.Handler(), http.MethodGet, path)
		var v map[string]any
		decode(t, body, &v)
		if res.StatusCode != http.StatusOK {
			t.Errorf("%s: %d %s", path, res.StatusCode, body)
		}
	}
	_, body := get(t, s.Handler(), http.MethodGet, "/api/status")
	var v map[string]any
	decode(t, body, &v)
	for _, absent := range []string{"node_id", "counters", "clock_synced", "store", "mqtt", "calibration", "self_check"} {
		if _, ok := v[absent]; ok {
			t.Errorf("status has %q though nothing filled it: %s", absent, body)
		}
	}
}

// The coverage of the last hour counts the seconds expected since the later of an hour ago
// and the node's start or its first stored second.
func TestCoverage(t *testing.T) {
	now := testNow()
	for _, tc := range []struct {
		name     string
		stored   int           // seconds stored, ending now
		started  time.Duration // node started this long ago (0: unknown)
		expected int
	}{
		{"fresh node on an empty store", 0, 5 * time.Minute, 300},
		{"fresh node, its own seconds", 600, 10 * time.Minute, 600},
		{"start unknown, first second counts", 600, 0, 600},
		{"running two hours, half the hour missing", 1800, 2 * time.Hour, 3600},
		{"nothing known", 0, 0, 3600},
	} {
		t.Run(tc.name, func(t *testing.T) {
			st := openStore(t)
			for i := tc.stored; i > 0; i-- {
				if _, err := st.Append(&record.Second{Start: now.Add(-time.Duration(i) * time.Second), Duration: time.Second, LAeq: 50}); err != nil {
					t.Fatal(err)
				}
			}
			var started time.Time
			if tc.started > 0 {
				started = now.Add(-tc.started)
			}
			s := newServer(t, web.Options{Store: st, Status: func() web.Status { return web.Status{Started: started} }})
			_, body := get(t, s.Handler(), http.MethodGet, "/api/health")
			var h struct {
				LastHour struct {
					Seconds  int `json:"seconds"`
					Expected int `json:"expected_seconds"`
				} `json:"last_hour"`
			}
			decode(t, body, &h)
			if h.LastHour.Seconds != tc.stored || h.LastHour.Expected != tc.expected {
				t.Errorf("%d of %d seconds, want %d of %d", h.LastHour.Seconds, h.LastHour.Expected, tc.stored, tc.expected)
			}
		})
	}
}

// What the caller leaves out of Status comes from the latest session record where it can.
func TestStatusFromSession(t *testing.T) {
	st := openStore(t)
	sess := &record.Session{At: testNow().Add(-time.Hour), SoftwareVersion: "leqnode v0.9.0", SensitivityDBFS: -37.5,
		SampleRate: 48000, Device: "hw:CARD=Mic,DEV=0", TimeZone: "Europe/Berlin"}
	if _, err := st.Append(sess); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name   string
		status func() web.Status
		want   web.Status
	}{
		{"nothing from the caller", nil, web.Status{Version: "leqnode v0.9.0", SampleRate: 48000, Source: "hw:CARD=Mic,DEV=0",
			TimeZone: "Europe/Berlin", Calibration: &web.CalibrationStatus{SensitivityDBFS: -37.5}}},
		{"the caller wins", func() web.Status {
			return web.Status{Version: "leqnode v1", SampleRate: 44100, Source: "file: a.wav", TimeZone: "UTC",
				Calibration: &web.CalibrationStatus{SensitivityDBFS: -38, Calibrating: true}}
		}, web.Status{Version: "leqnode v1", SampleRate: 44100, Source: "file: a.wav", TimeZone: "UTC",
			Calibration: &web.CalibrationStatus{SensitivityDBFS: -38, Calibrating: true}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newServer(t, web.Options{Store: st, Status: tc.status})
			_, body := get(t, s.Handler(), http.MethodGet, "/api/status")
			var got web.Status
			decode(t, body, &got)
			if got.Version != tc.want.Version || got.SampleRate != tc.want.SampleRate || got.Source != tc.want.Source ||
				got.TimeZone != tc.want.TimeZone || got.Calibration == nil || *got.Calibration != *tc.want.Calibration {
				t.Errorf("status %s, want %+v", body, tc.want)
			}
		})
	}
}
