package publish

import (
	"encoding/json"
	"fmt"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/santhosh-tekuri/jsonschema/v6"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/schema"
	"github.com/leqnode/leqnode/node/testrig"
)

// schemas compiles the JSON Schema files of configs/schema (the documented payload formats),
// one per message kind.
func schemas(t testing.TB) map[string]*jsonschema.Schema {
	t.Helper()
	set, err := schema.Compile()
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]*jsonschema.Schema{}
	for _, k := range set.Kinds() {
		out[k] = set.Schema(k)
	}
	return out
}

// validate checks one payload against the schema named by its "kind".
func validate(t testing.TB, sch map[string]*jsonschema.Schema, topic string, payload []byte) string {
	t.Helper()
	inst, err := schema.Decode(payload)
	if err != nil {
		t.Fatalf("%s: payload is not JSON: %v\n%s", topic, err, payload)
	}
	kind, _ := inst.(map[string]any)["kind"].(string)
	s := sch[kind]
	if s == nil {
		t.Fatalf("%s: no schema for kind %q", topic, kind)
	}
	if err := s.Validate(inst); err != nil {
		t.Fatalf("%s: payload does not match %s.schema.json: %v\n%s", topic, kind, err, payload)
	}
	return kind
}

// TestNormalFlow: every record of every kind arrives exactly once, live, on its topic, and every
// payload (data, status) matches the documented JSON Schema.
func TestNormalFlow(t *testing.T) {
	for _, mode := range []string{SpectraSecond, SpectraMinute, SpectraNone} {
		t.Run(mode, func(t *testing.T) {
			sch := schemas(t)
			m := startMosquitto(t, brokerOpts{})
			col := newCollector(t, m.url("tcp"), "wendlecross/#", nil)
			store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
			defer store.Close()
			var logs testrig.SyncBuffer
			p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross", Spectra: mode},
				store, Identity{NodeID: "wendle-cross-03", Site: "Harrowby Lane, Wendle Cross", Location: &Location{10.04, -20.17}, SoftwareVersion: "0.1.0-test"}, newLogger(&logs))
			if err != nil {
				t.Fatal(err)
			}
			runPublisher(t, p)
			waitConnected(t, p)
			const nSec, nMin = 130, 3
			for i := 0; i < nSec; i++ {
				mustAppend(t, store, second(i, true))
				if i%50 == 0 {
					mustAppend(t, store, minute(i/50, true))
					for _, r := range otherRecords(i / 50) {
						mustAppend(t, store, r)
					}
				}
			}
			if err := store.Flush(); err != nil {
				t.Fatal(err)
			}
			p.Notify()
			col.waitFor(30*time.Second, "every record", func(msgs []received) bool {
				c, _ := countSeqs(t, msgs)
				for _, k := range []string{"event", "calibration", "health", "gap", "annotation", "session"} {
					if !c.complete(k, nMin) {
						return false
					}
				}
				return c.complete("second", nSec) && c.complete("minute", nMin)
			})
			time.Sleep(200 * time.Millisecond) // let any duplicate show up
			msgs := col.snapshot()
			counts, deliveries := countSeqs(t, msgs)
			for kind, seqs := range counts {
				for seq, n := range seqs {
					if n != 1 {
						t.Errorf("%s %d arrived %d times, want once", kind, seq, n)
					}
				}
			}
			if deliveries[DeliveryBacklog] != 0 || deliveries[DeliveryResend] != 0 {
				t.Errorf("deliveries %v: want live only", deliveries)
			}
			kinds := map[string]int{}
			for _, msg := range msgs {
				kinds[validate(t, sch, msg.topic, msg.payload)]++
				var env struct {
					Node, Store string
					Spectrum    json.RawMessage `json:"third_octave_LZeq"`
					Bands       []string        `json:"bands_hz"`
				}
				_ = json.Unmarshal(msg.payload, &env)
				if env.Node != "wendle-cross-03" || env.Store != store.ID() {
					t.Errorf("%s: node %q store %q", msg.topic, env.Node, env.Store)
				}
				switch {
				case strings.HasSuffix(msg.topic, "/second"):
					if got := len(env.Bands) > 0; got != (mode == SpectraSecond) {
						t.Errorf("spectra %s: second batch has bands %v", mode, env.Bands)
					}
				case strings.HasSuffix(msg.topic, "/minute"):
					if got := env.Spectrum != nil; got != (mode != SpectraNone) {
						t.Errorf("spectra %s: minute has spectrum %v", mode, got)
					}
				}
			}
			// 130 seconds in batches of 10: 13 messages.
			if kinds["second"] != 13 {
				t.Errorf("%d second messages, want 13 (batches of 10)", kinds["second"])
			}
			if kinds["status"] == 0 {
				t.Errorf("no status message")
			}
			st := p.Status()
			if !st.Connected || st.Backlog || st.Pending["second"] != 0 || st.Pending["minute"] != 0 {
				t.Errorf("status %+v: want connected, no backlog, nothing pending", st)
			}
			// The cursor moved on PUBACK and was persisted.
			ss, _ := store.Stats()
			if got := ss.Streams[DefaultStream][record.KindSecond].Acked; got != nSec {
				t.Errorf("second cursor %d, want %d", got, nSec)
			}
		})
	}
}

// TestSelectedKindsAndQuantities: publish.kinds and publish.second_quantities narrow what is
// sent; what is left out stays in the store as pending.
func TestSelectedKindsAndQuantities(t *testing.T) {
	sch := schemas(t)
	m := startMosquitto(t, brokerOpts{})
	col := newCollector(t, m.url("tcp"), "wendlecross/#", nil)
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross", Kinds: []string{"second", "minute"},
		SecondQuantities: []string{"LAFmax", "LAeq"}}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(new(testrig.SyncBuffer)))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	for i := range 20 {
		mustAppend(t, store, second(i, false))
	}
	mustAppend(t, store, minute(0, false))
	for _, r := range otherRecords(0) {
		mustAppend(t, store, r)
	}
	store.Flush()
	p.Notify()
	col.waitFor(20*time.Second, "seconds and minutes", func(msgs []received) bool {
		c, _ := countSeqs(t, msgs)
		return c.complete("second", 20) && c.complete("minute", 1)
	})
	time.Sleep(300 * time.Millisecond)
	for _, msg := range col.snapshot() {
		kind := validate(t, sch, msg.topic, msg.payload)
		switch kind {
		case "second":
			var p struct{ Columns map[string]json.RawMessage }
			_ = json.Unmarshal(msg.payload, &p)
			var names []string
			for k := range p.Columns {
				names = append(names, k)
			}
			slices.Sort(names)
			if got := strings.Join(names, ","); got != "LAFmax,LAeq,dropped_samples,duration_s,flags,seq,start_ms" {
				t.Errorf("second columns %s", got)
			}
		case "minute", "status":
		default:
			t.Errorf("a %s message went out; publish.kinds has only second and minute", kind)
		}
	}
	if st := p.Status(); st.Pending["event"] != 1 || st.Pending["second"] != 0 {
		t.Errorf("pending %v: want the event kept, the seconds delivered", st.Pending)
	}
}

// TestBrokerFailover: a dead first broker is skipped; the publisher settles on the next one.
func TestBrokerFailover(t *testing.T) {
	m := startMosquitto(t, brokerOpts{})
	dead := fmt.Sprintf("tcp://127.0.0.1:%d", freePort(t))
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	var logs testrig.SyncBuffer
	p, err := New(Config{Brokers: []string{dead, m.url("tcp")}, ReconnectMaxDelay: Duration(time.Second)}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(&logs))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	waitConnected(t, p)
	if st := p.Status(); st.Broker != m.url("tcp") || !strings.Contains(st.LastError, dead) {
		t.Errorf("status %+v: want connected to the second broker after an error naming the first", st)
	}
}

// TestAbsorb: sequence numbers with no stored record (removed by retention) and numbers already
// delivered are passed over, and the cursor moves across them.
func TestAbsorb(t *testing.T) {
	var in []record.Record
	for i := range 8 {
		in = append(in, second(i, false))
	}
	recs := stored(t, 0, in) // 1..8
	l := &lane{kind: record.KindSecond}
	l.done = l.done.add(6, 6) // delivered live in an earlier connection
	// 2, 3 and 5 were removed by retention; 8 lies past the boundary 7.
	pos, buf, past := l.absorb(0, 7, []record.Record{recs[0], recs[3], recs[5], recs[6], recs[7]}, nil)
	var got []uint64
	for _, r := range buf {
		got = append(got, r.Seq())
	}
	if pos != 7 || !past || fmt.Sprint(got) != "[1 4 7]" {
		t.Fatalf("absorb: pos %d past %v records %v, want 7 true [1 4 7]", pos, past, got)
	}
	l.done = l.done.add(1, 1).add(4, 4) // the broker acknowledges 1 and 4
	acked, rest := l.done.advance(0)
	if acked != 6 || len(rest) != 0 {
		t.Errorf("cursor %d rest %v, want 6 (2, 3, 5 removed, 6 delivered before) and nothing left", acked, rest)
	}
}

// TestStoreClosedUnderneath: a store closed while the publisher runs (a node shutting down in
// the wrong order) gives an error in the status and one log line, not a crash or a log flood.
func TestStoreClosedUnderneath(t *testing.T) {
	m := startMosquitto(t, brokerOpts{})
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	var logs testrig.SyncBuffer
	p, err := New(Config{Brokers: []string{m.url("tcp")}}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(&logs))
	if err != nil {
		t.Fatal(err)
	}
	stop := runPublisher(t, p)
	waitConnected(t, p)
	mustAppend(t, store, second(0, false))
	store.Close()
	for range 20 {
		p.Notify()
		time.Sleep(10 * time.Millisecond)
	}
	stop()
	if n := strings.Count(logs.String(), "level=ERROR"); n != 1 {
		t.Errorf("%d error lines, want 1:\n%s", n, logs.String())
	}
	if st := p.Status(); !strings.Contains(st.LastError, "store") {
		t.Errorf("last error %q: want the store named", st.LastError)
	}
}
