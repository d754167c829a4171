package fleetdb

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/leqnode/leqnode/buffer/record"
)

// ReportNode is a node the database holds minute records of, as a report names it: site and
// position from its latest status message, time zone from its latest session record.
type ReportNode struct {
	Node, Store, Site   string
	Latitude, Longitude float64
	HasLocation         bool
	TimeZone            string
}

// ReportNodes returns the nodes with minute records in [from, to), by node id.
func (db *DB) ReportNodes(ctx context.Context, from, to time.Time) ([]ReportNode, error) {
	rows, err := db.pool.Query(ctx, `SELECT m.node_id, coalesce(n.store_id, ''), coalesce(n.site, ''), n.latitude, n.longitude,
			coalesce((SELECT s.time_zone FROM leqnode.sessions s WHERE s.node_id = m.node_id AND s.start_time < $2
				ORDER BY s.start_time DESC LIMIT 1), '')
		FROM (SELECT DISTINCT node_id FROM leqnode.minutes WHERE start_time >= $1 AND start_time < $2) m
		LEFT JOIN leqnode.nodes n ON n.node_id = m.node_id
		ORDER BY m.node_id`, from, to)
	if err != nil {
		return nil, fmt.Errorf("fleetdb: listing nodes: %w", err)
	}
	defer rows.Close()
	var out []ReportNode
	for rows.Next() {
		var n ReportNode
		var lat, lon *float64
		if err := rows.Scan(&n.Node, &n.Store, &n.Site, &lat, &lon, &n.TimeZone); err != nil {
			return nil, fmt.Errorf("fleetdb: listing nodes: %w", err)
		}
		if lat != nil && lon != nil && (*lat != 0 || *lon != 0) {
			n.Latitude, n.Longitude, n.HasLocation = *lat, *lon, true
		}
		out = append(out, n)
	}
	return out, rows.Err()
}

// NodeRecords reads one node's records back from the database as buffer records, for a
// report (it implements the report package's Records). What the tables do not keep is absent:
// minute records have no level histogram (a report's LAF10 and LAF90 are then not available)
// and no counts of left-out seconds by reason (those seconds count as missing); second records
// are not read (a report reads the minute records, which the node built from the same seconds).
type NodeRecords struct {
	db   *DB
	node string
	ctx  context.Context
}

// Records returns the records of node; ctx bounds every query.
func (db *DB) Records(ctx context.Context, node string) *NodeRecords {
	return &NodeRecords{db: db, node: node, ctx: ctx}
}

// Range calls fn for each record of kind k of the node with its time in [from, to), in time
// order.
func (r *NodeRecords) Range(k record.Kind, from, to time.Time, fn func(record.Record) error) error {
	var q string
	var scan func(pgx.Rows) (record.Record, error)
	switch k {
	case record.KindMinute:
		q = `SELECT start_time, LAeq, LCeq, LZeq, LAFmax, LAFmin, LAF1, LAF5, LAF10, LAF50, LAF90, LAF95, LAF99, LAE, LCpeak,
			LAImax, valid_seconds, flags, third_octave_first, third_octave_LZeq FROM leqnode.minutes`
		scan = scanMinute
	case record.KindEvent:
		q = `SELECT start_time, end_time, LAFmax, LAeq, LAE, LCpeak, flags FROM leqnode.events`
		scan = scanEvent
	case record.KindCalibration:
		q = `SELECT start_time, reference_dB, measured_dB, deviation_dB, frequency_hz, stability_dB, sensitivity_before_dBFS,
			sensitivity_after_dBFS, coalesce(applied, false), coalesce(passed, false), flags FROM leqnode.calibrations`
		scan = scanCalibration
	case record.KindGap:
		q = `SELECT start_time, coalesce(end_time, start_time), coalesce(reason, '') FROM leqnode.gaps`
		scan = scanGap
	case record.KindHealth:
		q = `SELECT start_time, flags FROM leqnode.health`
		scan = scanHealth
	default:
		return nil // second records and the rest: not read (see NodeRecords)
	}
	rows, err := r.db.pool.Query(r.ctx, q+` WHERE node_id = $1 AND start_time >= $2 AND start_time < $3 ORDER BY start_time, seq`, r.node, from, to)
	if err != nil {
		return fmt.Errorf("fleetdb: reading %s records of %s: %w", k, r.node, err)
	}
	defer rows.Close()
	for rows.Next() {
		rec, err := scan(rows)
		if err != nil {
			return fmt.Errorf("fleetdb: reading %s records of %s: %w", k, r.node, err)
		}
		if err := fn(rec); err != nil {
			return err
		}
	}
	return rows.Err()
}

// nan turns a NULL level into NaN.
func nan(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

func flagsOf(names []string) (record.Flags, error) {
	return record.ParseFlags(strings.Join(names, "|"))
}

func scanMinute(rows pgx.Rows) (record.Record, error) {
	var m record.Minute
	var lv [15]*float64
	var valid *int64
	var flags []string
	var first *int16
	var spec []*float64
	dst := []any{&m.Start}
	for i := range lv {
		dst = append(dst, &lv[i])
	}
	if err := rows.Scan(append(dst, &valid, &flags, &first, &spec)...); err != nil {
		return nil, err
	}
	for i, p := range []*float64{&m.LAeq, &m.LCeq, &m.LZeq, &m.LAFmax, &m.LAFmin, &m.LAF1, &m.LAF5, &m.LAF10, &m.LAF50,
		&m.LAF90, &m.LAF95, &m.LAF99, &m.LAE, &m.LCpeak, &m.LAImax} {
		*p = nan(lv[i])
	}
	if valid != nil {
		m.ValidSeconds = int(*valid)
	}
	var err error
	if m.Flags, err = flagsOf(flags); err != nil {
		return nil, err
	}
	if first != nil && len(spec) > 0 {
		m.FirstBand = int(*first)
		for _, v := range spec {
			m.Spectrum = append(m.Spectrum, nan(v))
		}
	}
	return &m, nil
}

func scanEvent(rows pgx.Rows) (record.Record, error) {
	var e record.Event
	var end *time.Time
	var lafmax, laeq, lae, lcpeak *float64
	var flags []string
	if err := rows.Scan(&e.Start, &end, &lafmax, &laeq, &lae, &lcpeak, &flags); err != nil {
		return nil, err
	}
	e.End = e.Start
	if end != nil {
		e.End = *end
	}
	e.LAFmax, e.LAeq, e.LAE, e.LCpeak = nan(lafmax), nan(laeq), nan(lae), nan(lcpeak)
	var err error
	e.Flags, err = flagsOf(flags)
	return &e, err
}

func scanCalibration(rows pgx.Rows) (record.Record, error) {
	var c record.Calibration
	var v [7]*float64
	var flags []string
	if err := rows.Scan(&c.At, &v[0], &v[1], &v[2], &v[3], &v[4], &v[5], &v[6], &c.Applied, &c.OK, &flags); err != nil {
		return nil, err
	}
	c.Reference, c.Measured, c.Deviation, c.Frequency = nan(v[0]), nan(v[1]), nan(v[2]), nan(v[3])
	c.Stability, c.SensitivityBefore, c.SensitivityAfter = nan(v[4]), nan(v[5]), nan(v[6])
	var err error
	c.Flags, err = flagsOf(flags)
	return &c, err
}

func scanGap(rows pgx.Rows) (record.Record, error) {
	var g record.Gap
	err := rows.Scan(&g.From, &g.To, &g.Reason)
	return &g, err
}

func scanHealth(rows pgx.Rows) (record.Record, error) {
	var h record.Health
	var flags []string
	if err := rows.Scan(&h.At, &flags); err != nil {
		return nil, err
	}
	var err error
	h.Flags, err = flagsOf(flags)
	return &h, err
}
