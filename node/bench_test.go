package node

import (
	"context"
	"log/slog"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/capture"
)

func cpuTime() time.Duration {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

func maxRSSMB() float64 {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return float64(ru.Maxrss) / 1024 // Linux reports kilobytes
}

// BenchmarkNodeCPUShare runs the whole node as the daemon runs by default (synthetic scene at
// 48 kHz, one-third-octave bands with spectra in every second record, event and calibrator
// detection, health checks, the store on disk with its default commit interval) over b.N seconds of audio as fast as it goes, and reports the CPU time per second of
// audio as a share of one core: what the node costs when it runs in real time. Goal: at most
// 2 % on the CI machine. It also reports the peak resident memory of the whole test process
// (goal for the daemon: 30 MB).
func BenchmarkNodeCPUShare(b *testing.B) {
	dir := b.TempDir()
	st, err := buffer.Open(filepath.Join(dir, "bench.db"), nil)
	if err != nil {
		b.Fatal(err)
	}
	defer st.Close()
	secs := max(b.N, 5)
	src, err := capture.New(capture.Config{Kind: capture.KindSynthetic, SampleRate: 48000, Seed: 7, DurationSeconds: float64(secs)}, nil)
	if err != nil {
		b.Fatal(err)
	}
	ev := dsp.DefaultEventConfig(-26)
	n, err := New(Options{Source: src, Store: st, SensitivityDBFS: -26, Bands: dsp.Third, SecondSpectra: true,
		Lossless: true, SampleTimed: true, Events: &ev, Calibration: &CalibrationOptions{NominalDBFS: -26},
		Logger: slog.New(slog.DiscardHandler)})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	c0 := cpuTime()
	if err := n.Run(context.Background()); err != nil {
		b.Fatal(err)
	}
	cpu := cpuTime() - c0
	b.StopTimer()
	if got := n.Counters.Seconds.Load(); got < int64(secs) {
		b.Fatalf("%d seconds measured, want %d", got, secs)
	}
	b.ReportMetric(100*cpu.Seconds()/float64(secs), "cpu-%")
	b.ReportMetric(maxRSSMB(), "MB-maxrss")
}

// BenchmarkNodeFirstRecord measures the time from start to the first committed second record
// with a real-time source (goal: under 2 s). The first record ends at the first UTC second
// boundary, so the figure lies between the start-up cost and that plus one second.
func BenchmarkNodeFirstRecord(b *testing.B) {
	for range b.N {
		dir := b.TempDir()
		st, err := buffer.Open(filepath.Join(dir, "bench.db"), nil)
		if err != nil {
			b.Fatal(err)
		}
		src, err := capture.New(capture.Config{Kind: capture.KindSynthetic, SampleRate: 48000, Seed: 7, Realtime: true}, nil)
		if err != nil {
			b.Fatal(err)
		}
		ctx, cancel := context.WithCancel(context.Background())
		start := time.Now()
		var first time.Duration
		n, err := New(Options{Source: src, Store: st, SensitivityDBFS: -26, Bands: dsp.Third,
			OnSecond: func(*record.Second) {
				// Append commits the first record after start at once (buffer.Options).
				if first == 0 {
					first = time.Since(start)
					cancel()
				}
			}})
		if err != nil {
			b.Fatal(err)
		}
		if err := n.Run(ctx); err != nil {
			b.Fatal(err)
		}
		st.Close()
		b.ReportMetric(first.Seconds(), "s-to-first-record")
	}
}
