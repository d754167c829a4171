package web

import (
	"math"
	"net/http"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"github.com/leqnode/leqnode/buffer/record"
)

// newRegistry returns the Server's own registry: the node's collector plus the Go runtime and
// process collectors. Nothing is registered globally, so several Servers (tests) coexist.
func (s *Server) newRegistry() (*prometheus.Registry, error) {
	reg := prometheus.NewRegistry()
	for _, c := range []prometheus.Collector{
		newNodeCollector(s),
		collectors.NewGoCollector(),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
	} {
		if err := reg.Register(c); err != nil {
			return nil, err
		}
	}
	return reg, nil
}

func (s *Server) metricsHandler() http.Handler {
	return promhttp.HandlerFor(s.registry, promhttp.HandlerOpts{
		ErrorHandling:       promhttp.ContinueOnError,
		ErrorLog:            promErrorLog{s},
		MaxRequestsInFlight: 2,
		Timeout:             10 * time.Second,
	})
}

// promErrorLog sends promhttp's errors to slog.
type promErrorLog struct{ s *Server }

func (l promErrorLog) Println(v ...any) { l.s.log.Warn("metrics", "err", v) }

// metricDescs are the series. docs/page-and-metrics.md documents each; keep the two in step.
type metricDescs struct {
	descLevel         *prometheus.Desc
	descLevelTime     *prometheus.Desc
	descInfo          *prometheus.Desc
	descStart         *prometheus.Desc
	descRate          *prometheus.Desc
	descSeconds       *prometheus.Desc
	descMinutes       *prometheus.Desc
	descGaps          *prometheus.Desc
	descDropped       *prometheus.Desc
	descOverflows     *prometheus.Desc
	descReopens       *prometheus.Desc
	descFlagged       *prometheus.Desc
	descHourSeconds   *prometheus.Desc
	descClock         *prometheus.Desc
	descStoreFile     *prometheus.Desc
	descStoreUsed     *prometheus.Desc
	descStoreMax      *prometheus.Desc
	descStoreRecords  *prometheus.Desc
	descMQTTConnected *prometheus.Desc
	descMQTTBacklog   *prometheus.Desc
	descMQTTLast      *prometheus.Desc
	descSensitivity   *prometheus.Desc
	descCalDeviation  *prometheus.Desc
	descCalTime       *prometheus.Desc
	descCalOK         *prometheus.Desc
	descSelfPass      *prometheus.Desc
	descSelfFailed    *prometheus.Desc
	descSelfTime      *prometheus.Desc
	descClipped       *prometheus.Desc
	descDiskFree      *prometheus.Desc
	descTemperature   *prometheus.Desc
	descHealthTime    *prometheus.Desc
}

func newMetricDescs() *metricDescs {
	return &metricDescs{
		descLevel: prometheus.NewDesc("leqnode_level_db",
			"Latest stored level in dB, by quantity (LAeq, LAFmax, LAF90, ...), record interval (1s, 1min), validity (counted, or why the record is left out of aggregates: calibrating, settling, excluded, suspect, no_data, digital_silence; no_valid_seconds for a minute without any) and bound (exact; lower when overloaded seconds are in it; upper when seconds under the measuring range are). Absent for digital silence.",
			[]string{"quantity", "interval", "validity", "bound"}, nil),
		descLevelTime: prometheus.NewDesc("leqnode_level_start_timestamp_seconds",
			"Start time of the record leqnode_level_db comes from, Unix seconds.", []string{"interval"}, nil),
		descInfo: prometheus.NewDesc("leqnode_node_info",
			"Constant 1, labelled with the node's identity.", []string{"node_id", "site", "version", "source"}, nil),
		descStart: prometheus.NewDesc("leqnode_start_time_seconds",
			"When the node started, Unix seconds.", nil, nil),
		descRate: prometheus.NewDesc("leqnode_sample_rate_hertz",
			"Sample rate of the audio source.", nil, nil),
		descSeconds: prometheus.NewDesc("leqnode_second_records_total",
			"Second records written since the node started.", nil, nil),
		descMinutes: prometheus.NewDesc("leqnode_minute_records_total",
			"Minute records written since the node started.", nil, nil),
		descGaps: prometheus.NewDesc("leqnode_gaps_total",
			"Gap records (periods without data) written since the node started.", nil, nil),
		descDropped: prometheus.NewDesc("leqnode_dropped_samples_total",
			"Audio samples lost to device or queue overflows since the node started.", nil, nil),
		descOverflows: prometheus.NewDesc("leqnode_queue_overflows_total",
			"Audio blocks lost because the processing queue was full, since the node started.", nil, nil),
		descReopens: prometheus.NewDesc("leqnode_source_reopens_total",
			"Times the audio source was re-opened after a failure, since the node started.", nil, nil),
		descFlagged: prometheus.NewDesc("leqnode_flagged_seconds_last_hour",
			"Second records of the last hour carrying each flag (clipped, overload, dropped, ...).", []string{"flag"}, nil),
		descHourSeconds: prometheus.NewDesc("leqnode_stored_seconds_last_hour",
			"Second records stored for the last hour (3600 when nothing is missing).", nil, nil),
		descClock: prometheus.NewDesc("leqnode_clock_synced",
			"1 when the system clock reports synchronisation, else 0.", nil, nil),
		descStoreFile: prometheus.NewDesc("leqnode_store_file_bytes",
			"Size of the store file.", nil, nil),
		descStoreUsed: prometheus.NewDesc("leqnode_store_used_bytes",
			"Bytes the store's data occupies (file high-water mark less free pages).", nil, nil),
		descStoreMax: prometheus.NewDesc("leqnode_store_max_bytes",
			"The store's size cap; above it the oldest records of the shortest-lived kinds go first.", nil, nil),
		descStoreRecords: prometheus.NewDesc("leqnode_store_records",
			"Records in the store, by kind.", []string{"kind"}, nil),
		descMQTTConnected: prometheus.NewDesc("leqnode_mqtt_connected",
			"1 when connected to the MQTT broker, else 0.", nil, nil),
		descMQTTBacklog: prometheus.NewDesc("leqnode_mqtt_backlog_records",
			"Stored records the MQTT broker has not acknowledged, by kind.", []string{"kind"}, nil),
		descMQTTLast: prometheus.NewDesc("leqnode_mqtt_last_publish_timestamp_seconds",
			"When the broker last acknowledged a message, Unix seconds.", nil, nil),
		descSensitivity: prometheus.NewDesc("leqnode_sensitivity_dbfs",
			"Microphone sensitivity in use: dBFS for 94 dB at 1 kHz.", nil, nil),
		descCalDeviation: prometheus.NewDesc("leqnode_calibration_deviation_db",
			"Measured minus stated calibrator level at the latest stored check, dB.", nil, nil),
		descCalTime: prometheus.NewDesc("leqnode_calibration_last_check_timestamp_seconds",
			"When the latest stored calibration check ended, Unix seconds.", nil, nil),
		descCalOK: prometheus.NewDesc("leqnode_calibration_last_check_ok",
			"1 when the latest stored calibration check passed, else 0.", nil, nil),
		descSelfPass: prometheus.NewDesc("leqnode_selfcheck_pass",
			"1 when the last self-verification of the digital chain passed, else 0.", nil, nil),
		descSelfFailed: prometheus.NewDesc("leqnode_selfcheck_failed_checks",
			"Checks that failed in the last self-verification.", nil, nil),
		descSelfTime: prometheus.NewDesc("leqnode_selfcheck_timestamp_seconds",
			"When the last self-verification ran, Unix seconds.", nil, nil),
		descClipped: prometheus.NewDesc("leqnode_health_clipped_samples",
			"Clipped samples counted by the latest health snapshot (since the snapshot before it).", nil, nil),
		descDiskFree: prometheus.NewDesc("leqnode_health_disk_free_bytes",
			"Free space on the store's file system at the latest health snapshot.", nil, nil),
		descTemperature: prometheus.NewDesc("leqnode_health_temperature_celsius",
			"Board temperature at the latest health snapshot.", nil, nil),
		descHealthTime: prometheus.NewDesc("leqnode_health_timestamp_seconds",
			"When the latest health snapshot was taken, Unix seconds.", nil, nil),
	}
}

// nodeCollector reads everything at scrape time: nothing is kept between scrapes.
type nodeCollector struct {
	s *Server
	d *metricDescs
}

func newNodeCollector(s *Server) *nodeCollector { return &nodeCollector{s: s, d: newMetricDescs()} }

func (c *nodeCollector) Describe(ch chan<- *prometheus.Desc) {
	d := c.d
	for _, desc := range []*prometheus.Desc{d.descLevel, d.descLevelTime, d.descInfo, d.descStart, d.descRate, d.descSeconds,
		d.descMinutes, d.descGaps, d.descDropped, d.descOverflows, d.descReopens, d.descFlagged, d.descHourSeconds, d.descClock,
		d.descStoreFile, d.descStoreUsed, d.descStoreMax, d.descStoreRecords, d.descMQTTConnected, d.descMQTTBacklog,
		d.descMQTTLast, d.descSensitivity, d.descCalDeviation, d.descCalTime, d.descCalOK, d.descSelfPass, d.descSelfFailed,
		d.descSelfTime, d.descClipped, d.descDiskFree, d.descTemperature, d.descHealthTime} {
		ch <- desc
	}
}

func unix(t time.Time) float64 { return float64(t.UnixNano()) / 1e9 }

func boolValue(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

func (c *nodeCollector) Collect(ch chan<- prometheus.Metric) {
	s, d := c.s, c.d
	gauge := func(d *prometheus.Desc, v float64, labels ...string) {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return
		}
		ch <- prometheus.MustNewConstMetric(d, prometheus.GaugeValue, v, labels...)
	}
	counter := func(d *prometheus.Desc, v int64) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.CounterValue, float64(v))
	}
	st := s.status()
	ch <- prometheus.MustNewConstMetric(d.descInfo, prometheus.GaugeValue, 1, st.NodeID, st.Site, st.Version, st.Source)
	if !st.Started.IsZero() {
		gauge(d.descStart, unix(st.Started))
	}
	if st.SampleRate > 0 {
		gauge(d.descRate, float64(st.SampleRate))
	}
	if n := st.Counters; n != nil {
		counter(d.descSeconds, n.Seconds)
		counter(d.descMinutes, n.Minutes)
		counter(d.descGaps, n.Gaps)
		counter(d.descDropped, n.DroppedSamples)
		counter(d.descOverflows, n.QueueOverflows)
		counter(d.descReopens, n.Reopens)
	}
	if st.ClockSynced != nil {
		gauge(d.descClock, boolValue(*st.ClockSynced))
	}
	if ss := st.Store; ss != nil {
		gauge(d.descStoreFile, float64(ss.FileBytes))
		gauge(d.descStoreUsed, float64(ss.UsedBytes))
		gauge(d.descStoreMax, float64(ss.MaxBytes))
		for _, k := range record.Kinds() {
			gauge(d.descStoreRecords, float64(ss.Records[k.String()]), k.String())
		}
	}
	if m := st.MQTT; m != nil {
		gauge(d.descMQTTConnected, boolValue(m.Connected))
		for _, k := range record.Kinds() {
			gauge(d.descMQTTBacklog, float64(m.PendingKind[k.String()]), k.String())
		}
		if !m.LastPublish.IsZero() {
			gauge(d.descMQTTLast, unix(m.LastPublish))
		}
	}
	if cal := st.Calibration; cal != nil {
		gauge(d.descSensitivity, cal.SensitivityDBFS)
	}
	if sc := st.SelfCheck; sc != nil {
		gauge(d.descSelfPass, boolValue(sc.Pass))
		gauge(d.descSelfFailed, float64(len(sc.Failed)))
		gauge(d.descSelfTime, unix(sc.At))
	}
	if s.o.Store == nil {
		return
	}
	// The latest second and minute, each level labelled with what the validity rule makes of
	// the record (package record): "counted" or the reason it is left out of every aggregate,
	// and which way it may be off, so that a calibrator tone never reads as a street level.
	for _, k := range []struct {
		kind     record.Kind
		interval string
	}{{record.KindSecond, "1s"}, {record.KindMinute, "1min"}} {
		r, err := s.o.Store.Last(k.kind)
		if err != nil || r == nil {
			continue
		}
		validity, bound := record.Counted.String(), record.Exact.String()
		switch v := r.(type) {
		case *record.Second:
			validity = record.Judge(v.Flags, v.LAeq).String()
			t := record.Tally{}
			t.Add(v.Flags, v.LAeq, 1)
			bound = t.Bound().String()
		case *record.Minute:
			if v.ValidSeconds == 0 {
				validity = "no_valid_seconds"
			}
			bound = v.Tally().Bound().String()
		}
		for _, f := range record.Fields(k.kind) {
			if f.Type == record.LevelField {
				gauge(d.descLevel, f.Value(r).(float64), f.Name, k.interval, validity, bound)
			}
		}
		gauge(d.descLevelTime, unix(r.Time()), k.interval)
	}
	if hour, err := s.summarizeHour(st.Now, time.Time{}); err == nil {
		gauge(d.descHourSeconds, float64(hour.Seconds))
		for name, n := range hour.Flagged {
			gauge(d.descFlagged, float64(n), name)
		}
	} else {
		s.log.Warn("metrics: reading the last hour", "err", err)
	}
	if r, err := s.o.Store.Last(record.KindCalibration); err == nil && r != nil {
		cal := r.(*record.Calibration)
		gauge(d.descCalDeviation, cal.Deviation)
		gauge(d.descCalTime, unix(cal.At))
		gauge(d.descCalOK, boolValue(cal.OK))
	}
	if h := s.lastHealth(); h != nil {
		gauge(d.descClipped, float64(h.Clipped))
		gauge(d.descDiskFree, h.DiskFreeMB*1e6)
		gauge(d.descTemperature, h.TemperatureC)
		gauge(d.descHealthTime, unix(h.At))
	}
}
