package node

import (
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// HealthOptions set up the node's health checks. A health snapshot is stored every Interval
// and at once whenever a health flag is raised or cleared.
type HealthOptions struct {
	// Interval between stored snapshots. Default 1 minute.
	Interval time.Duration
	// SilenceLimit is how long the input may be digital silence, or repeat one value, before
	// the digital-silence or stuck-input flag is raised. Default 30 s. A real microphone always
	// hears something (its self-noise at least): either state means a dead microphone, a
	// broken cable or a muted mixer.
	SilenceLimit time.Duration
	// DCLimit is the DC offset, as a fraction of full scale, above which the dc-offset flag is
	// raised. Default 0.01 (1 %). The DC blocker removes the offset from every level, but a
	// growing offset is a sign of a failing microphone or converter and eats headroom.
	DCLimit float64
	// ThermalDir is where thermal zones are read. Default /sys/class/thermal.
	ThermalDir string
}

func (h HealthOptions) withDefaults() HealthOptions {
	if h.Interval <= 0 {
		h.Interval = time.Minute
	}
	if h.SilenceLimit <= 0 {
		h.SilenceLimit = 30 * time.Second
	}
	if h.DCLimit <= 0 {
		h.DCLimit = 0.01
	}
	if h.ThermalDir == "" {
		h.ThermalDir = "/sys/class/thermal"
	}
	return h
}

// healthState accumulates what the health snapshots report.
type healthState struct {
	o HealthOptions

	silentRun, stuckRun    time.Duration
	flags                  record.Flags // the health flags now raised
	sticky                 record.Flags // flags raised until cleared by their cause (microphone fault)
	selfChecks, selfFailed uint64       // a self-verification to report in the next snapshot

	// Since the last snapshot.
	clipped       uint64
	dcSum, dcTime float64
	underRange    uint64
	dropped       uint64
	overflowsSeen int64
	lastSnap      time.Time
	lastCPU       time.Duration
	lastSnapWall  time.Time
	lastDC        float64
}

// second takes one closed second into account and returns the health flags now raised.
func (h *healthState) second(r *dsp.Result, secFlags record.Flags, dropped uint64) record.Flags {
	d := time.Duration(r.Duration * float64(time.Second))
	if r.Silent {
		h.silentRun += d
	} else {
		h.silentRun = 0
	}
	if r.Stuck && !r.Silent {
		h.stuckRun += d
	} else {
		h.stuckRun = 0
	}
	h.clipped += uint64(r.Clipped)
	if r.Duration > 0 {
		h.dcSum += r.DC * r.Duration
		h.dcTime += r.Duration
		h.lastDC = r.DC
	}
	if secFlags.Has(record.UnderRange) {
		h.underRange++
	}
	h.dropped += dropped
	f := record.Flags(0)
	if h.silentRun >= h.o.SilenceLimit {
		f |= record.DigitalSilence
	}
	if h.stuckRun >= h.o.SilenceLimit {
		f |= record.StuckInput
	}
	if math.Abs(h.lastDC) > h.o.DCLimit {
		f |= record.DCOffset
	}
	if r.Clipped > 0 {
		f |= record.Clipped
	}
	return f | h.sticky
}

// snapshot builds a health record and starts a new snapshot period.
func (p *processor) healthSnapshot(now time.Time) *record.Health {
	h := &p.health
	rec := &record.Health{
		At:                now.UTC(),
		Flags:             h.flags,
		Clipped:           h.clipped,
		Silent:            h.flags.Has(record.DigitalSilence),
		Stuck:             h.flags.Has(record.StuckInput),
		UnderRangeSeconds: h.underRange,
		DroppedSamples:    h.dropped,
		MemoryMB:          residentMB(),
		DiskFreeMB:        diskFreeMB(p.o.Store.Path()),
		ClockSynced:       p.synced,
		ClockErrorMs:      clockErrorMs(),
	}
	if h.dcTime > 0 {
		rec.DCOffset = h.dcSum / h.dcTime
	}
	if !p.synced {
		rec.Flags |= record.ClockUnsynced
	}
	ov := p.n.Counters.QueueOverflows.Load()
	rec.QueueOverflows = uint64(ov - h.overflowsSeen)
	h.overflowsSeen = ov
	cpu := processCPU()
	wall := time.Now()
	if !h.lastSnapWall.IsZero() {
		if dt := wall.Sub(h.lastSnapWall); dt > 0 {
			rec.CPU = 100 * float64(cpu-h.lastCPU) / float64(dt)
		}
	}
	h.lastCPU, h.lastSnapWall = cpu, wall
	if st, err := p.o.Store.Stats(); err == nil {
		rec.StoreBytes = uint64(st.FileBytes)
	}
	if t, ok := boardTemperature(h.o.ThermalDir); ok {
		rec.TemperatureC = t
	} else {
		rec.TemperatureC = math.NaN()
	}
	rec.SelfTestChecks, rec.SelfTestFailed = h.selfChecks, h.selfFailed
	h.selfChecks, h.selfFailed = 0, 0
	h.clipped, h.dcSum, h.dcTime, h.underRange, h.dropped = 0, 0, 0, 0, 0
	h.lastSnap = now
	return rec
}

// healthAfter runs after every second with the health flags that second raised: it stores a
// snapshot when a health flag changed or the snapshot interval has passed.
func (p *processor) healthAfter(f record.Flags, now time.Time) error {
	h := &p.health
	changed := f != h.flags
	if changed {
		raised, cleared := f&^h.flags, h.flags&^f
		if raised != 0 {
			p.n.log.Warn("health flag raised", "flags", raised.String())
		}
		if cleared != 0 {
			p.n.log.Info("health flag cleared", "flags", cleared.String())
		}
		h.flags = f
	}
	if h.lastSnap.IsZero() {
		h.lastSnap = now
	}
	if !changed && now.Sub(h.lastSnap) < h.o.Interval {
		return nil
	}
	rec := p.healthSnapshot(now)
	p.checkSpaceCap(rec)
	p.n.lastHealth.Store(rec)
	return p.append(rec)
}

// selfTest stores a health snapshot at once with the outcome of a self-verification.
func (p *processor) selfTest(checks, failed int) error {
	h := &p.health
	h.selfChecks, h.selfFailed = uint64(checks), uint64(failed)
	if failed > 0 {
		h.sticky |= record.ChainFault
	} else {
		h.sticky &^= record.ChainFault
	}
	h.flags = h.flags&^record.ChainFault | h.sticky&record.ChainFault
	now := p.o.Now()
	if p.anchored {
		now = p.lastEnd
	}
	rec := p.healthSnapshot(now)
	p.n.lastHealth.Store(rec)
	return p.append(rec)
}
