package publish

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/buffer"
)

var allActions = []string{ActionCalibrationCheck, ActionPublishStatus, ActionResend}

func TestParseCommand(t *testing.T) {
	long := `{"schema_version":1,"id":"a","action":"publish_status","pad":"` + strings.Repeat("x", 2000) + `"}`
	tests := []struct {
		name, in string
		allow    []string
		wantErr  string
	}{
		{"status", `{"schema_version":1,"id":"req-1","action":"publish_status"}`, allActions, ""},
		{"calibration", `{"schema_version":1,"id":"cal.7","action":"calibration_check"}`, allActions, ""},
		{"resend", `{"schema_version":1,"id":"r1","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T09:00:00Z","kinds":["second"]}`, allActions, ""},
		{"resend default kinds", `{"schema_version":1,"id":"r2","action":"resend","from":"2031-05-04T08:00:00+02:00","to":"2031-05-04T09:00:00+02:00"}`, allActions, ""},
		{"oversized", long, allActions, "exceeds the cap"},
		{"malformed", `{"schema_version":1,"id":`, allActions, "not a command object"},
		{"not an object", `[1,2]`, allActions, "not a command object"},
		{"two objects", `{"schema_version":1,"id":"a","action":"publish_status"}{}`, allActions, "data after"},
		{"unknown field", `{"schema_version":1,"id":"a","action":"publish_status","x":1}`, allActions, "unknown field"},
		{"unknown action", `{"schema_version":1,"id":"a","action":"format_disk"}`, allActions, "not allowed"},
		{"not on the allow-list", `{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T09:00:00Z"}`, []string{ActionPublishStatus}, "not allowed"},
		{"newer schema", `{"schema_version":2,"id":"a","action":"publish_status"}`, allActions, "schema_version"},
		{"no id", `{"schema_version":1,"action":"publish_status"}`, allActions, "id missing"},
		{"bad id", `{"schema_version":1,"id":"a/b#","action":"publish_status"}`, allActions, "id missing"},
		{"status with range", `{"schema_version":1,"id":"a","action":"publish_status","from":"2031-05-04T08:00:00Z"}`, allActions, "takes no"},
		{"resend reversed", `{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T09:00:00Z","to":"2031-05-04T08:00:00Z"}`, allActions, "want to after from"},
		{"resend too long", `{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T00:00:00Z","to":"2031-06-04T00:00:00Z"}`, allActions, "at most"},
		{"resend bad time", `{"schema_version":1,"id":"a","action":"resend","from":"yesterday","to":"2031-05-04T08:00:00Z"}`, allActions, "RFC 3339"},
		{"resend bad kind", `{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T09:00:00Z","kinds":["noise"]}`, allActions, "unknown kind"},
		{"resend empty kinds", `{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T09:00:00Z","kinds":[]}`, allActions, "kinds must"},
	}
	sch := schemas(t)["command"]
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, _, _, _, err := parseCommand([]byte(tt.in), DefaultMaxCommandBytes, tt.allow, DefaultMaxResendRange)
			if tt.wantErr == "" {
				if err != nil {
					t.Fatalf("parseCommand: %v", err)
				}
				if verr := sch.Validate(mustJSON(t, tt.in)); verr != nil {
					t.Errorf("accepted command fails command.schema.json: %v", verr)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
				t.Fatalf("error %v, want one containing %q", err, tt.wantErr)
			}
		})
	}
}

func mustJSON(t testing.TB, s string) any {
	t.Helper()
	var v any
	if err := json.Unmarshal([]byte(s), &v); err != nil {
		t.Fatal(err)
	}
	return v
}

// FuzzParseCommand: no payload panics the parser, and whatever it accepts matches the
// documented command schema.
func FuzzParseCommand(f *testing.F) {
	for _, s := range []string{
		`{"schema_version":1,"id":"req-1","action":"publish_status"}`,
		`{"schema_version":1,"id":"r1","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T09:00:00Z","kinds":["second","minute"]}`,
		`{"schema_version":1,"id":"cal","action":"calibration_check"}`,
		`{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T08:00:00Z"}`,
		`{"id":"\u0000","action":null}`, `null`, `{}`, `"x"`, ``,
	} {
		f.Add([]byte(s))
	}
	sch := schemas(f)["command"]
	f.Fuzz(func(t *testing.T, b []byte) {
		c, from, to, kinds, err := parseCommand(b, DefaultMaxCommandBytes, allActions, DefaultMaxResendRange)
		if err != nil {
			return
		}
		if c.Action == ActionResend && (!to.After(from) || len(kinds) == 0) {
			t.Fatalf("accepted resend with range %v..%v kinds %v", from, to, kinds)
		}
		var v any
		if json.Unmarshal(b, &v) != nil {
			t.Fatalf("accepted a payload encoding/json rejects: %q", b)
		}
		if err := sch.Validate(v); err != nil {
			t.Fatalf("accepted %q, which fails command.schema.json: %v", b, err)
		}
	})
}

// TestRemoteCommands: with commands enabled, valid commands get replies on the reply topic;
// malformed, oversized and unknown payloads are ignored (no reply) and logged once per minute.
func TestRemoteCommands(t *testing.T) {
	sch := schemas(t)
	m := startMosquitto(t, brokerOpts{})
	col := newCollector(t, m.url("tcp"), "wendlecross/#", nil)
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	for i := range 120 {
		mustAppend(t, store, second(i, false))
		if i%60 == 0 {
			mustAppend(t, store, minute(i/60, false))
		}
	}
	store.Flush()
	var logs logBuffer
	p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross", Commands: CommandsConfig{Enabled: true}},
		store, Identity{NodeID: "wendle-cross-03"}, newLogger(&logs))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	waitConnected(t, p)
	col.waitFor(20*time.Second, "the backlog", func(msgs []received) bool {
		c, _ := countSeqs(t, msgs)
		return c.complete("second", 120) && c.complete("minute", 2)
	})
	time.Sleep(200 * time.Millisecond) // the subscription is made in the connect handler

	cmd := mqtt.NewClient(mqtt.NewClientOptions().AddBroker(m.url("tcp")).SetClientID("commander"))
	if tok := cmd.Connect(); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatal(tok.Error())
	}
	defer cmd.Disconnect(100)
	send := func(s string) {
		if tok := cmd.Publish("wendlecross/wendle-cross-03/command", 1, false, s); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
			t.Fatal(tok.Error())
		}
	}
	for _, bad := range []string{
		`{"schema_version":1,"id":`, // malformed
		`{"schema_version":1,"id":"big","action":"publish_status","pad":"` + strings.Repeat("x", 4000) + `"}`, // oversized
		`{"schema_version":1,"id":"bad-1","action":"format_disk"}`,                                            // unknown action
		`{"schema_version":1,"id":"bad-2","action":"publish_status","urgent":true}`,                           // unknown field
		"\x00\xff\xfe garbage",
	} {
		send(bad)
	}
	send(`{"schema_version":1,"id":"st-1","action":"publish_status"}`)
	send(`{"schema_version":1,"id":"cal-1","action":"calibration_check"}`)
	send(`{"schema_version":1,"id":"rs-1","action":"resend","from":"2031-05-04T08:00:30Z","to":"2031-05-04T08:01:00Z","kinds":["second"]}`)

	select {
	case r := <-p.Requests():
		if r.ID != "cal-1" || r.Action != ActionCalibrationCheck {
			t.Errorf("request %+v", r)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("no calibration request reached the node")
	}
	type reply struct{ ID, Action, Result string }
	replies := func(msgs []received) []reply {
		var out []reply
		for _, m := range msgs {
			if m.topic == "wendlecross/wendle-cross-03/reply" {
				var r reply
				_ = json.Unmarshal(m.payload, &r)
				out = append(out, r)
			}
		}
		return out
	}
	col.waitFor(20*time.Second, "the resend to finish", func(msgs []received) bool {
		for _, r := range replies(msgs) {
			if r.ID == "rs-1" && r.Result == "done" {
				return true
			}
		}
		return false
	})
	time.Sleep(200 * time.Millisecond)
	msgs := col.snapshot()
	got := map[string][]string{}
	for _, r := range replies(msgs) {
		got[r.ID] = append(got[r.ID], r.Result)
	}
	want := map[string][]string{"st-1": {"done"}, "cal-1": {"accepted"}, "rs-1": {"accepted", "done"}}
	if len(got) != len(want) {
		t.Errorf("replies %v, want %v (ignored commands get none)", got, want)
	}
	for id, w := range want {
		if strings.Join(got[id], ",") != strings.Join(w, ",") {
			t.Errorf("replies to %s: %v, want %v", id, got[id], w)
		}
	}
	// The resent seconds 30..59 (sequence numbers 31..60), on the resend topic, with the request id.
	resent := map[uint64]bool{}
	for _, m := range msgs {
		if strings.HasSuffix(m.topic, "/command") {
			continue
		}
		kind := validate(t, sch, m.topic, m.payload)
		if !strings.Contains(m.topic, "/resend/") {
			continue
		}
		var p struct {
			Request string
			Columns struct{ Seq []uint64 }
		}
		_ = json.Unmarshal(m.payload, &p)
		if kind != "second" || p.Request != "rs-1" {
			t.Errorf("resend message kind %s request %q", kind, p.Request)
		}
		for _, s := range p.Columns.Seq {
			resent[s] = true
		}
	}
	if len(resent) != 30 || !resent[31] || !resent[60] {
		t.Errorf("resent sequence numbers %v, want 31..60", resent)
	}
	if n := strings.Count(logs.String(), "ignored a message on the command topic"); n != 1 {
		t.Errorf("%d log lines about ignored commands within a minute, want 1", n)
	}
	// Resends move no cursor.
	if st, _ := store.Stats(); st.Streams[DefaultStream][buffer.KindSecond].Acked != 120 {
		t.Errorf("cursor %d after the resend, want 120", st.Streams[DefaultStream][buffer.KindSecond].Acked)
	}
}

// TestCommandsOffByDefault: without commands enabled the node does not even subscribe.
func TestCommandsOffByDefault(t *testing.T) {
	m := startMosquitto(t, brokerOpts{})
	col := newCollector(t, m.url("tcp"), "wendlecross/wendle-cross-03/reply", nil)
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross"}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(new(logBuffer)))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	waitConnected(t, p)
	time.Sleep(200 * time.Millisecond)
	cmd := mqtt.NewClient(mqtt.NewClientOptions().AddBroker(m.url("tcp")).SetClientID("commander"))
	if tok := cmd.Connect(); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatal(tok.Error())
	}
	defer cmd.Disconnect(100)
	cmd.Publish("wendlecross/wendle-cross-03/command", 1, false, `{"schema_version":1,"id":"st-1","action":"publish_status"}`).Wait()
	time.Sleep(500 * time.Millisecond)
	if n := len(col.snapshot()); n != 0 {
		t.Errorf("%d replies with commands off", n)
	}
}

// TestCommandsAfterReconnect: the command subscription is made again on every connection (a
// broker restarted without persistence has forgotten it).
func TestCommandsAfterReconnect(t *testing.T) {
	m := startMosquitto(t, brokerOpts{})
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross", ReconnectMaxDelay: Duration(time.Second),
		Commands: CommandsConfig{Enabled: true}}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(new(logBuffer)))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	waitConnected(t, p)
	m.stop()
	m.start()
	deadline := time.Now().Add(10 * time.Second)
	for p.Status().Attempts == 0 && p.Status().LastError == "" && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond) // the loss is noticed
	}
	waitConnected(t, p)
	col := newCollector(t, m.url("tcp"), "wendlecross/wendle-cross-03/reply", nil)
	cmd := mqtt.NewClient(mqtt.NewClientOptions().AddBroker(m.url("tcp")).SetClientID("commander"))
	if tok := cmd.Connect(); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatal(tok.Error())
	}
	defer cmd.Disconnect(100)
	time.Sleep(200 * time.Millisecond) // the subscription made in the connect handler
	cmd.Publish("wendlecross/wendle-cross-03/command", 1, false, `{"schema_version":1,"id":"after-restart","action":"publish_status"}`).Wait()
	col.waitFor(10*time.Second, "a reply after the reconnect", func(msgs []received) bool { return len(msgs) > 0 })
}
