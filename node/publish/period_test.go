package publish

import (
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
)

func TestPeriodMessage(t *testing.T) {
	// A closed period's indicators reach a real mosquitto on PREFIX/NODE/live/period, matching
	// configs/schema/period.schema.json, with null for a level that does not exist.
	m := startMosquitto(t, brokerOpts{})
	url := m.url("tcp")
	col := newCollector(t, url, "leqnode/#", nil)
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	p, err := New(Config{Brokers: []string{url}}, store, Identity{NodeID: "wendle-cross-01"}, newLogger(new(testrig.SyncBuffer)))
	if err != nil {
		t.Fatal(err)
	}
	from := time.Date(2026, 5, 3, 21, 0, 0, 0, time.UTC) // 23:00 local (Europe/Berlin, summer)
	msg := PeriodMessage{Profile: "eu-lden", Zone: "", Period: "night", Day: time.Date(2026, 5, 3, 0, 0, 0, 0, time.UTC),
		From: from, To: from.Add(8 * time.Hour), Hours: 8, Penalty: 10, LAeq: 47.123, LCeq: 55.2, LAF10: 49.05,
		LAF90: 38.95, LAFmax: math.NaN(), Events: 3, Limit: math.NaN(), Coverage: 0.98}
	msg.Seconds.Counted, msg.Seconds.Overload = 28224, 12
	msg.Seconds.LeftOut[record.ReasonCalibrating] = 30
	payload := p.PeriodPayload(msg)
	if !p.PublishPeriod(payload) {
		t.Fatal("the period queue refused the first message")
	}
	runPublisher(t, p)
	col.waitFor(20*time.Second, "the period message", func(msgs []received) bool {
		for _, r := range msgs {
			if strings.HasSuffix(r.topic, "/live/period") {
				return true
			}
		}
		return false
	})
	sch := schemas(t)
	for _, r := range col.snapshot() {
		if r.topic == "leqnode/wendle-cross-01/live/period" {
			validate(t, sch, r.topic, r.payload)
			s := string(r.payload)
			for _, want := range []string{`"LAeq":47.12`, `"LAFmax":null`, `"period":"night"`, `"hours":8`,
				`"bound":"lower"`, `"valid_seconds":28224`, `"overload_seconds":12`, `"calibrating_seconds":30`} {
				if !strings.Contains(s, want) {
					t.Errorf("payload lacks %s: %s", want, s)
				}
			}
			return
		}
	}
	t.Fatal("no message on leqnode/wendle-cross-01/live/period")
}
