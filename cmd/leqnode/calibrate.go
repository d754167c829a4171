package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"text/tabwriter"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/calibrate"
	"github.com/leqnode/leqnode/node/lib/config"
)

// optFloat is a float flag that remembers whether it was given.
type optFloat struct {
	v   float64
	set bool
}

func (f *optFloat) String() string {
	if !f.set {
		return ""
	}
	return strconv.FormatFloat(f.v, 'g', -1, 64)
}

func (f *optFloat) Set(s string) error {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("%q is not a number", s)
	}
	f.v, f.set = v, true
	return nil
}

func runCalibrate(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("calibrate", "[--reference DB] [--sensitivity DBFS | --config FILE] [--range DB] [--class LS|1|2] [--channel N] [--format table|json] [FILE]", std.err)
	ref := fl.Float64("reference", calibrate.DefaultReference, "the calibrator's stated level, dB (usually 94 or 114)")
	var nominal optFloat
	fl.Var(&nominal, "sensitivity", "the microphone's nominal (data-sheet) sensitivity, dBFS for 94 dB at 1 kHz; the result must lie within --range of it. Without it or --config: the installed node's configuration ($LEQNODE_CONFIG, else /etc/leqnode/leqnode.toml when it exists; LEQNODE_CONFIG=none for none), else only the range microphones have, -60 to -15 dBFS, is checked")
	cfgPath := fl.String("config", "", "the node's configuration file: its microphone sensitivity is the nominal")
	rng := fl.Float64("range", calibrate.DefaultAdjustRange, "allowed distance of the new sensitivity from the nominal, dB")
	class := fl.String("class", "1", "the calibrator's class (IEC 60942): LS, 1 or 2; judges the tone's frequency")
	channel := fl.Int("channel", 1, "channel of the recording to use, counted from 1")
	format := fl.String("format", "", "output: table (default on a terminal) or json (default otherwise)")
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if *format == "" {
		*format = "json"
		if std.outIsTTY {
			*format = "table"
		}
	}
	if err := oneOf("format", *format, "table", "json"); err != nil {
		return err
	}
	if err := oneOf("class", *class, "LS", "1", "2"); err != nil {
		return err
	}
	cls := map[string]dsp.CalibratorClass{"LS": dsp.CalibratorClassLS, "1": dsp.CalibratorClass1, "2": dsp.CalibratorClass2}[*class]
	if !(*ref >= 60 && *ref <= 150) {
		return badInput("--reference %g dB is out of range: give the calibrator's stated level, e.g. 94 or 114", *ref)
	}
	if !(*rng > 0 && *rng <= 20) {
		return badInput("--range %g dB is out of range: give 0 to 20 dB (default 3)", *rng)
	}
	if nominal.set && *cfgPath != "" {
		return badInput("give either --sensitivity DBFS or --config FILE, not both")
	}
	if *cfgPath != "" {
		cfg, err := config.Load(*cfgPath)
		if err != nil {
			return badInput("%v", err)
		}
		nominal = optFloat{v: cfg.Microphone.SensitivityDBFS, set: true}
	}
	if nominal.set && !(nominal.v >= -100 && nominal.v <= 0) {
		return badInput("--sensitivity %g is out of range: give the dBFS for 94 dB SPL, between -100 and 0 (typical -26)", nominal.v)
	}
	if *channel < 1 {
		return badInput("--channel %d: count channels from 1", *channel)
	}
	if len(pos) > 1 {
		return badInput("give at most one recording FILE (a WAV file, or - for standard input)")
	}
	if len(pos) == 0 {
		return calibrateDaemon(ctx, std, *cfgPath, calibrate.Request{Reference: *ref, Timeout: 2 * time.Minute, Apply: true}, *format)
	}
	// The nominal sensitivity: --sensitivity, --config, else the installed node's configuration.
	var nom *calibrate.Nominal
	switch {
	case nominal.set && *cfgPath != "":
		nom = &calibrate.Nominal{DBFS: nominal.v, Source: "microphone.sensitivity_dbfs of " + *cfgPath}
	case nominal.set:
		nom = &calibrate.Nominal{DBFS: nominal.v, Source: "--sensitivity"}
	default:
		if p := installedConfig(); p != "" {
			if cfg, err := config.Load(p); err == nil {
				nom = &calibrate.Nominal{DBFS: cfg.Microphone.SensitivityDBFS, Source: "microphone.sensitivity_dbfs of " + p}
			}
		}
	}

	in, name, done, err := openRecording(std, pos[0])
	if err != nil {
		return err
	}
	defer done()
	res, err := calibrate.FromReader(ctx, in, calibrate.Options{Reference: *ref, Class: cls, Channel: *channel})
	if errors.Is(err, calibrate.ErrNoTone) {
		if *format == "json" {
			if werr := writeCalibrateJSON(std.out, calibrate.Summary{Reason: err.Error()}); werr != nil {
				return werr
			}
		}
		return badInput("%s: %v", name, err)
	}
	if err != nil {
		if errors.Is(err, context.Canceled) {
			return err
		}
		return badInput("%s: %v", name, err)
	}

	// Judge the result: clipping, the frequency against the calibrator's class, the
	// sensitivity against the nominal or, with none, against the plausible range.
	j := calibrate.Judge(res, nom, *rng, cls)
	sum := res.Summarize(j.OK)
	sum.Reason = j.Reason
	if nom != nil {
		sum.NominalDBFS = &nom.DBFS
	}
	var werr error
	if *format == "json" {
		werr = writeCalibrateJSON(std.out, sum)
	} else {
		werr = writeCalibrateTable(std.out, res, dsp.CalibratorTolerances(cls), j)
	}
	if werr != nil {
		return werr
	}
	if !j.OK {
		return fmt.Errorf("%s: %s", name, j.Reason)
	}
	return nil
}

// installedConfig returns the configuration file of the node installed on this machine whose
// microphone sensitivity `calibrate FILE` judges against when given neither --sensitivity nor
// --config: $LEQNODE_CONFIG, else /etc/leqnode/leqnode.toml when it exists; "" for none
// (LEQNODE_CONFIG=none turns it off).
func installedConfig() string {
	if p := os.Getenv("LEQNODE_CONFIG"); p != "" {
		if p == "none" {
			return ""
		}
		return p
	}
	const p = "/etc/leqnode/leqnode.toml"
	if _, err := os.Stat(p); err == nil {
		return p
	}
	return ""
}

func writeCalibrateJSON(w io.Writer, s calibrate.Summary) error {
	b, err := json.Marshal(s)
	if err != nil {
		return err
	}
	_, err = w.Write(append(b, '\n'))
	return err
}

func writeCalibrateTable(w io.Writer, r *calibrate.Result, tol dsp.CalibratorTolerance, j calibrate.Judgement) error {
	d := r.Detection
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	p := &printer{w: tw}
	plaus := "within"
	if !r.FrequencyPlausible {
		plaus = "OUTSIDE"
	}
	p.printf("tone\t%.2f Hz\t%s the ±%.1f %% of a class %s calibrator (IEC 60942:2017 Table 4)\n", d.FrequencyHz, plaus, 100*tol.Frequency, tol.Class)
	p.printf("measured\t%.2f dBFS\tLeq over %.2f s, spread %.3f dB, band %.0f dB above the rest\n", d.LevelDBFS, d.Stable, d.StabilityDB, d.DominanceDB)
	p.printf("reference\t%.1f dB\tthe calibrator's stated level\n", r.Reference)
	p.printf("sensitivity\t%.2f dBFS\t\n", r.SensitivityDBFS)
	okText := "yes"
	if !j.OK {
		okText = "no"
	}
	p.printf("ok\t%s\t%s\n", okText, j.Reason)
	if p.err != nil {
		return p.err
	}
	return tw.Flush()
}
