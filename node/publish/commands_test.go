package publish

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	mqtt "github.com/eclipse/paho.mqtt.golang"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
	"github.com/santhosh-tekuri/jsonschema/v6"
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
		{"unknown field", `{"schema_version":1,"id":"a","action":"publish_status","x":1}`, allActions, "unknown key"},
		{"unknown action", `{"schema_version":1,"id":"a","action":"format_disk"}`, allActions, "unknown: want one of"},
		// The payload of issue 20 and its relatives: keys differing in case, one-digit hours.
		{"keys in another case", `{"sChemA_version":1,"id":"00","ACtion":"resend","from":"2031-05-01T0:00:00Z","to":"2031-05-01T1:00:00Z"}`, allActions, `sChemA_version: unknown key (keys are case-sensitive: write "schema_version")`},
		{"one key in another case", `{"schema_version":1,"ID":"a","id":"a","action":"publish_status"}`, allActions, `ID: unknown key`},
		{"one-digit hour", `{"schema_version":1,"id":"00","action":"resend","from":"2031-05-01T0:00:00Z","to":"2031-05-01T01:00:00Z"}`, allActions, "from: \"2031-05-01T0:00:00Z\" is not an RFC 3339 time"},
		{"one-digit minute", `{"schema_version":1,"id":"00","action":"resend","from":"2031-05-01T00:00:00Z","to":"2031-05-01T01:0:00Z"}`, allActions, "to: "},
		{"space for T", `{"schema_version":1,"id":"00","action":"resend","from":"2031-05-01 00:00:00Z","to":"2031-05-01T01:00:00Z"}`, allActions, "not an RFC 3339 time"},
		{"no offset", `{"schema_version":1,"id":"00","action":"resend","from":"2031-05-01T00:00:00","to":"2031-05-01T01:00:00Z"}`, allActions, "not an RFC 3339 time"},
		{"hour 24", `{"schema_version":1,"id":"00","action":"resend","from":"2031-05-01T24:00:00Z","to":"2031-05-02T01:00:00Z"}`, allActions, "out of range"},
		{"duplicate key", `{"schema_version":1,"id":"a","id":"b","action":"publish_status"}`, allActions, "id: the key appears more than once"},
		{"null from", `{"schema_version":1,"id":"a","action":"publish_status","from":null}`, allActions, "from: null is not allowed"},
		{"version as a string", `{"schema_version":"1","id":"a","action":"publish_status"}`, allActions, `schema_version: want a number, got the string "1"`},
		{"version 1.0", `{"schema_version":1.0,"id":"a","action":"publish_status"}`, allActions, ""},
		{"version 10e-1", `{"schema_version":10e-1,"id":"a","action":"publish_status"}`, allActions, ""},
		{"version 1.5", `{"schema_version":1.5,"id":"a","action":"publish_status"}`, allActions, "schema_version 1.5: want 1"},
		{"lower-case t and z", `{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04t08:00:00z","to":"2031-05-04t09:00:00.5z"}`, allActions, ""},
		{"invalid UTF-8", "{\"schema_version\":1,\"id\":\"a\",\"action\":\"publish_status\",\"\xff\":1}", allActions, "not valid UTF-8"},
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
		if tt.wantErr != "" && strings.Contains(tt.wantErr, "\n") {
			t.Fatalf("%s: errors are one line", tt.name)
		}
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
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error %q is not one line", err)
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

// FuzzParseCommand: no payload panics the parser; the parser and the published schema
// (configs/schema/command.schema.json) agree in both directions: decodeCommand accepts a
// payload exactly when it is I-JSON (RFC 7493: UTF-8, no repeated keys) that the schema
// accepts, and whatever parseCommand accepts on top (allow-list, range order and length)
// stays valid.
func FuzzParseCommand(f *testing.F) {
	for _, s := range []string{
		`{"schema_version":1,"id":"req-1","action":"publish_status"}`,
		`{"schema_version":1,"id":"r1","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T09:00:00Z","kinds":["second","minute"]}`,
		`{"schema_version":1,"id":"cal","action":"calibration_check"}`,
		`{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T08:00:00Z"}`,
		`{"sChemA_version":1,"id":"00","ACtion":"resend","from":"2031-05-01T0:00:00Z","to":"2031-05-01T1:00:00Z"}`,
		`{"schema_version":1.0,"id":"a","action":"resend","from":"1990-12-31T15:59:60-08:00","to":"1990-12-31t23:59:60.5z"}`,
		`{"schema_version":1,"id":"a","action":"resend","from":"2031-05-04T08:00:00+24:00","to":"2031-05-04T09:00:00+01:60"}`,
		`{"id":"\u0000","action":null}`, `null`, `{}`, `"x"`, ``,
	} {
		f.Add([]byte(s))
	}
	sch := commandSchema(f)
	f.Fuzz(func(t *testing.T, b []byte) {
		c, from, to, kinds, err := parseCommand(b, DefaultMaxCommandBytes, allActions, DefaultMaxResendRange)
		if err == nil && c.Action == ActionResend && (!to.After(from) || len(kinds) == 0) {
			t.Fatalf("accepted resend with range %v..%v kinds %v", from, to, kinds)
		}
		if err != nil && strings.Contains(err.Error(), "\n") {
			t.Fatalf("error of more than one line: %q", err)
		}
		_, _, _, decErr := decodeCommand(b)
		if err == nil && decErr != nil {
			t.Fatalf("parseCommand accepted what decodeCommand refuses: %q", b)
		}
		schemaErr := validIJSON(b)
		var v any
		if schemaErr == nil {
			v, schemaErr = jsonschema.UnmarshalJSON(bytes.NewReader(b))
		}
		if schemaErr == nil {
			schemaErr = sch.Validate(v)
		}
		switch {
		case decErr == nil && schemaErr != nil:
			t.Fatalf("the parser accepts %q, which the schema refuses: %v", b, schemaErr)
		case decErr != nil && schemaErr == nil:
			t.Fatalf("the schema accepts %q, which the parser refuses: %v", b, decErr)
		}
	})
}

// validIJSON reports whether b is one I-JSON value (RFC 7493 section 2: UTF-8, section 2.3:
// no object with a repeated member name), written here apart from package strict.
func validIJSON(b []byte) error {
	if !utf8.Valid(b) {
		return errors.New("not UTF-8")
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	type frame struct {
		obj  bool
		keys map[string]bool
		key  bool // the next token of an object is a key
	}
	var stack []*frame
	for {
		tok, err := dec.Token()
		if errors.Is(err, io.EOF) {
			if len(stack) > 0 {
				return errors.New("ends early")
			}
			return nil
		}
		if err != nil {
			return err
		}
		if n := len(stack); n > 0 && stack[n-1].obj && stack[n-1].key {
			if d, ok := tok.(json.Delim); !ok || d != '}' {
				k := tok.(string)
				if stack[n-1].keys[k] {
					return fmt.Errorf("repeated key %q", k)
				}
				stack[n-1].keys[k] = true
				stack[n-1].key = false
				continue
			}
		}
		if d, ok := tok.(json.Delim); ok {
			switch d {
			case '{':
				stack = append(stack, &frame{obj: true, keys: map[string]bool{}, key: true})
				continue
			case '[':
				stack = append(stack, &frame{})
				continue
			default:
				stack = stack[:len(stack)-1]
			}
		}
		if n := len(stack); n > 0 && stack[n-1].obj {
			stack[n-1].key = true
		}
		if len(stack) == 0 {
			if _, err := dec.Token(); !errors.Is(err, io.EOF) {
				return errors.New("data after the value")
			}
			return nil
		}
	}
}

// rfc3339DateTime is the date-time format of JSON Schema 2020-12 (section 7.3.1 of its
// validation vocabulary: RFC 3339 date-time), written out from RFC 3339 sections 5.6 and 5.7
// for the agreement test: the validator's own check reads hours and offsets with strconv.Atoi
// and so takes "+1" for an hour.
func rfc3339DateTime(v any) error {
	s, ok := v.(string)
	if !ok {
		return nil
	}
	re := regexp.MustCompile(`^(\d{4})-(\d{2})-(\d{2})[Tt](\d{2}):(\d{2}):(\d{2})(\.\d+)?([Zz]|[+-](\d{2}):(\d{2}))$`)
	m := re.FindStringSubmatch(s)
	if m == nil {
		return errors.New("not RFC 3339 date-time syntax")
	}
	num := func(i int) int { n, _ := strconv.Atoi(m[i]); return n }
	y, mo, d, h, mi, sec := num(1), num(2), num(3), num(4), num(5), num(6)
	// RFC 3339 section 5.7: day limits per month, February 29 in leap years (Appendix C).
	mdays := []int{31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31}
	if mo >= 1 && mo <= 12 && mo == 2 && (y%4 == 0 && (y%100 != 0 || y%400 == 0)) {
		mdays[1] = 29
	}
	if mo < 1 || mo > 12 || d < 1 || d > mdays[mo-1] || h > 23 || mi > 59 || sec > 60 {
		return errors.New("out of range")
	}
	off := 0
	if m[9] != "" {
		if num(9) > 23 || num(10) > 59 {
			return errors.New("offset out of range")
		}
		off = num(9)*60 + num(10)
		if m[8][0] == '-' {
			off = -off
		}
	}
	// Section 5.7: second 60 only for a leap second, which falls at 23:59 UTC.
	if u := ((h*60+mi-off)%1440 + 1440) % 1440; sec == 60 && u != 23*60+59 {
		return errors.New("leap second not at 23:59 UTC")
	}
	return nil
}

// commandSchema compiles command.schema.json with date-time checked by rfc3339DateTime.
func commandSchema(t testing.TB) *jsonschema.Schema {
	t.Helper()
	c := jsonschema.NewCompiler()
	c.AssertFormat()
	c.RegisterFormat(&jsonschema.Format{Name: "date-time", Validate: rfc3339DateTime})
	s, err := c.Compile(filepath.Join("..", "..", "configs", "schema", "command.schema.json"))
	if err != nil {
		t.Fatal(err)
	}
	return s
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
	var logs testrig.SyncBuffer
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
	if st, _ := store.Stats(); st.Streams[DefaultStream][record.KindSecond].Acked != 120 {
		t.Errorf("cursor %d after the resend, want 120", st.Streams[DefaultStream][record.KindSecond].Acked)
	}
}

// TestCommandsOffByDefault: without commands enabled the node does not even subscribe.
func TestCommandsOffByDefault(t *testing.T) {
	m := startMosquitto(t, brokerOpts{})
	col := newCollector(t, m.url("tcp"), "wendlecross/wendle-cross-03/reply", nil)
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross"}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(new(testrig.SyncBuffer)))
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
		Commands: CommandsConfig{Enabled: true}}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(new(testrig.SyncBuffer)))
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
