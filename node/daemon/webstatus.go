package daemon

import (
	"time"

	"github.com/leqnode/leqnode/dsp/selftest"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/web"
)

// The adapters below turn the running parts' own types into the status page's (package web
// knows nothing of node, publish or selftest). Each copies: web keeps no pointer into them.

// liveFrom returns a Live function reading the A-weighted Fast level a running node keeps in
// its counters.
func liveFrom(c *node.Counters) func() web.Live {
	return func() web.Live { return web.Live{LAF: c.Level(), At: time.Now()} }
}

// countersFrom copies a running node's counters.
func countersFrom(c *node.Counters) *web.Counters {
	return &web.Counters{
		Seconds: c.Seconds.Load(), Minutes: c.Minutes.Load(), Gaps: c.Gaps.Load(),
		DroppedSamples: c.DroppedSamples.Load(), QueueOverflows: c.QueueOverflows.Load(),
		Reopens: c.Reopens.Load(),
	}
}

// mqttFrom converts a publisher's status: Pending is the backlog over every kind. The
// publisher keeps no credentials in its status.
func mqttFrom(st publish.Status) *web.MQTTStatus {
	m := &web.MQTTStatus{
		Connected: st.Connected, Broker: st.Broker, Since: st.Since, LastPublish: st.LastPublish,
		LastError: st.LastError, PendingKind: map[string]uint64{},
	}
	for k, n := range st.Pending {
		m.Pending += n
		m.PendingKind[k] = n
	}
	return m
}

// selfCheckFrom summarises a self-test report run at time at: the failed tests by name.
func selfCheckFrom(at time.Time, r selftest.Report) *web.SelfCheckStatus {
	s := &web.SelfCheckStatus{At: at, Pass: r.Pass, Checks: len(r.Checks), SampleRate: r.SampleRate, Error: r.Error}
	for _, c := range r.Failed() {
		s.Failed = append(s.Failed, c.Test)
	}
	return s
}
