-- leqnode central database, version 3: the role for readers (dashboards, scripts). It may read
-- the views and the record tables, nothing else: no writes, and not the quarantine's payloads.
-- Give it to a login role: CREATE ROLE wendle_dashboard LOGIN PASSWORD '...' IN ROLE leqnode_reader;
DO $$
BEGIN
    IF NOT EXISTS (SELECT FROM pg_roles WHERE rolname = 'leqnode_reader') THEN
        CREATE ROLE leqnode_reader NOLOGIN;
    END IF;
END
$$;
GRANT USAGE ON SCHEMA leqnode TO leqnode_reader;
GRANT SELECT ON leqnode.node_state, leqnode.latest_level, leqnode.minute_levels,
    leqnode.period_indicators, leqnode.node_health, leqnode.missing_records,
    leqnode.quarantine_summary TO leqnode_reader;
GRANT SELECT ON leqnode.seconds, leqnode.minutes, leqnode.events, leqnode.health,
    leqnode.calibrations, leqnode.gaps, leqnode.annotations, leqnode.sessions, leqnode.periods,
    leqnode.nodes, leqnode.streams, leqnode.received, leqnode.skipped, leqnode.resends
    TO leqnode_reader;
