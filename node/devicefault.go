package node

import (
	"fmt"
	"math"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/capture"
)

// A capture device that delivers audio faster or slower than its stated rate (an ALSA file
// PCM over a regular file, a converter whose clock has failed) cannot be measured against the
// wall clock: every block would look like a step of the system clock. The node tells the two
// apart by their rhythm: a real clock step is rare, so a second step within deviceFaultWindow
// of the first makes the device faulty. While it is, the node measures nothing (one gap record
// covers the time, so the store does not grow whatever the device does), raises the
// device-fault health flag and logs at most once a minute; every deviceCheck of wall time it
// compares the audio delivered with the time passed, and resumes as after a re-open once the
// rate is back within deviceRateTolerance.
const (
	deviceFaultWindow   = 30 * time.Second
	deviceCheck         = 10 * time.Second
	deviceRateTolerance = 0.01
)

// deviceState follows a capture device whose rate is wrong.
type deviceState struct {
	lastStep time.Time      // wall time of the last clock step seen
	faulty   bool           // measuring nothing until the rate is right again
	since    time.Time      // wall time the fault began
	window   time.Time      // wall time the current rate window began
	samples  int64          // samples delivered in the window
	ratio    float64        // the last measured rate as a multiple of the stated rate
	lastLog  time.Time      // the last log line about the fault
	format   capture.Format // the stream's format, to re-open the measurement when it recovers
}

// clockStepped handles a step of the sample clock at wall time now: a first step is the
// system clock's (the caller records it); a second within deviceFaultWindow starts a device
// fault, and clockStepped reports true.
func (p *processor) clockStepped(now time.Time) bool {
	d := &p.rate
	recent := !d.lastStep.IsZero() && now.Sub(d.lastStep) < deviceFaultWindow
	d.lastStep = now
	if !recent {
		return false
	}
	d.faulty, d.since, d.window, d.samples = true, now, now, 0
	p.closeSecond()
	p.flushMinutes()
	p.flushEvents()
	if p.lostAt.IsZero() {
		p.lostAt = p.lastEnd
		if p.lostAt.IsZero() {
			p.lostAt = now
		}
		p.lostWhy = "capture device delivers audio at the wrong rate (not measured)"
	}
	p.health.sticky |= record.DeviceFault
	p.n.log.Error("the capture device delivers audio faster or slower than its stated rate: not measuring it until it is right again",
		"source", p.o.Source.Describe())
	d.lastLog = now
	p.healthNow(now)
	return true
}

// faultyBlock takes a block while the device is faulty: it counts the samples, and every
// deviceCheck compares them with the time passed.
func (p *processor) faultyBlock(ev handoff) error {
	d := &p.rate
	now := ev.arrival
	d.samples += int64(len(ev.samples)) + ev.skipped
	elapsed := now.Sub(d.window)
	if elapsed < deviceCheck {
		return nil
	}
	d.ratio = float64(d.samples) / float64(d.format.SampleRate) / elapsed.Seconds()
	d.window, d.samples = now, 0
	if math.Abs(d.ratio-1) > deviceRateTolerance {
		if now.Sub(d.lastLog) >= time.Minute {
			p.n.log.Error("the capture device still delivers audio at the wrong rate", "source", p.o.Source.Describe(),
				"times_its_rate", fmt.Sprintf("%.3g", d.ratio), "since", d.since.UTC())
			d.lastLog = now
		}
		return nil
	}
	// Right again: measure as after a re-open; the gap ends at the first sample measured.
	p.n.log.Info("the capture device delivers audio at its rate again", "source", p.o.Source.Describe(), "faulty_for", now.Sub(d.since).Round(time.Second))
	format := d.format
	*d = deviceState{format: format}
	p.health.sticky &^= record.DeviceFault
	p.healthNow(now)
	return p.opened(handoff{kind: evOpened, format: format, arrival: now})
}
