package collect

import (
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"os"
	"regexp"
	"strings"
	"time"

	"github.com/leqnode/leqnode/node/fleetdb"
	"github.com/leqnode/leqnode/node/lib/strict"
	"github.com/leqnode/leqnode/node/publish"
)

// ConfigVersion is the collector configuration format this release reads.
const ConfigVersion = 1

// Duration is a Go duration string in the file ("30s", "10m").
type Duration = publish.Duration

// Config is the collector's configuration file (TOML, decoded strictly).
type Config struct {
	// Version of the file's format; must be ConfigVersion.
	Version  int            `toml:"version"`
	Broker   BrokerConfig   `toml:"broker"`
	Database DatabaseConfig `toml:"database"`
	Batch    BatchConfig    `toml:"batch"`
	Resend   ResendConfig   `toml:"resend"`
	// Retention drops old records by whole partitions (default: keep everything).
	Retention RetentionConfig `toml:"retention"`
	// Listen is the address of the collector's own HTTP endpoint (/metrics in the Prometheus
	// text format, /status as JSON). Empty turns it off. Keep it on loopback or a management
	// network: it tells anyone who asks how the fleet is doing.
	Listen string `toml:"listen"`
}

// BrokerConfig says how to reach the central broker.
type BrokerConfig struct {
	// URLs lists brokers to try in turn: tcp://, ssl://, mqtt://, mqtts://, ws://, wss://.
	URLs []string `toml:"urls"`
	// ClientID must be fixed and unique per collector: the broker keeps the persistent session
	// (and the messages it holds while the collector is away) under this id. Two collectors with
	// the same id throw each other off the broker.
	ClientID string `toml:"client_id"`
	// ShareGroup subscribes through the shared subscription $share/GROUP/..., so that several
	// collectors with the same group share the messages (each message goes to one of them).
	// Empty subscribes directly: every collector then gets every message (writes stay
	// idempotent, but the work is done twice).
	ShareGroup string `toml:"share_group"`
	// TopicPrefix is the nodes' publish.topic_prefix.
	TopicPrefix string `toml:"topic_prefix"`
	// Username and PasswordFile authenticate to the broker; the file holds only the password.
	Username     string `toml:"username"`
	PasswordFile string `toml:"password_file"`
	// CAFile, CertFile and KeyFile set up TLS (a CA to trust, and a client certificate).
	CAFile    string   `toml:"ca_file"`
	CertFile  string   `toml:"cert_file"`
	KeyFile   string   `toml:"key_file"`
	KeepAlive Duration `toml:"keep_alive"`
	// MaxPayloadBytes: larger payloads go to quarantine unread (default 1 MiB).
	MaxPayloadBytes int `toml:"max_payload_bytes"`
}

// DatabaseConfig says how to reach PostgreSQL.
type DatabaseConfig struct {
	// URL is a PostgreSQL connection URL without a password:
	// postgres://leqnode@db.wendle-cross.invalid:5432/leqnode?sslmode=verify-full
	URL string `toml:"url"`
	// PasswordFile holds the password (first line). A password in URL is refused: the URL is
	// shown in messages, the file never.
	PasswordFile string `toml:"password_file"`
	// MaxConns bounds the connection pool (default 4).
	MaxConns int `toml:"max_conns"`
	// Migrate applies the schema's migrations at start (default true). Turn it off where the
	// collector's role may not change the schema, and run `leqnode collect --migrate` as the
	// owner instead.
	Migrate *bool `toml:"migrate"`
	// PartitionsAhead: partitions are created this far ahead of the present (default 72h).
	PartitionsAhead Duration `toml:"partitions_ahead"`
}

// BatchConfig sets how messages are grouped into transactions. Larger batches write more
// records per second; a longer wait adds to every record's delay into the database. A batch
// also closes when no message has come for 10 ms: messages stay unacknowledged until their
// commit, and a broker sends only its in-flight window (mosquitto's max_inflight_messages)
// before it waits for acknowledgements.
type BatchConfig struct {
	// MaxMessages per transaction (default 1000).
	MaxMessages int `toml:"max_messages"`
	// MaxRecords per transaction (default 20000).
	MaxRecords int `toml:"max_records"`
	// MaxWait after the first message of a batch before it is written (default 200ms).
	MaxWait Duration `toml:"max_wait"`
}

// ResendConfig sets when holes are asked for again (see fleetdb.ResendPolicy).
type ResendConfig struct {
	Enabled    *bool    `toml:"enabled"`     // default true
	Interval   Duration `toml:"interval"`    // how often holes are looked for (default 1m)
	Grace      Duration `toml:"grace"`       // default 10m
	MaxAge     Duration `toml:"max_age"`     // default 720h (the nodes' 30 days of second records)
	MaxRange   Duration `toml:"max_range"`   // default 24h (nodes refuse more than their commands.max_resend_range)
	Backoff    Duration `toml:"backoff"`     // default 10m
	MaxBackoff Duration `toml:"max_backoff"` // default 6h
}

// RetentionConfig says how long records of the partitioned kinds are kept; zero keeps them
// forever. Each is at least 24h; a partition goes once its newest possible record is older
// (a day for seconds, a month for the others). Danger: what is dropped is gone; the nodes keep
// seconds 30 days and minutes 5 years, so a resend can bring back only what they still hold.
type RetentionConfig struct {
	Second Duration `toml:"second"`
	Minute Duration `toml:"minute"`
	Event  Duration `toml:"event"`
	Health Duration `toml:"health"`
}

// kinds returns the kinds with a retention, and their durations.
func (r RetentionConfig) kinds() map[string]time.Duration {
	out := map[string]time.Duration{}
	for k, d := range map[string]Duration{"second": r.Second, "minute": r.Minute, "event": r.Event, "health": r.Health} {
		if d > 0 {
			out[k] = time.Duration(d)
		}
	}
	return out
}

// DefaultConfig returns the defaults every key a file leaves out takes.
func DefaultConfig() Config {
	on := true
	return Config{
		Version: ConfigVersion,
		Broker: BrokerConfig{ClientID: "leqnode-collector", ShareGroup: "leqnode-collectors", TopicPrefix: publish.DefaultTopicPrefix,
			KeepAlive: Duration(30 * time.Second), MaxPayloadBytes: 1 << 20},
		Database: DatabaseConfig{MaxConns: 4, Migrate: &on, PartitionsAhead: Duration(72 * time.Hour)},
		Batch:    BatchConfig{MaxMessages: 1000, MaxRecords: 20000, MaxWait: Duration(200 * time.Millisecond)},
		Resend: ResendConfig{Enabled: &on, Interval: Duration(time.Minute), Grace: Duration(10 * time.Minute),
			MaxAge: Duration(720 * time.Hour), MaxRange: Duration(24 * time.Hour), Backoff: Duration(10 * time.Minute),
			MaxBackoff: Duration(6 * time.Hour)},
		Listen: "127.0.0.1:9467",
	}
}

// ParseConfig decodes a configuration file strictly over the defaults (package strict: exact
// key names, no unknown keys, plain-word type errors) and validates it; every problem is
// listed, one line each. name is used in errors.
func ParseConfig(data []byte, name string) (*Config, error) {
	c := DefaultConfig()
	c.Version = 0
	var lines []string
	reported := map[string]bool{}
	if err := strict.TOML(data, &c); err != nil {
		lines, reported = strict.FileLines(err, name, "configs/collector.toml")
	}
	for _, e := range c.Validate() {
		key, _, _ := strings.Cut(e.Error(), " ")
		if !reported[strings.TrimSuffix(key, ":")] {
			lines = append(lines, name+": "+e.Error())
		}
	}
	if len(lines) > 0 {
		return nil, errors.New(strings.Join(lines, "\n"))
	}
	return &c, nil
}

// LoadConfig reads and parses a configuration file.
func LoadConfig(path string) (*Config, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("config %s: %w", path, err)
	}
	return ParseConfig(data, path)
}

var (
	clientIDRe = regexp.MustCompile(`^[A-Za-z0-9._-]{1,64}$`)
	prefixRe   = regexp.MustCompile(`^[A-Za-z0-9._-]+(/[A-Za-z0-9._-]+)*$`)
)

// Validate returns one error per problem, each naming the key and what is allowed.
func (c *Config) Validate() []error {
	var errs []error
	bad := func(format string, a ...any) { errs = append(errs, fmt.Errorf(format, a...)) }
	if c.Version != ConfigVersion {
		bad("version = %d: this release reads version %d; add `version = %d` at the top", c.Version, ConfigVersion, ConfigVersion)
	}
	if len(c.Broker.URLs) == 0 {
		bad("broker.urls is empty: list the central broker, e.g. [\"tcp://broker.wendle-cross.invalid:1883\"]")
	}
	for _, u := range c.Broker.URLs {
		if !regexp.MustCompile(`^(tcp|ssl|mqtt|mqtts|ws|wss|tls)://[^/]+`).MatchString(u) {
			bad("broker.urls: %q is not a broker URL: write tcp://HOST:PORT or ssl://HOST:PORT", u)
		}
	}
	if !clientIDRe.MatchString(c.Broker.ClientID) {
		bad("broker.client_id %q: 1 to 64 letters, digits, '.', '_' or '-'", c.Broker.ClientID)
	}
	if c.Broker.ShareGroup != "" && !clientIDRe.MatchString(c.Broker.ShareGroup) {
		bad("broker.share_group %q: 1 to 64 letters, digits, '.', '_' or '-' (or empty for no shared subscription)", c.Broker.ShareGroup)
	}
	if !prefixRe.MatchString(c.Broker.TopicPrefix) {
		bad("broker.topic_prefix %q: topic levels of letters, digits, '.', '_' or '-', without wildcards", c.Broker.TopicPrefix)
	}
	if (c.Broker.CertFile == "") != (c.Broker.KeyFile == "") {
		bad("broker.cert_file and broker.key_file go together")
	}
	if c.Broker.MaxPayloadBytes < 1024 || c.Broker.MaxPayloadBytes > 256<<20 {
		bad("broker.max_payload_bytes %d: 1024 to 268435456", c.Broker.MaxPayloadBytes)
	}
	if c.Database.URL == "" {
		bad("database.url is empty: write postgres://USER@HOST:PORT/DATABASE")
	} else if fleetdb.HasPassword(c.Database.URL) {
		bad("database.url holds a password: move it to the file named by database.password_file")
	}
	if c.Database.MaxConns < 1 || c.Database.MaxConns > 100 {
		bad("database.max_conns %d: 1 to 100", c.Database.MaxConns)
	}
	if c.Batch.MaxMessages < 1 || c.Batch.MaxMessages > 65535 {
		bad("batch.max_messages %d: 1 to 65535", c.Batch.MaxMessages)
	}
	if c.Batch.MaxRecords < 1 || c.Batch.MaxRecords > 1000000 {
		bad("batch.max_records %d: 1 to 1000000", c.Batch.MaxRecords)
	}
	for _, d := range []struct {
		key    string
		v      Duration
		lo, hi time.Duration
	}{
		{"broker.keep_alive", c.Broker.KeepAlive, time.Second, time.Hour},
		{"batch.max_wait", c.Batch.MaxWait, time.Millisecond, 10 * time.Second},
		{"database.partitions_ahead", c.Database.PartitionsAhead, 24 * time.Hour, 366 * 24 * time.Hour},
		{"resend.interval", c.Resend.Interval, 100 * time.Millisecond, 24 * time.Hour},
		{"resend.grace", c.Resend.Grace, 0, 7 * 24 * time.Hour},
		{"resend.max_age", c.Resend.MaxAge, time.Hour, 5 * 366 * 24 * time.Hour},
		{"resend.max_range", c.Resend.MaxRange, time.Minute, 400 * 24 * time.Hour},
		{"resend.backoff", c.Resend.Backoff, time.Second, 7 * 24 * time.Hour},
		{"resend.max_backoff", c.Resend.MaxBackoff, time.Second, 30 * 24 * time.Hour},
	} {
		if time.Duration(d.v) < d.lo || time.Duration(d.v) > d.hi {
			bad("%s %s: %s to %s", d.key, d.v, d.lo, d.hi)
		}
	}
	for k, d := range c.Retention.kinds() {
		if d < 24*time.Hour {
			bad("retention.%s %s: 0 (keep forever) or at least 24h", k, d)
		}
	}
	return errs
}

// readSecret reads the first line of a password file.
func readSecret(key, path string) (string, error) {
	if path == "" {
		return "", nil
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return "", fmt.Errorf("%s: %w: create the file with the password on its first line", key, err)
	}
	line, _, _ := strings.Cut(string(b), "\n")
	return strings.TrimRight(line, "\r"), nil
}

// tlsConfig builds the broker's TLS settings (nil when none are configured).
func (b BrokerConfig) tlsConfig() (*tls.Config, error) {
	if b.CAFile == "" && b.CertFile == "" {
		return nil, nil
	}
	tc := &tls.Config{MinVersion: tls.VersionTLS12}
	if b.CAFile != "" {
		pem, err := os.ReadFile(b.CAFile)
		if err != nil {
			return nil, fmt.Errorf("broker.ca_file: %w", err)
		}
		tc.RootCAs = x509.NewCertPool()
		if !tc.RootCAs.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("broker.ca_file %s: no PEM certificate in it", b.CAFile)
		}
	}
	if b.CertFile != "" {
		cert, err := tls.LoadX509KeyPair(b.CertFile, b.KeyFile)
		if err != nil {
			return nil, fmt.Errorf("broker.cert_file/key_file: %w", err)
		}
		tc.Certificates = []tls.Certificate{cert}
	}
	return tc, nil
}
