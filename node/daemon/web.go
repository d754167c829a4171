package daemon

import (
	"context"
	"fmt"
	"os"
	"runtime/debug"
	"strings"
	"sync/atomic"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/dsp/selftest"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/internal/when"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/web"
)

// startWeb sets up the status page and metrics of a running node.
func (d *daemon) startWeb(n *node.Node, st *buffer.Store, pub *publish.Publisher, selfCheck *atomic.Pointer[web.SelfCheckStatus]) (*web.Server, error) {
	cfg, log := d.o.Config, d.o.Logger
	var token string
	if cfg.Web.TokenFile != "" {
		b, err := os.ReadFile(cfg.Web.TokenFile)
		if err != nil {
			return nil, configError(fmt.Errorf("web.token_file: %w: create the file or leave the key empty", err))
		}
		token = strings.TrimRight(string(b), "\r\n")
	}
	version := d.o.Version
	return web.New(web.Options{
		Addr: cfg.Web.Addr, Token: token, Store: st, Logger: log,
		Live: liveFrom(&n.Counters),
		Status: func() web.Status {
			ns := n.Status()
			s := web.Status{
				NodeID: cfg.Node.ID, Site: cfg.Node.Site, Version: version, TimeZone: cfg.Node.TimeZone,
				Started: ns.Started, Source: ns.Source, SampleRate: ns.SampleRate,
				Counters: countersFrom(&n.Counters),
				Calibration: &web.CalibrationStatus{
					SensitivityDBFS: n.Sensitivity(), NominalDBFS: cfg.Microphone.SensitivityDBFS,
				},
			}
			if h := n.Health(); h != nil {
				synced := h.ClockSynced
				s.ClockSynced = &synced
			}
			if pub != nil {
				s.MQTT = mqttFrom(pub.Status())
			}
			s.SelfCheck = selfCheck.Load()
			return s
		},
	})
}

// verifyDaily runs the electrical self-tests of the measurement chain (`leqnode verify`) at the
// node's sample rate once it runs, and then every day, and logs the outcome; the status page
// shows the latest.
func (d *daemon) verifyDaily(ctx context.Context, n *node.Node, last *atomic.Pointer[web.SelfCheckStatus]) {
	log := d.o.Logger
	for {
		fs := n.Status().SampleRate
		if fs == 0 { // not open yet
			if !when.Sleep(ctx, time.Second) {
				return
			}
			continue
		}
		at := time.Now()
		rep := selftest.Run(float64(fs), false)
		last.Store(selfCheckFrom(at, rep))
		// Stored and published with a health snapshot (self_test_checks, self_test_failed,
		// the chain-fault flag).
		failed := len(rep.Failed())
		if !rep.Pass && failed == 0 {
			failed = 1 // the chain could not even be built (rep.Error)
		}
		n.ReportSelfTest(len(rep.Checks), failed)
		// The tests build many meters; hand their memory back to the system at once rather
		// than over the next minutes (a small board's memory is the node's budget).
		debug.FreeOSMemory()
		if rep.Pass {
			log.Info("self-verification passed", "checks", len(rep.Checks), "sample_rate", fs)
		} else {
			var names []string
			for _, c := range rep.Failed() {
				names = append(names, c.Test)
			}
			log.Error("self-verification FAILED: the measurement chain is not to be trusted", "failed", strings.Join(names, ", "), "error", rep.Error)
		}
		if !when.Sleep(ctx, 24*time.Hour) {
			return
		}
	}
}
