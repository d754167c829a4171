package collect

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/fleetdb"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/testrig"
)

// The tests run a real PostgreSQL and a real mosquitto (package testrig), real bbolt stores
// and the node's real publisher (package publish) as the nodes of the invented town of
// Wendle Cross.

// TestMain runs the collector as a child process when asked (the SIGKILL test needs one).
func TestMain(m *testing.M) {
	if cfg := os.Getenv("LEQNODE_COLLECT_CHILD"); cfg != "" {
		c, err := LoadConfig(cfg)
		if err == nil {
			var col *Collector
			if col, err = New(c, Options{Logger: slog.New(slog.NewTextHandler(os.Stderr, nil))}); err == nil {
				ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM, os.Interrupt)
				err = col.Run(ctx)
				stop()
			}
		}
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// rig is a database and a broker for one test.
type rig struct {
	t      testing.TB
	pg     *testrig.Postgres
	broker *testrig.Mosquitto
	db     *fleetdb.DB
	dir    string
}

func newRig(t testing.TB) *rig {
	t.Helper()
	r := &rig{t: t, dir: t.TempDir()}
	r.pg = testrig.StartPostgres(t, testrig.PostgresOptions{})
	if out, err := r.pg.Psql("postgres", "CREATE DATABASE fleet"); err != nil {
		t.Fatalf("create database: %v\n%s", err, out)
	}
	// Messages stay unacknowledged until their commit: the broker must let a whole batch be in
	// flight (mosquitto's default is 20).
	r.broker = testrig.StartMosquitto(t, testrig.BrokerOptions{Persistent: true,
		ExtraConfigLines: []string{"max_inflight_messages 1000", "max_queued_messages 0"}})
	db, err := fleetdb.Open(context.Background(), fleetdb.Options{URL: r.pg.URL("fleet")})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(db.Close)
	r.db = db
	return r
}

// config returns a collector configuration for the rig; tweak may change it.
func (r *rig) config(tweak func(*Config)) *Config {
	c := DefaultConfig()
	c.Broker.URLs = []string{r.broker.URL("tcp")}
	c.Broker.ClientID = "wendle-collector-1"
	c.Broker.TopicPrefix = "wendlecross"
	c.Database.URL = r.pg.URL("fleet")
	c.Listen = ""
	c.Batch.MaxWait = Duration(50 * time.Millisecond)
	c.Resend.Interval = Duration(200 * time.Millisecond)
	if tweak != nil {
		tweak(&c)
	}
	return &c
}

// configFile writes c as TOML for a child collector.
func (r *rig) configFile(c *Config) string {
	r.t.Helper()
	p := filepath.Join(r.dir, "collector.toml")
	text := fmt.Sprintf(`version = 1
listen = ""
[broker]
urls = [%q]
client_id = %q
share_group = %q
topic_prefix = %q
[database]
url = %q
[batch]
max_wait = %q
`, c.Broker.URLs[0], c.Broker.ClientID, c.Broker.ShareGroup, c.Broker.TopicPrefix, c.Database.URL, c.Batch.MaxWait)
	if err := os.WriteFile(p, []byte(text), 0o600); err != nil {
		r.t.Fatal(err)
	}
	return p
}

// runCollector runs a collector in this process until the returned stop is called.
func runCollector(t testing.TB, c *Config, opts Options) (col *Collector, stop func()) {
	t.Helper()
	if opts.Logger == nil {
		opts.Logger = slog.New(slog.NewTextHandler(testWriter{t}, nil))
	}
	col, err := New(c, opts)
	if err != nil {
		t.Fatal(err)
	}
	stop = testrig.Background(t, "collector", 15*time.Second, col.Run)
	waitUntil(t, 30*time.Second, "the collector's subscriptions", func() (bool, string) { return col.Subscribed(), "" })
	return col, stop
}

// child is a collector in a child process (this test binary, see TestMain).
type child struct {
	cmd *exec.Cmd
	log *strings.Builder
}

func startChild(t testing.TB, cfgPath string) *child {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	c := &child{cmd: exec.Command(exe, "-test.run=^$"), log: &strings.Builder{}}
	c.cmd.Env = append(os.Environ(), "LEQNODE_COLLECT_CHILD="+cfgPath)
	c.cmd.Stderr = c.log
	if err := c.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = c.cmd.Process.Kill(); _ = c.cmd.Wait() })
	return c
}

// kill ends the child with SIGKILL: no clean shutdown, nothing flushed.
func (c *child) kill() {
	_ = c.cmd.Process.Signal(syscall.SIGKILL)
	_ = c.cmd.Wait()
}

// fleetNode is a node of Wendle Cross: a real store and the real publisher.
type fleetNode struct {
	id    string
	store *buffer.Store
	pub   *publish.Publisher
	stop  func()
	n     int // seconds appended so far
}

func startNode(t testing.TB, r *rig, id string, tweak func(*publish.Config)) *fleetNode {
	t.Helper()
	store, err := buffer.Open(filepath.Join(t.TempDir(), id+".db"), &buffer.Options{CommitInterval: 20 * time.Millisecond, NoSync: true,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { store.Close() })
	pc := publish.Config{Brokers: []string{r.broker.URL("tcp")}, TopicPrefix: "wendlecross", SecondsPerMessage: 10,
		StatusInterval: publish.Duration(5 * time.Second), ReconnectMaxDelay: publish.Duration(time.Second)}
	if tweak != nil {
		tweak(&pc)
	}
	p, err := publish.New(pc, store, publish.Identity{NodeID: id, Site: "Harrowby Lane, Wendle Cross", SoftwareVersion: "0.1.0-test"},
		slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- p.Run(ctx) }()
	n := &fleetNode{id: id, store: store, pub: p}
	n.stop = func() { cancel(); <-done }
	t.Cleanup(func() { n.stop() })
	return n
}

// t0 is the start of the invented measurements: yesterday, 08:00 UTC, since the collector
// refuses records dated more than a day ahead of its clock.
var t0 = time.Now().UTC().Truncate(24 * time.Hour).Add(-16 * time.Hour)

// add appends count seconds of records: a second record each second and, at each minute's
// end, a minute record and one record of every other kind.
func (n *fleetNode) add(t testing.TB, count int) {
	t.Helper()
	for range count {
		i := n.n
		at := t0.Add(time.Duration(i) * time.Second)
		n.append(t, &record.Second{Start: at, Duration: time.Second, LAeq: 48 + float64(i%13), LCeq: 60, LZeq: 64,
			LAFmax: 58.2, LAFmin: 44.1, LASmax: 56.3, LASmin: 45.9, LAImax: 60.4, LCpeak: 84.6, LZpeak: 86.1, LAE: 48 + float64(i%13)})
		if i%60 == 59 {
			m := at.Add(-59 * time.Second)
			for _, r := range []record.Record{
				&record.Minute{Start: m, LAeq: 53.4, LCeq: 61, LZeq: 65, LAFmax: 68.1, LAFmin: 44.2, LAF1: 66, LAF5: 62,
					LAF10: 59, LAF50: 52, LAF90: 46, LAF95: 45, LAF99: 44.5, LAE: 71.2, LCpeak: 90.3, LAImax: 70.2, ValidSeconds: 60},
				&record.Event{Start: m.Add(12 * time.Second), End: m.Add(17 * time.Second), LAFmax: 79.5, LAeq: 74.2, LAE: 81.2, LCpeak: 98.4},
				&record.Health{At: m, CPU: 9.5, MemoryMB: 28, DiskFreeMB: 4100, DCOffset: math.NaN(), ClockErrorMs: 1.5, TemperatureC: 41, ClockSynced: true},
				&record.Calibration{At: m, Reference: 94, Measured: 94.08, Deviation: 0.08, Frequency: 1000.1, Stability: 0.02,
					SensitivityBefore: -26.1, SensitivityAfter: -26.02, Applied: true, OK: true},
				&record.Gap{From: m.Add(30 * time.Second), To: m.Add(30 * time.Second), Reason: "test gap of no length"},
				&record.Annotation{From: m, To: m.Add(20 * time.Second), Flags: record.Excluded, Reason: "bin lorry on Harrowby Lane"},
				&record.Session{At: m, SoftwareVersion: "0.1.0-test", ConfigHash: "c0ffee", SensitivityDBFS: -26, SampleRate: 48000, Device: "synthetic", TimeZone: "UTC"},
			} {
				n.append(t, r)
			}
		}
		n.n++
	}
	if err := n.store.Flush(); err != nil {
		t.Fatal(err)
	}
	n.pub.Notify()
}

func (n *fleetNode) append(t testing.TB, r record.Record) {
	t.Helper()
	if _, err := n.store.Append(r); err != nil {
		t.Fatal(err)
	}
}

// storeCounts counts the node's stored records by kind.
func (n *fleetNode) storeCounts(t testing.TB) map[string]int64 {
	t.Helper()
	out := map[string]int64{}
	for _, k := range record.Kinds() {
		err := n.store.Range(k, time.Time{}, t0.Add(1000*time.Hour), func(record.Record) error {
			out[k.String()]++
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// dbCounts counts a store's rows by kind in the database, and the rows that appear twice.
func dbCounts(t testing.TB, db *fleetdb.DB, store string) (counts map[string]int64, dups int64) {
	t.Helper()
	ctx := context.Background()
	counts = map[string]int64{}
	for kind, table := range map[string]string{"second": "seconds", "minute": "minutes", "event": "events", "health": "health",
		"calibration": "calibrations", "gap": "gaps", "annotation": "annotations", "session": "sessions"} {
		var n, distinct int64
		q := fmt.Sprintf("SELECT count(*), count(DISTINCT seq) FROM leqnode.%s WHERE store_id = $1", table)
		if err := db.Pool().QueryRow(ctx, q, store).Scan(&n, &distinct); err != nil {
			t.Fatal(err)
		}
		counts[kind] = n
		dups += n - distinct
	}
	return counts, dups
}

// waitUntil polls cond until it holds or the timeout passes.
func waitUntil(t testing.TB, timeout time.Duration, what string, cond func() (bool, string)) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		ok, state := cond()
		if ok {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %s waiting for %s: %s", timeout, what, state)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

func equalCounts(a, b map[string]int64) bool {
	for _, k := range record.Kinds() {
		if a[k.String()] != b[k.String()] {
			return false
		}
	}
	return true
}

// testWriter sends logs to t.Log.
type testWriter struct{ t testing.TB }

func (w testWriter) Write(b []byte) (int, error) {
	w.t.Log(strings.TrimSpace(string(b)))
	return len(b), nil
}
