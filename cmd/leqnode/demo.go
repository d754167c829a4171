package main

import (
	"context"
	"fmt"
	"log/slog"
	"math"
	"net"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/daemon"
	"github.com/leqnode/leqnode/node/demobroker"
	"github.com/leqnode/leqnode/node/lib/config"
)

func runDemo(ctx context.Context, std stdio, args []string) (rerr error) {
	fl := newFlags("demo", "[--duration D] [--fast] [--dir DIR] [--no-broker]", std.err)
	dur := fl.Duration("duration", 65*time.Second, "how long a scene to play (0: until interrupted); in real time, or with --fast that much audio as fast as the processor allows")
	fast := fl.Bool("fast", false, "play --duration of the scene as fast as the processor allows (not in real time), its records dated to end now")
	dir := fl.String("dir", "", "directory for the demo's store (default: a new temporary directory, kept)")
	noBroker := fl.Bool("no-broker", false, "do not start the in-process MQTT broker (publish nothing)")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	out := &printer{w: std.out}
	if len(pos) != 0 || *dur < 0 {
		return badInput("demo takes no arguments; --duration must be 0 or more")
	}
	if *fast && *dur == 0 {
		return badInput("--fast needs a --duration: the length of audio to play (e.g. --duration 24h)")
	}
	cfg := config.Default()
	cfg.Capture.Realtime = !*fast
	cfg.Capture.CalibratorSeconds = 8
	// The scene follows the hour of its start time (quiet nights, rush hours): let it begin on
	// a weekday morning whatever the time of the demo, so there is traffic to hear.
	cfg.Capture.Start = time.Now().UTC().Format("2006-01-02") + "T08:00:00Z"
	var origin time.Time
	if *fast {
		// --duration of audio, stamped from the sample count so that it ends now: never dated
		// ahead of the clock. The scene follows its own clock from that start.
		origin = time.Now().UTC().Add(-*dur).Truncate(time.Second)
		cfg.Capture.Start = origin.Format(time.RFC3339)
		cfg.Capture.DurationSeconds = dur.Seconds()
	}
	if *dir == "" {
		if *dir, err = os.MkdirTemp("", "leqnode-demo-"); err != nil {
			return err
		}
	} else if err := os.MkdirAll(*dir, 0o755); err != nil {
		return err
	}
	cfg.Store.Path = filepath.Join(*dir, "leqnode.db")
	cfg.Store.CommitInterval = "5s" // the demo's store is not on a flash card: show records soon
	// A control socket, and the configuration written beside the store, so that the reading
	// commands it suggests work while the demo runs (they go through the socket) and after.
	cfg.Control.Socket = filepath.Join(*dir, "control.sock")
	cfgPath := filepath.Join(*dir, "leqnode.toml")
	if b, err := cfg.Encode(); err != nil {
		return err
	} else if err := os.WriteFile(cfgPath, b, 0o644); err != nil {
		return err
	}
	if *dur > 0 && !*fast {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, *dur)
		defer cancel()
	}
	if !*noBroker {
		url, stop, err := demobroker.Start(ctx, "127.0.0.1:0")
		if err != nil {
			return err
		}
		defer func() {
			if serr := stop(); serr != nil && rerr == nil {
				rerr = fmt.Errorf("the demo's MQTT broker: %w", serr)
			}
		}()
		cfg.Publish.Brokers = []string{url}
		host, port, _ := strings.Cut(strings.TrimPrefix(url, "tcp://"), ":")
		out.printf("MQTT: an in-process broker at %s; watch it with\n  mosquitto_sub -h %s -p %s -t 'leqnode/#' -v\n", url, host, port)
	}
	if ln, err := net.Listen("tcp", "127.0.0.1:0"); err == nil {
		cfg.Web.Enabled, cfg.Web.Addr = true, ln.Addr().String()
		if err := ln.Close(); err != nil {
			return fmt.Errorf("the status page's port: %w", err)
		}
		out.printf("status page: http://%s/ (this computer only, while the demo runs)\n", cfg.Web.Addr)
	}
	out.printf("leqnode demo: node %s at %s\n", cfg.Node.ID, cfg.Node.Site)
	out.printf("synthetic street scene (a 94 dB calibrator tone first), store %s\n", cfg.Store.Path)
	out.printf("while it runs, read the store with: %s export --config %s --kind second\n", prog(), cfgPath)
	out.printf("levels are indicative: see the README's cautions\n\n")
	log := newLogger(std.err, std.errIsTTY, slog.LevelWarn)
	err = runDaemon(ctx, std, daemon.Options{Config: cfg, Logger: log, SampleOrigin: origin,
		// Called on a goroutine of the daemon's while this one waits in runDaemon.
		Display: func(r record.Record) {
			switch r := r.(type) {
			case *record.Second:
				out.println(liveLine(r))
			case *record.Minute:
				out.println(minuteLine(r))
			}
		}})
	if err != nil {
		return err
	}
	st, err := buffer.OpenReadOnly(cfg.Store.Path, time.Second)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := st.Close(); cerr != nil && rerr == nil {
			rerr = fmt.Errorf("closing the store %s: %w", cfg.Store.Path, cerr)
		}
	}()
	stats, err := st.Stats()
	if err != nil {
		return err
	}
	out.printf("\nstored in %s (store %s):", cfg.Store.Path, st.ID())
	for _, k := range record.Kinds() {
		if ks := stats.Kinds[k]; ks.Count > 0 {
			out.printf(" %d %s", ks.Count, k)
		}
	}
	out.printf("\nexport them with: %s export --config %s --kind second --format csv\n", prog(), cfgPath)
	if cfg.Web.Enabled {
		out.printf("the status page stopped with the demo; `%s demo --duration 0` keeps it until you press Ctrl-C\n", prog())
	}
	return out.err
}

// prog is the command as the user typed it (bin/leqnode from make demo), or "leqnode".
func prog() string {
	if p := os.Args[0]; strings.ContainsRune(p, '/') && !strings.HasSuffix(p, ".test") {
		return p
	}
	return "leqnode"
}

// liveLine is one second of the demo's live display: time, LAeq, LAFmax and a level bar
// (one mark per 2 dB from 20 dB).
func liveLine(s *record.Second) string {
	bar := ""
	if !math.IsNaN(s.LAeq) {
		n := int(math.Max(0, math.Min(40, (s.LAeq-20)/2)))
		bar = strings.Repeat("#", n)
	}
	var flags string
	if s.Flags != 0 {
		flags = " [" + s.Flags.String() + "]"
	}
	return fmt.Sprintf("%s  LAeq %5.1f  LAFmax %5.1f  |%-40s|%s", s.Start.Local().Format("15:04:05"), s.LAeq, s.LAFmax, bar, flags)
}

// minuteLine is the demo's summary of a minute.
// It says which seconds the validity rule left out and marks a bound (≥ with overloaded
// seconds in it, ≤ with seconds under the measuring range).
func minuteLine(m *record.Minute) string {
	var out []string
	for why := record.ReasonCalibrating; why < record.NumReasons; why++ {
		if n := m.LeftOut[why]; n > 0 {
			out = append(out, fmt.Sprintf("%s %d", strings.ReplaceAll(why.String(), "_", " "), n))
		}
	}
	left := ""
	if len(out) > 0 {
		left = "; left out: " + strings.Join(out, ", ")
	}
	if m.ValidSeconds == 0 {
		return fmt.Sprintf("-- minute %s  no valid seconds%s", m.Start.Local().Format("15:04"), left)
	}
	b := m.Tally().Bound().Sign()
	return fmt.Sprintf("-- minute %s  LAeq %s%.1f  LAFmax %.1f  LAF10 %.1f  LAF50 %.1f  LAF90 %.1f  LCpeak %.1f  (%d valid seconds%s)",
		m.Start.Local().Format("15:04"), b, m.LAeq, m.LAFmax, m.LAF10, m.LAF50, m.LAF90, m.LCpeak, m.ValidSeconds, left)
}
