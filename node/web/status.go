package web

import (
	"encoding/json"
	"math"
	"strconv"
	"time"
)

// Live is the current A-weighted Fast level.
type Live struct {
	LAF float64   // dB; NaN when there is none (before the first block, digital silence)
	At  time.Time // when it was read
}

// Status is what the running node reports about itself. Every field is optional: a field the
// caller cannot fill stays zero (nil for the groups) and the page shows "not available". Where
// the caller leaves them zero, the server fills Store from the store's statistics, SampleRate,
// Version, TimeZone, Source and Calibration (the sensitivity in use) from the latest session
// record, and ClockSynced from the latest health snapshot.
type Status struct {
	NodeID     string    `json:"node_id,omitempty"`
	Site       string    `json:"site,omitempty"`
	Version    string    `json:"version,omitempty"`
	TimeZone   string    `json:"time_zone,omitempty"` // IANA name the page shows times in
	Started    time.Time `json:"started,omitzero"`    // when the node started
	Source     string    `json:"source,omitempty"`    // the audio source, as it describes itself
	SampleRate int       `json:"sample_rate_Hz,omitempty"`

	Counters    *Counters          `json:"counters,omitempty"`
	ClockSynced *bool              `json:"clock_synced,omitempty"`
	Store       *StoreStatus       `json:"store,omitempty"`
	MQTT        *MQTTStatus        `json:"mqtt,omitempty"`
	Calibration *CalibrationStatus `json:"calibration,omitempty"`
	SelfCheck   *SelfCheckStatus   `json:"self_check,omitempty"`

	// Filled by the server on each request.
	Now           time.Time `json:"now"`
	UptimeSeconds float64   `json:"uptime_s,omitempty"`
	TokenRequired bool      `json:"token_required"` // the page warns that plain HTTP exposes it
}

// Counters are a node's running totals since its start.
type Counters struct {
	Seconds        int64 `json:"seconds"`         // second records written
	Minutes        int64 `json:"minutes"`         // minute records written
	Gaps           int64 `json:"gaps"`            // gap records written
	DroppedSamples int64 `json:"dropped_samples"` // samples lost (device and queue overflows)
	QueueOverflows int64 `json:"queue_overflows"` // audio blocks lost to a full queue
	Reopens        int64 `json:"source_reopens"`  // times the source was re-opened after a failure
}

// StoreStatus describes the store file. The server fills it from Store.Stats.
type StoreStatus struct {
	Path         string            `json:"path,omitempty"`
	FileBytes    int64             `json:"file_bytes"`
	UsedBytes    int64             `json:"used_bytes"`
	MaxBytes     int64             `json:"max_bytes"`
	Held         int               `json:"held_records"` // appended, not yet committed
	Records      map[string]uint64 `json:"records"`      // per kind
	OldestSecond time.Time         `json:"oldest_second,omitzero"`
	Recovered    string            `json:"recovered,omitempty"` // a damaged file moved aside at start
}

// MQTTStatus is the publisher's state. Pending is the backlog: stored records the broker has
// not acknowledged.
type MQTTStatus struct {
	Connected   bool              `json:"connected"`
	Broker      string            `json:"broker,omitempty"` // URL without user information
	Since       time.Time         `json:"since,omitzero"`
	Pending     uint64            `json:"pending"`
	PendingKind map[string]uint64 `json:"pending_by_kind,omitempty"`
	LastPublish time.Time         `json:"last_publish,omitzero"`
	LastError   string            `json:"last_error,omitempty"`
}

// CalibrationStatus is the sensitivity in use and where it came from. The checks themselves
// are read from the store.
type CalibrationStatus struct {
	SensitivityDBFS float64   `json:"sensitivity_dBFS"`       // in use: dBFS for 94 dB at 1 kHz
	NominalDBFS     float64   `json:"nominal_dBFS,omitempty"` // the configured (data-sheet) value
	SetAt           time.Time `json:"set_at,omitzero"`        // when a check set it; zero: nominal
	Calibrating     bool      `json:"calibrating"`            // a calibrator is on the microphone now
	// DueDays is the interval between field checks the operator promised, in days (0: none).
	DueDays float64 `json:"due_days,omitempty"`
}

// SelfCheckStatus is the outcome of the last self-verification of the digital chain.
type SelfCheckStatus struct {
	At         time.Time `json:"at"`
	Pass       bool      `json:"pass"`
	Checks     int       `json:"checks"`
	Failed     []string  `json:"failed,omitempty"` // the tests that failed, by name
	SampleRate float64   `json:"sample_rate_Hz"`
	Error      string    `json:"error,omitempty"`
}

// level is a decibel value written with 0.01 dB resolution, and as null when it is NaN or
// infinite (JSON has no NaN).
type level float64

func (l level) MarshalJSON() ([]byte, error) {
	v := float64(l)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, math.Round(v*100)/100, 'f', -1, 64), nil
}

var _ json.Marshaler = level(0)
