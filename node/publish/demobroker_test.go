package publish

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/demobroker"
	"github.com/leqnode/leqnode/node/testrig"
)

// TestDemoBroker: the in-process broker of leqnode demo (node/demobroker) carries the node's
// records.
func TestDemoBroker(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	url, stop, err := demobroker.Start(ctx, "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if err := stop(); err != nil {
			t.Error(err)
		}
	}()
	if !strings.HasPrefix(url, "tcp://127.0.0.1:") || strings.HasSuffix(url, ":0") {
		t.Fatalf("url %q", url)
	}
	col := newCollector(t, url, "wendlecross/#", nil)
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	p, err := New(Config{Brokers: []string{url}, TopicPrefix: "wendlecross"}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(new(testrig.SyncBuffer)))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	for i := range 30 {
		mustAppend(t, store, second(i, false))
	}
	mustAppend(t, store, minute(0, false))
	store.Flush()
	p.Notify()
	col.waitFor(20*time.Second, "30 seconds and a minute", func(msgs []received) bool {
		c, _ := countSeqs(t, msgs)
		return c.complete("second", 30) && c.complete("minute", 1)
	})

}
