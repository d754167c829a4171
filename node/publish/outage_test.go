package publish

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
)

// TestOutage: the broker is stopped while the node keeps storing records, then restarted.
// Every sequence number of every stream arrives; the records stored during the outage arrive
// marked as backlog; duplicates are only the at-least-once kind (messages in flight when the
// connection died), bounded by the in-flight window.
func TestOutage(t *testing.T) {
	m := startMosquitto(t, brokerOpts{Persistent: true})
	col := newCollector(t, m.url("tcp"), "wendlecross/#", nil)
	store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
	defer store.Close()
	var logs testrig.SyncBuffer
	const window = 8
	p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross", ReconnectMaxDelay: Duration(time.Second),
		MaxInFlight: window, BacklogMessagesPerSecond: 500, KeepAlive: Duration(5 * time.Second)},
		store, Identity{NodeID: "wendle-cross-03"}, newLogger(&logs))
	if err != nil {
		t.Fatal(err)
	}
	runPublisher(t, p)
	waitConnected(t, p)

	// The node measures on (an accelerated source: a second record every millisecond).
	n := 0
	measure := func(count int) {
		for range count {
			mustAppend(t, store, second(n, false))
			if n%60 == 0 {
				mustAppend(t, store, minute(n/60, false))
				for _, r := range otherRecords(n / 60) {
					mustAppend(t, store, r)
				}
			}
			n++
			p.Notify()
			time.Sleep(time.Millisecond)
		}
	}
	measure(300)
	m.stop()
	measure(600) // stored while the broker is away
	for deadline := time.Now().Add(10 * time.Second); p.Status().Connected && time.Now().Before(deadline); {
		time.Sleep(10 * time.Millisecond) // a loaded machine may take a moment to see the lost connection
	}
	if p.Status().Connected {
		t.Errorf("status says connected while the broker is stopped")
	}
	m.start()
	measure(300)
	if err := store.Flush(); err != nil {
		t.Fatal(err)
	}
	nSec, nMin := uint64(n), uint64((n+59)/60)
	col.waitFor(60*time.Second, "every sequence number of every stream", func(msgs []received) bool {
		c, _ := countSeqs(t, msgs)
		if !c.complete("second", nSec) {
			return false
		}
		for _, k := range []string{"minute", "event", "calibration", "health", "gap", "annotation", "session"} {
			if !c.complete(k, nMin) {
				return false
			}
		}
		return true
	})
	counts, deliveries := countSeqs(t, col.snapshot())
	dups := 0
	for _, seqs := range counts {
		for _, c := range seqs {
			dups += c - 1
		}
	}
	t.Logf("deliveries %v, duplicated records %d", deliveries, dups)
	if deliveries[DeliveryBacklog] == 0 {
		t.Errorf("no message marked backlog after the outage")
	}
	// At-least-once: only messages in flight when the connection died can come twice: at most
	// the window, times 10 records for second batches, per lost connection (one here).
	if dups > window*DefaultSecondsPerMessage {
		t.Errorf("%d duplicated records: more than the in-flight window allows", dups)
	}
	deadline := time.Now().Add(5 * time.Second)
	for p.Status().Pending["second"] != 0 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond) // the last acknowledgements
	}
	if st := p.Status(); st.LastError == "" || st.Pending["second"] != 0 {
		t.Errorf("status %+v: want the outage recorded and nothing pending", st)
	}
}

// TestCrashDuringBackfill: a publisher process (this test binary re-executed) is killed with
// SIGKILL while it sends a backlog; a new process on the same store file sends what is missing.
func TestCrashDuringBackfill(t *testing.T) {
	m := startMosquitto(t, brokerOpts{Persistent: true})
	col := newCollector(t, m.url("tcp"), "wendlecross/#", nil)
	path := filepath.Join(t.TempDir(), "node.db")
	store := openStore(t, path)
	const nSec, nMin = 3000, 50
	for i := range nSec {
		mustAppend(t, store, second(i, true))
		if i%60 == 0 {
			mustAppend(t, store, minute(i/60, true))
		}
	}
	if err := store.Close(); err != nil {
		t.Fatal(err)
	}
	child := func(rate int) *exec.Cmd {
		cmd := exec.Command(os.Args[0], "-test.run=^TestPublisherChild$", "-test.v")
		cmd.Env = append(os.Environ(), "LEQNODE_PUBLISH_CHILD=1", "LEQNODE_CHILD_DB="+path,
			"LEQNODE_CHILD_BROKER="+m.url("tcp"), "LEQNODE_CHILD_RATE="+strconv.Itoa(rate))
		cmd.Stderr, cmd.Stdout = os.Stderr, nil
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		return cmd
	}
	first := child(100) // about 3.5 s for the 350 messages
	col.waitFor(30*time.Second, "part of the backlog", func(msgs []received) bool { return len(msgs) > 100 })
	if err := first.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	_ = first.Wait()
	// The broker publishes the node's last will: the retained status turns "offline".
	col.waitFor(10*time.Second, "the last will", func(msgs []received) bool {
		return len(msgs) > 0 && statusState(msgs) == "offline"
	})
	late := newCollector(t, m.url("tcp"), "wendlecross/wendle-cross-03/status", nil)
	late.waitFor(10*time.Second, "the retained status", func(msgs []received) bool { return statusState(msgs) == "offline" })
	got, _ := countSeqs(t, col.snapshot())
	if got.complete("second", nSec) {
		t.Fatalf("the backlog was complete before the kill: the test proves nothing")
	}
	second := child(-1)
	defer func() {
		_ = second.Process.Signal(syscall.SIGTERM)
		_ = second.Wait()
	}()
	col.waitFor(60*time.Second, "every record after the restart", func(msgs []received) bool {
		c, _ := countSeqs(t, msgs)
		return c.complete("second", nSec) && c.complete("minute", nMin)
	})
	counts, deliveries := countSeqs(t, col.snapshot())
	dups := 0
	for _, seqs := range counts {
		for _, c := range seqs {
			dups += c - 1
		}
	}
	t.Logf("deliveries %v, duplicated records after SIGKILL %d", deliveries, dups)
}

// TestPublisherChild is the publisher process of TestCrashDuringBackfill; it runs only when
// re-executed by that test.
func TestPublisherChild(t *testing.T) {
	if os.Getenv("LEQNODE_PUBLISH_CHILD") != "1" {
		t.Skip("runs only as the child process of TestCrashDuringBackfill")
	}
	store := openStore(t, os.Getenv("LEQNODE_CHILD_DB"))
	defer store.Close()
	rate, _ := strconv.Atoi(os.Getenv("LEQNODE_CHILD_RATE"))
	p, err := New(Config{Brokers: []string{os.Getenv("LEQNODE_CHILD_BROKER")}, TopicPrefix: "wendlecross",
		BacklogMessagesPerSecond: float64(rate), Spectra: SpectraSecond}, store, Identity{NodeID: "wendle-cross-03"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, stop := signalContext()
	defer stop()
	if err := p.Run(ctx); err != nil {
		t.Fatal(err)
	}
	fmt.Fprintln(os.Stderr, "child publisher stopped")
	_ = record.KindSecond
}

func signalContext() (context.Context, context.CancelFunc) {
	ctx, cancel := context.WithCancel(context.Background())
	ch := make(chan os.Signal, 1)
	signalNotify(ch)
	go func() {
		select {
		case <-ch:
			cancel()
		case <-ctx.Done():
		}
	}()
	return ctx, cancel
}

// statusState returns the state of the last status message in msgs ("" if none).
func statusState(msgs []received) string {
	state := ""
	for _, m := range msgs {
		if strings.HasSuffix(m.topic, "/status") {
			var st struct{ State string }
			if json.Unmarshal(m.payload, &st) == nil {
				state = st.State
			}
		}
	}
	return state
}
