-- leqnode central database, version 4: restarts are not losses. Each session record states the
-- first sequence number of every kind in its run of the node (first_seq_<kind> in the payload,
-- kept here as {"second": 4097, ...}); numbers skipped just before it were never committed. A
-- hole that ends exactly there is a restart, listed in restart_skips, not in missing_records.
ALTER TABLE leqnode.sessions ADD COLUMN first_seq jsonb;

CREATE VIEW leqnode.run_starts AS
SELECT s.store_id, s.node_id, k.key AS kind, k.value::bigint AS first_seq, s.start_time
FROM leqnode.sessions s CROSS JOIN LATERAL jsonb_each_text(s.first_seq) k
WHERE s.first_seq IS NOT NULL;

CREATE OR REPLACE VIEW leqnode.missing_records AS
WITH ordered AS (
    SELECT r.*, lag(r.last_seq) OVER w AS prev_last, lag(r.last_time) OVER w AS prev_time
    FROM leqnode.received r WINDOW w AS (PARTITION BY r.store_id, r.kind ORDER BY r.first_seq)
), holes AS (
    SELECT node_id, store_id, kind, coalesce(prev_last, 0) + 1 AS first_seq, first_seq - 1 AS last_seq,
           prev_time AS after_time, first_time AS before_time, created_at AS seen_since
    FROM ordered WHERE first_seq > coalesce(prev_last, 0) + 1
)
SELECT h.node_id, h.store_id, h.kind, h.first_seq, h.last_seq, h.last_seq - h.first_seq + 1 AS count,
       h.after_time, h.before_time, h.seen_since,
       r.attempts AS resend_attempts, r.sent_at AS resend_sent_at, r.next_at AS resend_next_at,
       r.result AS resend_result
FROM holes h
LEFT JOIN leqnode.resends r ON r.store_id = h.store_id AND r.kind = h.kind AND r.first_seq = h.first_seq
WHERE NOT EXISTS (SELECT 1 FROM leqnode.skipped k WHERE k.store_id = h.store_id AND k.kind = h.kind
                  AND k.first_seq <= h.first_seq AND k.last_seq >= h.last_seq)
  AND NOT EXISTS (SELECT 1 FROM leqnode.run_starts s WHERE s.store_id = h.store_id AND s.kind = h.kind
                  AND s.first_seq = h.last_seq + 1);

-- Holes closed by a restart: the numbers a node skipped when it started again.
CREATE VIEW leqnode.restart_skips AS
WITH ordered AS (
    SELECT r.*, lag(r.last_seq) OVER w AS prev_last
    FROM leqnode.received r WINDOW w AS (PARTITION BY r.store_id, r.kind ORDER BY r.first_seq)
)
SELECT o.node_id, o.store_id, o.kind, coalesce(o.prev_last, 0) + 1 AS first_seq, o.first_seq - 1 AS last_seq,
       o.first_seq - 1 - coalesce(o.prev_last, 0) AS count, s.start_time AS run_started
FROM ordered o JOIN leqnode.run_starts s ON s.store_id = o.store_id AND s.kind = o.kind AND s.first_seq = o.first_seq
WHERE o.first_seq > coalesce(o.prev_last, 0) + 1;

GRANT SELECT ON leqnode.run_starts, leqnode.restart_skips TO leqnode_reader;
