package publish

import (
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"net/url"
	"os"
	"regexp"
	"slices"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// Defaults for Config. A zero field of Config means its default.
const (
	DefaultTopicPrefix       = "leqnode"
	DefaultKeepAlive         = 30 * time.Second
	DefaultConnectTimeout    = 10 * time.Second
	DefaultReconnectMaxDelay = 2 * time.Minute
	DefaultSecondsPerMessage = 10
	DefaultLiveWait          = 1500 * time.Millisecond
	DefaultMaxInFlight       = 32
	DefaultBacklogRate       = 250 // messages per second: a 24-hour backlog in about 40 s
	DefaultStatusInterval    = time.Minute
	DefaultStream            = "mqtt"
	DefaultMaxCommandBytes   = 1024
	DefaultMaxResendRange    = 7 * 24 * time.Hour

	// reconnectBaseDelay is the first reconnect delay; it doubles per failed attempt up to
	// Config.ReconnectMaxDelay.
	reconnectBaseDelay = 500 * time.Millisecond
)

// Spectra modes: which records carry one-third-octave spectra.
const (
	SpectraSecond = "second" // second batches, minutes and events carry spectra
	SpectraMinute = "minute" // minutes and events carry spectra (the default)
	SpectraNone   = "none"   // no spectra at all
)

// Command actions a node may accept (Config.Commands.Allow).
const (
	ActionCalibrationCheck = "calibration_check" // ask the node to run a calibrator check
	ActionPublishStatus    = "publish_status"    // publish the status message now
	ActionResend           = "resend"            // publish the stored records of a time range again
)

// Config is the [publish] section of the node's TOML configuration. The zero value of every
// field means its default; Validate reports every problem at once.
type Config struct {
	// Brokers lists broker URLs tried in turn: tcp://host:1883, ssl://host:8883 (also
	// mqtts:// and tls://), ws:// or wss://. Credentials never go in a URL: use Username and
	// the password keys.
	Brokers []string `toml:"brokers"`

	// ClientID is the MQTT client identifier (default "leqnode-" + node id). Two clients with
	// one id throw each other off the broker in turn.
	ClientID string `toml:"client_id"`

	// KeepAlive is the MQTT keep-alive period (default 30 s, 5 s to 20 min). A shorter period
	// notices a dead link sooner and costs a ping (4 bytes each way) per period on a metered link.
	KeepAlive Duration `toml:"keep_alive"`

	// ConnectTimeout bounds one connection attempt (default 10 s, 1 s to 5 min).
	ConnectTimeout Duration `toml:"connect_timeout"`

	// PersistentSession asks the broker to keep the node's session (MQTT clean session off).
	// Data delivery never depends on it (the store's outbox is the only queue). Danger: with a
	// persistent session the broker queues remote commands while the node is offline and
	// delivers them, possibly hours old, when it returns.
	PersistentSession bool `toml:"persistent_session"`

	// ReconnectMaxDelay caps the reconnect backoff (default 2 min, 1 s to 1 h). Delays start
	// at 0.5 s and double per failed attempt, each drawn at random between half and all of the
	// current step so that many nodes do not return together after a broker restart.
	ReconnectMaxDelay Duration `toml:"reconnect_max_delay"`

	TLS TLSConfig `toml:"tls"`

	// Username for the broker. Never logged.
	Username string `toml:"username"`
	// Password in the configuration file itself. Prefer PasswordFile or PasswordEnv: a config
	// file is often copied around. At most one of the three password keys may be set.
	Password string `toml:"password"`
	// PasswordFile names a file holding the password (trailing newline removed), read at New.
	PasswordFile string `toml:"password_file"`
	// PasswordEnv names an environment variable holding the password, read at New.
	PasswordEnv string `toml:"password_env"`

	// TopicPrefix is the first level(s) of every topic (default "leqnode"); no wildcards.
	TopicPrefix string `toml:"topic_prefix"`

	// Spectra chooses which records carry one-third-octave spectra: "second", "minute" (the
	// default) or "none". Trade-off: per-second spectra cost about 1 GB a month (see
	// docs/mqtt.md); per-minute spectra about 50 MB.
	Spectra string `toml:"spectra"`

	// SecondsPerMessage is how many second records one message carries (default 10, 1 to 60):
	// backlog messages always, live ones when that many are ready within LiveWait.
	SecondsPerMessage int `toml:"seconds_per_message"`

	// LiveWait is the longest a live second waits for the others of its message (default
	// 1.5 s, 0.1 to 60 s). Live records leave as soon as they are measured, before the store
	// commits them, so a dashboard sees a second at most about LiveWait after it ends.
	// Trade-off: the default sends live seconds two to a message, about twice the traffic of
	// full messages of 10 (see docs/mqtt.md); a wait of SecondsPerMessage seconds sends full
	// messages, and delays the newest second by as much. Danger: a
	// live record that a crash keeps out of the store has left the node all the same (its
	// number is never used again; see the rules for consumers in docs/mqtt.md).
	LiveWait Duration `toml:"live_wait"`

	// SecondQuantities lists the quantities second messages carry (default all of LAeq, LCeq,
	// LZeq, LAFmax, LAFmin, LASmax, LASmin, LAImax, LCpeak, LZpeak, LAE). Trade-off: second
	// records are most of the traffic; ["LAeq", "LAFmax"] roughly halves it. The store keeps
	// everything, so a resend or a local report still has the rest.
	SecondQuantities []string `toml:"second_quantities"`

	// Kinds lists the record kinds published (default all: second, minute, event,
	// calibration, health, gap, annotation, session). Records of other kinds stay in the store
	// and count as pending; adding a kind later publishes its stored records as backlog.
	Kinds []string `toml:"kinds"`

	// MaxInFlight bounds the messages published and not yet acknowledged by the broker (default
	// 32, 1 to 1000). More hides more round-trip time; a connection loss resends them all.
	MaxInFlight int `toml:"max_in_flight"`

	// BacklogMessagesPerSecond limits the rate of backlog and resend messages (default 250; a
	// negative value means no limit). Live records are never held back. Danger: no limit lets a
	// node returning from a long outage flood the broker and a metered link.
	BacklogMessagesPerSecond float64 `toml:"backlog_messages_per_second"`

	// BacklogBytesPerSecond limits the payload bytes of backlog and resend messages per second
	// (default 0: no byte limit).
	BacklogBytesPerSecond int `toml:"backlog_bytes_per_second"`

	// StatusInterval is how often the retained status message is refreshed (default 1 min,
	// 5 s to 1 h).
	StatusInterval Duration `toml:"status_interval"`

	// Stream names the store's outbox cursor (default "mqtt"). Two publishers with one stream
	// name share, and fight over, one cursor.
	Stream string `toml:"stream"`

	Commands CommandsConfig `toml:"commands"`
}

// TLSConfig is the [publish.tls] section. TLS is used for ssl://, tls://, mqtts:// and wss://
// brokers; the broker's name is always verified unless InsecureSkipVerify is set.
type TLSConfig struct {
	// CAFile is a PEM file of the certificate authorities to trust (default: the system's).
	CAFile string `toml:"ca_file"`
	// CertFile and KeyFile are the node's client certificate and key (PEM), both or neither.
	CertFile string `toml:"cert_file"`
	KeyFile  string `toml:"key_file"`
	// ServerName overrides the name checked in the broker's certificate (default: the URL's host).
	ServerName string `toml:"server_name"`
	// InsecureSkipVerify accepts any broker certificate. Danger: anyone on the path can read the
	// node's password and data and feed it commands. Warned about at every start.
	InsecureSkipVerify bool `toml:"insecure_skip_verify"`
}

// CommandsConfig is the [publish.commands] section. Remote commands are off by default.
type CommandsConfig struct {
	// Enabled subscribes to the node's command topic. Danger: anyone allowed to publish on the
	// topic can trigger the allowed actions; restrict it with the broker's access control.
	Enabled bool `toml:"enabled"`
	// Allow lists the accepted actions (default, when enabled: all of calibration_check,
	// publish_status and resend).
	Allow []string `toml:"allow"`
	// MaxPayloadBytes caps a command message (default 1024, 64 to 65536); larger ones are ignored.
	MaxPayloadBytes int `toml:"max_payload_bytes"`
	// MaxResendRange caps the time range of one resend command (default 7 days, 1 min to 400
	// days). A long range of second records is a lot of traffic.
	MaxResendRange Duration `toml:"max_resend_range"`
}

// Duration is a time.Duration written in the configuration as a Go duration string: "30s",
// "2m", "1h30m". (TOML has no duration type.)
type Duration time.Duration

// UnmarshalText parses a duration such as "30s".
func (d *Duration) UnmarshalText(b []byte) error {
	v, err := time.ParseDuration(string(b))
	if err != nil {
		return fmt.Errorf("duration %q: write a number and a unit, such as \"30s\", \"2m\" or \"1h\"", b)
	}
	*d = Duration(v)
	return nil
}

// MarshalText writes the duration as time.Duration.String does.
func (d Duration) MarshalText() ([]byte, error) { return []byte(time.Duration(d).String()), nil }

// String returns the duration as time.Duration.String does.
func (d Duration) String() string { return time.Duration(d).String() }

// WithDefaults returns c with every zero field replaced by its default. nodeID feeds the client id.
func (c Config) WithDefaults(nodeID string) Config {
	if c.ClientID == "" && nodeID != "" {
		c.ClientID = "leqnode-" + nodeID
	}
	def := func(d *Duration, v time.Duration) {
		if *d == 0 {
			*d = Duration(v)
		}
	}
	def(&c.KeepAlive, DefaultKeepAlive)
	def(&c.ConnectTimeout, DefaultConnectTimeout)
	def(&c.ReconnectMaxDelay, DefaultReconnectMaxDelay)
	def(&c.StatusInterval, DefaultStatusInterval)
	def(&c.LiveWait, DefaultLiveWait)
	def(&c.Commands.MaxResendRange, DefaultMaxResendRange)
	if c.TopicPrefix == "" {
		c.TopicPrefix = DefaultTopicPrefix
	}
	if c.Spectra == "" {
		c.Spectra = SpectraMinute
	}
	if c.SecondsPerMessage == 0 {
		c.SecondsPerMessage = DefaultSecondsPerMessage
	}
	if c.MaxInFlight == 0 {
		c.MaxInFlight = DefaultMaxInFlight
	}
	if c.BacklogMessagesPerSecond == 0 {
		c.BacklogMessagesPerSecond = DefaultBacklogRate
	}
	if c.Stream == "" {
		c.Stream = DefaultStream
	}
	if c.SecondQuantities == nil {
		for _, q := range secondLevels {
			c.SecondQuantities = append(c.SecondQuantities, q.name)
		}
	}
	if c.Kinds == nil {
		for _, k := range record.Kinds() {
			c.Kinds = append(c.Kinds, k.String())
		}
	}
	if c.Commands.MaxPayloadBytes == 0 {
		c.Commands.MaxPayloadBytes = DefaultMaxCommandBytes
	}
	if c.Commands.Enabled && c.Commands.Allow == nil {
		c.Commands.Allow = []string{ActionCalibrationCheck, ActionPublishStatus, ActionResend}
	}
	return c
}

var (
	topicLevel = regexp.MustCompile(`^[A-Za-z0-9._-]+(/[A-Za-z0-9._-]+)*$`)
	clientIDRe = regexp.MustCompile(`^[A-Za-z0-9._:-]{1,128}$`)
)

// Validate reports every problem of c, one error each, naming the key, the value and what is
// allowed. Zero fields are checked as their defaults.
func (c Config) Validate() []error {
	var errs []error
	bad := func(format string, a ...any) { errs = append(errs, fmt.Errorf("publish."+format, a...)) }
	d := c.WithDefaults("node")
	if len(d.Brokers) == 0 {
		bad("brokers is empty: give at least one broker URL such as \"tcp://broker.example:1883\"")
	}
	for i, b := range d.Brokers {
		u, err := url.Parse(b)
		switch {
		case err != nil:
			bad("brokers[%d] %q is not a URL: write scheme://host:port", i, redactURL(b))
		case u.User != nil:
			bad("brokers[%d] %q holds credentials: remove them and use publish.username and publish.password_file", i, redactURL(b))
		case !validScheme(u.Scheme):
			bad("brokers[%d] %q has scheme %q: use tcp, ssl, tls, mqtts, ws or wss", i, b, u.Scheme)
		case u.Hostname() == "":
			bad("brokers[%d] %q has no host: write scheme://host:port", i, b)
		}
	}
	if !clientIDRe.MatchString(d.ClientID) {
		bad("client_id %q: use 1 to 128 letters, digits, '.', '_', ':' or '-'", d.ClientID)
	}
	durIn := func(key string, d Duration, lo, hi time.Duration) {
		if v := time.Duration(d); v < lo || v > hi {
			bad("%s %s out of range: use %s to %s", key, v, lo, hi)
		}
	}
	durIn("keep_alive", d.KeepAlive, 5*time.Second, 20*time.Minute)
	durIn("connect_timeout", d.ConnectTimeout, time.Second, 5*time.Minute)
	durIn("reconnect_max_delay", d.ReconnectMaxDelay, time.Second, time.Hour)
	durIn("status_interval", d.StatusInterval, 5*time.Second, time.Hour)
	durIn("live_wait", d.LiveWait, 100*time.Millisecond, time.Minute)
	if d.TLS.CertFile != "" && d.TLS.KeyFile == "" || d.TLS.CertFile == "" && d.TLS.KeyFile != "" {
		bad("tls.cert_file and tls.key_file: give both or neither")
	}
	for key, f := range map[string]string{"tls.ca_file": d.TLS.CAFile, "tls.cert_file": d.TLS.CertFile, "tls.key_file": d.TLS.KeyFile, "password_file": d.PasswordFile} {
		if f != "" {
			if _, err := os.Stat(f); err != nil {
				bad("%s %q cannot be read: %v", key, f, errors.Unwrap(err))
			}
		}
	}
	n := 0
	for _, s := range []string{d.Password, d.PasswordFile, d.PasswordEnv} {
		if s != "" {
			n++
		}
	}
	if n > 1 {
		bad("password, password_file and password_env: set at most one")
	}
	if d.PasswordEnv != "" {
		if _, ok := os.LookupEnv(d.PasswordEnv); !ok {
			bad("password_env %q: the environment variable is not set", d.PasswordEnv)
		}
	}
	if n > 0 && d.Username == "" {
		bad("username is empty while a password is set: set publish.username")
	}
	if !topicLevel.MatchString(d.TopicPrefix) || len(d.TopicPrefix) > 128 {
		bad("topic_prefix %q: use levels of letters, digits, '.', '_' or '-' separated by '/', no wildcards, at most 128 bytes", d.TopicPrefix)
	}
	switch d.Spectra {
	case SpectraSecond, SpectraMinute, SpectraNone:
	default:
		bad("spectra %q: use second, minute or none", d.Spectra)
	}
	if d.SecondsPerMessage < 1 || d.SecondsPerMessage > 60 {
		bad("seconds_per_message %d out of range: use 1 to 60", d.SecondsPerMessage)
	}
	for _, q := range d.SecondQuantities {
		if !slices.ContainsFunc(secondLevels, func(l secondLevel) bool { return l.name == q }) {
			bad("second_quantities has %q: use LAeq, LCeq, LZeq, LAFmax, LAFmin, LASmax, LASmin, LAImax, LCpeak, LZpeak or LAE", q)
		}
	}
	if d.SecondQuantities != nil && len(d.SecondQuantities) == 0 {
		bad("second_quantities is empty: list at least one quantity, or leave out \"second\" from publish.kinds")
	}
	for _, k := range d.Kinds {
		if _, err := record.ParseKind(k); err != nil {
			bad("kinds has %q: use second, minute, event, calibration, health, gap, annotation or session", k)
		}
	}
	if d.MaxInFlight < 1 || d.MaxInFlight > 1000 {
		bad("max_in_flight %d out of range: use 1 to 1000", d.MaxInFlight)
	}
	if d.BacklogMessagesPerSecond > 10000 {
		bad("backlog_messages_per_second %g out of range: use up to 10000, or a negative value for no limit", d.BacklogMessagesPerSecond)
	}
	if d.BacklogBytesPerSecond < 0 || d.BacklogBytesPerSecond > 0 && d.BacklogBytesPerSecond < 1024 {
		bad("backlog_bytes_per_second %d out of range: use 0 (no limit) or at least 1024", d.BacklogBytesPerSecond)
	}
	if d.Stream == "" || len(d.Stream) > 64 || strings.ContainsRune(d.Stream, 0) {
		bad("stream %q: use 1 to 64 bytes", d.Stream)
	}
	if d.Commands.MaxPayloadBytes < 64 || d.Commands.MaxPayloadBytes > 65536 {
		bad("commands.max_payload_bytes %d out of range: use 64 to 65536", d.Commands.MaxPayloadBytes)
	}
	durIn("commands.max_resend_range", d.Commands.MaxResendRange, time.Minute, 400*24*time.Hour)
	for _, a := range d.Commands.Allow {
		switch a {
		case ActionCalibrationCheck, ActionPublishStatus, ActionResend:
		default:
			bad("commands.allow has %q: use calibration_check, publish_status or resend", a)
		}
	}
	return errs
}

func validScheme(s string) bool {
	switch s {
	case "tcp", "mqtt", "ssl", "tls", "mqtts", "tcps", "ws", "wss":
		return true
	}
	return false
}

func tlsScheme(s string) bool {
	switch s {
	case "ssl", "tls", "mqtts", "tcps", "wss":
		return true
	}
	return false
}

// redactURL removes any user information from a URL for messages and status.
func redactURL(s string) string {
	u, err := url.Parse(s)
	if err != nil {
		if i := strings.LastIndexByte(s, '@'); i >= 0 {
			return "…@" + s[i+1:]
		}
		return s
	}
	if u.User != nil {
		u.User = nil
		return u.String()
	}
	return s
}

// password returns the configured password, reading the file or environment variable.
func (c Config) password() (string, error) {
	switch {
	case c.PasswordFile != "":
		b, err := os.ReadFile(c.PasswordFile)
		if err != nil {
			return "", fmt.Errorf("publish.password_file %q cannot be read: %w", c.PasswordFile, err)
		}
		return strings.TrimRight(string(b), "\r\n"), nil
	case c.PasswordEnv != "":
		v, ok := os.LookupEnv(c.PasswordEnv)
		if !ok {
			return "", fmt.Errorf("publish.password_env %q: the environment variable is not set", c.PasswordEnv)
		}
		return v, nil
	}
	return c.Password, nil
}

// tlsConfig builds the TLS client configuration for broker host (nil when no broker uses TLS).
func (c Config) tlsConfig() (*tls.Config, error) {
	t := &tls.Config{MinVersion: tls.VersionTLS12, ServerName: c.TLS.ServerName, InsecureSkipVerify: c.TLS.InsecureSkipVerify}
	if c.TLS.CAFile != "" {
		pem, err := os.ReadFile(c.TLS.CAFile)
		if err != nil {
			return nil, fmt.Errorf("publish.tls.ca_file %q cannot be read: %w", c.TLS.CAFile, err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("publish.tls.ca_file %q holds no PEM certificate: give the CA certificate in PEM form", c.TLS.CAFile)
		}
		t.RootCAs = pool
	}
	if c.TLS.CertFile != "" {
		cert, err := tls.LoadX509KeyPair(c.TLS.CertFile, c.TLS.KeyFile)
		if err != nil {
			return nil, fmt.Errorf("publish.tls.cert_file %q and key_file %q: %w (give a matching PEM certificate and key)", c.TLS.CertFile, c.TLS.KeyFile, err)
		}
		t.Certificates = []tls.Certificate{cert}
	}
	return t, nil
}
