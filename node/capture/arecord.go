package capture

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"os"
	"os/exec"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"
)

// arecordFormats maps sample encodings to arecord's -f names.
var arecordFormats = map[string]string{Int16: "S16_LE", Int32: "S32_LE", Int24in32: "S32_LE", Float32: "FLOAT_LE"}

// overrunLine matches arecord's report of a capture overrun, e.g.
// "overrun!!! (at least 1.234 ms long)". arecord runs with LC_ALL=C so the text is not
// translated.
var overrunLine = regexp.MustCompile(`overrun!!!(?: \(at least ([0-9.]+) ms long\))?`)

// rateLine matches arecord's warning that the device runs at another rate than the one asked
// (printed when they differ by more than 5 %): the samples would be timed wrongly.
var rateLine = regexp.MustCompile(`rate is not accurate \(requested = (\d+)Hz, got = (\d+)Hz\)`)

// arecordSource runs arecord and reads raw PCM from its standard output. Every Open starts
// a new arecord process.
type arecordSource struct {
	cfg    Config
	logger *slog.Logger
	layout pcmLayout

	dropped  atomic.Int64 // over all processes
	overruns atomic.Int64

	mu     sync.Mutex // guards closed and proc against a concurrent Close
	closed bool
	proc   *arecordProc
	ctx    context.Context
}

// arecordProc is one run of arecord.
type arecordProc struct {
	cmd     *exec.Cmd
	stdout  *os.File
	exited  chan struct{}         // closed when the process has been waited for
	waitErr error                 // the process's exit; read only after exited is closed
	errDone chan struct{}         // closed when standard error has been read to its end
	last    atomic.Value          // string: the last line on standard error that was not an overrun
	refusal atomic.Pointer[error] // the device refused the configuration (ErrUnsupported)
	dec     *rawDecoder
	err     error // sticky error of Read
}

func newArecord(c Config, logger *slog.Logger) *arecordSource {
	return &arecordSource{cfg: c, logger: logger, layout: newLayout(c.Sample, c.Channels, c.Channel)}
}

// args returns arecord's command line (without the program name).
func (s *arecordSource) args() []string {
	c := s.cfg
	a := []string{"-D", c.Device, "-f", arecordFormats[c.Sample], "-r", strconv.Itoa(c.SampleRate),
		"-c", strconv.Itoa(c.Channels), "-t", "raw"}
	if !c.AllowResample {
		a = append(a, "--disable-resample")
	}
	return a
}

// Open starts arecord. It does not wait for the device: a device arecord cannot open shows
// as ErrDeviceLost (or ErrUnsupported) from the first Read, with arecord's message.
func (s *arecordSource) Open(ctx context.Context) (Format, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.proc != nil && !s.closed {
		return Format{}, fmt.Errorf("arecord: already open")
	}
	if s.proc != nil {
		select {
		case <-s.proc.exited:
		default:
			return Format{}, fmt.Errorf("arecord: %w: the previous arecord (pid %d) has not exited yet", ErrDeviceLost, s.proc.cmd.Process.Pid)
		}
	}
	path, err := exec.LookPath(s.cfg.ArecordPath)
	if err != nil {
		return Format{}, fmt.Errorf("arecord: %q not found (%w): install Debian's alsa-utils or set %s.arecord_path",
			s.cfg.ArecordPath, err, section)
	}
	outR, outW, err := os.Pipe()
	if err != nil {
		return Format{}, fmt.Errorf("arecord: %w", err)
	}
	errR, errW, err := os.Pipe()
	if err != nil {
		closeAll(outR, outW)
		return Format{}, fmt.Errorf("arecord: %w", err)
	}
	cmd := exec.Command(path, s.args()...)
	cmd.Stdout, cmd.Stderr = outW, errW
	cmd.Env = append(os.Environ(), "LC_ALL=C")
	setProcessGroup(cmd)
	// Our own pipes rather than cmd.StdoutPipe: Wait then never closes the read ends, so the
	// samples arecord wrote before it died are all read.
	err = cmd.Start()
	closeAll(outW, errW) // the child holds its own copies of the write ends
	if err != nil {
		closeAll(outR, errR)
		return Format{}, fmt.Errorf("arecord: starting %s: %w: %w", path, ErrDeviceLost, err)
	}
	p := &arecordProc{cmd: cmd, stdout: outR, exited: make(chan struct{}), errDone: make(chan struct{})}
	p.last.Store("")
	p.dec = newRawDecoder(outR, s.layout, s.cfg.FramesPerBuffer, "arecord", s.logger)
	s.proc, s.closed, s.ctx = p, false, ctx
	go func() {
		p.waitErr = cmd.Wait()
		close(p.exited)
	}()
	go s.readStderr(p, errR)
	go func() {
		// Cancelling the context stops arecord, which ends a waiting Read.
		select {
		case <-ctx.Done():
			p.stop()
		case <-p.exited:
		}
	}()
	s.logger.Info("started arecord", "path", path, "args", strings.Join(s.args(), " "), "pid", cmd.Process.Pid)
	return Format{SampleRate: s.cfg.SampleRate, Channels: s.cfg.Channels, Channel: s.cfg.Channel, Sample: s.cfg.Sample}, nil
}

// readStderr counts overruns, notes refusals and keeps the last other message, until
// arecord's standard error closes.
func (s *arecordSource) readStderr(p *arecordProc, r *os.File) {
	defer close(p.errDone)
	defer closeAll(r)
	sc := bufio.NewScanner(r)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" {
			continue
		}
		if m := overrunLine.FindStringSubmatch(line); m != nil {
			n := overrunSamples(m[1], s.cfg.SampleRate, s.cfg.FramesPerBuffer)
			s.dropped.Add(n)
			s.overruns.Add(1)
			s.logger.Warn("arecord reported an overrun; samples were lost", "message", line, "dropped_estimate", n)
			continue
		}
		if err := s.refused(line); err != nil {
			p.refusal.CompareAndSwap(nil, &err)
			s.logger.Error("arecord: the device refuses the configuration", "message", line)
			p.stop()
			continue
		}
		if strings.HasPrefix(line, "Recording ") {
			s.logger.Debug("arecord", "message", line)
			continue
		}
		p.last.Store(line)
		s.logger.Warn("arecord", "message", line)
	}
}

// refused returns an ErrUnsupported error when line is arecord's report that the device
// refuses the encoding, the channel count or the rate asked of it, else nil.
func (s *arecordSource) refused(line string) error {
	c := s.cfg
	hint := fmt.Sprintf("arecord -D %s --dump-hw-params lists what it takes", c.Device)
	switch {
	case strings.Contains(line, "Sample format non available"):
		return fmt.Errorf("arecord -D %s: %w: the device refuses %s samples (%s); choose another %s.sample_format (%s)",
			c.Device, ErrUnsupported, c.Sample, arecordFormats[c.Sample], section, hint)
	case strings.Contains(line, "Channels count non available"):
		return fmt.Errorf("arecord -D %s: %w: the device refuses %d channel(s); change %s.channels (%s)",
			c.Device, ErrUnsupported, c.Channels, section, hint)
	}
	if m := rateLine.FindStringSubmatch(line); m != nil {
		return fmt.Errorf("arecord -D %s: %w: the device runs at %s Hz, not the %s Hz asked; set %s.sample_rate = %s",
			c.Device, ErrUnsupported, m[2], m[1], section, m[2])
	}
	return nil
}

// overrunSamples estimates the samples lost in one overrun that arecord reported as lasting at
// least ms milliseconds: ceil(ms · rate / 1000). arecord measures the time from the overrun to
// its noticing it, and the restart of the stream loses a little more, so this is a lower bound.
// A report without a duration counts one block of frames, also a lower bound (common practice:
// ALSA stops a capture stream when its buffer is full, so at least the next period is lost).
func overrunSamples(ms string, rate, block int) int64 {
	v, err := strconv.ParseFloat(ms, 64)
	if err != nil || !(v > 0) || v > 1e7 {
		return int64(block)
	}
	return int64(math.Ceil(v * float64(rate) / 1000))
}

func (s *arecordSource) Read(dst []float32) (int, error) {
	s.mu.Lock()
	closed, p := s.closed, s.proc
	s.mu.Unlock()
	switch {
	case closed:
		return 0, fmt.Errorf("arecord: %w", ErrClosed)
	case p == nil:
		return 0, fmt.Errorf("arecord: read before Open")
	case len(dst) == 0:
		return 0, io.ErrShortBuffer
	case p.err != nil:
		return 0, p.err
	}
	if r := p.refusal.Load(); r != nil {
		p.err = *r
		return 0, p.err
	}
	n, err := p.dec.read(dst)
	if err == nil {
		return n, nil
	}
	switch {
	case s.isClosed():
		return 0, fmt.Errorf("arecord: %w", ErrClosed)
	case s.ctx.Err() != nil:
		p.err = s.ctx.Err()
	case errors.Is(err, ErrBadInput):
		p.err = fmt.Errorf("arecord: %w", err)
	default:
		p.err = s.lost(p)
	}
	return 0, p.err
}

// lost waits (briefly) for arecord to end and returns the error that says why it ended:
// ErrUnsupported when it refused the configuration, else ErrDeviceLost.
func (s *arecordSource) lost(p *arecordProc) error {
	p.stop() // in case only its standard output closed
	timeout := time.NewTimer(3 * time.Second)
	defer timeout.Stop()
	select {
	case <-p.exited:
	case <-timeout.C:
		return fmt.Errorf("arecord -D %s: %w: its output ended but the process did not exit", s.cfg.Device, ErrDeviceLost)
	}
	select {
	case <-p.errDone:
	case <-timeout.C:
	}
	if r := p.refusal.Load(); r != nil {
		return *r
	}
	status := "exited"
	if p.waitErr != nil {
		status = p.waitErr.Error()
	}
	if msg, _ := p.last.Load().(string); msg != "" {
		return fmt.Errorf("arecord -D %s: %w: %s: %s", s.cfg.Device, ErrDeviceLost, status, msg)
	}
	return fmt.Errorf("arecord -D %s: %w: %s", s.cfg.Device, ErrDeviceLost, status)
}

// stop asks arecord to end (SIGTERM to its process group) and kills it if it has not after a
// second. It does not wait.
func (p *arecordProc) stop() {
	select {
	case <-p.exited:
		return
	default:
	}
	terminate(p.cmd)
	go func() {
		t := time.NewTimer(time.Second)
		defer t.Stop()
		select {
		case <-p.exited:
		case <-t.C:
			kill(p.cmd)
		}
	}()
}

func (s *arecordSource) isClosed() bool {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.closed
}

// Dropped returns the estimated number of samples lost in overruns (see overrunSamples),
// over every arecord process this source started.
func (s *arecordSource) Dropped() int64 { return s.dropped.Load() }

// Close stops arecord and waits up to two seconds for it to exit.
func (s *arecordSource) Close() error {
	s.mu.Lock()
	if s.closed || s.proc == nil {
		s.closed = true
		s.mu.Unlock()
		return nil
	}
	s.closed = true
	p := s.proc
	s.mu.Unlock()
	p.stop()
	closeAll(p.stdout) // ends a Read blocked on the pipe
	t := time.NewTimer(2 * time.Second)
	defer t.Stop()
	select {
	case <-p.exited:
		return nil
	case <-t.C:
		return fmt.Errorf("arecord: process %d did not exit after SIGTERM and SIGKILL", p.cmd.Process.Pid)
	}
}

func (s *arecordSource) Describe() string {
	return fmt.Sprintf("arecord: %s @%d Hz, channel %d of %d, %s", s.cfg.Device, s.cfg.SampleRate,
		s.cfg.Channel, s.cfg.Channels, s.cfg.Sample)
}

// closeAll closes pipe ends whose data is read or no longer wanted. Closing a pipe end loses
// nothing (only a second Close fails, with os.ErrClosed, and the callers close each end once),
// so the errors are dropped here, in one place.
func closeAll(fs ...*os.File) {
	for _, f := range fs {
		_ = f.Close()
	}
}
