package node

import (
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// Status is a snapshot of a running node, for the control socket and the status page. Levels
// that do not exist (NaN) are nil, so that the snapshot always encodes as JSON.
type Status struct {
	Source         string         `json:"source"`
	SampleRate     int            `json:"sample_rate"`
	Started        time.Time      `json:"started"`
	Seconds        int64          `json:"seconds"`
	Minutes        int64          `json:"minutes"`
	Gaps           int64          `json:"gaps"`
	DroppedSamples int64          `json:"dropped_samples"`
	QueueOverflows int64          `json:"queue_overflows"`
	Reopens        int64          `json:"reopens"`
	LAF            *float64       `json:"LAF"`
	Health         map[string]any `json:"health,omitempty"`
}

// Status returns the node's current status.
func (n *Node) Status() Status {
	c := &n.Counters
	s := Status{
		Source:         n.o.Source.Describe(),
		SampleRate:     int(n.sampleRate.Load()),
		Started:        n.started,
		Seconds:        c.Seconds.Load(),
		Minutes:        c.Minutes.Load(),
		Gaps:           c.Gaps.Load(),
		DroppedSamples: c.DroppedSamples.Load(),
		QueueOverflows: c.QueueOverflows.Load(),
		Reopens:        c.Reopens.Load(),
		LAF:            finite(c.Level()),
	}
	if h := n.Health(); h != nil {
		s.Health = HealthJSON(h)
	}
	return s
}

// HealthJSON returns a health snapshot as a JSON-ready map: its fields as the record model
// names them (record.Fields, NaN readings as null) and "at", the time it was taken.
func HealthJSON(h *record.Health) map[string]any {
	m := record.FieldMap(h)
	m["at"] = h.At
	return m
}

func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// Sensitivity returns the microphone sensitivity in use (dBFS for 94 dB SPL at 1 kHz).
func (n *Node) Sensitivity() float64 { return math.Float64frombits(n.sensitivity.Load()) }
