package daemon

import (
	"errors"
	"os"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/lib/calibrate"
	"github.com/leqnode/leqnode/node/lib/config"
)

// nodeOptions maps a configuration onto the node's options.
func (d *daemon) nodeOptions(src capture.Source, st *buffer.Store) node.Options {
	cfg, log := d.o.Config, d.o.Logger
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
		Session: record.Session{
			SoftwareVersion: d.o.Version,
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
func (d *daemon) sensitivityInUse(cfg *config.Config) float64 {
	log := d.o.Logger
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
func (d *daemon) openStore() (*buffer.Store, error) {
	cfg, log := d.o.Config, d.o.Logger
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
