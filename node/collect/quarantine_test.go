package collect

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"strings"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/node/testrig"
)

// good returns a valid gap payload of node wendle-cross-04 (configs/schema/gap.schema.json).
func good(seq int, node string) string {
	at := t0.Add(time.Duration(seq) * time.Minute)
	return fmt.Sprintf(`{"schema_version":1,"kind":"gap","node":%q,"store":"0a0b0c0d0e0f1011","delivery":"live","seq":%d,"start":%q,"start_ms":%d,"end":%q,"end_ms":%d,"reason":"device lost"}`,
		node, seq, at.Format("2006-01-02T15:04:05.000Z"), at.UnixMilli(), at.Add(time.Second).Format("2006-01-02T15:04:05.000Z"), at.Add(time.Second).UnixMilli())
}

// quarantineCases are bad payloads of every kind the collector must hold back, with the
// reason each must get. Each is followed by a good payload, which must be stored.
var quarantineCases = []struct {
	name, topic, payload, reason string
}{
	{"not json", "wendlecross/wendle-cross-04/live/gap", `{"schema_version":1,"kind":`, ReasonNotJSON},
	{"not an object", "wendlecross/wendle-cross-04/live/gap", `[1,2,3]`, ReasonNotJSON},
	{"unknown schema version", "wendlecross/wendle-cross-04/live/gap", strings.Replace(good(1, "wendle-cross-04"), `"schema_version":1`, `"schema_version":2`, 1), ReasonSchemaVersion},
	{"node differs from topic", "wendlecross/wendle-cross-09/live/gap", good(2, "wendle-cross-04"), ReasonTopic},
	{"kind differs from topic", "wendlecross/wendle-cross-04/live/minute", good(3, "wendle-cross-04"), ReasonTopic},
	{"delivery differs from topic", "wendlecross/wendle-cross-04/backlog/gap", good(4, "wendle-cross-04"), ReasonTopic},
	{"unknown field", "wendlecross/wendle-cross-04/live/gap", strings.Replace(good(5, "wendle-cross-04"), `"reason"`, `"mood":"grim","reason"`, 1), ReasonSchema},
	{"missing field", "wendlecross/wendle-cross-04/live/gap", strings.Replace(good(6, "wendle-cross-04"), `,"reason":"device lost"`, ``, 1), ReasonSchema},
	{"bad store id", "wendlecross/wendle-cross-04/live/gap", strings.Replace(good(7, "wendle-cross-04"), `0a0b0c0d0e0f1011`, `zz`, 1), ReasonSchema},
	{"time far ahead", "wendlecross/wendle-cross-04/live/gap", good(60*24*400, "wendle-cross-04"), ReasonContent},
	{"seconds count mismatch", "wendlecross/wendle-cross-04/live/second", `{"schema_version":1,"kind":"second","node":"wendle-cross-04","store":"0a0b0c0d0e0f1011","delivery":"live","seq":1,"start":"2031-05-04T08:00:00.000Z","start_ms":1967702400000,"last_seq":2,"count":2,"columns":{"seq":[1],"start_ms":[1967702400000],"duration_s":[1],"flags":[[]],"dropped_samples":[0]}}`, ReasonContent},
	{"level beyond real", "wendlecross/wendle-cross-04/live/minute", `{"schema_version":1,"kind":"minute","node":"wendle-cross-04","store":"0a0b0c0d0e0f1011","delivery":"live","seq":1,"start":"2031-05-04T08:00:00.000Z","start_ms":` + fmt.Sprint(t0.UnixMilli()) + `,"LAeq":1e300,"LCeq":null,"LZeq":null,"LAFmax":null,"LAFmin":null,"LAF1":null,"LAF5":null,"LAF10":null,"LAF50":null,"LAF90":null,"LAF95":null,"LAF99":null,"LAE":null,"LCpeak":null,"LAImax":null,"valid_seconds":60,"flags":[]}`, ReasonContent},
	// PostgreSQL text cannot hold the character U+0000 (SQLSTATE 22P05): the database refuses
	// the record, not the schema.
	{"refused by the database", "wendlecross/wendle-cross-04/live/gap", strings.Replace(good(11, "wendle-cross-04"), `"device lost"`, `"device\u0000lost"`, 1), ReasonDatabase},
	{"unknown delivery", "wendlecross/wendle-cross-04/odd/gap", good(9, "wendle-cross-04"), ReasonTopic},
}

// TestQuarantine: every kind of bad payload lands in the quarantine table with its reason,
// is counted, and does not hold up the good payload behind it.
func TestQuarantine(t *testing.T) {
	r := newRig(t)
	listen := fmt.Sprintf("127.0.0.1:%d", testrig.FreePort(t))
	col, _ := runCollector(t, r.config(func(c *Config) { c.Broker.MaxPayloadBytes = 4096; c.Listen = listen }), Options{})
	cases := append(quarantineCases, struct{ name, topic, payload, reason string }{
		"too large", "wendlecross/wendle-cross-04/live/gap", strings.Repeat(" ", 5000) + good(10, "wendle-cross-04"), ReasonTooLarge})
	opts := mqtt.NewClientOptions().AddBroker(r.broker.URL("tcp")).SetClientID("wendle-test-sender")
	cl := mqtt.NewClient(opts)
	if tok := cl.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatal(tok.Error())
	}
	defer cl.Disconnect(100)
	for i, c := range cases {
		for _, m := range []struct{ topic, payload string }{{c.topic, c.payload}, {"wendlecross/wendle-cross-04/live/gap", good(100+i, "wendle-cross-04")}} {
			if tok := cl.Publish(m.topic, 1, false, m.payload); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
				t.Fatal(tok.Error())
			}
		}
	}
	ctx := context.Background()
	waitUntil(t, 30*time.Second, "every payload", func() (bool, string) {
		var q, g int
		_ = r.db.Pool().QueryRow(ctx, "SELECT (SELECT count(*) FROM leqnode.quarantine), (SELECT count(*) FROM leqnode.gaps)").Scan(&q, &g)
		return q == len(cases) && g == len(cases), fmt.Sprintf("%d quarantined, %d good stored", q, g)
	})
	rows, err := r.db.Pool().Query(ctx, "SELECT topic, reason, payload FROM leqnode.quarantine ORDER BY id")
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	// The collector's workers may store them in any order: match each row to its case by its
	// topic and payload.
	seen := map[string]bool{}
	for rows.Next() {
		var topic, reason string
		var payload []byte
		if err := rows.Scan(&topic, &reason, &payload); err != nil {
			t.Fatal(err)
		}
		found := false
		for _, c := range cases {
			if topic != c.topic || string(payload) != c.payload {
				continue
			}
			found, seen[c.name] = true, true
			if !strings.HasPrefix(reason, c.reason+": ") || strings.Contains(reason, "\n") {
				t.Errorf("%s: quarantined as %q, want reason %q", c.name, reason, c.reason)
			}
		}
		if !found {
			t.Errorf("quarantined %q on %s: no such case, or the payload was changed", payload, topic)
		}
	}
	for _, c := range cases {
		if !seen[c.name] {
			t.Errorf("%s: not quarantined", c.name)
		}
	}
	counts := col.Counts()
	want := map[string]float64{}
	for _, c := range cases {
		want["quarantined_total/"+c.reason]++
	}
	for k, v := range want {
		if counts[k] != v {
			t.Errorf("%s = %v, want %v", k, counts[k], v)
		}
	}
	// The same counts on the collector's endpoint, in the Prometheus text format and as JSON.
	resp, err := http.Get("http://" + listen + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	line := fmt.Sprintf("leqnode_collect_quarantined_total{reason=%q} %v\n", ReasonSchema, want["quarantined_total/"+ReasonSchema])
	if !strings.Contains(string(body), line) {
		t.Errorf("/metrics lacks %q:\n%s", line, body)
	}
	resp, err = http.Get("http://" + listen + "/status")
	if err != nil {
		t.Fatal(err)
	}
	var status map[string]float64
	err = json.NewDecoder(resp.Body).Decode(&status)
	resp.Body.Close()
	if err != nil || status["quarantined_total/"+ReasonTopic] != want["quarantined_total/"+ReasonTopic] {
		t.Errorf("/status: %v %v", status, err)
	}
}

// FuzzIntake: the payload intake never panics, and whatever it accepts converts to rows whose
// node and kind are those of the topic.
func FuzzIntake(f *testing.F) {
	for _, c := range quarantineCases {
		f.Add(c.topic, []byte(c.payload))
	}
	f.Add("wendlecross/wendle-cross-04/live/gap", []byte(good(1, "wendle-cross-04")))
	in, err := newIntake("wendlecross", 1<<20)
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, topic string, payload []byte) {
		it := in.classify(topic, payload, t0)
		switch it.class {
		case classBad:
			if it.bad == nil || it.bad.Reason == "" || string(it.bad.Payload) != string(payload) {
				t.Fatalf("bad payload without reason or payload: %+v", it.bad)
			}
		case classData:
			parts := strings.Split(topic, "/")
			for _, r := range it.rows {
				if r.Node != parts[1] || r.Kind != parts[3] {
					t.Fatalf("row of %s %s from topic %s", r.Node, r.Kind, topic)
				}
			}
		}
	})
}
