package collect

import (
	"encoding/json"
	"net/http"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

// metrics are the collector's counters, in its own registry (no global state).
type metrics struct {
	reg         *prometheus.Registry
	messages    *prometheus.CounterVec // by class: data, status, reply, quarantined
	records     *prometheus.CounterVec // by result: inserted, duplicate
	quarantined *prometheus.CounterVec // by reason
	dbErrors    prometheus.Counter
	batches     prometheus.Counter
	resends     prometheus.Counter
	liveDelay   prometheus.Histogram
	batchSize   prometheus.Histogram
}

func newMetrics() *metrics {
	m := &metrics{
		reg: prometheus.NewRegistry(),
		messages: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "leqnode_collect_messages_total",
			Help: "MQTT messages taken in, by class (data, status, reply, quarantined)."}, []string{"class"}),
		records: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "leqnode_collect_records_total",
			Help: "Records written: inserted (new) or duplicate (already in the database)."}, []string{"result"}),
		quarantined: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "leqnode_collect_quarantined_total",
			Help: "Payloads put in quarantine, by reason."}, []string{"reason"}),
		dbErrors: prometheus.NewCounter(prometheus.CounterOpts{Name: "leqnode_collect_database_errors_total",
			Help: "Failed database transactions (each is retried; nothing is acknowledged before a commit)."}),
		batches: prometheus.NewCounter(prometheus.CounterOpts{Name: "leqnode_collect_batches_total",
			Help: "Committed transactions."}),
		resends: prometheus.NewCounter(prometheus.CounterOpts{Name: "leqnode_collect_resend_requests_total",
			Help: "Resend commands sent to nodes for holes."}),
		liveDelay: prometheus.NewHistogram(prometheus.HistogramOpts{Name: "leqnode_collect_live_delay_seconds",
			Help:    "From the end of a live second record to its commit in the database.",
			Buckets: []float64{0.25, 0.5, 1, 1.5, 2, 3, 5, 10, 30, 60, 120}}),
		batchSize: prometheus.NewHistogram(prometheus.HistogramOpts{Name: "leqnode_collect_batch_records",
			Help: "Records per committed transaction.", Buckets: prometheus.ExponentialBuckets(1, 4, 9)}),
	}
	m.reg.MustRegister(m.messages, m.records, m.quarantined, m.dbErrors, m.batches, m.resends, m.liveDelay, m.batchSize)
	for _, r := range []string{ReasonTooLarge, ReasonNotJSON, ReasonSchemaVersion, ReasonSchema, ReasonTopic, ReasonContent, ReasonDatabase} {
		m.quarantined.WithLabelValues(r)
	}
	return m
}

// Counts returns every counter's value by name and label ("leqnode_collect_quarantined_total
// {reason=schema}" becomes "quarantined_total/schema").
func (m *metrics) Counts() map[string]float64 {
	out := map[string]float64{}
	fams, err := m.reg.Gather()
	if err != nil {
		return out
	}
	for _, f := range fams {
		name := f.GetName()[len("leqnode_collect_"):]
		for _, mt := range f.GetMetric() {
			key := name
			for _, l := range mt.GetLabel() {
				key += "/" + l.GetValue()
			}
			switch {
			case mt.Counter != nil:
				out[key] = mt.Counter.GetValue()
			case mt.Histogram != nil:
				out[key+"/count"] = float64(mt.Histogram.GetSampleCount())
			}
		}
	}
	return out
}

// handler serves /metrics (Prometheus text) and /status (the counters as JSON).
func (m *metrics) handler() http.Handler {
	mux := http.NewServeMux()
	mux.Handle("GET /metrics", promhttp.HandlerFor(m.reg, promhttp.HandlerOpts{}))
	mux.HandleFunc("GET /status", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		_ = json.NewEncoder(w).Encode(m.Counts())
	})
	return mux
}
