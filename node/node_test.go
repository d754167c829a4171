package node

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/internal/when"
)

// simClock is a simulated system clock driven by the fake source: the time of the latest
// sample delivered, plus an optional step. Stepping the real clock is not possible in a test
// (decisions: never step the machine's clock), so the node's Options.Now reads this instead.
type simClock struct {
	mu  sync.Mutex
	now time.Time
}

func (c *simClock) Now() time.Time  { c.mu.Lock(); defer c.mu.Unlock(); return c.now }
func (c *simClock) set(t time.Time) { c.mu.Lock(); c.now = t; c.mu.Unlock() }

// fakeSource stands in for a capture device where the real thing cannot run on a build
// machine: device loss, a stalled device, a clock step. It delivers signal(i) for sample i,
// advancing the simulated clock by the samples' duration. The real sources are tested in
// package capture and end to end below.
type fakeSource struct {
	fs     int
	signal func(i int64) float32
	total  int64 // samples to deliver before io.EOF
	clock  *simClock
	t0     time.Time
	// failAt makes Read fail with ErrDeviceLost once the stream reaches that sample
	// (0: never); the device comes back after failFor of simulated time.
	failAt  int64
	failFor time.Duration
	// stallAt makes Read block (until Close) once at that sample.
	stallAt int64
	// stepAt shifts the simulated clock by step once at that sample.
	stepAt int64
	step   time.Duration
	// openFails makes the first openFails calls of Open fail (a missing device).
	openFails int
	// flaps makes Read fail at once, before any sample, this many times after failAt.
	flaps int
	// fastUntil makes the device deliver its first fastUntil samples speed times faster than
	// real time (an ALSA file PCM over a regular file).
	fastUntil int64
	speed     float64

	mu      sync.Mutex
	pos     int64
	offset  time.Duration // accumulated clock shifts (outage, step)
	closed  chan struct{}
	opens   int
	dropped atomic.Int64
}

func (s *fakeSource) Open(ctx context.Context) (capture.Format, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.openFails > 0 {
		// The device is missing: each attempt takes a second of simulated time.
		s.openFails--
		s.offset += time.Second
		s.clock.set(s.wall())
		return capture.Format{}, fmt.Errorf("fake: no such device")
	}
	s.closed = make(chan struct{})
	s.opens++
	return capture.Format{SampleRate: s.fs, Channels: 1, Channel: 1, Sample: "float32"}, nil
}

func (s *fakeSource) Read(dst []float32) (int, error) {
	s.mu.Lock()
	closed := s.closed
	if s.pos >= s.total {
		s.mu.Unlock()
		return 0, io.EOF
	}
	if s.failAt == 0 && s.flaps > 0 && s.pos > 0 {
		s.flaps--
		s.offset += 100 * time.Millisecond
		s.clock.set(s.wall())
		s.mu.Unlock()
		return 0, fmt.Errorf("fake flap: %w", capture.ErrDeviceLost)
	}
	if s.failAt > 0 && s.pos >= s.failAt {
		s.failAt = 0
		s.offset += s.failFor
		s.clock.set(s.wall())
		s.mu.Unlock()
		return 0, fmt.Errorf("fake: %w", capture.ErrDeviceLost)
	}
	if s.stallAt > 0 && s.pos >= s.stallAt {
		s.stallAt = 0
		s.offset += 3 * time.Second
		s.clock.set(s.wall())
		s.mu.Unlock()
		<-closed
		return 0, capture.ErrClosed
	}
	if s.stepAt > 0 && s.pos >= s.stepAt {
		s.stepAt = 0
		s.offset += s.step
	}
	n := min(int64(len(dst)), s.total-s.pos)
	for i := range n {
		dst[i] = s.signal(s.pos + i)
	}
	s.pos += n
	s.clock.set(s.wall())
	s.mu.Unlock()
	return int(n), nil
}

// wall returns the simulated wall time at the stream's position.
func (s *fakeSource) wall() time.Time {
	audio := float64(s.pos) / float64(s.fs)
	if s.fastUntil > 0 {
		fast := float64(min(s.pos, s.fastUntil)) / float64(s.fs)
		audio = fast/s.speed + (audio - fast)
	}
	return s.t0.Add(time.Duration(audio*1e9) + s.offset)
}

func (s *fakeSource) Dropped() int64 { return s.dropped.Load() }
func (s *fakeSource) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed != nil {
		select {
		case <-s.closed:
		default:
			close(s.closed)
		}
	}
	return nil
}
func (s *fakeSource) Describe() string { return "fake test source" }

// ampFor returns the peak amplitude of a sine of level l dB SPL at sensitivity -26 dBFS (AES17:
// a full-scale sine is 0 dBFS; data-sheet sensitivity: SPL = dBFS - S + 94).
func ampFor(l float64) float64 { return math.Pow(10, (l-94-26)/20) }

type rig struct {
	store *buffer.Store
	src   *fakeSource
	clock *simClock
	node  *Node
}

func newRig(t *testing.T, src *fakeSource, mod func(*Options)) *rig {
	t.Helper()
	st, err := buffer.Open(filepath.Join(t.TempDir(), "node.db"), &buffer.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	ck := &simClock{now: src.t0}
	src.clock = ck
	o := Options{
		Source: src, Store: st, SensitivityDBFS: -26, Bands: dsp.Third, SecondSpectra: true,
		Lossless: true, Now: ck.Now, ClockSynced: func() bool { return true }, Settling: 2 * time.Second,
		RetryMax: time.Millisecond, Logger: slog.New(slog.DiscardHandler),
	}
	if mod != nil {
		mod(&o)
	}
	n, err := New(o)
	if err != nil {
		t.Fatal(err)
	}
	return &rig{store: st, src: src, clock: ck, node: n}
}

func (r *rig) run(t *testing.T) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	if err := r.node.Run(ctx); err != nil {
		t.Fatal(err)
	}
}

func records[T record.Record](t *testing.T, st *buffer.Store, k record.Kind) []T {
	t.Helper()
	var out []T
	err := st.Range(k, time.Unix(0, 0), time.Date(2100, 1, 1, 0, 0, 0, 0, time.UTC), func(r record.Record) error {
		out = append(out, r.(T))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

var t0 = time.Date(2026, 5, 4, 7, 0, 0, 0, time.UTC)

func testSignal(i int64) float32 {
	// A 1 kHz tone whose level steps every 1.5 s between 60 and 80 dB, plus noise.
	t := float64(i) / 48000
	l := 60.0
	if int(t/1.5)%2 == 1 {
		l = 80
	}
	rng := rand.New(rand.NewPCG(uint64(i), 9))
	return float32(ampFor(l)*math.Sin(2*math.Pi*1000*t) + 1e-4*rng.NormFloat64())
}

func TestNodeMatchesMeter(t *testing.T) {
	// The stored second records equal the measurement chain run over the same samples with
	// the same one-second intervals (the offline `analyze` path), within the store's 0.01 dB.
	const secs = 125
	src := &fakeSource{fs: 48000, signal: testSignal, total: secs * 48000, t0: t0}
	r := newRig(t, src, nil)
	r.run(t)

	m, _ := dsp.NewMeter(dsp.MeterConfig{SampleRate: 48000, SensitivityDBFS: -26, Bands: dsp.Third})
	x := make([]float32, 48000)
	var want []dsp.Result
	for k := range int64(secs) {
		for i := range x {
			x[i] = testSignal(k*48000 + int64(i))
		}
		m.Process(x)
		var res dsp.Result
		m.Take(&res)
		want = append(want, res)
	}
	got := records[*record.Second](t, r.store, record.KindSecond)
	if len(got) != secs {
		t.Fatalf("%d second records, want %d", len(got), secs)
	}
	for k, s := range got {
		w := &want[k]
		if !s.Start.Equal(t0.Add(time.Duration(k) * time.Second)) {
			t.Errorf("second %d starts at %v", k, s.Start)
		}
		for _, c := range []struct {
			name string
			a, b float64
		}{{"LAeq", s.LAeq, w.LAeq}, {"LAFmax", s.LAFmax, w.LAFmax}, {"LCpeak", s.LCpeak, w.LCpeak}, {"band 1 kHz", s.Spectrum[19], w.Bands[19]}} {
			if math.Abs(c.a-c.b) > 0.01 {
				t.Errorf("second %d: %s stored %.3f, chain %.3f", k, c.name, c.a, c.b)
			}
		}
		if settling := s.Flags.Has(record.Settling); settling != (k < 2) {
			t.Errorf("second %d: settling flag %v", k, settling)
		}
	}
	mins := records[*record.Minute](t, r.store, record.KindMinute)
	if len(mins) != 3 || mins[0].ValidSeconds != 58 || mins[1].ValidSeconds != 60 || mins[2].ValidSeconds != 5 {
		t.Fatalf("minutes: %d records, valid seconds %v", len(mins), func() (v []int) {
			for _, m := range mins {
				v = append(v, m.ValidSeconds)
			}
			return
		}())
	}
	// The minute's LAeq is the energy mean of its seconds (ISO 1996-1:2016 3.1.7).
	var e float64
	for _, s := range got[60:120] {
		e += math.Pow(10, s.LAeq/10)
	}
	if lm := 10 * math.Log10(e/60); math.Abs(mins[1].LAeq-lm) > 0.02 {
		t.Errorf("minute LAeq %.3f, energy mean of its seconds %.3f", mins[1].LAeq, lm)
	}
	// Half the time at 60 dB and half at 80 dB (within a minute of 1.5 s steps): LAF10 near 80
	// and LAF90 near 60 (definition of LN, ISO 1996-1:2016, from memory).
	if math.Abs(mins[1].LAF10-80) > 0.2 || math.Abs(mins[1].LAF90-60) > 0.2 {
		t.Errorf("minute LAF10 %.2f, LAF90 %.2f", mins[1].LAF10, mins[1].LAF90)
	}
	sess := records[*record.Session](t, r.store, record.KindSession)
	if len(sess) != 1 || sess[0].SampleRate != 48000 || sess[0].SensitivityDBFS != -26 {
		t.Errorf("sessions: %+v", sess)
	}
}

func TestNodeDeviceLossGivesGap(t *testing.T) {
	src := &fakeSource{fs: 48000, signal: testSignal, total: 20 * 48000, t0: t0,
		failAt: 5 * 48000, failFor: 4 * time.Second}
	r := newRig(t, src, nil)
	r.run(t)
	gaps := records[*record.Gap](t, r.store, record.KindGap)
	if len(gaps) != 1 || !strings.Contains(gaps[0].Reason, "device lost") {
		t.Fatalf("gaps: %+v", gaps)
	}
	if d := gaps[0].To.Sub(gaps[0].From); d < 3*time.Second || d > 5*time.Second {
		t.Errorf("gap of %v, want about 4 s", d)
	}
	secs := records[*record.Second](t, r.store, record.KindSecond)
	if len(secs) < 19 {
		t.Errorf("%d seconds after a recovered device loss, want the whole stream resumed", len(secs))
	}
	if src.opens != 2 {
		t.Errorf("source opened %d times, want 2", src.opens)
	}
	// After the re-open the seconds are flagged settling again.
	last := secs[len(secs)-1]
	after := secs[6] // the first second after the outage
	if !after.Flags.Has(record.Settling) || last.Flags.Has(record.Settling) {
		t.Errorf("settling after re-open: first %v, last %v", after.Flags, last.Flags)
	}
}

func TestNodeWatchdog(t *testing.T) {
	// A device that stops delivering without an error trips the watchdog, which closes it;
	// the node re-opens it and records the gap.
	src := &fakeSource{fs: 48000, signal: testSignal, total: 8 * 48000, t0: t0, stallAt: 3 * 48000}
	r := newRig(t, src, func(o *Options) { o.Watchdog = 300 * time.Millisecond })
	r.run(t)
	gaps := records[*record.Gap](t, r.store, record.KindGap)
	if len(gaps) != 1 || !strings.Contains(gaps[0].Reason, "watchdog") {
		t.Fatalf("gaps: %+v", gaps)
	}
	if src.opens != 2 {
		t.Errorf("opens = %d", src.opens)
	}
}

func TestNodeClockStepGivesGap(t *testing.T) {
	src := &fakeSource{fs: 48000, signal: testSignal, total: 10 * 48000, t0: t0,
		stepAt: 4 * 48000, step: 30 * time.Second}
	r := newRig(t, src, nil)
	r.run(t)
	gaps := records[*record.Gap](t, r.store, record.KindGap)
	if len(gaps) != 1 || !strings.Contains(gaps[0].Reason, "clock stepped") {
		t.Fatalf("gaps: %+v", gaps)
	}
	secs := records[*record.Second](t, r.store, record.KindSecond)
	lastStart := secs[len(secs)-1].Start
	if lastStart.Sub(t0) < 35*time.Second {
		t.Errorf("after a 30 s step the last second starts at %v", lastStart)
	}
	// Seconds after the step are aligned to whole UTC seconds again.
	if !lastStart.Equal(lastStart.Truncate(time.Second)) {
		t.Errorf("last second starts at %v, not on a whole second", lastStart)
	}
}

func TestNodeFlags(t *testing.T) {
	// Overload (clipping) and under-range flags appear exactly on the seconds that contain
	// them (IEC 61672-1 asks for overload and under-range indication).
	sig := func(i int64) float32 {
		t := float64(i) / 48000
		switch int(t) {
		case 3: // one clipped sample in second 3
			if i == 3*48000+100 {
				return 1
			}
		case 6, 7: // 20 dB SPL: below the 29 dB(A) self-noise plus 5 dB
			return float32(ampFor(20) * math.Sin(2*math.Pi*1000*t))
		}
		return float32(ampFor(60) * math.Sin(2*math.Pi*1000*t))
	}
	src := &fakeSource{fs: 48000, signal: sig, total: 10 * 48000, t0: t0}
	r := newRig(t, src, func(o *Options) { o.UnderRangeLevel = 34; o.OverloadLevel = 120; o.Settling = 0 })
	r.run(t)
	for k, s := range records[*record.Second](t, r.store, record.KindSecond) {
		if got := s.Flags.Has(record.Overload | record.Clipped); got != (k == 3) {
			t.Errorf("second %d: overload %v (%v)", k, got, s.Flags)
		}
		// Second 8 still reads under-range while the Fast detector has gone, but LAeq of second
		// 8 is back at 60 dB: only 6 and 7.
		if got := s.Flags.Has(record.UnderRange); got != (k == 6 || k == 7) {
			t.Errorf("second %d: under-range %v (LAeq %.1f)", k, got, s.LAeq)
		}
	}
}

func TestNodeQueueOverflowCounted(t *testing.T) {
	// A processing side that falls behind (a slow hook) with a small queue: capture does not
	// wait; the lost blocks are counted and the seconds flagged.
	src := &fakeSource{fs: 48000, signal: testSignal, total: 6 * 48000, t0: t0}
	r := newRig(t, src, func(o *Options) {
		o.Lossless = false
		o.QueueBlocks = 2
		o.OnSecond = func(*record.Second) { time.Sleep(50 * time.Millisecond) }
	})
	r.run(t)
	if r.node.Counters.QueueOverflows.Load() == 0 {
		t.Fatal("no queue overflow counted")
	}
	flagged := 0
	var dropped uint64
	for _, s := range records[*record.Second](t, r.store, record.KindSecond) {
		if s.Flags.Has(record.Dropped) {
			flagged++
			dropped += s.DroppedSamples
		}
	}
	if flagged == 0 || dropped == 0 {
		t.Errorf("overflow not flagged: %d seconds, %d samples", flagged, dropped)
	}
}

func TestNodeStartupGap(t *testing.T) {
	// A restart after the node was down leaves a gap from the last stored second to now.
	dir := t.TempDir()
	path := filepath.Join(dir, "n.db")
	for i, start := range []time.Time{t0, t0.Add(time.Hour)} {
		st, err := buffer.Open(path, &buffer.Options{NoSync: true})
		if err != nil {
			t.Fatal(err)
		}
		ck := &simClock{now: start}
		src := &fakeSource{fs: 48000, signal: testSignal, total: 3 * 48000, t0: start, clock: ck}
		n, _ := New(Options{Source: src, Store: st, SensitivityDBFS: -26, Lossless: true, Now: ck.Now, ClockSynced: func() bool { return false }})
		if err := n.Run(context.Background()); err != nil {
			t.Fatal(err)
		}
		gaps := records[*record.Gap](t, st, record.KindGap)
		if want := i; len(gaps) != want {
			t.Errorf("run %d: %d gaps, want %d", i, len(gaps), want)
		}
		if i == 1 && (len(gaps) != 1 || gaps[0].To.Sub(gaps[0].From) < 59*time.Minute) {
			t.Errorf("restart gap: %+v", gaps)
		}
		secs := records[*record.Second](t, st, record.KindSecond)
		if !secs[0].Flags.Has(record.ClockUnsynced) {
			t.Error("clock not synchronised: seconds should carry the flag")
		}
		st.Close()
	}
}

var _ = errors.New

func TestNodeEvents(t *testing.T) {
	// A 3 s pass at 80 dB over a 50 dB background, starting 4 s into the stream: one event
	// record, at the right wall time, with LAFmax 80 dB and SEL = LAeq,T + 10 lg(T / 1 s)
	// (ISO 1996-1:2016 3.1.8).
	sig := func(i int64) float32 {
		t := float64(i) / 48000
		l := 50.0
		if t >= 4 && t < 7 {
			l = 80
		}
		return float32(ampFor(l) * math.Sin(2*math.Pi*1000*t))
	}
	src := &fakeSource{fs: 48000, signal: sig, total: 12 * 48000, t0: t0}
	cfg := dsp.DefaultEventConfig(-26)
	r := newRig(t, src, func(o *Options) { o.Events = &cfg })
	r.run(t)
	evs := records[*record.Event](t, r.store, record.KindEvent)
	if len(evs) != 1 {
		t.Fatalf("%d events, want 1: %+v", len(evs), evs)
	}
	e := evs[0]
	if d := e.Start.Sub(t0.Add(4 * time.Second)); d < 0 || d > 300*time.Millisecond {
		t.Errorf("event starts %v after the pass began", d)
	}
	if math.Abs(e.LAFmax-80) > 0.1 {
		t.Errorf("LAFmax %.2f, want 80", e.LAFmax)
	}
	T := e.End.Sub(e.Start).Seconds()
	if math.Abs(e.LAE-(e.LAeq+10*math.Log10(T))) > 0.02 {
		t.Errorf("LAE %.2f, LAeq %.2f over %.2f s", e.LAE, e.LAeq, T)
	}
	if len(e.Spectrum) == 0 {
		t.Error("event without a spectrum")
	}
}

func TestNodeCalibration(t *testing.T) {
	// A 94 dB calibrator on a microphone 1 dB less sensitive than its data sheet says (-27
	// dBFS instead of -26): the node, asked to calibrate, takes the tone, stores the check and
	// a calibrating annotation, applies -27 dBFS (within the ±3 dB range), keeps it in the state
	// directory and writes a new session record. No event is raised for the tone.
	const actual = -27.0
	tone := func(i int64) float32 {
		t := float64(i) / 48000
		noise := float32(1e-4 * math.Sin(2*math.Pi*137*t))
		if t >= 3 && t < 13 {
			// 94 dB SPL at the true sensitivity: peak 10^(actual/20) (AES17).
			return float32(math.Pow(10, actual/20)*math.Sin(2*math.Pi*1000*t)) + noise
		}
		return noise
	}
	state := t.TempDir()
	src := &fakeSource{fs: 48000, signal: tone, total: 20 * 48000, t0: t0}
	ev := dsp.DefaultEventConfig(-26)
	r := newRig(t, src, func(o *Options) {
		o.Calibration = &CalibrationOptions{NominalDBFS: -26, StateDir: state}
		o.Events = &ev
	})
	done := make(chan *CalibrationResult, 1)
	go func() {
		res, err := r.node.RequestCalibration(context.Background(), 94, true)
		if err != nil {
			t.Error(err)
		}
		done <- res
	}()
	time.Sleep(50 * time.Millisecond)
	r.run(t)
	res := <-done
	if res == nil || !res.Applied {
		t.Fatalf("calibration not applied: %+v", res)
	}
	if math.Abs(res.Check.SensitivityAfter-actual) > 0.1 {
		t.Errorf("applied sensitivity %.3f dBFS, want %.1f within 0.1 dB", res.Check.SensitivityAfter, actual)
	}
	if math.Abs(res.Check.Deviation-(-1)) > 0.1 {
		t.Errorf("deviation %.3f dB, want -1 (the microphone reads 1 dB low)", res.Check.Deviation)
	}
	checks := records[*record.Calibration](t, r.store, record.KindCalibration)
	anns := records[*record.Annotation](t, r.store, record.KindAnnotation)
	sess := records[*record.Session](t, r.store, record.KindSession)
	if len(checks) != 1 || len(sess) != 2 || math.Abs(sess[1].SensitivityDBFS-actual) > 0.1 {
		t.Errorf("checks %d, sessions %+v", len(checks), sess)
	}
	// The annotations (one when the tone was recognised, for the seconds already stored; one
	// with the check) mark calibrating at least the tone and 2 s before it.
	from, to := t0.Add(20*time.Second), t0
	for _, a := range anns {
		if !a.Flags.Has(record.Calibrating) {
			t.Errorf("annotation %+v does not mark calibrating", a)
		}
		from, to = when.Earlier(from, a.From), when.Later(to, a.To)
	}
	if len(anns) == 0 || from.After(t0.Add(time.Second)) || to.Before(t0.Add(13*time.Second)) {
		t.Errorf("annotations %+v do not cover the tone with its margins", anns)
	}
	if evs := records[*record.Event](t, r.store, record.KindEvent); len(evs) != 0 {
		t.Errorf("events during the calibrator tone: %+v", evs)
	}
	if _, err := os.Stat(filepath.Join(state, "sensitivity.json")); err != nil {
		t.Errorf("no sensitivity kept in the state directory: %v", err)
	}
}
