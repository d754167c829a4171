package fleetdb

import (
	"context"
	"fmt"
	"time"

	"github.com/leqnode/leqnode/node/lib/report"
)

// FleetReport computes a fleet report (package report) over every node with minute records in
// cfg's range, from the database instead of store files (cfg.Stores is unused). Site and
// position come from each node's latest status message; see NodeRecords for what the tables
// do not keep.
func (db *DB) FleetReport(ctx context.Context, cfg report.FleetConfig) (*report.Fleet, error) {
	nodes, err := db.ReportNodes(ctx, cfg.From, cfg.To)
	if err != nil {
		return nil, err
	}
	if len(nodes) == 0 {
		return nil, fmt.Errorf("fleetdb: no node has minute records from %s to %s", cfg.From.Format(time.RFC3339), cfg.To.Format(time.RFC3339))
	}
	srcs := make([]report.FleetSource, len(nodes))
	for i, n := range nodes {
		srcs[i] = report.FleetSource{
			Identity: report.Identity{NodeID: n.Node, Site: n.Site, Latitude: n.Latitude, Longitude: n.Longitude,
				HasLocation: n.HasLocation, TimeZone: n.TimeZone, StoreID: n.Store, Path: "database"},
			Records: db.Records(ctx, n.Node),
		}
	}
	return report.ComputeFleetFrom(ctx, cfg, srcs)
}
