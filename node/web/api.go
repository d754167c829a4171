package web

import (
	"bytes"
	"cmp"
	"compress/gzip"
	"encoding/json"
	"fmt"
	"math"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp/reference"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// maxMinutes bounds /api/seconds: three hours of seconds is about 1 MB of JSON.
const maxMinutes = 180

// stamp formats a time for JSON: UTC, RFC 3339 with milliseconds.
func stamp(t time.Time) string { return t.UTC().Format("2006-01-02T15:04:05.000Z07:00") }

// writeJSON writes v as JSON, gzip-compressed when the client accepts it and the body is
// large enough to gain from it. Responses are never cached: they describe the present.
func writeJSON(w http.ResponseWriter, r *http.Request, code int, v any) {
	body, err := json.Marshal(v)
	if err != nil {
		writeError(w, http.StatusInternalServerError, "encoding the response: "+err.Error())
		return
	}
	body = append(body, '\n')
	h := w.Header()
	h.Set("Content-Type", "application/json; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	h.Add("Vary", "Accept-Encoding")
	if len(body) > 2048 && r != nil && acceptsGzip(r) {
		if z, err := gzipped(body); err == nil { // else: sent as it is
			body = z
			h.Set("Content-Encoding", "gzip")
		}
	}
	h.Set("Content-Length", strconv.Itoa(len(body)))
	w.WriteHeader(code)
	// A failed write is the client's: it went away, and the server has nobody to tell.
	_, _ = w.Write(body)
}

// gzipped compresses b at gzip's fastest level.
func gzipped(b []byte) ([]byte, error) {
	var buf bytes.Buffer
	zw, err := gzip.NewWriterLevel(&buf, gzip.BestSpeed)
	if err != nil {
		return nil, err
	}
	if _, err := zw.Write(b); err != nil {
		return nil, err
	}
	if err := zw.Close(); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

func acceptsGzip(r *http.Request) bool {
	for _, part := range strings.Split(r.Header.Get("Accept-Encoding"), ",") {
		name, q, _ := strings.Cut(strings.TrimSpace(part), ";")
		if strings.EqualFold(strings.TrimSpace(name), "gzip") && strings.ReplaceAll(q, " ", "") != "q=0" {
			return true
		}
	}
	return false
}

// writeError writes a one-line error as JSON {"error": msg}.
func writeError(w http.ResponseWriter, code int, msg string) {
	h := w.Header()
	h.Set("Content-Type", "application/json; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	w.WriteHeader(code)
	b, err := json.Marshal(map[string]string{"error": msg})
	if err != nil { // a map of strings always encodes
		b = []byte(`{"error":"the error could not be encoded"}`)
	}
	// A failed write is the client's: it went away, and the server has nobody to tell.
	_, _ = w.Write(append(b, '\n'))
}

// status returns the caller's Status completed with what the store knows.
func (s *Server) status() Status {
	var st Status
	if s.o.Status != nil {
		st = s.o.Status()
	}
	st.Now = s.o.Now().UTC()
	st.TokenRequired = s.o.Token != ""
	if !st.Started.IsZero() {
		st.UptimeSeconds = math.Round(st.Now.Sub(st.Started).Seconds())
	}
	if s.o.Store == nil {
		return st
	}
	if st.Store == nil {
		if stats, err := s.o.Store.Stats(); err == nil {
			ss := &StoreStatus{Path: stats.Path, FileBytes: stats.FileBytes, UsedBytes: stats.UsedBytes,
				MaxBytes: stats.MaxBytes, Held: stats.Held, Records: map[string]uint64{}, Recovered: stats.Recovered,
				OldestSecond: stats.Kinds[record.KindSecond].Oldest}
			for k, ks := range stats.Kinds {
				ss.Records[k.String()] = ks.Count
			}
			st.Store = ss
		} else {
			s.log.Warn("status page: reading the store's statistics", "err", err)
		}
	}
	if st.SampleRate == 0 || st.Version == "" || st.TimeZone == "" || st.Source == "" || st.Calibration == nil {
		if r, err := s.o.Store.Last(record.KindSession); err == nil && r != nil {
			sess := r.(*record.Session)
			st.SampleRate = cmp.Or(st.SampleRate, sess.SampleRate)
			st.Version = cmp.Or(st.Version, sess.SoftwareVersion)
			st.TimeZone = cmp.Or(st.TimeZone, sess.TimeZone)
			st.Source = cmp.Or(st.Source, sess.Device)
			if st.Calibration == nil && sess.SensitivityDBFS != 0 {
				st.Calibration = &CalibrationStatus{SensitivityDBFS: sess.SensitivityDBFS}
			}
		}
	}
	if st.ClockSynced == nil {
		if h := s.lastHealth(); h != nil {
			synced := h.ClockSynced
			st.ClockSynced = &synced
		}
	}
	return st
}

// lastHealth returns the latest health snapshot, or nil.
func (s *Server) lastHealth() *record.Health {
	if s.o.Store == nil {
		return nil
	}
	r, err := s.o.Store.Last(record.KindHealth)
	if err != nil {
		s.log.Warn("status page: reading the latest health record", "err", err)
		return nil
	}
	h, _ := r.(*record.Health)
	return h
}

func (s *Server) apiStatus(w http.ResponseWriter, r *http.Request) {
	writeJSON(w, r, http.StatusOK, s.status())
}

// secondJSON is one second record as /api/seconds and the live stream write it.
type secondJSON struct {
	Start  string   `json:"start"`
	LAeq   level    `json:"LAeq"`
	LAFmax level    `json:"LAFmax"`
	LAFmin level    `json:"LAFmin"`
	LCpeak level    `json:"LCpeak"`
	Flags  []string `json:"flags"`
}

func secondOf(r *record.Second) secondJSON {
	return secondJSON{Start: stamp(r.Start), LAeq: level(r.LAeq), LAFmax: level(r.LAFmax),
		LAFmin: level(r.LAFmin), LCpeak: level(r.LCpeak), Flags: r.Flags.Names()}
}

// queryInt reads an integer query parameter in [lo, hi], def when absent: given once, in
// decimal digits only (package strict).
func queryInt(r *http.Request, name string, def, lo, hi int) (int, error) {
	v, ok, err := strict.Param(r.URL.Query(), name)
	if err != nil {
		return 0, err
	}
	if !ok {
		return def, nil
	}
	n, err := strict.Whole(v)
	if err != nil || n < int64(lo) || n > int64(hi) {
		if len(v) > 20 {
			v = v[:20] + "..."
		}
		return 0, fmt.Errorf("%s=%q: give a whole number from %d to %d", name, v, lo, hi)
	}
	return int(n), nil
}

func (s *Server) apiSeconds(w http.ResponseWriter, r *http.Request) {
	minutes, err := queryInt(r, "minutes", 60, 1, maxMinutes)
	if err != nil {
		writeError(w, http.StatusBadRequest, err.Error())
		return
	}
	now := s.o.Now()
	from := now.Add(-time.Duration(minutes) * time.Minute)
	out := struct {
		From    string       `json:"from"`
		To      string       `json:"to"`
		Seconds []secondJSON `json:"seconds"`
	}{From: stamp(from), To: stamp(now), Seconds: []secondJSON{}}
	if s.o.Store != nil {
		// Store.Range copies each record out of a short read transaction before calling back.
		err = s.o.Store.Range(record.KindSecond, from, now.Add(time.Minute), func(rec record.Record) error {
			out.Seconds = append(out.Seconds, secondOf(rec.(*record.Second)))
			return nil
		})
		if err != nil {
			writeError(w, http.StatusInternalServerError, "reading the second records: "+err.Error())
			return
		}
	}
	writeJSON(w, r, http.StatusOK, out)
}

// bandJSON is one band of a spectrum.
type bandJSON struct {
	Nominal string `json:"nominal_hz"` // IEC 61260-1 Annex E name, e.g. "31.5"
	LZeq    level  `json:"LZeq"`
}

// spectrumJSON is /api/spectrum.
type spectrumJSON struct {
	Record string     `json:"record"` // "second" or "minute"; "" when no spectrum is stored
	Start  string     `json:"start,omitempty"`
	LAeq   level      `json:"LAeq"`
	LZeq   level      `json:"LZeq"`
	Flags  []string   `json:"flags"`
	Bands  []bandJSON `json:"third_octave_LZeq"`
}

// latestSpectrum returns the spectrum of the latest second record that has one, else of the
// latest minute record (nodes that keep spectra only per minute).
func (s *Server) latestSpectrum() (spectrumJSON, error) {
	out := spectrumJSON{Bands: []bandJSON{}, LAeq: level(math.NaN()), LZeq: level(math.NaN())}
	if s.o.Store == nil {
		return out, nil
	}
	bands := func(first int, spec []float64) []bandJSON {
		b := make([]bandJSON, len(spec))
		for i, v := range spec {
			b[i] = bandJSON{Nominal: reference.NominalMidband(3, first+i), LZeq: level(v)}
		}
		return b
	}
	rs, err := s.o.Store.Last(record.KindSecond)
	if err != nil {
		return out, err
	}
	if sec, ok := rs.(*record.Second); ok && len(sec.Spectrum) > 0 {
		out.Record, out.Start, out.LAeq, out.LZeq, out.Flags = "second", stamp(sec.Start), level(sec.LAeq), level(sec.LZeq), sec.Flags.Names()
		out.Bands = bands(sec.FirstBand, sec.Spectrum)
		return out, nil
	}
	rm, err := s.o.Store.Last(record.KindMinute)
	if err != nil {
		return out, err
	}
	if m, ok := rm.(*record.Minute); ok && len(m.Spectrum) > 0 {
		out.Record, out.Start, out.LAeq, out.LZeq, out.Flags = "minute", stamp(m.Start), level(m.LAeq), level(m.LZeq), m.Flags.Names()
		out.Bands = bands(m.FirstBand, m.Spectrum)
	}
	return out, nil
}

func (s *Server) apiSpectrum(w http.ResponseWriter, r *http.Request) {
	sp, err := s.latestSpectrum()
	if err != nil {
		writeError(w, http.StatusInternalServerError, "reading the latest spectrum: "+err.Error())
		return
	}
	writeJSON(w, r, http.StatusOK, sp)
}

// calibrationJSON is one stored calibration check.
type calibrationJSON struct {
	Time              string   `json:"time"`
	Reference         level    `json:"reference_dB"`
	Measured          level    `json:"measured_dB"`
	Deviation         level    `json:"deviation_dB"`
	Frequency         float64  `json:"frequency_hz"`
	Stability         level    `json:"stability_dB"`
	SensitivityBefore level    `json:"sensitivity_before_dBFS"`
	SensitivityAfter  level    `json:"sensitivity_after_dBFS"`
	Applied           bool     `json:"applied"`
	OK                bool     `json:"passed"`
	Flags             []string `json:"flags"`
}

// maxCalibrations bounds /api/calibrations; checks are a few a month.
const maxCalibrations = 100

// calibrations returns the stored checks of the last five years, newest first.
func (s *Server) calibrations() ([]*record.Calibration, error) {
	var out []*record.Calibration
	if s.o.Store == nil {
		return out, nil
	}
	now := s.o.Now()
	err := s.o.Store.Range(record.KindCalibration, now.AddDate(-5, 0, 0), now.Add(24*time.Hour), func(rec record.Record) error {
		out = append(out, rec.(*record.Calibration))
		return nil
	})
	slices.Reverse(out)
	if len(out) > maxCalibrations {
		out = out[:maxCalibrations]
	}
	return out, err
}

func (s *Server) apiCalibrations(w http.ResponseWriter, r *http.Request) {
	checks, err := s.calibrations()
	if err != nil {
		writeError(w, http.StatusInternalServerError, "reading the calibration checks: "+err.Error())
		return
	}
	st := s.status()
	out := struct {
		State     *CalibrationStatus `json:"state"`
		DaysSince *float64           `json:"days_since_last_check"`
		Checks    []calibrationJSON  `json:"checks"`
	}{State: st.Calibration, Checks: []calibrationJSON{}}
	for _, c := range checks {
		out.Checks = append(out.Checks, calibrationJSON{
			Time: stamp(c.At), Reference: level(c.Reference), Measured: level(c.Measured),
			Deviation: level(c.Deviation), Frequency: math.Round(c.Frequency*10) / 10, Stability: level(c.Stability),
			SensitivityBefore: level(c.SensitivityBefore), SensitivityAfter: level(c.SensitivityAfter),
			Applied: c.Applied, OK: c.OK, Flags: c.Flags.Names(),
		})
	}
	if len(checks) > 0 {
		d := math.Round(st.Now.Sub(checks[0].At).Hours()/24*10) / 10
		out.DaysSince = &d
	}
	writeJSON(w, r, http.StatusOK, out)
}

// hourSummary counts the flags of the second records of the last hour.
type hourSummary struct {
	Seconds        int            `json:"seconds"`          // second records in the hour
	Expected       int            `json:"expected_seconds"` // seconds the hour (or the uptime) holds
	DroppedSamples uint64         `json:"dropped_samples"`
	Flagged        map[string]int `json:"flagged_seconds"` // per flag name
	Silent         int            `json:"silent_seconds"`  // digital silence (no level)
}

// summarizeHour reads the second records of the hour before now. The seconds expected are
// those since the later of an hour ago and the earlier of the node's start and its first
// second record in the hour: a node started ten minutes ago on an empty store expects 600,
// one that was off for half of the hour expects 3600.
func (s *Server) summarizeHour(now time.Time, started time.Time) (hourSummary, error) {
	h := hourSummary{Flagged: map[string]int{}}
	from := now.Add(-time.Hour)
	for f := record.Flags(1); f != 0 && f <= record.Excluded; f <<= 1 {
		h.Flagged[f.String()] = 0
	}
	var first time.Time
	if s.o.Store != nil {
		err := s.o.Store.Range(record.KindSecond, from, now, func(rec record.Record) error {
			sec := rec.(*record.Second)
			if h.Seconds == 0 {
				first = sec.Start
			}
			h.Seconds++
			h.DroppedSamples += sec.DroppedSamples
			if math.IsNaN(sec.LAeq) {
				h.Silent++
			}
			for f := record.Flags(1); f != 0 && f <= record.Excluded; f <<= 1 {
				if sec.Flags.Has(f) {
					h.Flagged[f.String()]++
				}
			}
			return nil
		})
		if err != nil {
			return h, err
		}
	}
	begin := started
	if begin.IsZero() || !first.IsZero() && first.Before(begin) {
		begin = first
	}
	if begin.IsZero() || begin.Before(from) {
		begin = from
	}
	h.Expected = max(h.Seconds, int(math.Ceil(now.Sub(begin).Seconds())))
	return h, nil
}

// healthJSON is the latest health snapshot.
type healthJSON struct {
	Time              string   `json:"time"`
	Flags             []string `json:"flags"`
	Clipped           uint64   `json:"clipped_samples"`
	DCOffset          level    `json:"dc_offset"`
	Silent            bool     `json:"silent"`
	Stuck             bool     `json:"stuck"`
	UnderRangeSeconds uint64   `json:"under_range_seconds"`
	DroppedSamples    uint64   `json:"dropped_samples"`
	QueueOverflows    uint64   `json:"queue_overflows"`
	CPU               level    `json:"cpu_percent"`
	MemoryMB          level    `json:"memory_mb"`
	DiskFreeMB        level    `json:"disk_free_mb"`
	StoreBytes        uint64   `json:"store_bytes"`
	ClockSynced       bool     `json:"clock_synced"`
	ClockErrorMs      level    `json:"clock_error_ms"`
	TemperatureC      level    `json:"temperature_c"`
	AgeSeconds        float64  `json:"age_s"`
}

// gapJSON is one stored gap.
type gapJSON struct {
	From   string  `json:"from"`
	To     string  `json:"to"`
	Length float64 `json:"duration_s"`
	Reason string  `json:"reason"`
}

func (s *Server) apiHealth(w http.ResponseWriter, r *http.Request) {
	st := s.status()
	hour, err := s.summarizeHour(st.Now, st.Started)
	if err != nil {
		writeError(w, http.StatusInternalServerError, "reading the second records: "+err.Error())
		return
	}
	out := struct {
		Now         string       `json:"now"`
		LastHour    hourSummary  `json:"last_hour"`
		Snapshot    *healthJSON  `json:"snapshot"`
		Gaps        []gapJSON    `json:"gaps_last_day"`
		Counters    *Counters    `json:"counters"`
		ClockSynced *bool        `json:"clock_synced"`
		Store       *StoreStatus `json:"store"`
		MQTT        *MQTTStatus  `json:"mqtt"`
	}{Now: stamp(st.Now), LastHour: hour, Gaps: []gapJSON{}, Counters: st.Counters, ClockSynced: st.ClockSynced,
		Store: st.Store, MQTT: st.MQTT}
	if h := s.lastHealth(); h != nil {
		out.Snapshot = &healthJSON{
			Time: stamp(h.At), Flags: h.Flags.Names(), Clipped: h.Clipped, DCOffset: level(h.DCOffset),
			Silent: h.Silent, Stuck: h.Stuck, UnderRangeSeconds: h.UnderRangeSeconds, DroppedSamples: h.DroppedSamples,
			QueueOverflows: h.QueueOverflows, CPU: level(h.CPU), MemoryMB: level(h.MemoryMB), DiskFreeMB: level(h.DiskFreeMB),
			StoreBytes: h.StoreBytes, ClockSynced: h.ClockSynced, ClockErrorMs: level(h.ClockErrorMs),
			TemperatureC: level(h.TemperatureC), AgeSeconds: math.Round(st.Now.Sub(h.At).Seconds()),
		}
	}
	if s.o.Store != nil {
		err := s.o.Store.Range(record.KindGap, st.Now.Add(-24*time.Hour), st.Now.Add(time.Minute), func(rec record.Record) error {
			g := rec.(*record.Gap)
			out.Gaps = append(out.Gaps, gapJSON{From: stamp(g.From), To: stamp(g.To),
				Length: math.Round(g.To.Sub(g.From).Seconds()*1000) / 1000, Reason: g.Reason})
			return nil
		})
		if err != nil {
			writeError(w, http.StatusInternalServerError, "reading the gap records: "+err.Error())
			return
		}
	}
	writeJSON(w, r, http.StatusOK, out)
}
