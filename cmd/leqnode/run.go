package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"os/user"
	"reflect"
	"runtime/debug"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/dsp/selftest"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/calibrate"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/config"
	"github.com/leqnode/leqnode/node/control"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/web"
)

// softwareVersion returns the module version and VCS revision the binary was built from.
func softwareVersion() string {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "leqnode (unknown build)"
	}
	v := bi.Main.Version
	for _, s := range bi.Settings {
		if s.Key == "vcs.revision" && len(s.Value) >= 12 {
			v += " " + s.Value[:12]
		}
	}
	return "leqnode " + v
}

// newLogger returns text logs on a terminal and JSON logs otherwise (under systemd the journal
// keeps them structured).
func newLogger(w io.Writer, tty bool, level slog.Level) *slog.Logger {
	opts := &slog.HandlerOptions{Level: level}
	if tty || os.Getenv("JOURNAL_STREAM") == "" && os.Getenv("INVOCATION_ID") == "" {
		return slog.New(slog.NewTextHandler(w, opts))
	}
	return slog.New(slog.NewJSONHandler(w, opts))
}

// nodeOptions maps a configuration onto the node's options.
func nodeOptions(cfg *config.Config, src capture.Source, st *buffer.Store, log *slog.Logger) node.Options {
	bands := map[string]dsp.BandSet{"third": dsp.Third, "octave": dsp.Octave, "none": 0}[cfg.Measure.Bands]
	o := node.Options{
		Source: src, Store: st,
		SensitivityDBFS: cfg.Microphone.SensitivityDBFS,
		Bands:           bands,
		SecondSpectra:   cfg.Measure.SecondSpectra && bands == dsp.Third,
		Settling:        time.Duration(cfg.Measure.SettlingSeconds * float64(time.Second)),
		OverloadLevel:   cfg.Microphone.OverloadDB,
		Lossless:        cfg.Capture.Kind == capture.KindStdin || cfg.SampleTimed(),
		SampleTimed:     cfg.SampleTimed(),
		Synthetic:       cfg.Capture.Kind == capture.KindSynthetic,
		Session: buffer.Session{
			SoftwareVersion: softwareVersion(),
			ConfigHash:      cfg.Hash(),
			TimeZone:        cfg.Node.TimeZone,
			NodeID:          cfg.Node.ID,
			Site:            cfg.Node.Site,
		},
		Logger: log,
	}
	if lat, lon, ok := cfg.Location(); ok {
		o.Session.Latitude, o.Session.Longitude = lat, lon
	}
	if o.Settling == 0 {
		o.Settling = time.Nanosecond // zero means the default; a tiny value means none
	}
	if cfg.Microphone.SelfNoiseDBA > 0 {
		o.UnderRangeLevel = cfg.Microphone.SelfNoiseDBA + cfg.Microphone.UnderRangeMarginDB
	}
	if c := cfg.Calibration; c.Detect {
		o.Calibration = &node.CalibrationOptions{
			References: c.References, NominalDBFS: cfg.Microphone.SensitivityDBFS,
			Class:       map[string]dsp.CalibratorClass{"LS": dsp.CalibratorClassLS, "1": dsp.CalibratorClass1, "2": dsp.CalibratorClass2}[c.Class],
			AdjustRange: c.AdjustRangeDB, StateDir: cfg.StateDir(),
		}
	}
	for _, pt := range cfg.Microphone.Correction {
		o.Correction = append(o.Correction, dsp.CorrectionPoint{FrequencyHz: pt[0], CorrectionDB: pt[1]})
	}
	if e := cfg.Events; e.Enabled {
		ec := dsp.EventConfig{
			SensitivityDBFS: cfg.Microphone.SensitivityDBFS, Threshold: e.ThresholdDB,
			Hysteresis: e.HysteresisDB, Hold: e.HoldS, MinDuration: e.MinDurationS,
			MaxDuration: e.MaxDurationS, Slow: e.Slow,
		}
		if e.Spectrum {
			ec.Bands = dsp.Third
		}
		o.Events = &ec
	}
	return o
}

// sensitivityInUse returns the microphone sensitivity to measure with: the one a calibration
// applied and kept in the state directory, when it was judged against the configured nominal
// sensitivity; else the configured one.
func sensitivityInUse(cfg *config.Config, log *slog.Logger) float64 {
	nominal := cfg.Microphone.SensitivityDBFS
	st, err := calibrate.LoadState(cfg.StateDir())
	switch {
	case errors.Is(err, os.ErrNotExist):
		return nominal
	case err != nil:
		log.Error("the kept calibration cannot be read; measuring with the configured sensitivity", "err", err)
		return nominal
	case st.NominalDBFS != nominal:
		log.Warn("the kept calibration was made for another nominal sensitivity; measuring with the configured one: calibrate again",
			"kept_nominal_dbfs", st.NominalDBFS, "configured_dbfs", nominal)
		return nominal
	}
	log.Info("measuring with the calibrated sensitivity", "sensitivity_dbfs", st.SensitivityDBFS, "calibrated_at", st.At, "nominal_dbfs", nominal)
	return st.SensitivityDBFS
}

// openStore opens the configured store for writing.
func openStore(cfg *config.Config, log *slog.Logger) (*buffer.Store, error) {
	st, err := buffer.Open(cfg.Store.Path, &buffer.Options{
		CommitInterval: cfg.CommitInterval(),
		MaxBytes:       cfg.Store.MaxMB << 20,
		Logger:         log,
	})
	if err != nil {
		return nil, err
	}
	if moved := st.Recovered(); moved != "" {
		log.Error("the store file was damaged: it was moved aside and a fresh store started", "moved_to", moved)
	}
	return st, nil
}

func runRun(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("run", "--config FILE", std.err)
	cfgPath := fl.String("config", "", "the node's configuration file (TOML)")
	verbose := fl.Bool("verbose", false, "log debug messages")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 || *cfgPath == "" {
		return badInput("give the configuration with --config FILE (see configs/leqnode.toml)")
	}
	cfg, err := config.Load(*cfgPath)
	if err != nil {
		return usageError{err}
	}
	level := slog.LevelInfo
	if *verbose {
		level = slog.LevelDebug
	}
	log := newLogger(std.err, std.errIsTTY, level).With("node", cfg.Node.ID)
	// A node lives on a small board for months: collect garbage more eagerly than Go's default
	// and aim to keep the heap under 16 MB (a soft limit: the runtime exceeds it rather than
	// fail). Costs a little CPU at start-up, when the filters are designed.
	debug.SetGCPercent(50)
	debug.SetMemoryLimit(16 << 20)
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	defer signal.Stop(hup)
	for _, w := range cfg.Warnings() {
		log.Warn(w)
	}
	return runNode(ctx, cfg, std.in, log, nil, func(ctx context.Context, n *node.Node) {
		for {
			select {
			case <-ctx.Done():
				return
			case <-hup:
				reload(*cfgPath, cfg, n, log)
			}
		}
	})
}

// runNode runs a node on cfg until ctx ends (or a finite source ends). hooks, when set,
// adjusts the options (the demo's live display); watch, when set, runs beside the node until
// it stops (the reload on SIGHUP).
func runNode(ctx context.Context, cfg *config.Config, stdin io.Reader, log *slog.Logger, hooks func(*node.Options), watch func(context.Context, *node.Node)) error {
	st, err := openStore(cfg, log)
	if err != nil {
		return err
	}
	defer st.Close()
	src, err := capture.NewReader(cfg.Capture, stdin, log)
	if err != nil {
		return usageError{fmt.Errorf("capture: %w", err)}
	}
	o := nodeOptions(cfg, src, st, log)
	o.SensitivityDBFS = sensitivityInUse(cfg, log)
	var pub *publish.Publisher
	if len(cfg.Publish.Brokers) > 0 {
		id := publish.Identity{NodeID: cfg.Node.ID, Site: cfg.Node.Site, SoftwareVersion: o.Session.SoftwareVersion}
		if lat, lon, ok := cfg.Location(); ok {
			id.Location = &publish.Location{Latitude: lat, Longitude: lon}
		}
		if pub, err = publish.New(cfg.Publish, st, id, log); err != nil {
			return usageError{err}
		}
		o.Notify = pub.Notify
	}
	if hooks != nil {
		hooks(&o)
	}
	n, err := node.New(o)
	if err != nil {
		return err
	}
	log.Info("node starting", "version", o.Session.SoftwareVersion, "source", src.Describe(), "store", cfg.Store.Path, "store_id", st.ID())
	ctx, cancel := context.WithCancel(ctx)
	var bg sync.WaitGroup
	defer bg.Wait()
	defer cancel()
	if path := cfg.ControlSocket(); path != "" {
		srv, err := startControl(cfg, path, n, st, log)
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
	if watch != nil {
		bg.Go(func() { watch(ctx, n) })
	}
	var selfCheck atomic.Pointer[web.SelfCheckStatus]
	bg.Go(func() { verifyDaily(ctx, n, &selfCheck, log) })
	if cfg.Web.Enabled {
		srv, err := startWeb(cfg, n, st, pub, &selfCheck, log)
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
		bg.Go(func() { publishPeriods(ctx, cfg, st, pub, log) })
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

// startControl opens the control socket of a running node.
func startControl(cfg *config.Config, path string, n *node.Node, st *buffer.Store, log *slog.Logger) (*control.Server, error) {
	gid := -1
	if cfg.Control.Group != "" {
		g, err := user.LookupGroup(cfg.Control.Group)
		if err != nil {
			return nil, usageError{fmt.Errorf("control.group %q: no such group: create it or leave the key empty", cfg.Control.Group)}
		}
		gid, _ = strconv.Atoi(g.Gid)
	}
	status := func() any {
		return map[string]any{
			"node": cfg.Node.ID, "site": cfg.Node.Site, "version": softwareVersion(),
			"store":  map[string]any{"id": st.ID(), "path": cfg.Store.Path},
			"status": n.Status(),
		}
	}
	h := control.Handlers{
		Status: status,
		Live: func() any {
			return map[string]any{"at": time.Now().UTC(), "LAF": n.Status().LAF}
		},
		Health: func() any {
			if h := n.Health(); h != nil {
				return node.HealthJSON(h)
			}
			return map[string]any{}
		},
		Calibrate: func(ctx context.Context, reference float64) (any, error) {
			ctx, cancel := context.WithTimeout(ctx, 2*time.Minute)
			defer cancel()
			res, err := n.RequestCalibration(ctx, reference, true)
			if res == nil {
				return nil, err
			}
			sum := (&calibrate.Result{Detection: res.Detection, SensitivityDBFS: calibrate.Implied(res.Check)}).Summarize(res.Applied && res.Check.OK)
			if err != nil {
				return nil, fmt.Errorf("%v (tone at %.2f Hz, %.2f dBFS)", err, res.Detection.FrequencyHz, res.Detection.LevelDBFS)
			}
			return sum, nil
		},
		// Reading commands run here, against the store this daemon holds.
		Exec: func(ctx context.Context, args []string, stdout io.Writer) (bool, error) {
			var errb strings.Builder
			code := run(ctx, stdio{in: strings.NewReader(""), out: stdout, err: &errb, daemon: st}, args)
			if code == 0 {
				return false, nil
			}
			msg := strings.TrimSpace(errb.String())
			if i := strings.LastIndex(msg, "\n"); i >= 0 {
				msg = msg[i+1:]
			}
			msg = strings.TrimPrefix(msg, "leqnode "+args[0]+": ")
			return code == 2, errors.New(msg)
		},
	}
	return control.Listen(path, gid, h, log)
}

// reload re-reads the configuration on SIGHUP: the microphone settings apply at once; every
// other change is named as needing a restart. A file with problems changes nothing.
func reload(path string, cur *config.Config, n *node.Node, log *slog.Logger) {
	next, err := config.Load(path)
	if err != nil {
		log.Error("reload: the configuration has problems; nothing changed", "err", strings.ReplaceAll(err.Error(), "\n", "; "))
		return
	}
	var restart []string
	for _, c := range []struct {
		name string
		a, b any
	}{
		{"node", cur.Node, next.Node}, {"capture", cur.Capture, next.Capture},
		{"measure", cur.Measure, next.Measure}, {"store", cur.Store, next.Store},
		{"control", cur.Control, next.Control},
	} {
		if !reflect.DeepEqual(c.a, c.b) {
			restart = append(restart, "["+c.name+"]")
		}
	}
	if !reflect.DeepEqual(next.Microphone.Correction, cur.Microphone.Correction) {
		restart = append(restart, "[microphone] correction")
	}
	if !reflect.DeepEqual(next.Microphone, cur.Microphone) {
		m := next.Microphone
		// A calibrated sensitivity stays in use unless the nominal one changed.
		sens := n.Sensitivity()
		if m.SensitivityDBFS != cur.Microphone.SensitivityDBFS {
			sens = sensitivityInUse(next, log)
		}
		st := node.Settings{SensitivityDBFS: sens, OverloadLevel: m.OverloadDB}
		if m.SelfNoiseDBA > 0 {
			st.UnderRangeLevel = m.SelfNoiseDBA + m.UnderRangeMarginDB
		}
		if n.Reconfigure(st) {
			cur.Microphone = m
			log.Info("reload: microphone settings applied", "sensitivity_dbfs", sens)
		}
	}
	if len(restart) > 0 {
		log.Warn("reload: these sections changed and need a restart to apply: "+strings.Join(restart, " "), "apply", "systemctl restart leqnode")
	} else {
		log.Info("reload: done")
	}
}

// startWeb sets up the status page and metrics of a running node.
func startWeb(cfg *config.Config, n *node.Node, st *buffer.Store, pub *publish.Publisher, selfCheck *atomic.Pointer[web.SelfCheckStatus], log *slog.Logger) (*web.Server, error) {
	var token string
	if cfg.Web.TokenFile != "" {
		b, err := os.ReadFile(cfg.Web.TokenFile)
		if err != nil {
			return nil, usageError{fmt.Errorf("web.token_file: %w: create the file or leave the key empty", err)}
		}
		token = strings.TrimRight(string(b), "\r\n")
	}
	version := softwareVersion()
	return web.New(web.Options{
		Addr: cfg.Web.Addr, Token: token, Store: st, Logger: log,
		Live: web.LiveFrom(&n.Counters),
		Status: func() web.Status {
			ns := n.Status()
			s := web.Status{
				NodeID: cfg.Node.ID, Site: cfg.Node.Site, Version: version, TimeZone: cfg.Node.TimeZone,
				Started: ns.Started, Source: ns.Source, SampleRate: ns.SampleRate,
				Counters: web.CountersFrom(&n.Counters),
				Calibration: &web.CalibrationStatus{
					SensitivityDBFS: n.Sensitivity(), NominalDBFS: cfg.Microphone.SensitivityDBFS,
				},
			}
			if h := n.Health(); h != nil {
				synced := h.ClockSynced
				s.ClockSynced = &synced
			}
			if pub != nil {
				s.MQTT = web.MQTTFrom(pub.Status())
			}
			s.SelfCheck = selfCheck.Load()
			return s
		},
	})
}

// verifyDaily runs the electrical self-tests of the measurement chain (`leqnode verify`) at the
// node's sample rate once it runs, and then every day, and logs the outcome; the status page
// shows the latest.
func verifyDaily(ctx context.Context, n *node.Node, last *atomic.Pointer[web.SelfCheckStatus], log *slog.Logger) {
	for {
		fs := n.Status().SampleRate
		if fs == 0 { // not open yet
			if !sleepFor(ctx, time.Second) {
				return
			}
			continue
		}
		at := time.Now()
		rep := selftest.Run(float64(fs), false)
		last.Store(web.SelfCheckFrom(at, rep))
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
		if !sleepFor(ctx, 24*time.Hour) {
			return
		}
	}
}

func sleepFor(ctx context.Context, d time.Duration) bool {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return true
	case <-ctx.Done():
		return false
	}
}
