package fleetdb

import (
	"context"
	"time"
)

// NodeSummary is one node's line in the fleet status.
type NodeSummary struct {
	Node     string    `json:"node"`
	Site     string    `json:"site,omitempty"`
	State    string    `json:"state"` // the node's last status: online, offline (or unknown)
	Online   bool      `json:"online"`
	LastSeen time.Time `json:"last_seen"`
	Health   []string  `json:"health_flags"`
	// DaysSinceCalibration counts from the last passed calibrator check (null: none yet).
	DaysSinceCalibration *float64 `json:"days_since_calibration"`
	// Coverage is the share of the range covered by the node's second records (0 to 1).
	Coverage float64 `json:"coverage"`
	// Missing counts the records of every kind known to be missing with times in the range.
	Missing int64 `json:"missing"`
	// LAeq and LAeqTime are the node's last second record.
	LAeq     *float64   `json:"LAeq"`
	LAeqTime *time.Time `json:"LAeq_time"`
}

// Fleet returns one summary per node, by node id, with coverage and missing records counted
// over [from, to).
func (db *DB) Fleet(ctx context.Context, from, to time.Time) ([]NodeSummary, error) {
	rows, err := db.pool.Query(ctx, `SELECT h.node_id, coalesce(s.site, ''), h.state, h.online, h.last_seen,
			coalesce(h.health_flags, '{}') ||
				CASE WHEN h.silent THEN '{silent}'::text[] ELSE '{}' END ||
				CASE WHEN h.stuck THEN '{stuck}'::text[] ELSE '{}' END ||
				CASE WHEN h.clock_synced = false AND NOT 'clock-unsynced' = ANY(coalesce(h.health_flags, '{}'))
					THEN '{clock-unsynced}'::text[] ELSE '{}' END,
			h.days_since_calibration,
			(SELECT coalesce(sum(x.duration_s), 0) FROM leqnode.seconds x
				WHERE x.node_id = h.node_id AND x.start_time >= $1 AND x.start_time < $2)::double precision,
			(SELECT coalesce(sum(m.count), 0) FROM leqnode.missing_records m
				WHERE m.node_id = h.node_id AND m.before_time > $1 AND (m.after_time IS NULL OR m.after_time < $2))::bigint,
			l.LAeq::double precision, l.start_time
		FROM leqnode.node_health h JOIN leqnode.node_state s ON s.node_id = h.node_id
		LEFT JOIN leqnode.latest_level l ON l.node_id = h.node_id
		ORDER BY h.node_id`, from, to)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	span := to.Sub(from).Seconds()
	var out []NodeSummary
	for rows.Next() {
		var n NodeSummary
		var covered float64
		if err := rows.Scan(&n.Node, &n.Site, &n.State, &n.Online, &n.LastSeen, &n.Health, &n.DaysSinceCalibration,
			&covered, &n.Missing, &n.LAeq, &n.LAeqTime); err != nil {
			return nil, err
		}
		if span > 0 {
			n.Coverage = min(covered/span, 1)
		}
		if n.Health == nil {
			n.Health = []string{}
		}
		out = append(out, n)
	}
	return out, rows.Err()
}
