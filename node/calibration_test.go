package node

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

func TestNodeCalibrationStateNotKept(t *testing.T) {
	// The state file is written off the processing goroutine; when the write fails (here the
	// state directory lies under a regular file, so no file can be made in it) the node puts the
	// old sensitivity back, stores the check as not applied and tells the requester why. The
	// tone is 94 dB on a microphone 1 dB less sensitive than its data sheet (-27 dBFS), as in
	// TestNodeCalibration.
	const actual, nominal = -27.0, -26.0
	tone := func(i int64) float32 {
		t := float64(i) / 48000
		noise := float32(1e-4 * math.Sin(2*math.Pi*137*t))
		if t >= 3 && t < 13 {
			return float32(math.Pow(10, actual/20)*math.Sin(2*math.Pi*1000*t)) + noise
		}
		return noise
	}
	blocker := filepath.Join(t.TempDir(), "not-a-directory")
	if err := os.WriteFile(blocker, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	src := &fakeSource{fs: 48000, signal: tone, total: 20 * 48000, t0: t0}
	ev := dsp.DefaultEventConfig(nominal)
	r := newRig(t, src, func(o *Options) {
		o.Calibration = &CalibrationOptions{NominalDBFS: nominal, StateDir: filepath.Join(blocker, "state")}
		o.Events = &ev
	})
	type outcome struct {
		res *CalibrationResult
		err error
	}
	done := make(chan outcome, 1)
	go func() {
		res, err := r.node.RequestCalibration(context.Background(), 94, true)
		done <- outcome{res, err}
	}()
	time.Sleep(50 * time.Millisecond) // the request waits on the node before it runs
	r.run(t)
	got := <-done
	if got.err == nil || got.res == nil || got.res.Applied || got.res.Check == nil || got.res.Check.Applied {
		t.Fatalf("a calibration whose state could not be kept: %+v, err %v; want not applied and an error", got.res, got.err)
	}
	checks := records[*record.Calibration](t, r.store, record.KindCalibration)
	if len(checks) != 1 || checks[0].Applied {
		t.Errorf("checks %+v, want one, not applied", checks)
	}
	// Sessions: the start, the new sensitivity from the tone on, the old one back once the
	// write failed.
	sess := records[*record.Session](t, r.store, record.KindSession)
	if len(sess) != 3 || math.Abs(sess[1].SensitivityDBFS-actual) > 0.1 || sess[2].SensitivityDBFS != nominal {
		t.Errorf("sessions %+v, want the start, %.0f dBFS, then %.0f dBFS again", sess, actual, nominal)
	}
	if s := r.node.Sensitivity(); s != nominal {
		t.Errorf("sensitivity in use %v, want the old %v", s, nominal)
	}
	if _, err := os.Stat(filepath.Join(blocker, "state")); err == nil {
		t.Errorf("a state directory was made under a file")
	}
}
