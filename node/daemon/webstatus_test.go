package daemon

import (
	"math"
	"reflect"
	"testing"
	"time"

	"github.com/leqnode/leqnode/dsp/selftest"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/web"
)

// TestWebAdapters: the status page gets the running parts' state copied into its own types.
func TestWebAdapters(t *testing.T) {
	var c node.Counters
	c.Seconds.Store(7200)
	c.Minutes.Store(120)
	c.Gaps.Store(1)
	c.DroppedSamples.Store(9600)
	c.QueueOverflows.Store(2)
	c.Reopens.Store(3)
	c.FastLevel.Store(math.Float64bits(61.25))
	if got, want := countersFrom(&c), (&web.Counters{Seconds: 7200, Minutes: 120, Gaps: 1, DroppedSamples: 9600, QueueOverflows: 2, Reopens: 3}); !reflect.DeepEqual(got, want) {
		t.Errorf("countersFrom = %+v, want %+v", got, want)
	}
	if l := liveFrom(&c)(); l.LAF != 61.25 || time.Since(l.At) > time.Minute {
		t.Errorf("liveFrom = %+v", l)
	}

	at := time.Date(2031, 5, 4, 8, 0, 0, 0, time.UTC)
	for _, tc := range []struct {
		name string
		in   publish.Status
		want *web.MQTTStatus
	}{
		{"backlog summed over kinds", publish.Status{Connected: true, Broker: "tcp://127.0.0.1:1883", Since: at, LastPublish: at,
			Pending: map[string]uint64{"second": 41, "minute": 1}},
			&web.MQTTStatus{Connected: true, Broker: "tcp://127.0.0.1:1883", Since: at, LastPublish: at, Pending: 42,
				PendingKind: map[string]uint64{"second": 41, "minute": 1}}},
		{"never connected", publish.Status{LastError: "connection refused"},
			&web.MQTTStatus{LastError: "connection refused", PendingKind: map[string]uint64{}}},
	} {
		if got := mqttFrom(tc.in); !reflect.DeepEqual(got, tc.want) {
			t.Errorf("%s: mqttFrom = %+v, want %+v", tc.name, got, tc.want)
		}
	}

	rep := selftest.Report{Pass: false, SampleRate: 48000, Checks: []selftest.Check{
		{Test: "A weighting at 63 Hz", Pass: false}, {Test: "linearity", Pass: true}}}
	want := &web.SelfCheckStatus{At: at, Pass: false, Checks: 2, SampleRate: 48000, Failed: []string{"A weighting at 63 Hz"}}
	if got := selfCheckFrom(at, rep); !reflect.DeepEqual(got, want) {
		t.Errorf("selfCheckFrom = %+v, want %+v", got, want)
	}
}
