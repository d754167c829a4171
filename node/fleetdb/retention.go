package fleetdb

import (
	"context"
	"fmt"
	"strings"
	"time"
)

// DropPartitionsBefore drops the partitions of kind's table (second, minute, event or health)
// that hold only records older than before, and returns their names. Danger: the records go
// for good; the arrival ranges stay, so what was dropped is not counted as missing.
func (db *DB) DropPartitionsBefore(ctx context.Context, kind string, before time.Time) ([]string, error) {
	t := tableOf(kind)
	if t == nil || t.partition == "" {
		return nil, fmt.Errorf("kind %q has no partitions: use second, minute, event or health", kind)
	}
	rows, err := db.pool.Query(ctx, `SELECT c.relname FROM pg_inherits i JOIN pg_class c ON c.oid = i.inhrelid
		WHERE i.inhparent = ('leqnode.' || $1)::regclass ORDER BY c.relname`, t.name)
	if err != nil {
		return nil, err
	}
	var names []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			rows.Close()
			return nil, err
		}
		names = append(names, n)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, err
	}
	layout := "200601"
	if t.partition == "day" {
		layout = "20060102"
	}
	var dropped []string
	for _, n := range names {
		from, err := time.Parse(layout, strings.TrimPrefix(n, t.name+"_"))
		if err != nil {
			continue // not one of ours
		}
		_, _, end := partitionName(t, from)
		if end.After(before) {
			continue
		}
		if _, err := db.pool.Exec(ctx, fmt.Sprintf("DROP TABLE leqnode.%s", n)); err != nil {
			return dropped, fmt.Errorf("dropping partition %s: %w", n, err)
		}
		db.mu.Lock()
		delete(db.parts, n)
		db.mu.Unlock()
		db.log.Info("partition dropped", "partition", n, "older_than", before)
		dropped = append(dropped, n)
	}
	return dropped, nil
}
