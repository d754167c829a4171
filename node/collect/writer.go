package collect

import (
	"context"
	"time"

	"github.com/leqnode/leqnode/node/fleetdb"
)

// idleGap closes a batch when no message has come for this long.
const idleGap = 10 * time.Millisecond

// writer gathers messages into batches and writes them until ctx ends.
func (c *Collector) writer(ctx context.Context) {
	var batch []entry
	maxWait := time.Duration(c.cfg.Batch.MaxWait)
	for {
		select {
		case <-ctx.Done():
			return
		case e := <-c.msgs:
			batch = append(batch[:0], e)
		}
		records := len(batch[0].item.rows)
		// A batch closes when full, at max_wait, or when no message came for idleGap: a broker
		// sends only its in-flight window (mosquitto: max_inflight_messages) before it waits
		// for acknowledgements, which come only after the commit.
		deadline := time.NewTimer(maxWait)
		idle := time.NewTimer(idleGap)
	fill:
		for len(batch) < c.cfg.Batch.MaxMessages && records < c.cfg.Batch.MaxRecords {
			select {
			case e := <-c.msgs:
				batch = append(batch, e)
				records += len(e.item.rows)
				idle.Reset(idleGap)
			case <-idle.C:
				break fill
			case <-deadline.C:
				break fill
			case <-ctx.Done():
				break fill
			}
		}
		deadline.Stop()
		idle.Stop()
		if !c.process(ctx, batch) {
			return
		}
	}
}

// process writes one batch and acknowledges its messages after the commit. It returns false
// when ctx ended first (nothing of the batch is acknowledged then).
func (c *Collector) process(ctx context.Context, batch []entry) bool {
	var b fleetdb.Batch
	for _, e := range batch {
		switch e.item.class {
		case classData:
			b.Rows = append(b.Rows, e.item.rows...)
		case classBad:
			b.Quarantine = append(b.Quarantine, *e.item.bad)
		}
	}
	if len(b.Rows) > 0 || len(b.Quarantine) > 0 {
		w, err := c.write(ctx, b)
		if err != nil {
			if ctx.Err() != nil {
				return false
			}
			// A value the database refuses: find the message by writing them one by one.
			if !c.oneByOne(ctx, batch) {
				return false
			}
		} else {
			c.counted(b, w)
		}
	}
	for _, e := range batch {
		var err error
		switch e.item.class {
		case classStatus:
			err = c.retrying(ctx, "recording a status", func() error { return c.db.NoteStatus(ctx, e.item.doc) })
		case classReply:
			if a, _ := e.item.doc["action"].(string); a == "resend" {
				id, _ := e.item.doc["id"].(string)
				result, _ := e.item.doc["result"].(string)
				msg, _ := e.item.doc["message"].(string)
				err = c.retrying(ctx, "recording a reply", func() error { return c.db.NoteReply(ctx, id, result, msg) })
			}
		}
		if err != nil && ctx.Err() != nil {
			return false
		}
		if err != nil {
			c.log.Warn("status or reply not recorded", "topic", e.msg.Topic(), "err", err)
		}
	}
	for _, e := range batch {
		e.msg.Ack()
		class := [...]string{"data", "status", "reply", "quarantined"}[e.item.class]
		c.m.messages.WithLabelValues(class).Inc()
	}
	return true
}

// write writes a batch, retrying with back-off while the failure is transient. It returns an
// error for a failure of the data itself, or when ctx ends.
func (c *Collector) write(ctx context.Context, b fleetdb.Batch) (fleetdb.Written, error) {
	var w fleetdb.Written
	err := c.retrying(ctx, "database write failed", func() error {
		var err error
		w, err = c.db.Write(ctx, b)
		return err
	})
	if err == nil && c.opts.OnCommit != nil {
		c.opts.OnCommit(b.Rows, time.Now())
	}
	return w, err
}

// retrying runs f until it succeeds, fails for good (not fleetdb.Transient) or ctx ends.
func (c *Collector) retrying(ctx context.Context, what string, f func() error) error {
	var r retry
	for {
		err := f()
		if err == nil || !fleetdb.Transient(err) || ctx.Err() != nil {
			return err
		}
		c.m.dbErrors.Inc()
		if !r.sleep(ctx, c.log, what, err) {
			return ctx.Err()
		}
	}
}

// oneByOne writes each message of a batch alone; one the database refuses goes to quarantine.
func (c *Collector) oneByOne(ctx context.Context, batch []entry) bool {
	for i := range batch {
		it := &batch[i].item
		var b fleetdb.Batch
		switch it.class {
		case classData:
			b.Rows = it.rows
		case classBad:
			b.Quarantine = []fleetdb.Quarantined{*it.bad}
		default:
			continue
		}
		w, err := c.write(ctx, b)
		if err != nil && ctx.Err() == nil {
			m := batch[i].msg
			node := ""
			if len(it.rows) > 0 {
				node = it.rows[0].Node
			}
			it.class, it.rows = classBad, nil
			it.bad = &fleetdb.Quarantined{Topic: m.Topic(), TopicNode: node, Reason: ReasonDatabase + ": " + oneLine(err.Error()), Payload: m.Payload()}
			b = fleetdb.Batch{Quarantine: []fleetdb.Quarantined{*it.bad}}
			w, err = c.write(ctx, b)
			c.m.quarantined.WithLabelValues(ReasonDatabase).Inc()
			c.log.Warn("payload refused by the database: quarantined", "topic", m.Topic(), "err", it.bad.Reason)
			w.Quarantined = 0 // counted above
		}
		if err != nil {
			return false
		}
		c.counted(b, w)
	}
	return true
}

// counted updates the counters after a commit.
func (c *Collector) counted(b fleetdb.Batch, w fleetdb.Written) {
	c.m.batches.Inc()
	c.m.records.WithLabelValues("inserted").Add(float64(w.Inserted))
	c.m.records.WithLabelValues("duplicate").Add(float64(w.Duplicates))
	c.m.batchSize.Observe(float64(len(b.Rows)))
	if w.Quarantined > 0 {
		for _, q := range b.Quarantine {
			c.m.quarantined.WithLabelValues(reasonCode(q.Reason)).Inc()
		}
	}
	now := time.Now()
	for _, r := range b.Rows {
		if r.Kind == "second" && r.Delivery == "live" {
			c.m.liveDelay.Observe(now.Sub(r.Time.Add(time.Second)).Seconds())
		}
	}
}

// reasonCode returns the first word of a quarantine reason.
func reasonCode(reason string) string {
	for i, ch := range reason {
		if ch == ':' {
			return reason[:i]
		}
	}
	return reason
}

// housekeeping creates partitions ahead (every 6 hours) and plans resends (every
// resend.interval) until ctx ends.
func (c *Collector) housekeeping(ctx context.Context) {
	resend := time.NewTicker(time.Duration(c.cfg.Resend.Interval))
	defer resend.Stop()
	parts := time.NewTicker(6 * time.Hour)
	defer parts.Stop()
	c.dropOld(ctx)
	for {
		select {
		case <-ctx.Done():
			return
		case <-parts.C:
			if err := c.db.CreatePartitionsAhead(ctx, time.Now(), time.Duration(c.cfg.Database.PartitionsAhead)); err != nil && ctx.Err() == nil {
				c.log.Warn("creating partitions ahead failed; retrying in 6 h (records still create theirs)", "err", err)
			}
			c.dropOld(ctx)
		case <-resend.C:
			if !*c.cfg.Resend.Enabled {
				continue
			}
			if n, err := c.db.PlanResends(ctx, time.Now(), c.policy(), c.sendResend); err != nil && ctx.Err() == nil {
				c.log.Warn("planning resends failed", "err", err)
			} else if n > 0 {
				c.log.Info("resend requests sent", "requests", n)
			}
		}
	}
}

// dropOld drops the partitions that retention no longer keeps.
func (c *Collector) dropOld(ctx context.Context) {
	for kind, keep := range c.cfg.Retention.kinds() {
		if _, err := c.db.DropPartitionsBefore(ctx, kind, time.Now().Add(-keep)); err != nil && ctx.Err() == nil {
			c.log.Warn("dropping old partitions failed; retrying in 6 h", "kind", kind, "err", err)
		}
	}
}

func (c *Collector) policy() fleetdb.ResendPolicy {
	r := c.cfg.Resend
	return fleetdb.ResendPolicy{Grace: time.Duration(r.Grace), MaxAge: time.Duration(r.MaxAge), MaxRange: time.Duration(r.MaxRange),
		Backoff: time.Duration(r.Backoff), MaxBackoff: time.Duration(r.MaxBackoff), Limit: 100}
}
