-- leqnode central database, version 5: minutes and periods say which seconds they count and
-- which they leave out, and whether their LAeq is a bound (overload: a lower bound; under the
-- measuring range: an upper bound), as the nodes' payloads do.
ALTER TABLE leqnode.minutes ADD COLUMN bound text, ADD COLUMN valid_duration_s real,
    ADD COLUMN overload_seconds integer, ADD COLUMN calibrating_seconds integer,
    ADD COLUMN settling_seconds integer, ADD COLUMN excluded_seconds integer,
    ADD COLUMN suspect_seconds integer, ADD COLUMN no_data_seconds integer,
    ADD COLUMN digital_silence_seconds integer, ADD COLUMN under_range_seconds integer;
ALTER TABLE leqnode.periods ADD COLUMN bound text, ADD COLUMN valid_seconds integer,
    ADD COLUMN overload_seconds integer, ADD COLUMN calibrating_seconds integer,
    ADD COLUMN settling_seconds integer, ADD COLUMN excluded_seconds integer,
    ADD COLUMN suspect_seconds integer, ADD COLUMN no_data_seconds integer,
    ADD COLUMN digital_silence_seconds integer, ADD COLUMN under_range_seconds integer;
ALTER TABLE leqnode.gaps ADD COLUMN duration_s real;

CREATE OR REPLACE VIEW leqnode.minute_levels AS
SELECT node_id, start_time, LAeq, LCeq, LZeq, LAFmax, LAFmin, LAF1, LAF5, LAF10, LAF50, LAF90,
       LAF95, LAF99, LAE, LCpeak, LAImax, valid_seconds, flags, bound, overload_seconds
FROM leqnode.minutes;

CREATE OR REPLACE VIEW leqnode.period_indicators AS
SELECT node_id, day, profile, period, zone, start_time, end_time, hours, penalty_dB, LAeq, LCeq,
       LAF10, LAF90, LAFmax, events, limit_dB, exceeds, coverage, coverage_low, bound, valid_seconds,
       overload_seconds
FROM leqnode.periods;
