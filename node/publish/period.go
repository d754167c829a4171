package publish

import (
	"encoding/json"
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// PublishPeriod hands the publisher the indicators of a closed period (a day, evening or night
// of the node's profile), already encoded as JSON, to send on PREFIX/NODE/live/period with QoS 1
// as soon as a broker is connected. Period messages are not part of the store's outbox: a period
// can always be computed again from the stored records (`leqnode report`), so while no broker is
// reachable at most periodQueue of them wait in memory. It returns false when that queue is full
// and the payload was dropped.
func (p *Publisher) PublishPeriod(payload []byte) bool {
	select {
	case p.periods <- payload:
		return true
	default:
		return false
	}
}

// periodQueue is how many period messages wait for a broker: three days of a day/evening/night
// profile.
const periodQueue = 9

// PeriodMessage is what a period message says: the node's profile, the period and its
// indicators (levels NaN when there are none; they are sent as null).
type PeriodMessage struct {
	Profile, Zone, Period string
	Day, From, To         time.Time
	Hours, Penalty        float64
	LAeq, LCeq            float64
	LAF10, LAF90, LAFmax  float64
	Events                int
	Limit                 float64 // NaN without a zone limit
	Exceeds               bool
	Coverage              float64 // share of valid data, 0 to 1
	CoverageLow           bool
	// Seconds says what the validity rule made of the period's seconds: counted, left out by
	// reason, overloaded and under range; the payload carries them with the names of the
	// minute records and the bound they imply.
	Seconds record.Tally
}

// PeriodPayload encodes a period message as the JSON of configs/schema/period.schema.json.
func (p *Publisher) PeriodPayload(m PeriodMessage) []byte {
	level := func(v float64) *float64 {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil
		}
		r := math.Round(v*100) / 100
		return &r
	}
	type payload struct {
		SchemaVersion int      `json:"schema_version"`
		Kind          string   `json:"kind"`
		Node          string   `json:"node"`
		Store         string   `json:"store"`
		Profile       string   `json:"profile"`
		Zone          string   `json:"zone,omitempty"`
		Period        string   `json:"period"`
		Day           string   `json:"day"`
		Start         string   `json:"start"`
		StartMs       int64    `json:"start_ms"`
		End           string   `json:"end"`
		EndMs         int64    `json:"end_ms"`
		Hours         float64  `json:"hours"`
		Penalty       float64  `json:"penalty_dB"`
		LAeq          *float64 `json:"LAeq"`
		LCeq          *float64 `json:"LCeq"`
		LAF10         *float64 `json:"LAF10"`
		LAF90         *float64 `json:"LAF90"`
		LAFmax        *float64 `json:"LAFmax"`
		Events        int      `json:"events"`
		Limit         *float64 `json:"limit_dB,omitempty"`
		Exceeds       *bool    `json:"exceeds,omitempty"`
		Coverage      float64  `json:"coverage"`
		CoverageLow   bool     `json:"coverage_low"`
		Bound         string   `json:"bound"`
		ValidSeconds  int64    `json:"valid_seconds"`
		Overload      int64    `json:"overload_seconds"`
		UnderRange    int64    `json:"under_range_seconds"`
		Calibrating   int64    `json:"calibrating_seconds"`
		Settling      int64    `json:"settling_seconds"`
		Excluded      int64    `json:"excluded_seconds"`
		Suspect       int64    `json:"suspect_seconds"`
		NoData        int64    `json:"no_data_seconds"`
		Silence       int64    `json:"digital_silence_seconds"`
	}
	stamp := func(t time.Time) string { return t.UTC().Format("2006-01-02T15:04:05.000Z") }
	pl := payload{
		SchemaVersion: SchemaVersion, Kind: "period", Node: p.id.NodeID, Store: p.store.ID(),
		Profile: m.Profile, Zone: m.Zone, Period: m.Period, Day: m.Day.Format("2006-01-02"),
		Start: stamp(m.From), StartMs: m.From.UnixMilli(), End: stamp(m.To), EndMs: m.To.UnixMilli(),
		Hours: math.Round(m.Hours*1000) / 1000, Penalty: m.Penalty,
		LAeq: level(m.LAeq), LCeq: level(m.LCeq), LAF10: level(m.LAF10), LAF90: level(m.LAF90), LAFmax: level(m.LAFmax),
		Events: m.Events, Coverage: math.Round(m.Coverage*10000) / 10000, CoverageLow: m.CoverageLow,
		Bound: m.Seconds.Bound().String(),
	}
	secs := func(v float64) int64 { return int64(math.Round(v)) }
	t := m.Seconds
	pl.ValidSeconds, pl.Overload, pl.UnderRange = secs(t.Counted), secs(t.Overload), secs(t.UnderRange)
	pl.Calibrating, pl.Settling, pl.Excluded = secs(t.LeftOut[record.ReasonCalibrating]), secs(t.LeftOut[record.ReasonSettling]), secs(t.LeftOut[record.ReasonExcluded])
	pl.Suspect, pl.NoData, pl.Silence = secs(t.LeftOut[record.ReasonSuspect]), secs(t.LeftOut[record.ReasonNoData]), secs(t.LeftOut[record.ReasonSilence])
	if l := level(m.Limit); l != nil {
		pl.Limit, pl.Exceeds = l, &m.Exceeds
	}
	b, _ := json.Marshal(pl)
	return b
}
