package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"log/slog"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/wav"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/testrig"
)

// TestOneTruthMQTT: the minute records of TestOneTruth's signal, published by the node's
// publisher through a real mosquitto, carry the record model's names and the stored numbers.
func TestOneTruthMQTT(t *testing.T) {
	m := testrig.StartMosquitto(t, testrig.BrokerOptions{})
	dir := t.TempDir()
	sig := writeWAV(t, dir, "street.wav", wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32}, consistencySignal()[:75*48000])
	db := filepath.Join(dir, "node.db")
	cfg := filepath.Join(dir, "node.toml")
	os.WriteFile(cfg, []byte(fmt.Sprintf("version = 1\n[node]\nid = \"wc-harrowby-04\"\n[microphone]\noverload_db = 110\n[capture]\nkind = \"file\"\nfile = %q\nrealtime = false\n[store]\npath = %q\n", sig, db)), 0o644)
	var out, errb strings.Builder
	if code := run(context.Background(), stdio{in: strings.NewReader(""), out: &out, err: &errb}, []string{"run", "--config", cfg}); code != 0 {
		t.Fatalf("leqnode run: exit %d: %s", code, errb.String())
	}
	st, err := buffer.Open(db, &buffer.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var mins []*record.Minute
	st.Range(record.KindMinute, time.Unix(0, 0), time.Now().Add(time.Hour), func(r record.Record) error { mins = append(mins, r.(*record.Minute)); return nil })

	got := make(chan map[string]any, 16)
	opts := mqtt.NewClientOptions().AddBroker(m.URL("tcp")).SetClientID("one-truth-reader")
	opts.SetOnConnectHandler(func(c mqtt.Client) {
		c.Subscribe("leqnode/+/+/minute", 1, func(_ mqtt.Client, msg mqtt.Message) {
			var v map[string]any
			if json.Unmarshal(msg.Payload(), &v) == nil {
				got <- v
			}
		}).Wait()
	})
	reader := mqtt.NewClient(opts)
	if tok := reader.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("reader: %v", tok.Error())
	}
	defer reader.Disconnect(100)
	pc := publish.Config{Brokers: []string{m.URL("tcp")}}.WithDefaults("wc-harrowby-04")
	pub, err := publish.New(pc, st, publish.Identity{NodeID: "wc-harrowby-04"}, slog.New(slog.DiscardHandler))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	go pub.Run(ctx)
	bySeq := map[uint64]map[string]any{}
	for len(bySeq) < len(mins) {
		select {
		case v := <-got:
			seq, _ := v["seq"].(float64)
			bySeq[uint64(seq)] = v
		case <-ctx.Done():
			t.Fatalf("%d of %d minute messages arrived", len(bySeq), len(mins))
		}
	}
	for _, mr := range mins {
		v := bySeq[mr.Seq()]
		for _, f := range record.Fields(record.KindMinute) {
			x, ok := v[f.Name]
			if !ok {
				t.Errorf("minute %d over MQTT lacks %q", mr.Seq(), f.Name)
				continue
			}
			switch want := f.Value(mr).(type) {
			case float64:
				if g, _ := x.(float64); !(math.IsNaN(want) && x == nil) && g != want {
					t.Errorf("minute %d %s: MQTT %v, stored %v", mr.Seq(), f.Name, x, want)
				}
			case uint64:
				if g, _ := x.(float64); uint64(g) != want {
					t.Errorf("minute %d %s: MQTT %v, stored %v", mr.Seq(), f.Name, x, want)
				}
			case string:
				if x != want {
					t.Errorf("minute %d %s: MQTT %v, stored %v", mr.Seq(), f.Name, x, want)
				}
			}
		}
	}
}

func readAll(res *http.Response) (string, error) {
	defer res.Body.Close()
	var b strings.Builder
	_, err := bufio.NewReader(res.Body).WriteTo(&b)
	return b.String(), err
}
