package collect

import (
	"context"
	"fmt"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/publish"
)

// TestResendFillsHole: records lost on the way (simulated by deleting them from the database
// and from its arrival ranges, as if their messages had never come) are asked for with a
// resend command once the node is online with its backlog sent; the node sends them again,
// the hole closes, and the node's reply is recorded.
func TestResendFillsHole(t *testing.T) {
	r := newRig(t)
	runCollector(t, r.config(func(c *Config) {
		c.Resend.Grace = 0
		c.Resend.Backoff = Duration(time.Second)
	}), Options{})
	n := startNode(t, r, "wendle-cross-06", func(c *publish.Config) { c.Commands.Enabled = true })
	n.add(t, 120)
	ctx := context.Background()
	want := n.storeCounts(t)
	waitUntil(t, 30*time.Second, "every record", func() (bool, string) {
		got, _ := dbCounts(t, r.db, n.store.ID())
		return equalCounts(got, want), fmt.Sprint(got)
	})
	// Lose seconds 31 to 50.
	_, err := r.db.Pool().Exec(ctx, `DELETE FROM leqnode.seconds WHERE seq BETWEEN 31 AND 50;
		DELETE FROM leqnode.received WHERE kind = 'second';
		INSERT INTO leqnode.received (store_id, kind, first_seq, last_seq, first_time, last_time, node_id, created_at)
		SELECT store_id, 'second', min(seq), max(seq), min(start_time), max(start_time), node_id, now() - interval '1 hour'
		FROM leqnode.seconds GROUP BY store_id, node_id, seq > 50`)
	if err != nil {
		t.Fatal(err)
	}
	var first, last int64
	if err := r.db.Pool().QueryRow(ctx, "SELECT first_seq, last_seq FROM leqnode.missing_records").Scan(&first, &last); err != nil || first != 31 || last != 50 {
		t.Fatalf("missing_records: %d..%d (%v), want 31..50", first, last, err)
	}
	waitUntil(t, 30*time.Second, "the hole to close", func() (bool, string) {
		var seconds, holes int
		_ = r.db.Pool().QueryRow(ctx, "SELECT (SELECT count(*) FROM leqnode.seconds), (SELECT count(*) FROM leqnode.missing_records)").Scan(&seconds, &holes)
		return seconds == 120 && holes == 0, fmt.Sprintf("%d seconds, %d holes", seconds, holes)
	})
	waitUntil(t, 30*time.Second, "the node's reply", func() (bool, string) {
		var result, msg string
		err := r.db.Pool().QueryRow(ctx, "SELECT coalesce(result, ''), coalesce(message, '') FROM leqnode.resends WHERE kind = 'second' AND first_seq = 31").Scan(&result, &msg)
		return err == nil && result == "done", fmt.Sprintf("%q %q %v", result, msg, err)
	})
}
