package publish

import (
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"math"
	"math/rand/v2"
	"os"
	"os/signal"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
)

// The tests run a real mosquitto (Debian package mosquitto) on 127.0.0.1, real bbolt stores
// from package buffer and a real paho client as the consumer.

// mosquitto is a broker process on 127.0.0.1 that a test starts, stops and restarts (package
// testrig, shared with the collector's tests).
type mosquitto struct{ *testrig.Mosquitto }

type brokerOpts = testrig.BrokerOptions

func freePort(t testing.TB) int { return testrig.FreePort(t) }

func needTools(t testing.TB) { testrig.NeedMosquitto(t) }

func startMosquitto(t testing.TB, o brokerOpts) *mosquitto {
	t.Helper()
	return &mosquitto{testrig.StartMosquitto(t, o)}
}

func (m *mosquitto) url(scheme string) string { return m.URL(scheme) }
func (m *mosquitto) start()                   { m.Start() }
func (m *mosquitto) stop()                    { m.Stop() }

// received is one message seen by the collector.
type received struct {
	topic   string
	payload []byte
}

// collector is an MQTT consumer: a paho client with a persistent session subscribed with QoS 1.
type collector struct {
	t      testing.TB
	client mqtt.Client
	mu     sync.Mutex
	msgs   []received
}

func newCollector(t testing.TB, url string, filter string, tweak func(*mqtt.ClientOptions)) *collector {
	t.Helper()
	c := &collector{t: t}
	opts := mqtt.NewClientOptions().AddBroker(url).SetClientID(fmt.Sprintf("collector-%d", time.Now().UnixNano())).
		SetCleanSession(false).SetAutoReconnect(true).SetMaxReconnectInterval(200 * time.Millisecond).
		SetConnectRetry(true).SetConnectRetryInterval(200 * time.Millisecond).SetOrderMatters(false)
	opts.SetOnConnectHandler(func(cl mqtt.Client) {
		cl.Subscribe(filter, 1, func(_ mqtt.Client, m mqtt.Message) {
			c.mu.Lock()
			c.msgs = append(c.msgs, received{m.Topic(), append([]byte(nil), m.Payload()...)})
			c.mu.Unlock()
		}).Wait()
	})
	if tweak != nil {
		tweak(opts)
	}
	c.client = mqtt.NewClient(opts)
	tok := c.client.Connect()
	if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("collector cannot connect: %v", tok.Error())
	}
	// wait for the subscription made in the connect handler
	time.Sleep(100 * time.Millisecond)
	t.Cleanup(func() { c.client.Disconnect(100) })
	return c
}

func (c *collector) snapshot() []received {
	c.mu.Lock()
	defer c.mu.Unlock()
	return append([]received(nil), c.msgs...)
}

// waitFor polls cond over the collected messages until it holds or the timeout passes.
func (c *collector) waitFor(timeout time.Duration, what string, cond func([]received) bool) {
	c.t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		if cond(c.snapshot()) {
			return
		}
		if time.Now().After(deadline) {
			c.t.Fatalf("timed out after %s waiting for %s (%d messages received)", timeout, what, len(c.snapshot()))
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// seqCount counts, per kind, how often each sequence number arrived on the data topics, and the
// deliveries seen.
type seqCount map[string]map[uint64]int

func countSeqs(t testing.TB, msgs []received) (seqCount, map[string]int) {
	t.Helper()
	counts := seqCount{}
	deliveries := map[string]int{}
	for _, m := range msgs {
		parts := strings.Split(m.topic, "/")
		if len(parts) != 4 || (parts[2] != DeliveryLive && parts[2] != DeliveryBacklog && parts[2] != DeliveryResend) {
			continue
		}
		var p struct {
			Kind     string `json:"kind"`
			Delivery string `json:"delivery"`
			Seq      uint64 `json:"seq"`
			Columns  struct {
				Seq []uint64 `json:"seq"`
			} `json:"columns"`
		}
		if err := json.Unmarshal(m.payload, &p); err != nil {
			t.Fatalf("payload on %s is not JSON: %v", m.topic, err)
		}
		if p.Kind != parts[3] || p.Delivery != parts[2] {
			t.Fatalf("topic %s carries kind %q delivery %q", m.topic, p.Kind, p.Delivery)
		}
		deliveries[p.Delivery]++
		if counts[p.Kind] == nil {
			counts[p.Kind] = map[uint64]int{}
		}
		if p.Kind == "second" {
			for _, s := range p.Columns.Seq {
				counts[p.Kind][s]++
			}
		} else {
			counts[p.Kind][p.Seq]++
		}
	}
	return counts, deliveries
}

// complete reports whether kind holds every sequence number 1..n.
func (c seqCount) complete(kind string, n uint64) bool {
	for s := uint64(1); s <= n; s++ {
		if c[kind][s] == 0 {
			return false
		}
	}
	return true
}

// openStore opens a real bbolt store with a short commit interval (no fsync: test speed).
func openStore(t testing.TB, path string) *buffer.Store {
	t.Helper()
	s, err := buffer.Open(path, &buffer.Options{CommitInterval: 20 * time.Millisecond, NoSync: true,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// The demo scenario: node "wendle-cross-03" at Harrowby Lane in the invented town of Wendle Cross.
var t0 = time.Date(2031, 5, 4, 8, 0, 0, 0, time.UTC)

// spectrum returns 33 one-third-octave levels, bands -19 (12.5 Hz) to 13 (20 kHz).
func spectrum(i int) []float64 {
	s := make([]float64, 33)
	for b := range s {
		s[b] = 40 + 10*math.Sin(float64(i+b)/5)
	}
	return s
}

func second(i int, spectra bool) *record.Second {
	r := &record.Second{Start: t0.Add(time.Duration(i) * time.Second), Duration: time.Second,
		LAeq: 55 + float64(i%7), LCeq: 62, LZeq: 66, LAFmax: 61.3, LAFmin: 50.2, LASmax: 58.9, LASmin: 52.1,
		LAImax: 63.4, LCpeak: 88.1, LZpeak: 90.5, LAE: 55 + float64(i%7)}
	if spectra {
		r.Spectrum, r.FirstBand = spectrum(i), -19
	}
	if i == 0 {
		r.Flags = record.Settling
	}
	return r
}

func minute(i int, spectra bool) *record.Minute {
	r := &record.Minute{Start: t0.Add(time.Duration(i) * time.Minute), LAeq: 57.2, LCeq: 63, LZeq: 67.5,
		LAFmax: 71.2, LAFmin: 48.3, LAF1: 69, LAF5: 65, LAF10: 62, LAF50: 56, LAF90: 51, LAF95: 50, LAF99: 49,
		LAE: 75, LCpeak: 95.1, LAImax: 73, ValidSeconds: 60}
	if spectra {
		r.Spectrum, r.FirstBand = spectrum(i), -19
	}
	return r
}

// appendAll appends one record of every kind but second and minute, at minute i.
func otherRecords(i int) []record.Record {
	at := t0.Add(time.Duration(i) * time.Minute)
	return []record.Record{
		&record.Event{Start: at.Add(5 * time.Second), End: at.Add(9 * time.Second), LAFmax: 82.5, LAeq: 76.1, LAE: 82.1, LCpeak: 101.2, Spectrum: spectrum(i), FirstBand: -19},
		&record.Calibration{At: at, Reference: 94, Measured: 94.12, Deviation: 0.12, Frequency: 1000.2, Stability: 0.03, SensitivityBefore: -26.1, SensitivityAfter: -26.0, Applied: true, OK: true},
		&record.Health{At: at, CPU: 12.5, MemoryMB: 31, DiskFreeMB: 5120, DCOffset: math.NaN(), ClockErrorMs: math.NaN(), TemperatureC: 44, StoreBytes: 1 << 20, ClockSynced: true},
		&record.Gap{From: at, To: at.Add(2 * time.Second), Reason: "device lost"},
		&record.Annotation{From: at, To: at.Add(30 * time.Second), Flags: record.Excluded, Reason: "road works on Harrowby Lane"},
		&record.Session{At: at, SoftwareVersion: "0.1.0-test", ConfigHash: "c0ffee", SensitivityDBFS: -26, SampleRate: 48000, Device: "testsig", TimeZone: "UTC"},
	}
}

func mustAppend(t testing.TB, s *buffer.Store, r record.Record) uint64 {
	t.Helper()
	seq, err := s.Append(r)
	if err != nil {
		t.Fatal(err)
	}
	return seq
}

// runPublisher starts p.Run in the background and stops it at the end of the test.
func runPublisher(t testing.TB, p *Publisher) (stop func()) {
	t.Helper()
	return testrig.Background(t, "Run", 10*time.Second, p.Run)
}

func newLogger(w *testrig.SyncBuffer) *slog.Logger {
	return slog.New(slog.NewTextHandler(w, &slog.HandlerOptions{Level: slog.LevelDebug}))
}

// waitConnected waits until the publisher reports a connection.
func waitConnected(t testing.TB, p *Publisher) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !p.Status().Connected {
		if time.Now().After(deadline) {
			t.Fatalf("publisher not connected after 10 s: %+v", p.Status())
		}
		time.Sleep(10 * time.Millisecond)
	}
}

func signalNotify(ch chan os.Signal) { signal.Notify(ch, syscall.SIGTERM, os.Interrupt) }

func newTestRand() *rand.Rand { return rand.New(rand.NewPCG(1, 2)) }
