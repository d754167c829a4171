-- leqnode central database, version 6: holes at the end of a stream. A node's status states the
-- last committed sequence number of each kind (last_seq) and how many are not yet sent
-- (pending); with nothing pending, numbers above the highest that arrived were sent and lost on
-- the way. This matters for the rare kinds (events, calibrations): no later record turns their
-- tail into a hole between two ranges. before_time is then the status message's time.
CREATE OR REPLACE VIEW leqnode.missing_records AS
WITH ordered AS (
    SELECT r.*, lag(r.last_seq) OVER w AS prev_last, lag(r.last_time) OVER w AS prev_time
    FROM leqnode.received r WINDOW w AS (PARTITION BY r.store_id, r.kind ORDER BY r.first_seq)
), holes AS (
    SELECT node_id, store_id, kind, coalesce(prev_last, 0) + 1 AS first_seq, first_seq - 1 AS last_seq,
           prev_time AS after_time, first_time AS before_time, created_at AS seen_since
    FROM ordered WHERE first_seq > coalesce(prev_last, 0) + 1
    UNION ALL
    SELECT s.node_id, s.store_id, s.kind, s.max_seq + 1, (n.last_seq ->> s.kind)::bigint,
           r.last_time, n.status_time, s.last_arrival
    FROM leqnode.streams s
    JOIN leqnode.nodes n ON n.node_id = s.node_id AND n.store_id = s.store_id
    JOIN leqnode.received r ON r.store_id = s.store_id AND r.kind = s.kind AND r.last_seq = s.max_seq
    WHERE n.status_time IS NOT NULL AND jsonb_typeof(n.last_seq -> s.kind) = 'number'
      AND (n.last_seq ->> s.kind)::bigint > s.max_seq
      AND coalesce((n.pending ->> s.kind)::bigint, 0) = 0
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
