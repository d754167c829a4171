-- leqnode central database, version 1: the records of every node, their arrival bookkeeping,
-- quarantine and resend requests. Column names of quantities are those of `leqnode analyze`
-- written without quotes, so PostgreSQL folds them to lower case: write LAeq or laeq in queries.
CREATE SCHEMA IF NOT EXISTS leqnode;

-- Second records: partitioned by day of start_time (the collector creates partitions ahead).
-- The key holds start_time because a partitioned table's key must hold its partition column;
-- a record's time never changes on resend, so (store_id, seq) alone decides a duplicate.
CREATE TABLE leqnode.seconds (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL, duration_s real,
    LAeq real, LCeq real, LZeq real, LAFmax real, LAFmin real, LASmax real, LASmin real,
    LAImax real, LCpeak real, LZpeak real, LAE real,
    flags text[] NOT NULL DEFAULT '{}', dropped_samples bigint,
    third_octave_first smallint, third_octave_LZeq real[],
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq, start_time)
) PARTITION BY RANGE (start_time);
CREATE INDEX ON leqnode.seconds (node_id, start_time);

CREATE TABLE leqnode.minutes (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL,
    LAeq real, LCeq real, LZeq real, LAFmax real, LAFmin real,
    LAF1 real, LAF5 real, LAF10 real, LAF50 real, LAF90 real, LAF95 real, LAF99 real,
    LAE real, LCpeak real, LAImax real, valid_seconds integer,
    flags text[] NOT NULL DEFAULT '{}',
    third_octave_first smallint, third_octave_LZeq real[],
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq, start_time)
) PARTITION BY RANGE (start_time);
CREATE INDEX ON leqnode.minutes (node_id, start_time);

CREATE TABLE leqnode.events (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL, end_time timestamptz, duration_s real,
    LAFmax real, LAeq real, LAE real, LCpeak real,
    flags text[] NOT NULL DEFAULT '{}',
    third_octave_first smallint, third_octave_LZeq real[],
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq, start_time)
) PARTITION BY RANGE (start_time);
CREATE INDEX ON leqnode.events (node_id, start_time);

CREATE TABLE leqnode.health (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL,
    flags text[] NOT NULL DEFAULT '{}',
    clipped_samples bigint, under_range_seconds bigint, dropped_samples bigint,
    queue_overflows bigint, store_bytes bigint, self_test_checks bigint, self_test_failed bigint,
    silent boolean, stuck boolean, clock_synced boolean,
    dc_offset double precision, cpu_percent real, memory_mb real, disk_free_mb real,
    clock_error_ms real, temperature_c real,
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq, start_time)
) PARTITION BY RANGE (start_time);
CREATE INDEX ON leqnode.health (node_id, start_time);

-- The rare kinds are small: plain tables.
CREATE TABLE leqnode.calibrations (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL,
    reference_dB real, measured_dB real, deviation_dB real, frequency_hz real, stability_dB real,
    sensitivity_before_dBFS real, sensitivity_after_dBFS real, applied boolean, passed boolean,
    flags text[] NOT NULL DEFAULT '{}',
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq)
);
CREATE INDEX ON leqnode.calibrations (node_id, start_time);

CREATE TABLE leqnode.gaps (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL, end_time timestamptz, reason text,
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq)
);
CREATE INDEX ON leqnode.gaps (node_id, start_time);

CREATE TABLE leqnode.annotations (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL, end_time timestamptz,
    flags text[] NOT NULL DEFAULT '{}', reason text,
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq)
);
CREATE INDEX ON leqnode.annotations (node_id, start_time);

CREATE TABLE leqnode.sessions (
    store_id text NOT NULL, seq bigint NOT NULL, node_id text NOT NULL,
    start_time timestamptz NOT NULL,
    software_version text, config_hash text, sensitivity_dBFS real, sample_rate_hz integer,
    device text, time_zone text,
    delivery text NOT NULL, received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, seq)
);
CREATE INDEX ON leqnode.sessions (node_id, start_time);

-- Period indicators as nodes send them when a period closes (no sequence number: keyed by
-- the period itself; a later message for the same period replaces the earlier one).
CREATE TABLE leqnode.periods (
    store_id text NOT NULL, node_id text NOT NULL, profile text NOT NULL, period text NOT NULL,
    day date NOT NULL, zone text, start_time timestamptz NOT NULL, end_time timestamptz NOT NULL,
    hours real, penalty_dB real, LAeq real, LCeq real, LAF10 real, LAF90 real, LAFmax real,
    events integer, limit_dB real, exceeds boolean, coverage real, coverage_low boolean,
    received_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, profile, period, day)
);
CREATE INDEX ON leqnode.periods (node_id, start_time);

-- The latest status message of each node (retained on the broker, last will "offline").
CREATE TABLE leqnode.nodes (
    node_id text PRIMARY KEY, store_id text NOT NULL, state text NOT NULL,
    status_time timestamptz, site text, latitude double precision, longitude double precision,
    software_version text, commands boolean NOT NULL DEFAULT false, backlog boolean,
    pending jsonb, last_seq jsonb,
    first_seen timestamptz NOT NULL DEFAULT now(), last_seen timestamptz NOT NULL DEFAULT now()
);

-- Arrival bookkeeping per stream (store_id, kind): the highest sequence and the last arrival.
-- The collector updates a stream's row first in every write, which also serialises the range
-- merges of one stream across several collectors.
CREATE TABLE leqnode.streams (
    store_id text NOT NULL, kind text NOT NULL, node_id text NOT NULL,
    max_seq bigint NOT NULL, last_arrival timestamptz NOT NULL,
    PRIMARY KEY (store_id, kind)
);

-- Which sequences arrived, as closed ranges [first_seq, last_seq] with the times of their first
-- and last records; adjacent and overlapping ranges are merged on every write. created_at is
-- when the range (or the oldest range merged into it) first appeared.
CREATE TABLE leqnode.received (
    store_id text NOT NULL, kind text NOT NULL, first_seq bigint NOT NULL, last_seq bigint NOT NULL,
    first_time timestamptz NOT NULL, last_time timestamptz NOT NULL, node_id text NOT NULL,
    created_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, kind, first_seq)
);

-- Sequence ranges known not to exist (a node's restart that skipped numbers): holes they cover
-- are not missing data.
CREATE TABLE leqnode.skipped (
    store_id text NOT NULL, kind text NOT NULL, first_seq bigint NOT NULL, last_seq bigint NOT NULL,
    reason text NOT NULL, noted_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (store_id, kind, first_seq)
);

-- Resend commands sent to nodes for holes, one row per hole (store_id, kind, first_seq).
CREATE TABLE leqnode.resends (
    store_id text NOT NULL, kind text NOT NULL, first_seq bigint NOT NULL, last_seq bigint NOT NULL,
    node_id text NOT NULL, request_id text NOT NULL UNIQUE,
    from_time timestamptz NOT NULL, to_time timestamptz NOT NULL,
    attempts integer NOT NULL, sent_at timestamptz NOT NULL, next_at timestamptz NOT NULL,
    result text, message text, replied_at timestamptz,
    PRIMARY KEY (store_id, kind, first_seq)
);

-- Payloads that failed validation, with the reason; never silently dropped.
CREATE TABLE leqnode.quarantine (
    id bigserial PRIMARY KEY, received_at timestamptz NOT NULL DEFAULT now(),
    topic text NOT NULL, topic_node text, reason text NOT NULL, payload bytea NOT NULL
);
CREATE INDEX ON leqnode.quarantine (received_at);
