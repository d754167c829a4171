package daemon

import (
	"context"
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/internal/when"
	"github.com/leqnode/leqnode/node/lib/report"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
	"github.com/leqnode/leqnode/node/publish"
)

// publishPeriods computes the indicators of each period of the configured profile once it has
// closed, and its records have been committed, and hands them to the publisher.
func (d *daemon) publishPeriods(ctx context.Context, st *buffer.Store, pub *publish.Publisher) {
	cfg, log := d.o.Config, d.o.Logger
	prof, err := profiles.Load(cfg.Indicators.Profile)
	if err != nil {
		log.Error("indicators.profile: cannot load; no period indicators are published", "err", err)
		return
	}
	var zone *profiles.Zone
	if cfg.Indicators.Zone != "" {
		if zone, err = prof.Zone(cfg.Indicators.Zone); err != nil {
			log.Error("indicators.zone: unknown; no period indicators are published", "err", err)
			return
		}
	}
	loc, err := time.LoadLocation(cfg.Node.TimeZone)
	if err != nil {
		loc = time.UTC
	}
	settle := cfg.CommitInterval() + 10*time.Second // the period's last records are committed by then
	done := prof.LastClosed(time.Now(), loc).To     // periods closed before the start are not sent
	for {
		now := time.Now()
		last := prof.LastClosed(now.Add(-settle), loc)
		if last.To.After(done) {
			p, iv, err := report.ClosedPeriod(ctx, st, prof, zone, loc, now.Add(-settle), indicator.Options{})
			switch {
			case err != nil:
				log.Warn("period indicators not computed", "err", err)
			case p != nil:
				m := publish.PeriodMessage{
					Profile: prof.Name, Period: p.Name, Day: p.Day, From: iv.From, To: iv.To, Hours: p.Hours,
					Penalty: p.Penalty, LAeq: p.LAeq, LCeq: p.LCeq, LAF10: p.LAF10, LAF90: p.LAF90,
					LAFmax: p.LAFmax, Events: p.Events, Limit: math.NaN(), Coverage: p.Coverage.Share,
					CoverageLow: p.Coverage.Low, Seconds: p.Coverage.Tally(),
				}
				if zone != nil {
					m.Zone, m.Limit, m.Exceeds = zone.Name, p.Limit, p.Exceeds
				}
				if !pub.PublishPeriod(pub.PeriodPayload(m)) {
					log.Warn("period indicators dropped: too many wait for the broker", "period", p.Name, "from", iv.From)
				}
			}
			done = last.To
		}
		if !when.Sleep(ctx, 30*time.Second) {
			return
		}
	}
}
