// Package collect is leqnode's central collector: a service that takes the records of a fleet
// of nodes from the central MQTT broker and keeps them in PostgreSQL (package fleetdb).
//
// # Model
//
// The collector holds a persistent MQTT session (clean session off, a fixed client id) and
// subscribes at QoS 1 to the nodes' data topics, through a shared subscription when several
// collectors share the work, and directly to their status and reply topics. Automatic
// acknowledgement is off: a message is acknowledged only after the transaction that stores it
// has committed. If the collector dies first, the broker delivers the message again when the
// session resumes, and the idempotent write absorbs the copy; if the database is down, the
// collector stops acknowledging, retries with back-off and resumes where it stopped.
//
// Each payload is validated against configs/schema and checked against its topic. A payload
// that fails (not JSON, an unknown schema version, a node id that differs from the topic's, a
// value the database refuses) goes to the quarantine table with its reason and is
// acknowledged: it never blocks the stream and is never dropped unseen.
//
// Messages are grouped into batches (Config.Batch) written in one transaction each. A
// housekeeping loop creates partitions ahead and asks nodes that accept commands to resend
// the holes that stay open (fleetdb.ResendPolicy).
package collect

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"sync/atomic"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/node/fleetdb"
)

// Options are the parts of a collector that are not in its configuration file.
type Options struct {
	// Logger receives the collector's logs (default: discard).
	Logger *slog.Logger
	// OnCommit, when set, is called on the writer goroutine after each commit with the rows it
	// stored and the time of the commit (tests and benchmarks measure delays with it). A slow
	// function slows every write.
	OnCommit func(rows []fleetdb.Row, at time.Time)
}

// Collector is the central collector. Create it with New and run it with Run.
type Collector struct {
	cfg     Config
	opts    Options
	log     *slog.Logger
	in      *intake
	m       *metrics
	db      *fleetdb.DB
	client  mqtt.Client
	msgs    chan entry
	stopped chan struct{} // closed when Run returns: receive stops waiting
	// subscribed is set once the broker has confirmed the subscriptions.
	subscribed atomic.Bool
	dbPass     string
	mqttPass   string
}

// entry is a received message with its classification.
type entry struct {
	msg  mqtt.Message
	item item
}

// New checks the configuration and reads its secret files; it connects to nothing.
func New(cfg *Config, opts Options) (*Collector, error) {
	if errs := cfg.Validate(); len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	in, err := newIntake(cfg.Broker.TopicPrefix, cfg.Broker.MaxPayloadBytes)
	if err != nil {
		return nil, err
	}
	c := &Collector{cfg: *cfg, opts: opts, log: opts.Logger, in: in, m: newMetrics(),
		msgs: make(chan entry, cfg.Batch.MaxMessages), stopped: make(chan struct{})}
	if c.log == nil {
		c.log = slog.New(slog.DiscardHandler)
	}
	if c.dbPass, err = readSecret("database.password_file", cfg.Database.PasswordFile); err != nil {
		return nil, err
	}
	if c.mqttPass, err = readSecret("broker.password_file", cfg.Broker.PasswordFile); err != nil {
		return nil, err
	}
	return c, nil
}

// Subscribed reports whether the broker has confirmed the collector's subscriptions (once
// confirmed, the persistent session keeps them across reconnects).
func (c *Collector) Subscribed() bool { return c.subscribed.Load() }

// Counts returns the collector's counters (see the /status endpoint).
func (c *Collector) Counts() map[string]float64 { return c.m.Counts() }

// openDB opens the database and, if asked, migrates it.
func openDB(ctx context.Context, cfg *Config, password string, log *slog.Logger) (*fleetdb.DB, error) {
	return fleetdb.Open(ctx, fleetdb.Options{URL: cfg.Database.URL, Password: password, MaxConns: int32(cfg.Database.MaxConns), Logger: log})
}

// OpenDB opens the database of cfg (reading its password file), for queries such as
// fleetdb.DB.Fleet.
func OpenDB(ctx context.Context, cfg *Config) (*fleetdb.DB, error) {
	pass, err := readSecret("database.password_file", cfg.Database.PasswordFile)
	if err != nil {
		return nil, err
	}
	return openDB(ctx, cfg, pass, nil)
}

// Migrate applies the database migrations of cfg's database and returns their names.
func Migrate(ctx context.Context, cfg *Config, log *slog.Logger) ([]string, error) {
	pass, err := readSecret("database.password_file", cfg.Database.PasswordFile)
	if err != nil {
		return nil, err
	}
	db, err := openDB(ctx, cfg, pass, log)
	if err != nil {
		return nil, err
	}
	defer db.Close()
	applied, err := db.Migrate(ctx)
	if err != nil {
		return applied, fmt.Errorf("database %s: %w", fleetdb.Describe(cfg.Database.URL), err)
	}
	return applied, db.CreatePartitionsAhead(ctx, time.Now(), time.Duration(cfg.Database.PartitionsAhead))
}

// Run connects to the database and the broker and collects until ctx ends. A database or
// broker that is down at start is waited for (with back-off), not an error; only a setting
// that cannot work (a bad URL, a TLS file that cannot be read) ends Run with an error.
func (c *Collector) Run(ctx context.Context) error {
	db, err := openDB(ctx, &c.cfg, c.dbPass, c.log)
	if err != nil {
		return err
	}
	defer db.Close()
	c.db = db
	c.log.Info("collector starting", "database", fleetdb.Describe(c.cfg.Database.URL), "brokers", c.cfg.Broker.URLs,
		"client_id", c.cfg.Broker.ClientID, "share_group", c.cfg.Broker.ShareGroup)
	if err := c.prepareDB(ctx); err != nil {
		return err
	}
	opts, err := c.mqttOptions()
	if err != nil {
		return err
	}
	c.client = mqtt.NewClient(opts)
	c.client.Connect() // with ConnectRetry, the token completes once connected
	defer c.client.Disconnect(250)
	defer close(c.stopped)

	var srv *http.Server
	if c.cfg.Listen != "" {
		l, err := net.Listen("tcp", c.cfg.Listen)
		if err != nil {
			return fmt.Errorf("listen %s: %w: choose another address or set listen = \"\"", c.cfg.Listen, err)
		}
		srv = &http.Server{Handler: c.m.handler(), ReadHeaderTimeout: 5 * time.Second}
		go func() { _ = srv.Serve(l) }() // Serve returns ErrServerClosed after Close below
		defer func() {
			if err := srv.Close(); err != nil {
				c.log.Warn("closing the metrics listener", "listen", c.cfg.Listen, "err", err)
			}
		}()
	}
	house := make(chan struct{})
	go func() { defer close(house); c.housekeeping(ctx) }()
	c.writer(ctx)
	<-house
	c.log.Info("collector stopped")
	return nil
}

// prepareDB migrates (if configured) and creates partitions ahead, retrying while the
// database cannot be reached.
func (c *Collector) prepareDB(ctx context.Context) error {
	wait := retry{}
	for {
		var err error
		if *c.cfg.Database.Migrate {
			_, err = c.db.Migrate(ctx)
		}
		if err == nil {
			err = c.db.CreatePartitionsAhead(ctx, time.Now(), time.Duration(c.cfg.Database.PartitionsAhead))
		}
		if err == nil {
			return nil
		}
		if !fleetdb.Transient(err) {
			return fmt.Errorf("database %s: %w", fleetdb.Describe(c.cfg.Database.URL), err)
		}
		if !wait.sleep(ctx, c.log, "database not ready", err) {
			return ctx.Err()
		}
	}
}

// retry is an exponential back-off from 100 ms to 30 s with rate-limited logs.
type retry struct {
	d       time.Duration
	lastLog time.Time
}

// sleep logs (at most every 30 s) and waits; false when ctx ended.
func (r *retry) sleep(ctx context.Context, log *slog.Logger, what string, err error) bool {
	if r.d == 0 {
		r.d = 100 * time.Millisecond
	} else {
		r.d = min(2*r.d, 30*time.Second)
	}
	if time.Since(r.lastLog) > 30*time.Second {
		log.Warn(what+": retrying", "err", err, "next_try_in", r.d)
		r.lastLog = time.Now()
	}
	t := time.NewTimer(r.d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return false
	case <-t.C:
		return true
	}
}

// topics returns the data filter (shared when a group is set) and the status and reply filters.
func (c *Collector) topics() (data, status, reply string) {
	p := c.cfg.Broker.TopicPrefix
	data = p + "/+/+/+"
	if c.cfg.Broker.ShareGroup != "" {
		data = "$share/" + c.cfg.Broker.ShareGroup + "/" + data
	}
	return data, p + "/+/status", p + "/+/reply"
}

func (c *Collector) mqttOptions() (*mqtt.ClientOptions, error) {
	o := mqtt.NewClientOptions()
	for _, u := range c.cfg.Broker.URLs {
		o.AddBroker(u)
	}
	tc, err := c.cfg.Broker.tlsConfig()
	if err != nil {
		return nil, err
	}
	if tc != nil {
		o.SetTLSConfig(tc)
	}
	o.SetClientID(c.cfg.Broker.ClientID).SetCleanSession(false).SetAutoAckDisabled(true).SetOrderMatters(false).
		SetAutoReconnect(true).SetConnectRetry(true).SetConnectRetryInterval(time.Second).
		SetMaxReconnectInterval(30 * time.Second).SetKeepAlive(time.Duration(c.cfg.Broker.KeepAlive)).
		SetConnectTimeout(10 * time.Second)
	if c.cfg.Broker.Username != "" {
		o.SetUsername(c.cfg.Broker.Username)
		o.SetPassword(c.mqttPass)
	}
	data, status, reply := c.topics()
	o.SetOnConnectHandler(func(cl mqtt.Client) {
		c.log.Info("connected to the broker")
		// Subscriptions survive in the persistent session; subscribing again is harmless and
		// covers a broker that lost its sessions.
		tok := cl.SubscribeMultiple(map[string]byte{data: 1, status: 1, reply: 1}, c.receive)
		go func() {
			switch {
			case !tok.WaitTimeout(30 * time.Second):
				c.log.Error("the broker did not confirm the subscriptions within 30 s")
			case tok.Error() != nil:
				c.log.Error("subscribing failed", "err", tok.Error())
			default:
				c.subscribed.Store(true)
			}
		}()
	})
	o.SetConnectionLostHandler(func(_ mqtt.Client, err error) {
		c.log.Warn("connection to the broker lost; reconnecting", "err", err)
	})
	// Messages the persistent session delivers before the subscription is made again still
	// arrive here.
	o.SetDefaultPublishHandler(c.receive)
	return o, nil
}

// receive classifies a message on paho's goroutine (validation runs in parallel) and queues
// it for the writer; when the writer falls behind, receive waits, and the broker holds the
// rest (nothing is acknowledged until written).
func (c *Collector) receive(_ mqtt.Client, m mqtt.Message) {
	e := entry{msg: m, item: c.in.classify(m.Topic(), m.Payload(), time.Now())}
	select {
	case c.msgs <- e:
	case <-c.stopped: // not acknowledged: the broker delivers it again next time
	}
}
