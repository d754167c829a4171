// Package config is the node's configuration: one TOML file, decoded strictly (an unknown key
// is an error naming the key and its line), with a version number so that later releases can
// tell an old file and say what to change. Every section validates itself and reports one line
// per problem: the key, the value and the allowed range.
//
// The sections are the node's identity, the microphone, the audio source (package capture's
// Config), the measurement, and the store. Defaults fill every key a file leaves out; Default
// returns the embedded defaults the demo runs on.
package config

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"net"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/pelletier/go-toml/v2"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/lib/strict"
	"github.com/leqnode/leqnode/node/publish"
)

// Version is the configuration format this release reads and writes.
const Version = 1

// Config is the whole configuration of a node.
type Config struct {
	// Version of the file's format; must be Version.
	Version     int            `toml:"version"`
	Node        Node           `toml:"node"`
	Microphone  Microphone     `toml:"microphone"`
	Capture     capture.Config `toml:"capture"`
	Measure     Measure        `toml:"measure"`
	Store       Store          `toml:"store"`
	Control     Control        `toml:"control"`
	Events      Events         `toml:"events"`
	Web         Web            `toml:"web"`
	Calibration Calibration    `toml:"calibration"`
	Indicators  Indicators     `toml:"indicators"`
	// Publish sets up MQTT publishing; with no brokers listed the node publishes nothing.
	Publish publish.Config `toml:"publish"`
}

// Control sets up the daemon's control socket, through which local commands read the store
// the daemon holds and ask for status and calibration checks.
type Control struct {
	// Socket is the path of the Unix socket. Empty means $RUNTIME_DIRECTORY/control.sock when
	// systemd provides a runtime directory, else no socket. "none" turns it off.
	Socket string `toml:"socket"`
	// Group names the group whose members may use the socket (besides root and the daemon's
	// user). Empty means the daemon's own group.
	Group string `toml:"group"`
}

// Node identifies the node.
type Node struct {
	// ID names the node in records, MQTT topics and logs: letters, digits, '-' and '_'.
	ID string `toml:"id"`
	// Site is a free-text name of the measurement site.
	Site string `toml:"site"`
	// Latitude and Longitude place the node; LocationDecimals rounds them before they leave
	// the node (2 decimals is about 1 km). A node at a private home should publish coarsely.
	Latitude         float64 `toml:"latitude"`
	Longitude        float64 `toml:"longitude"`
	LocationDecimals int     `toml:"location_decimals"`
	// TimeZone is the IANA zone in which days, periods and dates are counted.
	TimeZone string `toml:"time_zone"`
}

// Microphone describes the microphone and its converter.
type Microphone struct {
	// SensitivityDBFS is the level in dBFS (AES17) that a 1 kHz sine of 94 dB SPL produces.
	// It decides every level the node reports: calibrate it against a sound calibrator.
	SensitivityDBFS float64 `toml:"sensitivity_dbfs"`
	// SelfNoiseDBA is the microphone's self-noise, dB(A); levels within UnderRangeMarginDB of
	// it are flagged under-range. 0 disables the flag.
	SelfNoiseDBA float64 `toml:"self_noise_dba"`
	// UnderRangeMarginDB is added to the self-noise to set the under-range limit (default 5).
	UnderRangeMarginDB float64 `toml:"under_range_margin_db"`
	// Correction is an optional measured response of the microphone (and windscreen): pairs
	// [frequency Hz, correction dB] added to the levels, fitted as a filter at start (method and
	// residual error: dsp.FitCorrection; a fit off by more than 0.15 dB is refused). Empty means
	// none. Danger: a correction that is not 0 dB at 1 kHz moves the calibrator reading too.
	Correction [][2]float64 `toml:"correction"`
	// OverloadDB is the acoustic overload point, dB SPL (peak); LZpeak at or above it flags
	// overload. 0 disables the check (clipped samples still flag it).
	OverloadDB float64 `toml:"overload_db"`
}

// Measure sets up the measurement.
type Measure struct {
	// Bands is "third" (one-third-octave spectra), "octave" or "none".
	Bands string `toml:"bands"`
	// SecondSpectra stores a spectrum with every second record. Trade-off: about three times
	// the store size and write volume; minute records always carry the minute's spectrum.
	SecondSpectra bool `toml:"second_spectra"`
	// SettlingSeconds flags the first seconds after each start as settling (default 5).
	SettlingSeconds float64 `toml:"settling_s"`
	// Timestamps says where the records' times come from: "clock" (the system clock, for live
	// sources) or "samples" (the sample count from the moment the source opened, for
	// recordings replayed faster than real time, e.g. a file piped to stdin). Empty means
	// "clock", except "samples" for file and synthetic sources that are not paced in real
	// time.
	Timestamps string `toml:"timestamps"`
}

// Events sets up the detection of noise events: a threshold on LAF (or LAS) with hysteresis,
// a hold time and a duration window; each event is stored with LAFmax, LAeq, LAE (SEL), LCpeak
// and its one-third-octave spectrum.
type Events struct {
	// Enabled turns event detection on (default true).
	Enabled bool `toml:"enabled"`
	// ThresholdDB is the level at which an event starts (default 70 dB). Set it some 10 dB
	// above the site's usual background: too low turns the background into one endless event.
	ThresholdDB float64 `toml:"threshold_db"`
	// HysteresisDB lowers the level at which an event ends (default 3 dB).
	HysteresisDB float64 `toml:"hysteresis_db"`
	// HoldS bridges dips shorter than this many seconds (default 1).
	HoldS float64 `toml:"hold_s"`
	// MinDurationS drops shorter events (default 1 s); MaxDurationS closes longer ones
	// (default 300 s), marked truncated.
	MinDurationS float64 `toml:"min_duration_s"`
	MaxDurationS float64 `toml:"max_duration_s"`
	// Slow detects on LAS instead of LAF.
	Slow bool `toml:"slow"`
	// Spectrum stores each event's one-third-octave spectrum (default true). Trade-off: it runs
	// a second band filter bank, about doubling the node's processing cost.
	Spectrum bool `toml:"spectrum"`
}

// Calibration sets up the detection of sound calibrators while the node runs and the
// adjustment of the sensitivity on request (`leqnode calibrate` without a file).
type Calibration struct {
	// Detect turns the detection on (default true): every stable 1 kHz calibrator tone is
	// stored as a check and its seconds are left out of statistics.
	Detect bool `toml:"detect"`
	// References are the stated levels of the calibrators used (default [94, 114]).
	References []float64 `toml:"references"`
	// Class is the calibrators' IEC 60942 class: "LS", "1" or "2" (default "1").
	Class string `toml:"class"`
	// AdjustRangeDB is the largest adjustment from the data-sheet sensitivity (default 3 dB);
	// beyond it the node refuses and raises the microphone-fault health flag. Danger: a wider
	// range lets a failing microphone be calibrated back into apparent health.
	AdjustRangeDB float64 `toml:"adjust_range_db"`
	// StateDir keeps the applied sensitivity across restarts. Empty means systemd's
	// $STATE_DIRECTORY, else the store's directory.
	StateDir string `toml:"state_dir"`
}

// Indicators sets up the period indicators the node publishes over MQTT when a period of
// its profile closes (each day, evening and night of eu-lden, say).
type Indicators struct {
	// Profile names a built-in profile (eu-lden, ldn, india-2000) or a profile file; empty
	// publishes no period indicators.
	Profile string `toml:"profile"`
	// Zone names the profile's zone whose limits apply (e.g. "residential"); empty: none.
	Zone string `toml:"zone"`
}

// Web sets up the status page and the Prometheus metrics endpoint.
type Web struct {
	// Enabled serves the page (default false).
	Enabled bool `toml:"enabled"`
	// Addr is host:port to listen on (default "127.0.0.1:8080"). Danger: any host other than
	// a loopback address serves the page to the whole network; set a token and use an SSH
	// tunnel or a TLS proxy, since the page speaks plain HTTP.
	Addr string `toml:"addr"`
	// TokenFile names a file holding an access token (trailing newline removed); empty means
	// no token. Over plain HTTP the token is readable by anyone on the network path.
	TokenFile string `toml:"token_file"`
}

// Store sets up the bbolt store.
type Store struct {
	// Path of the store file. Default: the systemd state directory's leqnode.db.
	Path string `toml:"path"`
	// CommitInterval is the group-commit period (Go duration; default
	// buffer.DefaultCommitInterval, the one place the default is stated). Trade-off: longer
	// writes less to flash (measured in package buffer); a power cut loses up to one interval,
	// and MQTT consumers see live records only once they are committed.
	CommitInterval string `toml:"commit_interval"`
	// MaxMB caps the store's size in megabytes (0: the store's default cap,
	// buffer.DefaultMaxBytes: 1024 on 64-bit systems, 512 on 32-bit ones).
	MaxMB int64 `toml:"max_mb"`
}

// Default returns the embedded defaults: the synthetic scene, one-third-octave bands, a store
// in the working directory, and every section's defaults filled in (see WithDefaults).
func Default() *Config {
	c := &Config{
		Version: Version,
		Node:    Node{ID: "wendle-cross-01", Site: "Harrowby Lane, Wendle Cross (invented)", LocationDecimals: 2, TimeZone: "UTC"},
		Microphone: Microphone{
			SensitivityDBFS: -26, SelfNoiseDBA: 29, UnderRangeMarginDB: 5, OverloadDB: 120,
		},
		Capture:     capture.Config{Kind: "synthetic", SampleRate: 48000, Channels: 1, Channel: 1, Realtime: true, Seed: 1},
		Measure:     Measure{Bands: "third", SettlingSeconds: 5},
		Store:       Store{Path: "leqnode.db", CommitInterval: fmt.Sprintf("%gs", buffer.DefaultCommitInterval.Seconds())},
		Web:         Web{Addr: "127.0.0.1:8080"},
		Calibration: Calibration{Detect: true, References: []float64{94, 114}, Class: "1", AdjustRangeDB: 3},
		Events: Events{Enabled: true, ThresholdDB: 70, HysteresisDB: 3, HoldS: 1, MinDurationS: 1,
			MaxDurationS: 300, Spectrum: true},
	}
	c.WithDefaults()
	return c
}

// WithDefaults fills the defaults that depend on other keys, on the machine or on another
// package's section: the audio source's (capture.Config.WithDefaults, by kind), MQTT
// publishing's (publish.Config.WithDefaults; the client id follows node.id) and the store's
// size cap (buffer.DefaultMaxBytes, which depends on the word size). Parse calls it after
// decoding, and also settles measure.timestamps for the file's source (see SampleTimed), so
// `config check` prints the values the daemon runs with. (Default leaves measure.timestamps
// empty: the demo changes its source's pacing afterwards.)
func (c *Config) WithDefaults() {
	c.Capture = c.Capture.WithDefaults()
	c.Publish = c.Publish.WithDefaults(c.Node.ID)
	if c.Store.MaxMB == 0 {
		c.Store.MaxMB = buffer.DefaultMaxBytes >> 20
	}
}

// Parse decodes a configuration file strictly over the defaults (package strict: exact key
// names, no unknown keys, plain-word type errors) and validates it. name is used in errors.
// The error lists every problem, one line each: those of the file's form first, then those
// of its values.
func Parse(data []byte, name string) (*Config, error) {
	c := Default()
	c.Version = 0
	c.Publish = publish.Config{}
	var lines []string
	reported := map[string]bool{}
	if err := strict.TOML(data, c); err != nil {
		lines, reported = strict.FileLines(err, name, "configs/leqnode.toml")
	}
	c.WithDefaults()
	if c.Measure.Timestamps == "" {
		ts := "clock"
		if c.SampleTimed() {
			ts = "samples"
		}
		c.Measure.Timestamps = ts
	}
	lines = append(lines, required(data, name)...)
	for _, e := range c.Validate() {
		key, _, _ := strings.Cut(e.Error(), " = ")
		if !reported[key] {
			lines = append(lines, name+": "+e.Error())
		}
	}
	if len(lines) > 0 {
		return nil, errors.New(strings.Join(lines, "\n"))
	}
	return c, nil
}

// required reports the keys a node's configuration must give itself: its id and its audio
// source. Without them a configuration would measure the invented demo scene under the demo's
// id, storing and publishing plausible levels; leqnode demo uses its embedded defaults instead.
func required(data []byte, name string) []string {
	var tree map[string]any
	if toml.Unmarshal(data, &tree) != nil {
		return nil // the syntax error is reported already
	}
	given := func(table, key string) bool {
		t, ok := tree[table].(map[string]any)
		if !ok {
			return false
		}
		_, ok = t[key]
		return ok
	}
	var lines []string
	if !given("node", "id") {
		lines = append(lines, name+`: node.id is not set: give this node an id of its own, e.g. id = "harrowby-lane-2" under [node] (the demo's invented id belongs to leqnode demo)`)
	}
	if !given("capture", "kind") {
		lines = append(lines, name+`: capture.kind is not set: name the audio source under [capture]: "portaudio", "arecord", "stdin", "file", or "synthetic" for the invented demo scene (its records are flagged synthetic)`)
	}
	return lines
}

// Warnings returns advice about a valid configuration that is allowed but risky, one line
// each: the status page served beyond this machine without an access token.
func (c *Config) Warnings() []string {
	var w []string
	if c.Web.Enabled && c.Web.TokenFile == "" && !loopback(c.Web.Addr) {
		w = append(w, fmt.Sprintf("web.addr = %q serves the status page and metrics to the network without a token: set web.token_file, or listen on 127.0.0.1 and reach it through an SSH tunnel", c.Web.Addr))
	}
	return w
}

// loopback reports whether the host of addr (host:port) is a loopback name or address; an
// empty host means every interface.
func loopback(addr string) bool {
	host, _, err := net.SplitHostPort(addr)
	if err != nil || host == "" {
		return false
	}
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// Load reads and parses a configuration file.
func Load(path string) (*Config, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("config %s: %w", path, err)
	}
	return Parse(data, path)
}

// Validate returns one error per problem, each naming the key, its value and what is allowed.
func (c *Config) Validate() []error {
	var errs []error
	bad := func(key string, v any, want string) {
		errs = append(errs, fmt.Errorf("%s = %v: %s", key, v, want))
	}
	switch {
	case c.Version == 0:
		bad("version", "(missing)", fmt.Sprintf("add `version = %d` at the top of the file", Version))
	case c.Version > Version:
		bad("version", c.Version, fmt.Sprintf("this release reads version %d; upgrade leqnode", Version))
	case c.Version < Version:
		bad("version", c.Version, fmt.Sprintf("an old format: run `leqnode config check` and update the file to version %d", Version))
	}
	if !validID(c.Node.ID) {
		bad("node.id", fmt.Sprintf("%q", c.Node.ID), "use 1 to 64 letters, digits, '-' or '_'")
	}
	if c.Node.Latitude < -90 || c.Node.Latitude > 90 {
		bad("node.latitude", c.Node.Latitude, "allowed -90 to 90")
	}
	if c.Node.Longitude < -180 || c.Node.Longitude > 180 {
		bad("node.longitude", c.Node.Longitude, "allowed -180 to 180")
	}
	if c.Node.LocationDecimals < 0 || c.Node.LocationDecimals > 5 {
		bad("node.location_decimals", c.Node.LocationDecimals, "allowed 0 to 5")
	}
	if _, err := time.LoadLocation(c.Node.TimeZone); err != nil || c.Node.TimeZone == "" {
		bad("node.time_zone", fmt.Sprintf("%q", c.Node.TimeZone), "use an IANA zone name such as \"UTC\" or \"Europe/Madrid\"")
	}
	m := c.Microphone
	if !(m.SensitivityDBFS >= -80 && m.SensitivityDBFS <= 0) {
		bad("microphone.sensitivity_dbfs", m.SensitivityDBFS, "allowed -80 to 0 (dBFS for 94 dB SPL at 1 kHz; typical -26)")
	}
	if m.SelfNoiseDBA < 0 || m.SelfNoiseDBA > 80 || math.IsNaN(m.SelfNoiseDBA) {
		bad("microphone.self_noise_dba", m.SelfNoiseDBA, "allowed 0 (off) to 80")
	}
	if m.UnderRangeMarginDB < 0 || m.UnderRangeMarginDB > 20 {
		bad("microphone.under_range_margin_db", m.UnderRangeMarginDB, "allowed 0 to 20")
	}
	if m.OverloadDB != 0 && (m.OverloadDB < 90 || m.OverloadDB > 160) {
		bad("microphone.overload_db", m.OverloadDB, "allowed 0 (off) or 90 to 160")
	}
	for _, e := range c.Capture.Validate() {
		errs = append(errs, fmt.Errorf("capture.%w", e))
	}
	switch c.Measure.Bands {
	case "third", "octave", "none":
	default:
		bad("measure.bands", fmt.Sprintf("%q", c.Measure.Bands), `use "third", "octave" or "none"`)
	}
	switch c.Measure.Timestamps {
	case "", "clock", "samples":
	default:
		bad("measure.timestamps", fmt.Sprintf("%q", c.Measure.Timestamps), `use "clock" or "samples"`)
	}
	if c.Measure.SettlingSeconds < 0 || c.Measure.SettlingSeconds > 600 {
		bad("measure.settling_s", c.Measure.SettlingSeconds, "allowed 0 to 600")
	}
	if e := c.Events; e.Enabled {
		if e.ThresholdDB < 20 || e.ThresholdDB > 140 {
			bad("events.threshold_db", e.ThresholdDB, "allowed 20 to 140 dB")
		}
		if e.HysteresisDB < 0 || e.HysteresisDB > 20 {
			bad("events.hysteresis_db", e.HysteresisDB, "allowed 0 to 20 dB")
		}
		if e.HoldS < 0 || e.HoldS > 60 {
			bad("events.hold_s", e.HoldS, "allowed 0 to 60 s")
		}
		if e.MinDurationS < 0 || e.MinDurationS > 3600 {
			bad("events.min_duration_s", e.MinDurationS, "allowed 0 to 3600 s")
		}
		if e.MaxDurationS <= e.MinDurationS || e.MaxDurationS > 86400 {
			bad("events.max_duration_s", e.MaxDurationS, "allowed above min_duration_s, up to 86400 s")
		}
	}
	if cal := c.Calibration; cal.Detect {
		if len(cal.References) == 0 {
			bad("calibration.references", "[]", "give the calibrators' levels, e.g. [94.0, 114.0]")
		}
		for _, r := range cal.References {
			if r < 70 || r > 140 {
				bad("calibration.references", r, "allowed 70 to 140 dB")
			}
		}
		switch cal.Class {
		case "LS", "1", "2":
		default:
			bad("calibration.class", fmt.Sprintf("%q", cal.Class), `use "LS", "1" or "2" (IEC 60942)`)
		}
		if cal.AdjustRangeDB <= 0 || cal.AdjustRangeDB > 10 {
			bad("calibration.adjust_range_db", cal.AdjustRangeDB, "allowed above 0, up to 10 dB")
		}
	}
	for i, pt := range c.Microphone.Correction {
		if !(pt[0] >= 10 && pt[0] <= 24000) || math.Abs(pt[1]) > 20 {
			bad(fmt.Sprintf("microphone.correction[%d]", i), fmt.Sprintf("[%g, %g]", pt[0], pt[1]), "give [frequency 10 to 24000 Hz, correction within ±20 dB]")
		}
	}
	if c.Indicators.Profile != "" {
		if prof, err := profiles.Load(c.Indicators.Profile); err != nil {
			bad("indicators.profile", fmt.Sprintf("%q", c.Indicators.Profile), fmt.Sprintf("use a built-in profile (%s) or a profile file: %v", strings.Join(profiles.Names(), ", "), err))
		} else if c.Indicators.Zone != "" {
			if _, err := prof.Zone(c.Indicators.Zone); err != nil {
				bad("indicators.zone", fmt.Sprintf("%q", c.Indicators.Zone), err.Error())
			}
		}
	}
	if c.Web.Enabled {
		if _, _, err := net.SplitHostPort(c.Web.Addr); err != nil {
			bad("web.addr", fmt.Sprintf("%q", c.Web.Addr), `write host:port, such as "127.0.0.1:8080"`)
		}
	}
	if c.Store.Path == "" {
		bad("store.path", `""`, "give the store file's path")
	}
	if d, err := time.ParseDuration(c.Store.CommitInterval); err != nil || d < time.Second || d > time.Minute {
		bad("store.commit_interval", fmt.Sprintf("%q", c.Store.CommitInterval), `allowed "1s" to "60s" (the worst-case loss on a power cut)`)
	}
	if c.Control.Socket != "" && c.Control.Socket != "none" && !strings.HasPrefix(c.Control.Socket, "/") {
		bad("control.socket", fmt.Sprintf("%q", c.Control.Socket), `give an absolute path, "none", or leave it empty`)
	}
	if len(c.Publish.Brokers) > 0 {
		errs = append(errs, c.Publish.Validate()...) // each names its publish.* key
	}
	if c.Store.MaxMB < 0 || c.Store.MaxMB > 1<<20 {
		bad("store.max_mb", c.Store.MaxMB, "allowed 0 (default) to 1048576")
	}
	return errs
}

func validID(s string) bool {
	if len(s) == 0 || len(s) > 64 {
		return false
	}
	for _, r := range s {
		if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '_') {
			return false
		}
	}
	return true
}

// SampleTimed reports whether record times come from the sample count (see Measure.Timestamps).
func (c *Config) SampleTimed() bool {
	switch c.Measure.Timestamps {
	case "samples":
		return true
	case "clock":
		return false
	}
	return (c.Capture.Kind == capture.KindFile || c.Capture.Kind == capture.KindSynthetic) && !c.Capture.Realtime
}

// Location returns the node's position rounded to LocationDecimals, or nil when none is set.
func (c *Config) Location() (lat, lon float64, ok bool) {
	if c.Node.Latitude == 0 && c.Node.Longitude == 0 {
		return 0, 0, false
	}
	p := math.Pow(10, float64(c.Node.LocationDecimals))
	return math.Round(c.Node.Latitude*p) / p, math.Round(c.Node.Longitude*p) / p, true
}

// StateDir returns the directory where the node keeps its applied sensitivity.
func (c *Config) StateDir() string {
	if c.Calibration.StateDir != "" {
		return c.Calibration.StateDir
	}
	if d := os.Getenv("STATE_DIRECTORY"); d != "" {
		return strings.Split(d, ":")[0]
	}
	return filepath.Dir(c.Store.Path)
}

// ControlSocket returns the control socket's path, or "" for none.
func (c *Config) ControlSocket() string {
	switch c.Control.Socket {
	case "none":
		return ""
	case "":
		if d := os.Getenv("RUNTIME_DIRECTORY"); d != "" {
			return strings.Split(d, ":")[0] + "/control.sock"
		}
		return ""
	}
	return c.Control.Socket
}

// CommitInterval returns the parsed commit interval.
func (c *Config) CommitInterval() time.Duration {
	d, _ := time.ParseDuration(c.Store.CommitInterval)
	return d
}

// Hash returns a short hash of the settings, stored in session records so that a change of
// settings is visible in the data.
func (c *Config) Hash() string {
	b, _ := toml.Marshal(c)
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:8])
}

// Encode returns the configuration as TOML (the resolved configuration that `config check`
// prints).
func (c *Config) Encode() ([]byte, error) { return toml.Marshal(c) }
