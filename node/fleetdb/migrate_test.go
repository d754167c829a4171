package fleetdb

import (
	"context"
	"strings"
	"testing"
)

// TestMigrations: migrating twice applies nothing the second time, and the reader role may
// read the views and record tables but not write, nor read the quarantined payloads.
func TestMigrations(t *testing.T) {
	db, pg := openTestDB(t)
	ctx := context.Background()
	applied, err := db.Migrate(ctx)
	if err != nil || len(applied) != 0 {
		t.Fatalf("second migration applied %v (%v), want nothing", applied, err)
	}
	var version int
	if err := db.pool.QueryRow(ctx, "SELECT max(version) FROM leqnode.migrations").Scan(&version); err != nil || version != SchemaVersion() {
		t.Errorf("schema version %d (%v), want %d", version, err, SchemaVersion())
	}
	if out, err := pg.Psql("fleet", "CREATE ROLE wendle_dashboard LOGIN IN ROLE leqnode_reader"); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	reader, err := Open(ctx, Options{URL: strings.Replace(pg.URL("fleet"), pg.User+"@", "wendle_dashboard@", 1)})
	if err != nil {
		t.Fatal(err)
	}
	defer reader.Close()
	for _, q := range []string{"SELECT count(*) FROM leqnode.latest_level", "SELECT count(*) FROM leqnode.missing_records",
		"SELECT count(*) FROM leqnode.seconds", "SELECT count(*) FROM leqnode.node_health", "SELECT count(*) FROM leqnode.restart_skips"} {
		if _, err := reader.pool.Exec(ctx, q); err != nil {
			t.Errorf("reader: %s: %v", q, err)
		}
	}
	for _, q := range []string{"SELECT count(*) FROM leqnode.quarantine", "DELETE FROM leqnode.seconds",
		"INSERT INTO leqnode.skipped (store_id, kind, first_seq, last_seq, reason) VALUES ('a', 'second', 1, 2, 'x')"} {
		if _, err := reader.pool.Exec(ctx, q); err == nil || !strings.Contains(err.Error(), "permission denied") {
			t.Errorf("reader: %s: %v, want permission denied", q, err)
		}
	}
}
