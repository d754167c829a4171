package fleetdb

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// NoteStatus records a node's status message (decoded by schema.Decode and valid against
// status.schema.json): online or offline, whether it takes commands, its backlog.
func (db *DB) NoteStatus(ctx context.Context, doc map[string]any) error {
	str := func(k string) any {
		if s, ok := doc[k].(string); ok {
			return s
		}
		return nil
	}
	var at, lat, lon any
	if v, err := value(cTime, doc["time_ms"]); err == nil {
		at = v
	}
	if loc, ok := doc["location"].(map[string]any); ok {
		lat, _ = value(cDouble, loc["latitude"])
		lon, _ = value(cDouble, loc["longitude"])
	}
	commands, _ := doc["commands"].(bool)
	var backlog any
	if b, ok := doc["backlog"].(bool); ok {
		backlog = b
	}
	js := func(k string) any {
		if v, ok := doc[k]; ok {
			b, _ := json.Marshal(v)
			return string(b)
		}
		return nil
	}
	// The last will carries no time: keep the last known status time then.
	_, err := db.pool.Exec(ctx, `INSERT INTO leqnode.nodes (node_id, store_id, state, status_time, site, latitude, longitude,
			software_version, commands, backlog, pending, last_seq)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11::jsonb, $12::jsonb)
		ON CONFLICT (node_id) DO UPDATE SET store_id = excluded.store_id, state = excluded.state,
			status_time = coalesce(excluded.status_time, nodes.status_time), site = coalesce(excluded.site, nodes.site),
			latitude = coalesce(excluded.latitude, nodes.latitude), longitude = coalesce(excluded.longitude, nodes.longitude),
			software_version = coalesce(excluded.software_version, nodes.software_version), commands = excluded.commands,
			backlog = excluded.backlog, pending = coalesce(excluded.pending, nodes.pending),
			last_seq = coalesce(excluded.last_seq, nodes.last_seq), last_seen = now()`,
		str("node"), str("store"), str("state"), at, str("site"), lat, lon, str("software_version"), commands, backlog,
		js("pending"), js("last_seq"))
	return err
}

// MarkSkipped records that a stream's sequences first..last were never made (a node restart
// that skipped numbers): the holes they cover no longer count as missing.
func (db *DB) MarkSkipped(ctx context.Context, store, kind string, first, last int64, reason string) error {
	_, err := db.pool.Exec(ctx, `INSERT INTO leqnode.skipped (store_id, kind, first_seq, last_seq, reason) VALUES ($1, $2, $3, $4, $5)
		ON CONFLICT (store_id, kind, first_seq) DO UPDATE SET last_seq = greatest(skipped.last_seq, excluded.last_seq)`,
		store, kind, first, last, reason)
	return err
}

// ResendPolicy says when a hole is asked for again.
type ResendPolicy struct {
	// Grace is how long a hole must have been seen, with its node online and its backlog sent,
	// before the first request: records still on their way fill most holes by themselves.
	Grace time.Duration
	// MaxAge: holes whose records are older than this are not asked for (the node's retention
	// has deleted them).
	MaxAge time.Duration
	// MaxRange caps the time range of one request (a node refuses longer ones); a longer hole
	// is filled in several rounds.
	MaxRange time.Duration
	// Backoff is the wait after the first request; it doubles with each request for the same
	// hole up to MaxBackoff.
	Backoff, MaxBackoff time.Duration
	// Limit caps the requests of one round.
	Limit int
}

// ResendRequest is one resend command to send.
type ResendRequest struct {
	ID          string // the command's id, unique
	Node, Store string
	Kind        string
	First, Last int64     // the hole's sequence numbers
	From, To    time.Time // the time range asked for, half-open
	Attempt     int       // 1 for the first request
}

// resendLock is the advisory lock key that lets one collector of several plan resends.
const resendLock = 0x6c65716e6f6466

// PlanResends finds the holes due for a request under p and calls send for each; a request
// that send reports sent is recorded with its next due time. Only one collector at a time
// plans (the others return 0 at once).
func (db *DB) PlanResends(ctx context.Context, now time.Time, p ResendPolicy, send func(ResendRequest) error) (int, error) {
	sent := 0
	err := db.inTx(ctx, func(tx pgx.Tx) error {
		var got bool
		if err := tx.QueryRow(ctx, "SELECT pg_try_advisory_xact_lock($1)", int64(resendLock)).Scan(&got); err != nil || !got {
			return err
		}
		rows, err := tx.Query(ctx, `SELECT m.node_id, m.store_id, m.kind, m.first_seq, m.last_seq, m.after_time, m.before_time,
				coalesce(m.resend_attempts, 0)
			FROM leqnode.missing_records m JOIN leqnode.node_state s ON s.node_id = m.node_id AND s.store_id = m.store_id
			WHERE s.online AND s.commands AND NOT coalesce(s.backlog, false)
			  AND m.seen_since <= $1 AND (m.resend_next_at IS NULL OR m.resend_next_at <= $2)
			  AND m.before_time >= $3
			ORDER BY m.seen_since LIMIT $4`, now.Add(-p.Grace), now, now.Add(-p.MaxAge), p.Limit)
		if err != nil {
			return err
		}
		var reqs []ResendRequest
		for rows.Next() {
			var r ResendRequest
			var after *time.Time
			var before time.Time
			if err := rows.Scan(&r.Node, &r.Store, &r.Kind, &r.First, &r.Last, &after, &before, &r.Attempt); err != nil {
				return err
			}
			r.Attempt++
			r.To = before.Add(time.Millisecond)
			if after != nil {
				r.From = *after
			} else {
				r.From = r.To.Add(-p.MaxRange)
			}
			if r.To.Sub(r.From) > p.MaxRange {
				r.To = r.From.Add(p.MaxRange)
			}
			r.ID = fmt.Sprintf("fill-%.8s-%s-%d-%d", r.Store, r.Kind, r.First, r.Attempt)
			reqs = append(reqs, r)
		}
		if err := rows.Err(); err != nil {
			return err
		}
		for _, r := range reqs {
			if err := send(r); err != nil {
				db.log.Warn("resend request not sent", "node", r.Node, "kind", r.Kind, "err", err)
				continue
			}
			wait := p.Backoff << min(r.Attempt-1, 20)
			if wait > p.MaxBackoff || wait <= 0 {
				wait = p.MaxBackoff
			}
			if _, err := tx.Exec(ctx, `INSERT INTO leqnode.resends (store_id, kind, first_seq, last_seq, node_id, request_id,
					from_time, to_time, attempts, sent_at, next_at)
				VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11)
				ON CONFLICT (store_id, kind, first_seq) DO UPDATE SET last_seq = excluded.last_seq,
					request_id = excluded.request_id, from_time = excluded.from_time, to_time = excluded.to_time,
					attempts = excluded.attempts, sent_at = excluded.sent_at, next_at = excluded.next_at,
					result = NULL, message = NULL, replied_at = NULL`,
				r.Store, r.Kind, r.First, r.Last, r.Node, r.ID, r.From, r.To, r.Attempt, now, now.Add(wait)); err != nil {
				return err
			}
			sent++
		}
		return nil
	})
	return sent, err
}

// NoteReply records a node's reply to a resend command.
func (db *DB) NoteReply(ctx context.Context, id, result, message string) error {
	_, err := db.pool.Exec(ctx, `UPDATE leqnode.resends SET result = $2, message = $3, replied_at = now() WHERE request_id = $1`, id, result, message)
	return err
}
