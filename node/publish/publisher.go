package publish

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"math/rand/v2"
	"net/url"
	"regexp"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"github.com/eclipse/paho.mqtt.golang/packets"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

// Identity describes the node in the status message and in every payload.
type Identity struct {
	// NodeID names the node: 1 to 64 letters, digits, '.', '_' or '-'. It is a topic level.
	NodeID string
	// Site is a free-text site name for the status message ("" to leave it out).
	Site string
	// Location is published in the status message exactly as given (nil to leave it out). The
	// node rounds it to the precision its configuration allows before handing it over.
	Location *Location
	// SoftwareVersion is the node's software version.
	SoftwareVersion string
}

// Location is a position in decimal degrees (WGS 84).
type Location struct {
	Latitude, Longitude float64
}

// Request is a remote command that the node itself must carry out (today only
// ActionCalibrationCheck). The publisher has already validated it and replied "accepted".
type Request struct {
	ID       string    // the command's id, as the requester chose it
	Action   string    // ActionCalibrationCheck
	Received time.Time // when the command arrived
}

// Status is a snapshot of the publisher. It never holds credentials.
type Status struct {
	Connected   bool              `json:"connected"`
	Broker      string            `json:"broker"`        // the broker in use or last tried (URL without user information)
	Since       time.Time         `json:"since"`         // when the current connection was made or lost
	Attempts    int               `json:"attempts"`      // failed connection attempts since the last success
	LastError   string            `json:"last_error"`    // the last connection or store error ("" when none yet)
	LastErrorAt time.Time         `json:"last_error_at"` // when it happened
	Backlog     bool              `json:"backlog"`       // records stored during an outage are still being sent
	Pending     map[string]uint64 `json:"pending"`       // per kind: stored records the broker has not acknowledged
	InFlight    int               `json:"in_flight"`     // messages published and not yet acknowledged
	Messages    uint64            `json:"messages"`      // messages acknowledged by the broker since New
	Bytes       uint64            `json:"bytes"`         // payload bytes of those messages
	LastPublish time.Time         `json:"last_publish"`  // when the broker last acknowledged a message
}

// Publisher delivers the store's records to an MQTT broker. Create one with New and call Run;
// Notify, Status and Requests may be called from any goroutine.
type Publisher struct {
	cfg      Config
	store    *buffer.Store
	id       Identity
	log      *slog.Logger
	password string
	tls      *tls.Config
	topics   topics

	notify   chan struct{}
	periods  chan []byte // closed periods' indicators waiting for a broker
	requests chan Request
	cmdIn    chan []byte
	running  atomic.Bool

	mu sync.Mutex
	st Status

	// Owned by the Run goroutine.
	lanes      []*lane
	quantities []secondLevel
	rng        *rand.Rand
	msgBucket  bucket
	byteBucket bucket
	jobs       []*resendJob
	ignored    rateLog
	storeErrs  rateLog
}

var nodeIDRe = regexp.MustCompile(`^[A-Za-z0-9._-]{1,64}$`)

// New checks cfg (see Config.Validate), reads the password and TLS files, and returns a
// Publisher for store. It does not connect: Run does.
func New(cfg Config, store *buffer.Store, ident Identity, logger *slog.Logger) (*Publisher, error) {
	if store == nil {
		return nil, errors.New("publish: no store given")
	}
	if !nodeIDRe.MatchString(ident.NodeID) {
		return nil, fmt.Errorf("node id %q: use 1 to 64 letters, digits, '.', '_' or '-'", ident.NodeID)
	}
	if errs := cfg.Validate(); len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	if logger == nil {
		logger = slog.Default()
	}
	cfg = cfg.WithDefaults(ident.NodeID)
	pw, err := cfg.password()
	if err != nil {
		return nil, err
	}
	var tc *tls.Config
	for _, b := range cfg.Brokers {
		if u, _ := url.Parse(b); u != nil && tlsScheme(u.Scheme) {
			if tc, err = cfg.tlsConfig(); err != nil {
				return nil, err
			}
			break
		}
	}
	p := &Publisher{
		cfg: cfg, store: store, id: ident, log: logger.With("component", "publish"),
		password: pw, tls: tc,
		topics:   newTopics(cfg.TopicPrefix, ident.NodeID),
		notify:   make(chan struct{}, 1),
		periods:  make(chan []byte, periodQueue),
		requests: make(chan Request, 4),
		cmdIn:    make(chan []byte, 16),
		rng:      rand.New(rand.NewPCG(rand.Uint64(), rand.Uint64())),
	}
	for _, k := range record.Kinds() {
		p.lanes = append(p.lanes, &lane{kind: k, off: !slices.Contains(cfg.Kinds, k.String())})
	}
	for _, q := range cfg.SecondQuantities {
		for _, l := range secondLevels {
			if l.name == q {
				p.quantities = append(p.quantities, l)
			}
		}
	}
	now := time.Now()
	p.msgBucket = newBucket(cfg.BacklogMessagesPerSecond, now)
	p.byteBucket = newBucket(float64(cfg.BacklogBytesPerSecond), now)
	p.ignored.every = time.Minute
	p.storeErrs.every = time.Minute
	return p, nil
}

// Notify wakes the publisher after the node committed new records. It never blocks. Without
// it, new records are found by a poll once a second.
func (p *Publisher) Notify() {
	select {
	case p.notify <- struct{}{}:
	default:
	}
}

// Requests returns the channel on which accepted remote commands that the node must carry out
// arrive. The node should drain it; when it is full, further requests are answered "busy".
func (p *Publisher) Requests() <-chan Request { return p.requests }

// Status returns a snapshot of the publisher's state and the store's pending counts.
func (p *Publisher) Status() Status {
	p.mu.Lock()
	st := p.st
	p.mu.Unlock()
	st.Pending = map[string]uint64{}
	if s, err := p.store.Stats(); err == nil {
		for _, k := range record.Kinds() {
			if ss, ok := s.Streams[p.cfg.Stream][k]; ok {
				st.Pending[k.String()] = ss.Pending
			} else {
				st.Pending[k.String()] = s.Kinds[k].Count
			}
		}
	}
	return st
}

func (p *Publisher) setStatus(fn func(*Status)) {
	p.mu.Lock()
	fn(&p.st)
	p.mu.Unlock()
}

// Run connects to the brokers in turn and publishes until ctx ends, reconnecting after every
// failure with capped exponential backoff and jitter. It returns nil when ctx ends (after
// publishing the retained "offline" status when connected) and an error only when called twice
// at once.
func (p *Publisher) Run(ctx context.Context) error {
	if !p.running.CompareAndSwap(false, true) {
		return errors.New("publish: Run is already running")
	}
	defer p.running.Store(false)
	if p.cfg.TLS.InsecureSkipVerify {
		p.log.Warn("publish.tls.insecure_skip_verify is set: the broker's certificate is not checked, so anyone on the network path can read the credentials and data and send commands; use it only for a first test")
	}
	attempt := 0
	for i := 0; ctx.Err() == nil; i++ {
		broker := p.cfg.Brokers[i%len(p.cfg.Brokers)]
		connected, err := p.session(ctx, broker)
		if ctx.Err() != nil {
			return nil
		}
		if connected {
			attempt = 0
		}
		if err != nil {
			attempt++
			p.setStatus(func(s *Status) {
				s.Connected, s.LastError, s.LastErrorAt, s.Attempts, s.Since = false, err.Error(), time.Now(), attempt, time.Now()
			})
		}
		delay := p.backoff(attempt)
		p.log.Warn("MQTT connection failed, retrying", "broker", redactURL(broker), "err", err, "attempt", attempt, "retry_in", delay.Round(time.Millisecond))
		t := time.NewTimer(delay)
		select {
		case <-ctx.Done():
			t.Stop()
			return nil
		case <-t.C:
		}
	}
	return nil
}

// backoff returns the delay before reconnect attempt n (n >= 1): half to all of
// min(cap, base·2^(n-1)) ("equal jitter").
func (p *Publisher) backoff(n int) time.Duration {
	step := float64(reconnectBaseDelay) * math.Pow(2, float64(max(n-1, 0)))
	step = math.Min(step, float64(p.cfg.ReconnectMaxDelay))
	return time.Duration(step/2 + p.rng.Float64()*step/2)
}

// connectError turns a paho connection error into one line that names the broker and the fix.
func connectError(broker string, err error) error {
	b := redactURL(broker)
	var ua x509.UnknownAuthorityError
	var he x509.HostnameError
	var ie x509.CertificateInvalidError
	switch {
	case errors.Is(err, packets.ErrorRefusedBadUsernameOrPassword), errors.Is(err, packets.ErrorRefusedNotAuthorised):
		return fmt.Errorf("broker %s refused the username or password (%w): check publish.username and publish.password, password_file or password_env", b, err)
	case errors.As(err, &ua):
		return fmt.Errorf("broker %s presented a certificate from an authority this node does not trust (%w): set publish.tls.ca_file to the CA certificate that signed it", b, err)
	case errors.As(err, &he):
		return fmt.Errorf("broker %s presented a certificate for another name (%w): use the name the certificate gives in the broker URL, or set publish.tls.server_name", b, err)
	case errors.As(err, &ie):
		return fmt.Errorf("broker %s presented an invalid certificate (%w): renew the broker's certificate or check the node's clock", b, err)
	case errors.Is(err, packets.ErrorRefusedIDRejected):
		return fmt.Errorf("broker %s rejected the client id (%w): set publish.client_id to an id the broker accepts", b, err)
	}
	return fmt.Errorf("broker %s: %w (check the URL, the network and that the broker runs)", b, err)
}
