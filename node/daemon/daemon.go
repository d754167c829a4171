// Package daemon runs a node: it is the composition root that starts, supervises and stops
// every long-running part of `leqnode run` and `leqnode demo`, and wires them together: the
// store (package buffer), the measuring node (package node), MQTT publishing (node/publish), the
// control socket (node/control), the status page and metrics (node/web), the daily
// self-verification (dsp/selftest) and the period indicators (node/lib/report). cmd/leqnode only
// parses flags, loads the configuration and calls Run.
//
// # Goroutines
//
// Run owns every goroutine it starts and returns only when all have ended: the node's capture
// and processing (node.Node.Run), the publisher, its remote-request listener, the control
// socket, the status page, the daily self-verification, the period publisher and the reload
// watcher. When the node stops (its context ends, or a finite source ends), Run cancels the
// others, waits for them, and closes the store.
package daemon

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"sync"
	"sync/atomic"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/lib/config"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/web"
)

// Options set up Run.
type Options struct {
	// Config is the node's configuration (node/lib/config), already loaded and checked.
	Config *config.Config
	// Stdin is the standard input, for the stdin capture source.
	Stdin io.Reader
	// Logger receives the daemon's logs.
	Logger *slog.Logger
	// Version is the software version stored in session records and shown on the page.
	Version string
	// SampleOrigin, with a sample-timed capture, is the time of the first sample (see
	// node.Options.SampleOrigin); zero means now.
	SampleOrigin time.Time
	// Display, when set, receives every second and minute record after the node stored it
	// (the demo's live display). It runs on a goroutine of the daemon's own, never on the
	// processing goroutine, so a slow terminal cannot hold up the measurement. Trade-off: while
	// it is slower than the records come, up to displayQueue of them wait and the ones after
	// are skipped for the display (counted in the log at the end); the store has them all.
	Display func(record.Record)
	// Reload, when set, asks for the configuration to be read again from ConfigPath (SIGHUP):
	// the microphone settings apply at once; other changes are named as needing a restart.
	Reload     <-chan os.Signal
	ConfigPath string
}

// ErrConfig marks an error in the configuration or the environment it names (a token file, a
// control group): the caller reports it as bad input.
var ErrConfig = errors.New("configuration")

// configError marks err as a configuration problem (errors.Is(err, ErrConfig)) and keeps its
// message as it is.
func configError(err error) error { return configErr{err} }

type configErr struct{ err error }

func (e configErr) Error() string        { return e.err.Error() }
func (e configErr) Unwrap() error        { return e.err }
func (e configErr) Is(target error) bool { return target == ErrConfig }

type daemon struct{ o Options }

// Run runs a node with o until ctx ends (or a finite source ends), with every part its
// configuration enables, and returns when all have stopped and the store is closed. An error
// wrapping ErrConfig names a problem of the configuration.
func Run(ctx context.Context, o Options) (err error) {
	d := &daemon{o: o}
	cfg, stdin, log := o.Config, o.Stdin, o.Logger
	st, err := d.openStore()
	if err != nil {
		return err
	}
	// Closed at the end of a run, and here on the way out of a start that failed (closing
	// twice is harmless); it commits what the store still holds.
	defer func() {
		if cerr := st.Close(); cerr != nil && err == nil {
			err = fmt.Errorf("closing the store: %w", cerr)
		}
	}()
	src, err := capture.NewReader(cfg.Capture, stdin, log)
	if err != nil {
		return configError(fmt.Errorf("capture: %w", err))
	}
	no := d.nodeOptions(src, st)
	no.SensitivityDBFS = d.sensitivityInUse(cfg)
	var pub *publish.Publisher
	if len(cfg.Publish.Brokers) > 0 {
		id := publish.Identity{NodeID: cfg.Node.ID, Site: cfg.Node.Site, SoftwareVersion: no.Session.SoftwareVersion}
		if lat, lon, ok := cfg.Location(); ok {
			id.Location = &publish.Location{Latitude: lat, Longitude: lon}
		}
		if pub, err = publish.New(cfg.Publish, st, id, log); err != nil {
			return configError(err)
		}
		no.Notify = pub.Notify
	}
	no.SampleOrigin = o.SampleOrigin
	var display *displayFeed
	if o.Display != nil {
		display = newDisplayFeed()
		no.OnSecond = func(r *record.Second) { display.offer(cloneSecond(r)) }
		no.OnMinute = func(r *record.Minute) { display.offer(cloneMinute(r)) }
	}
	n, err := node.New(no)
	if err != nil {
		return err
	}
	log.Info("node starting", "version", no.Session.SoftwareVersion, "source", src.Describe(), "store", cfg.Store.Path, "store_id", st.ID())
	ctx, cancel := context.WithCancel(ctx)
	var bg sync.WaitGroup
	defer bg.Wait()
	defer cancel()
	if display != nil {
		bg.Go(func() { display.run(o.Display) })
		defer func() {
			display.close() // n.Run has returned or never started: nothing more is offered
			if k := display.skipped.Load(); k > 0 {
				log.Warn("the live display skipped records it could not show in time (all are stored)", "records", k)
			}
		}()
	}
	if path := cfg.ControlSocket(); path != "" {
		srv, err := d.startControl(path, n, st)
		if err != nil {
			return err
		}
		bg.Go(func() {
			if err := srv.Serve(ctx); err != nil {
				log.Error("control socket stopped", "err", err)
			}
		})
		log.Info("control socket listening", "path", path)
	}
	if o.Reload != nil {
		bg.Go(func() {
			for {
				select {
				case <-ctx.Done():
					return
				case <-o.Reload:
					d.reload(cfg, n)
				}
			}
		})
	}
	var selfCheck atomic.Pointer[web.SelfCheckStatus]
	bg.Go(func() { d.verifyDaily(ctx, n, &selfCheck) })
	if cfg.Web.Enabled {
		srv, err := d.startWeb(n, st, pub, &selfCheck)
		if err != nil {
			return err
		}
		bg.Go(func() {
			if err := srv.Run(ctx); err != nil && ctx.Err() == nil {
				log.Error("status page stopped", "err", err)
			}
		})
	}
	if pub != nil && cfg.Indicators.Profile != "" {
		bg.Go(func() { d.publishPeriods(ctx, st, pub) })
	}
	if pub != nil {
		bg.Go(func() {
			if err := pub.Run(ctx); err != nil && ctx.Err() == nil {
				log.Error("publisher stopped", "err", err)
			}
		})
		bg.Go(func() {
			for {
				select {
				case <-ctx.Done():
					return
				case r := <-pub.Requests():
					// A remote calibration check: take the next stable tone, without adjusting (the reply on the
					// reply topic said the request was accepted; the check is published as a
					// calibration record).
					log.Info("remote calibration request", "id", r.ID)
					bg.Go(func() {
						cctx, cancel := context.WithTimeout(ctx, 2*time.Minute)
						defer cancel()
						if _, err := n.RequestCalibration(cctx, 0, false); err != nil {
							log.Warn("remote calibration request ended without a check", "id", r.ID, "err", err)
						}
					})
				}
			}
		})
	}
	err = n.Run(ctx)
	cancel()
	if errors.Is(err, context.Canceled) {
		err = nil
	}
	if cerr := st.Close(); cerr != nil && err == nil {
		err = cerr
	}
	log.Info("node stopped", "seconds", n.Counters.Seconds.Load(), "minutes", n.Counters.Minutes.Load(), "gaps", n.Counters.Gaps.Load(), "dropped_samples", n.Counters.DroppedSamples.Load())
	return err
}
