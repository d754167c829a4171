-- leqnode central database, version 2: views for dashboards and scripts. Read these rather than
-- the tables: their columns stay stable while the tables may change between versions.

-- A node is online when its last status said so and something arrived in the last 5 minutes.
CREATE VIEW leqnode.node_state AS
SELECT n.node_id, n.store_id, n.site, n.latitude, n.longitude, n.software_version, n.state,
       n.status_time, n.last_seen, n.commands, n.backlog,
       (n.state = 'online' AND n.last_seen > now() - interval '5 minutes') AS online
FROM leqnode.nodes n;

-- The latest second record of each node.
CREATE VIEW leqnode.latest_level AS
SELECT n.node_id, n.site, s.start_time, s.LAeq, s.LAFmax, s.LCpeak, s.flags,
       extract(epoch FROM now() - s.start_time)::double precision AS age_s
FROM leqnode.nodes n
CROSS JOIN LATERAL (SELECT x.start_time, x.LAeq, x.LAFmax, x.LCpeak, x.flags FROM leqnode.seconds x
                    WHERE x.node_id = n.node_id ORDER BY x.start_time DESC LIMIT 1) s;

-- Per-minute levels of every node (from the nodes' minute records).
CREATE VIEW leqnode.minute_levels AS
SELECT node_id, start_time, LAeq, LCeq, LZeq, LAFmax, LAFmin, LAF1, LAF5, LAF10, LAF50, LAF90,
       LAF95, LAF99, LAE, LCpeak, LAImax, valid_seconds, flags
FROM leqnode.minutes;

-- Period indicators (day, evening, night ... of each node's profile) as the nodes computed them.
CREATE VIEW leqnode.period_indicators AS
SELECT node_id, day, profile, period, zone, start_time, end_time, hours, penalty_dB, LAeq, LCeq,
       LAF10, LAF90, LAFmax, events, limit_dB, exceeds, coverage, coverage_low
FROM leqnode.periods;

-- Each node's health: its latest health record and its latest passed calibrator check.
CREATE VIEW leqnode.node_health AS
SELECT s.node_id, s.online, s.state, s.last_seen, h.start_time AS health_time, h.flags AS health_flags,
       h.silent, h.stuck, h.clock_synced, h.cpu_percent, h.memory_mb, h.disk_free_mb,
       h.temperature_c, h.clipped_samples, h.dropped_samples,
       c.start_time AS last_calibration, c.deviation_dB AS last_calibration_deviation_dB,
       extract(epoch FROM now() - c.start_time)::double precision / 86400 AS days_since_calibration
FROM leqnode.node_state s
LEFT JOIN LATERAL (SELECT * FROM leqnode.health x WHERE x.node_id = s.node_id
                   ORDER BY x.start_time DESC LIMIT 1) h ON true
LEFT JOIN LATERAL (SELECT * FROM leqnode.calibrations x WHERE x.node_id = s.node_id AND x.passed
                   ORDER BY x.start_time DESC LIMIT 1) c ON true;

-- Holes: sequences of a stream that have not arrived, between two received ranges or before the
-- first, unless a skipped range (a node restart that skipped numbers) covers them. after_time is
-- the time of the record before the hole, before_time that of the record after it.
CREATE VIEW leqnode.missing_records AS
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
                  AND k.first_seq <= h.first_seq AND k.last_seq >= h.last_seq);

-- Quarantined payloads by reason and day (the payloads themselves are in the table).
CREATE VIEW leqnode.quarantine_summary AS
SELECT date_trunc('day', received_at) AS day, reason, topic_node, count(*) AS payloads
FROM leqnode.quarantine GROUP BY 1, 2, 3;
