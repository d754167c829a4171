package web_test

import (
	"bytes"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/web"
)

// scrape fetches /metrics and parses it with the Prometheus text parser.
func scrape(t *testing.T, s *web.Server) map[string]*dto.MetricFamily {
	t.Helper()
	res, body := get(t, s.Handler(), http.MethodGet, "/metrics", "Accept", "text/plain")
	if res.StatusCode != http.StatusOK {
		t.Fatalf("/metrics: status %d: %s", res.StatusCode, body)
	}
	if ct := res.Header.Get("Content-Type"); !strings.HasPrefix(ct, "text/plain") {
		t.Fatalf("/metrics: Content-Type %q, want the text format", ct)
	}
	p := expfmt.NewTextParser(model.UTF8Validation)
	fams, err := p.TextToMetricFamilies(bytes.NewReader(body))
	if err != nil {
		t.Fatalf("the Prometheus text parser rejects /metrics: %v\n%s", err, body)
	}
	return fams
}

// value returns the value of the series of family name whose labels include want.
func value(t *testing.T, fams map[string]*dto.MetricFamily, name string, want map[string]string) (float64, bool) {
	t.Helper()
	f := fams[name]
	if f == nil {
		return 0, false
	}
next:
	for _, m := range f.Metric {
		labels := map[string]string{}
		for _, l := range m.Label {
			labels[l.GetName()] = l.GetValue()
		}
		for k, v := range want {
			if labels[k] != v {
				continue next
			}
		}
		switch {
		case m.Gauge != nil:
			return m.Gauge.GetValue(), true
		case m.Counter != nil:
			return m.Counter.GetValue(), true
		case m.Untyped != nil:
			return m.Untyped.GetValue(), true
		}
	}
	return 0, false
}

func TestMetrics(t *testing.T) {
	st := openStore(t)
	hist := fillHistory(t, st, testNow(), true)
	synced := true
	selfAt := testNow().Add(-time.Hour)
	s := newServer(t, web.Options{Store: st, Status: func() web.Status {
		return web.Status{
			NodeID: "wc-harrowby-02", Site: "Harrowby Lane, Wendle Cross (invented)", Version: "leqnode test",
			Started: testNow().Add(-2 * time.Hour), Source: "file: street.wav", SampleRate: 48000,
			Counters:    &web.Counters{Seconds: 7200, Minutes: 120, Gaps: 1, DroppedSamples: 9600, QueueOverflows: 2, Reopens: 1},
			ClockSynced: &synced,
			MQTT: &web.MQTTStatus{Connected: true, Broker: "tcp://127.0.0.1:1883", Pending: 42,
				PendingKind: map[string]uint64{"second": 41, "minute": 1}, LastPublish: testNow().Add(-2 * time.Second)},
			Calibration: &web.CalibrationStatus{SensitivityDBFS: -38.31},
			SelfCheck:   &web.SelfCheckStatus{At: selfAt, Pass: false, Checks: 120, Failed: []string{"A weighting at 63 Hz"}},
		}
	}})
	fams := scrape(t, s)

	for _, tc := range []struct {
		name   string
		labels map[string]string
		want   float64
	}{
		// Levels are stored with 0.01 dB resolution (record.Second).
		{"leqnode_level_db", map[string]string{"quantity": "LAeq", "interval": "1s"}, hist.lastLAeq},
		{"leqnode_level_db", map[string]string{"quantity": "LAFmax", "interval": "1s"}, math.Round((hist.lastLAeq+4)*100) / 100},
		{"leqnode_level_db", map[string]string{"quantity": "LAF90", "interval": "1min"}, 50},
		{"leqnode_level_db", map[string]string{"quantity": "LAE", "interval": "1min"}, 74.8},
		{"leqnode_level_start_timestamp_seconds", map[string]string{"interval": "1s"}, float64(hist.last.Unix())},
		{"leqnode_node_info", map[string]string{"node_id": "wc-harrowby-02", "source": "file: street.wav"}, 1},
		{"leqnode_start_time_seconds", nil, float64(testNow().Add(-2 * time.Hour).Unix())},
		{"leqnode_sample_rate_hertz", nil, 48000},
		{"leqnode_second_records_total", nil, 7200},
		{"leqnode_minute_records_total", nil, 120},
		{"leqnode_gaps_total", nil, 1},
		{"leqnode_dropped_samples_total", nil, 9600},
		{"leqnode_queue_overflows_total", nil, 2},
		{"leqnode_source_reopens_total", nil, 1},
		{"leqnode_flagged_seconds_last_hour", map[string]string{"flag": "clipped"}, float64(hist.clipped)},
		{"leqnode_flagged_seconds_last_hour", map[string]string{"flag": "dropped"}, float64(hist.dropped)},
		{"leqnode_flagged_seconds_last_hour", map[string]string{"flag": "calibrating"}, 0},
		{"leqnode_stored_seconds_last_hour", nil, float64(hist.seconds)},
		{"leqnode_clock_synced", nil, 1},
		{"leqnode_store_records", map[string]string{"kind": "second"}, float64(hist.seconds)},
		{"leqnode_store_records", map[string]string{"kind": "calibration"}, 3},
		{"leqnode_mqtt_connected", nil, 1},
		{"leqnode_mqtt_backlog_records", map[string]string{"kind": "second"}, 41},
		{"leqnode_mqtt_backlog_records", map[string]string{"kind": "event"}, 0},
		{"leqnode_mqtt_last_publish_timestamp_seconds", nil, float64(testNow().Add(-2 * time.Second).Unix())},
		{"leqnode_sensitivity_dbfs", nil, -38.31},
		{"leqnode_calibration_deviation_db", nil, hist.calibration[len(hist.calibration)-1]},
		{"leqnode_calibration_last_check_ok", nil, 1},
		{"leqnode_selfcheck_pass", nil, 0},
		{"leqnode_selfcheck_failed_checks", nil, 1},
		{"leqnode_selfcheck_timestamp_seconds", nil, float64(selfAt.Unix())},
		{"leqnode_health_clipped_samples", nil, 12},
		{"leqnode_health_disk_free_bytes", nil, 5200e6},
		{"leqnode_health_temperature_celsius", nil, 47},
	} {
		got, ok := value(t, fams, tc.name, tc.labels)
		if !ok {
			t.Errorf("%s%v: missing", tc.name, tc.labels)
			continue
		}
		if math.Abs(got-tc.want) > 1e-9*math.Max(1, math.Abs(tc.want)) {
			t.Errorf("%s%v = %v, want %v", tc.name, tc.labels, got, tc.want)
		}
	}
	for _, name := range []string{"leqnode_store_file_bytes", "leqnode_store_used_bytes", "leqnode_store_max_bytes"} {
		if v, ok := value(t, fams, name, nil); !ok || v <= 0 {
			t.Errorf("%s = %v (present %v), want > 0", name, v, ok)
		}
	}
	if fams["leqnode_second_records_total"].GetType() != dto.MetricType_COUNTER {
		t.Errorf("leqnode_second_records_total has type %v", fams["leqnode_second_records_total"].GetType())
	}
	// The Go runtime and process collectors of the private registry.
	for _, name := range []string{"go_goroutines", "process_resident_memory_bytes"} {
		if fams[name] == nil {
			t.Errorf("%s missing", name)
		}
	}

	// Every leqnode_ family is documented in docs/page-and-metrics.md, and every documented
	// series exists.
	doc, err := os.ReadFile(filepath.Join("..", "..", "docs", "page-and-metrics.md"))
	if err != nil {
		t.Fatal(err)
	}
	for name := range fams {
		if strings.HasPrefix(name, "leqnode_") && !strings.Contains(string(doc), "`"+name) {
			t.Errorf("%s is not documented in docs/page-and-metrics.md", name)
		}
	}
	for _, m := range regexp.MustCompile("`(leqnode_[a-z_]+)").FindAllStringSubmatch(string(doc), -1) {
		if fams[m[1]] == nil {
			t.Errorf("docs/page-and-metrics.md documents %s, which /metrics does not carry", m[1])
		}
	}
}

// Two servers in one process do not share metric state: the registry is private.
func TestMetricsPrivateRegistry(t *testing.T) {
	a := newServer(t, web.Options{Status: func() web.Status { return web.Status{NodeID: "a", Counters: &web.Counters{Seconds: 1}} }})
	b := newServer(t, web.Options{Status: func() web.Status { return web.Status{NodeID: "b", Counters: &web.Counters{Seconds: 2}} }})
	for _, tc := range []struct {
		s    *web.Server
		want float64
	}{{a, 1}, {b, 2}} {
		fams := scrape(t, tc.s)
		if v, ok := value(t, fams, "leqnode_second_records_total", nil); !ok || v != tc.want {
			t.Errorf("leqnode_second_records_total = %v, want %v", v, tc.want)
		}
		// Without a store there are no levels and no store series, but the scrape works.
		if fams["leqnode_level_db"] != nil || fams["leqnode_store_file_bytes"] != nil {
			t.Error("series from a store that does not exist")
		}
	}
}

// TestMetricsLevelValidity: a calibrator tone's second reads as what it is. The latest second
// is labelled with the validity rule's verdict (left out: calibrating) and an overloaded
// minute as a lower bound, so a dashboard never shows a 94 dB calibrator as the street level.
func TestMetricsLevelValidity(t *testing.T) {
	st := openStore(t)
	at := testNow().Add(-2 * time.Minute).Truncate(time.Minute)
	if _, err := st.Append(&record.Minute{Start: at, LAeq: 77.4, ValidSeconds: 60, OverloadSeconds: 1, Flags: record.Overload}); err != nil {
		t.Fatal(err)
	}
	if _, err := st.Append(&record.Second{Start: at.Add(time.Minute), Duration: time.Second, LAeq: 94, Flags: record.Calibrating}); err != nil {
		t.Fatal(err)
	}
	s := newServer(t, web.Options{Store: st, Status: func() web.Status { return web.Status{NodeID: "wc-harrowby-02"} }})
	fams := scrape(t, s)
	for _, tc := range []struct {
		labels map[string]string
		want   float64
	}{
		{map[string]string{"quantity": "LAeq", "interval": "1s", "validity": "calibrating", "bound": "exact"}, 94},
		{map[string]string{"quantity": "LAeq", "interval": "1min", "validity": "counted", "bound": "lower"}, 77.4},
	} {
		if got, ok := value(t, fams, "leqnode_level_db", tc.labels); !ok || got != tc.want {
			t.Errorf("leqnode_level_db%v = %v (found %v), want %v", tc.labels, got, ok, tc.want)
		}
	}
}
