package node

import (
	"log/slog"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
)

// smallFS mounts a tmpfs of the given size for the test (a full disk without filling the
// machine's). It needs root; under CI=true a missing mount fails the test.
func smallFS(t *testing.T, size string) string {
	t.Helper()
	dir := t.TempDir()
	if out, err := exec.Command("mount", "-t", "tmpfs", "-o", "size="+size, "tmpfs", dir).CombinedOutput(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("mounting a tmpfs for the full-disk test: %v: %s", err, out)
		}
		t.Skipf("cannot mount a tmpfs (needs root): %v: %s", err, out)
	}
	t.Cleanup(func() { exec.Command("umount", "-l", dir).Run() })
	return dir
}

// TestNodeSurvivesFullDisk: the store's file system fills up (another file takes the space)
// while the node measures, and frees up later. The node never stops: it raises store-fault at
// once, holds what it can in memory, covers what the store refused with a gap record, clears
// the flag when the store writes again, and the store checks clean with every record it
// committed before the fault still there.
func TestNodeSurvivesFullDisk(t *testing.T) {
	dir := smallFS(t, "400k")
	filler := filepath.Join(dir, "filler")
	const fs = 48000
	fill := func() {
		// Take every free block: write until the file system refuses.
		f, err := os.Create(filler)
		if err != nil {
			return
		}
		buf := make([]byte, 4096)
		for {
			if _, err := f.Write(buf); err != nil {
				break
			}
		}
		f.Close()
	}
	sig := func(i int64) float32 {
		switch i {
		case 20 * fs:
			fill()
		case 100 * fs:
			os.Remove(filler)
		}
		return float32(ampFor(60) * math.Sin(2*math.Pi*1000*float64(i)/fs))
	}
	src := &fakeSource{fs: fs, signal: sig, total: 130 * fs, t0: t0}
	logger := slog.New(slog.DiscardHandler)
	ck := &simClock{now: src.t0}
	src.clock = ck
	// The store's back-off follows the simulated clock, as the node's does.
	st, err := buffer.Open(filepath.Join(dir, "node.db"), &buffer.Options{NoSync: true, MaxHeld: 40, CommitInterval: time.Second, Now: ck.Now, Logger: logger})
	if err != nil {
		t.Fatal(err)
	}
	ev := dsp.DefaultEventConfig(-26)
	n, err := New(Options{
		Source: src, Store: st, SensitivityDBFS: -26, Bands: dsp.Third, SecondSpectra: true, Events: &ev,
		Lossless: true, Now: ck.Now, ClockSynced: func() bool { return true }, Settling: time.Second,
		RetryMax: time.Millisecond, Logger: logger,
	})
	if err != nil {
		t.Fatal(err)
	}
	r := &rig{store: st, src: src, clock: ck, node: n}
	r.run(t) // fails the test if the node stops with an error
	if err := st.Close(); err != nil {
		t.Fatalf("closing the store after the disk freed up: %v", err)
	}
	st, err = buffer.OpenReadOnly(filepath.Join(dir, "node.db"), time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if err := st.Check(); err != nil {
		t.Fatalf("store check: %v", err)
	}
	secs := records[*record.Second](t, st, record.KindSecond)
	gaps := records[*record.Gap](t, st, record.KindGap)
	health := records[*record.Health](t, st, record.KindHealth)
	var raised, cleared bool
	for _, h := range health {
		if h.Flags.Has(record.StoreFault) {
			raised = true
		} else if raised {
			cleared = true
		}
	}
	if !raised || !cleared {
		t.Errorf("store-fault raised %v, cleared %v in %d health snapshots", raised, cleared, len(health))
	}
	// Every second of the 130 is either stored or inside a gap record.
	covered := func(at time.Time) bool {
		for _, s := range secs {
			if !at.Before(s.Start) && at.Before(s.Start.Add(s.Duration)) {
				return true
			}
		}
		for _, g := range gaps {
			if !at.Before(g.From) && at.Before(g.To) {
				return true
			}
		}
		return false
	}
	first := secs[0].Start
	for k := 0; k < 129; k++ {
		if at := first.Add(time.Duration(k)*time.Second + 500*time.Millisecond); !covered(at) {
			t.Errorf("second %v is neither stored nor explained by a gap record (%d gaps)", at.Sub(t0), len(gaps))
			break
		}
	}
	if len(gaps) == 0 {
		t.Error("no gap record for what the full store refused")
	}
	t.Logf("%d seconds stored, %d gaps (%v), %d health snapshots", len(secs), len(gaps), gaps, len(health))
}
