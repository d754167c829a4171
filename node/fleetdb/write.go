package fleetdb

import (
	"context"
	"fmt"
	"sort"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
)

// Quarantined is a payload refused by validation, kept with the reason.
type Quarantined struct {
	Topic     string
	TopicNode string // the node id the topic names, if any
	Reason    string // one line: what is wrong
	Payload   []byte
}

// Batch is what one transaction writes.
type Batch struct {
	Rows       []Row
	Quarantine []Quarantined
}

// Written counts what a batch changed.
type Written struct {
	Inserted    int // new rows
	Duplicates  int // rows already present (resends, redeliveries)
	Quarantined int
}

// Write stores a batch in one transaction: rows of every kind (duplicates skipped), the
// arrival ranges of their streams, the nodes' last-seen times and the quarantined payloads.
// On error nothing of the batch is stored; Transient tells whether a retry can succeed.
func (db *DB) Write(ctx context.Context, b Batch) (Written, error) {
	var w Written
	if err := db.ensurePartitions(ctx, b.Rows); err != nil {
		return w, err
	}
	byKind := map[string][]Row{}
	for _, r := range b.Rows {
		byKind[r.Kind] = append(byKind[r.Kind], r)
	}
	err := db.inTx(ctx, func(tx pgx.Tx) error {
		w = Written{}
		if err := lockStreams(ctx, tx, b.Rows); err != nil {
			return err
		}
		for _, t := range append(tables, periodTable) {
			rows := byKind[t.kind]
			if len(rows) == 0 {
				continue
			}
			n, err := insertRows(ctx, tx, &t, rows)
			if err != nil {
				return fmt.Errorf("writing %s: %w", t.name, err)
			}
			w.Inserted += n
			w.Duplicates += len(rows) - n
		}
		if err := mergeRanges(ctx, tx, b.Rows); err != nil {
			return fmt.Errorf("arrival ranges: %w", err)
		}
		if len(b.Quarantine) > 0 {
			src := make([][]any, len(b.Quarantine))
			for i, q := range b.Quarantine {
				var node any
				if q.TopicNode != "" {
					node = q.TopicNode
				}
				src[i] = []any{q.Topic, node, q.Reason, q.Payload}
			}
			if _, err := tx.CopyFrom(ctx, pgx.Identifier{"leqnode", "quarantine"}, []string{"topic", "topic_node", "reason", "payload"}, pgx.CopyFromRows(src)); err != nil {
				return fmt.Errorf("quarantine: %w", err)
			}
			w.Quarantined = len(b.Quarantine)
		}
		return nil
	})
	if err != nil {
		return Written{}, err
	}
	return w, nil
}

// insertRows copies rows of one table into a staging table and inserts what is new.
func insertRows(ctx context.Context, tx pgx.Tx, t *table, rows []Row) (int, error) {
	stage := "stage_" + t.name
	if _, err := tx.Exec(ctx, fmt.Sprintf("CREATE TEMP TABLE IF NOT EXISTS %s (LIKE leqnode.%s INCLUDING DEFAULTS) ON COMMIT DELETE ROWS", stage, t.name)); err != nil {
		return 0, err
	}
	names := t.columnNames()
	src := make([][]any, len(rows))
	for i := range rows {
		src[i] = rows[i].vals
	}
	if _, err := tx.CopyFrom(ctx, pgx.Identifier{stage}, names, pgx.CopyFromRows(src)); err != nil {
		return 0, err
	}
	list := strings.Join(names, ", ")
	conflict := "ON CONFLICT DO NOTHING"
	if t.kind == periodTable.kind {
		// A period sent again (recomputed by its node) replaces the earlier one.
		var set []string
		for _, n := range names {
			set = append(set, n+" = excluded."+n)
		}
		conflict = "ON CONFLICT (store_id, profile, period, day) DO UPDATE SET " + strings.Join(set, ", ") + ", received_at = now()"
	}
	// DISTINCT ON: a batch may hold the same record twice (a redelivery within one batch).
	key := "store_id, seq"
	if t.kind == periodTable.kind {
		key = "store_id, profile, period, day"
	}
	tag, err := tx.Exec(ctx, fmt.Sprintf("INSERT INTO leqnode.%s (%s) SELECT DISTINCT ON (%s) %s FROM %s %s", t.name, list, key, list, stage, conflict))
	if err != nil {
		return 0, err
	}
	return int(tag.RowsAffected()), nil
}

type streamKey struct{ store, kind string }

// lockStreams creates or updates each stream's row in a fixed order, which locks it for the
// rest of the transaction: range merges of one stream never interleave.
func lockStreams(ctx context.Context, tx pgx.Tx, rows []Row) error {
	type agg struct {
		node   string
		maxSeq int64
	}
	m := map[streamKey]*agg{}
	nodes := map[string]string{}
	for _, r := range rows {
		if r.Kind == periodTable.kind {
			nodes[r.Node] = r.Store
			continue
		}
		k := streamKey{r.Store, r.Kind}
		a := m[k]
		if a == nil {
			a = &agg{node: r.Node}
			m[k] = a
		}
		a.maxSeq = max(a.maxSeq, r.Seq)
		nodes[r.Node] = r.Store
	}
	keys := make([]streamKey, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		if keys[i].store != keys[j].store {
			return keys[i].store < keys[j].store
		}
		return keys[i].kind < keys[j].kind
	})
	var b pgx.Batch
	for _, k := range keys {
		b.Queue(`INSERT INTO leqnode.streams (store_id, kind, node_id, max_seq, last_arrival) VALUES ($1, $2, $3, $4, now())
			ON CONFLICT (store_id, kind) DO UPDATE SET max_seq = greatest(streams.max_seq, excluded.max_seq),
			last_arrival = now(), node_id = excluded.node_id`, k.store, k.kind, m[k].node, m[k].maxSeq)
	}
	names := make([]string, 0, len(nodes))
	for n := range nodes {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		b.Queue(`INSERT INTO leqnode.nodes (node_id, store_id, state) VALUES ($1, $2, 'unknown')
			ON CONFLICT (node_id) DO UPDATE SET last_seen = now(), store_id = excluded.store_id`, n, nodes[n])
	}
	return tx.SendBatch(ctx, &b).Close()
}

// seqRange is a run of consecutive sequence numbers of one stream in a batch.
type seqRange struct {
	streamKey
	node        string
	first, last int64
	tf, tl      time.Time
}

// ranges collapses the rows' sequence numbers into runs per stream.
func ranges(rows []Row) []seqRange {
	by := map[streamKey][]Row{}
	for _, r := range rows {
		if r.Kind == periodTable.kind {
			continue
		}
		k := streamKey{r.Store, r.Kind}
		by[k] = append(by[k], r)
	}
	var out []seqRange
	for k, rs := range by {
		sort.Slice(rs, func(i, j int) bool { return rs[i].Seq < rs[j].Seq })
		cur := seqRange{k, rs[0].Node, rs[0].Seq, rs[0].Seq, rs[0].Time, rs[0].Time}
		for _, r := range rs[1:] {
			if r.Seq <= cur.last+1 {
				if r.Seq > cur.last {
					cur.last, cur.tl = r.Seq, r.Time
				}
				continue
			}
			out = append(out, cur)
			cur = seqRange{k, r.Node, r.Seq, r.Seq, r.Time, r.Time}
		}
		out = append(out, cur)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].store != out[j].store {
			return out[i].store < out[j].store
		}
		if out[i].kind != out[j].kind {
			return out[i].kind < out[j].kind
		}
		return out[i].first < out[j].first
	})
	return out
}

// mergeRanges merges the batch's runs into the stored ranges: every stored range that overlaps
// or touches a run is replaced by their union.
func mergeRanges(ctx context.Context, tx pgx.Tx, rows []Row) error {
	var b pgx.Batch
	for _, r := range ranges(rows) {
		b.Queue(`WITH gone AS (
			DELETE FROM leqnode.received WHERE store_id = $1 AND kind = $2 AND first_seq <= $4 + 1 AND last_seq >= $3 - 1
			RETURNING first_seq, last_seq, first_time, last_time, created_at)
		INSERT INTO leqnode.received (store_id, kind, first_seq, last_seq, first_time, last_time, node_id, created_at)
		SELECT $1, $2, least($3, min(first_seq)), greatest($4, max(last_seq)),
			CASE WHEN min(first_seq) < $3 THEN (array_agg(first_time ORDER BY first_seq))[1] ELSE $5 END,
			CASE WHEN max(last_seq) > $4 THEN (array_agg(last_time ORDER BY last_seq DESC))[1] ELSE $6 END,
			$7, coalesce(min(created_at), now())
		FROM gone`, r.store, r.kind, r.first, r.last, r.tf, r.tl, r.node)
	}
	return tx.SendBatch(ctx, &b).Close()
}
