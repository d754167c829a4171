package publish

import (
	"io"
	"log/slog"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
)

// TestLiveBeforeCommit: with the store committing once an hour, a second record reaches the
// broker all the same, on the live topic, alone in its message after LiveWait (the default
// settings otherwise), while the store still holds it uncommitted.
func TestLiveBeforeCommit(t *testing.T) {
	m := startMosquitto(t, brokerOpts{})
	url := m.url("tcp")
	col := newCollector(t, url, "leqnode/+/live/second", nil)
	st, err := buffer.Open(filepath.Join(t.TempDir(), "node.db"), &buffer.Options{CommitInterval: time.Hour, NoSync: true,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	// The first record after Open is committed at once: append one and let it go.
	at := time.Date(2031, 5, 4, 8, 0, 0, 0, time.UTC)
	st.Append(&record.Second{Start: at, Duration: time.Second, LAeq: 50})
	p, err := New(Config{Brokers: []string{url}}.WithDefaults("wendle-cross-05"), st, Identity{NodeID: "wendle-cross-05"}, newLogger(new(testrig.SyncBuffer)))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	waitConnected(t, p)
	if _, err := st.Append(&record.Second{Start: at.Add(time.Second), Duration: time.Second, LAeq: 61.25}); err != nil {
		t.Fatal(err)
	}
	p.Notify()
	col.waitFor(20*time.Second, "the live second", func(msgs []received) bool {
		for _, r := range msgs {
			if strings.Contains(string(r.payload), "61.25") {
				return true
			}
		}
		return false
	})
	if s, _ := st.Stats(); s.Kinds[record.KindSecond].LastSeq != 1 {
		t.Errorf("the store committed the second record (last committed %d): the test shows nothing", s.Kinds[record.KindSecond].LastSeq)
	}
}
