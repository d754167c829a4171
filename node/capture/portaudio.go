//go:build cgo && !noportaudio

package capture

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/gordonklaus/portaudio"
)

// havePortAudio reports whether this build has the portaudio source.
const havePortAudio = true

// paMu serialises the calls that touch PortAudio's process-global state (Initialize,
// Terminate, the device list, opening streams) and the swap of file descriptor 2 around them.
// PortAudio is one library per process, so this lock is per process too: it is the one piece
// of package-level state, and it guards state that is not ours.
var paMu sync.Mutex

// paInit initialises PortAudio with its (and JACK's and ALSA's) start-up chatter on standard
// error silenced. Every successful call must be matched by paTerminate.
func paInit() error {
	var err error
	quietStderr(func() { err = portaudio.Initialize() })
	if err != nil {
		return fmt.Errorf("portaudio: initialising the library: %w", err)
	}
	return nil
}

func paTerminate() error { return portaudio.Terminate() }

// paSource captures from a sound card through PortAudio's blocking read interface.
type paSource struct {
	cfg    Config
	logger *slog.Logger

	closed    atomic.Bool
	closeWait time.Duration // how long Close waits for a Read in progress
	dropped   atomic.Int64
	events    atomic.Int64 // overflow reports

	mu       sync.Mutex // held across a device read; Close takes it
	inited   bool       // PortAudio initialised by this source
	stream   *portaudio.Stream
	read     func() error // stream.Read; tests inject faults here
	ctx      context.Context
	format   Format
	devName  string
	buf16    []int16
	buf32    []int32
	bufF     []float32
	frames   int // frames held in the buffer from the last device read
	next     int // next frame of the buffer to deliver
	lostErr  error
	channels int
}

func newPortAudio(c Config, logger *slog.Logger) (Source, error) {
	return &paSource{cfg: c, logger: logger, closeWait: 3 * time.Second}, nil
}

// findDevice returns the input device that spec selects: "" the default input device, a
// number its index, else the device whose name equals spec (ignoring case) or the one input
// device whose name contains it.
func findDevice(devs []*portaudio.DeviceInfo, spec string) (*portaudio.DeviceInfo, error) {
	var inputs []*portaudio.DeviceInfo
	for _, d := range devs {
		if d.MaxInputChannels > 0 {
			inputs = append(inputs, d)
		}
	}
	names := func(ds []*portaudio.DeviceInfo) string {
		var s []string
		for _, d := range ds {
			s = append(s, fmt.Sprintf("%d %q", d.Index, d.Name))
		}
		if len(s) == 0 {
			return "none"
		}
		return strings.Join(s, ", ")
	}
	if spec == "" {
		d, err := portaudio.DefaultInputDevice()
		if err != nil || d == nil {
			return nil, fmt.Errorf("%w: PortAudio has no default input device; set %s.device to one of: %s",
				ErrNoDevice, section, names(inputs))
		}
		return d, nil
	}
	if i, err := strconv.Atoi(spec); err == nil {
		for _, d := range inputs {
			if d.Index == i {
				return d, nil
			}
		}
		return nil, fmt.Errorf("%w: %s.device = %q: no input device with index %d; input devices: %s",
			ErrNoDevice, section, spec, i, names(inputs))
	}
	var match []*portaudio.DeviceInfo
	for _, d := range inputs {
		if strings.EqualFold(d.Name, spec) {
			return d, nil
		}
		if strings.Contains(strings.ToLower(d.Name), strings.ToLower(spec)) {
			match = append(match, d)
		}
	}
	switch len(match) {
	case 0:
		return nil, fmt.Errorf("%w: %s.device = %q matches no input device; input devices: %s",
			ErrNoDevice, section, spec, names(inputs))
	case 1:
		return match[0], nil
	}
	return nil, fmt.Errorf("%s.device = %q matches %d input devices (%s); give more of the name or an index",
		section, spec, len(match), names(match))
}

// converts reports whether an ALSA device is a conversion layer rather than hardware.
func converts(d *portaudio.DeviceInfo) bool {
	if d.HostApi == nil || d.HostApi.Type != portaudio.ALSA {
		return false
	}
	return !strings.Contains(d.Name, "(hw:")
}

// Open initialises PortAudio, finds the device and starts capture. It may be called again
// after Close (the node's retry after a device loss): every Open initialises PortAudio afresh.
func (s *paSource) Open(ctx context.Context) (Format, error) {
	if !s.lockWithin(s.closeWait) {
		return Format{}, fmt.Errorf("portaudio: %w: a read from %q has not returned since Close; the device seems hung",
			ErrDeviceLost, s.cfg.Device)
	}
	defer s.mu.Unlock()
	if s.stream != nil && !s.closed.Load() {
		return s.format, fmt.Errorf("portaudio: already open")
	}
	if err := s.release(); err != nil {
		// What a closed or hung stream left behind: the open below starts afresh regardless.
		s.logger.Warn("portaudio: releasing the previous stream", "err", err)
	}
	s.closed.Store(false)
	f, err := s.open(ctx)
	if err != nil {
		if rerr := s.release(); rerr != nil {
			return Format{}, errors.Join(err, rerr)
		}
		return Format{}, err
	}
	return f, nil
}

// lockWithin takes s.mu, waiting at most d for a Read in progress. It reports whether it did.
func (s *paSource) lockWithin(d time.Duration) bool {
	deadline := time.Now().Add(d)
	for !s.mu.TryLock() {
		if time.Now().After(deadline) {
			return false
		}
		time.Sleep(5 * time.Millisecond)
	}
	return true
}

// open does the work of Open with s.mu held; on error the caller releases what was taken.
func (s *paSource) open(ctx context.Context) (Format, error) {
	paMu.Lock()
	defer paMu.Unlock()
	// A fresh Initialize every time: PortAudio's device list is fixed at initialisation, and a
	// re-plugged USB microphone only shows up in a new one.
	if err := paInit(); err != nil {
		return Format{}, fmt.Errorf("%w: %w", ErrDeviceLost, err)
	}
	s.inited = true
	devs, err := portaudio.Devices()
	if err != nil {
		return Format{}, fmt.Errorf("portaudio: listing devices: %w: %w", ErrDeviceLost, err)
	}
	dev, err := findDevice(devs, s.cfg.Device)
	if err != nil {
		return Format{}, fmt.Errorf("portaudio: %w", err)
	}
	s.devName = dev.Name
	c := s.cfg
	if c.Channels > dev.MaxInputChannels {
		return Format{}, fmt.Errorf("portaudio: %w: %s.channels = %d but device %q captures at most %d; lower channels (and channel)",
			ErrUnsupported, section, c.Channels, dev.Name, dev.MaxInputChannels)
	}
	native := int(math.Round(dev.DefaultSampleRate))
	rate := c.SampleRate
	if rate == 0 {
		rate = native
	}
	if converts(dev) {
		if rate != native {
			s.logger.Warn("the chosen device is an ALSA conversion layer that will resample: its default rate differs from the rate asked; measure through a hardware device (hw:...) at its native rate, or set sample_rate = 0",
				"device", dev.Name, "rate", rate, "device_default_rate", native)
		} else {
			s.logger.Info("the chosen device is an ALSA conversion layer, not hardware: it may resample or mix; prefer a hardware device (hw:...) for measuring",
				"device", dev.Name, "rate", rate)
		}
	}
	if rate < minRate || rate > maxRate {
		return Format{}, fmt.Errorf("portaudio: device %q runs at %d Hz, outside %d to %d Hz; set %s.sample_rate",
			dev.Name, rate, minRate, maxRate, section)
	}
	p := portaudio.StreamParameters{
		Input:           portaudio.StreamDeviceParameters{Device: dev, Channels: c.Channels, Latency: dev.DefaultHighInputLatency},
		SampleRate:      float64(rate),
		FramesPerBuffer: c.FramesPerBuffer,
	}
	n := c.FramesPerBuffer * c.Channels
	var buf any
	switch c.Sample {
	case Int16:
		s.buf16 = make([]int16, n)
		buf = &s.buf16
	case Int32, Int24in32:
		s.buf32 = make([]int32, n)
		buf = &s.buf32
	case Float32:
		s.bufF = make([]float32, n)
		buf = &s.bufF
	default:
		return Format{}, fmt.Errorf("portaudio: %s.sample_format = %q: choose int16, int32, int24in32 or float32", section, c.Sample)
	}
	stream, err := portaudio.OpenStream(p, buf)
	if err != nil {
		return Format{}, s.openError(dev, rate, err)
	}
	s.stream, s.read = stream, stream.Read
	if err := stream.Start(); err != nil {
		return Format{}, fmt.Errorf("portaudio: starting capture on %q: %w: %w", dev.Name, ErrDeviceLost, err)
	}
	if info := stream.Info(); info != nil && math.Abs(info.SampleRate-float64(rate)) > 0.5 {
		s.logger.Warn("the device runs at another rate than the one asked", "device", dev.Name,
			"asked", rate, "actual", info.SampleRate)
	}
	s.ctx = ctx
	s.channels = c.Channels
	s.frames, s.next = 0, 0
	s.lostErr = nil
	s.format = Format{SampleRate: rate, Channels: c.Channels, Channel: c.Channel, Sample: c.Sample}
	s.logger.Info("capturing", "device", dev.Name, "index", dev.Index, "format", s.format.String(),
		"frames_per_buffer", c.FramesPerBuffer)
	return s.format, nil
}

// openError explains why a stream did not open. Parameters the device refuses are
// configuration errors; anything else (busy, vanished, a host error) wraps ErrDeviceLost.
func (s *paSource) openError(dev *portaudio.DeviceInfo, rate int, err error) error {
	var pe portaudio.Error
	if errors.As(err, &pe) {
		switch pe {
		case portaudio.InvalidSampleRate:
			return fmt.Errorf("portaudio: %w: device %q refuses %d Hz (%w); set %s.sample_rate = 0 for its default rate (%d Hz) or see leqnode devices",
				ErrUnsupported, dev.Name, rate, err, section, int(math.Round(dev.DefaultSampleRate)))
		case portaudio.SampleFormatNotSupported:
			return fmt.Errorf("portaudio: %w: device %q refuses %s samples (%w); try %s.sample_format = \"float32\"",
				ErrUnsupported, dev.Name, s.cfg.Sample, err, section)
		case portaudio.InvalidChannelCount:
			return fmt.Errorf("portaudio: %w: device %q refuses %d channels (%w); it captures at most %d",
				ErrUnsupported, dev.Name, s.cfg.Channels, err, dev.MaxInputChannels)
		}
	}
	return fmt.Errorf("portaudio: opening %q: %w: %w", dev.Name, ErrDeviceLost, err)
}

func (s *paSource) Read(dst []float32) (int, error) {
	if s.closed.Load() {
		return 0, fmt.Errorf("portaudio: %w", ErrClosed)
	}
	if len(dst) == 0 {
		return 0, io.ErrShortBuffer
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed.Load() {
		return 0, fmt.Errorf("portaudio: %w", ErrClosed)
	}
	if s.stream == nil {
		return 0, fmt.Errorf("portaudio: read before Open")
	}
	if s.lostErr != nil {
		return 0, s.lostErr
	}
	if s.next >= s.frames {
		if err := s.ctx.Err(); err != nil {
			return 0, err
		}
		err := s.read()
		if s.closed.Load() {
			// Close gave up waiting for this read (a hung device): release what it left.
			if rerr := s.release(); rerr != nil {
				return 0, fmt.Errorf("portaudio: %w: %w", ErrClosed, rerr)
			}
			return 0, fmt.Errorf("portaudio: %w", ErrClosed)
		}
		if errors.Is(err, portaudio.InputOverflowed) {
			// Samples were discarded before this buffer; the buffer itself is good. PortAudio
			// does not say how many: count one buffer, a lower bound.
			s.dropped.Add(int64(s.cfg.FramesPerBuffer))
			if k := s.events.Add(1); k&(k-1) == 0 { // log the 1st, 2nd, 4th, 8th ... report
				s.logger.Warn("input overflowed: samples were lost because capture fell behind",
					"device", s.devName, "reports", k, "dropped_estimate", s.dropped.Load())
			}
			err = nil
		}
		if err != nil {
			s.lostErr = fmt.Errorf("portaudio: reading %q: %w: %w", s.devName, ErrDeviceLost, err)
			return 0, s.lostErr
		}
		s.frames, s.next = s.cfg.FramesPerBuffer, 0
	}
	ch, pickCh := s.channels, s.format.Channel-1
	lo, hi := s.next*ch, s.frames*ch
	var n int
	switch s.cfg.Sample {
	case Int16:
		n = pick(dst, s.buf16[lo:hi], ch, pickCh, scale16)
	case Int32, Int24in32:
		n = pick(dst, s.buf32[lo:hi], ch, pickCh, scale32)
	default:
		n = pick(dst, s.bufF[lo:hi], ch, pickCh, 1)
	}
	s.next += n
	return n, nil
}

// Dropped returns the samples lost in input overflows, estimated as one buffer
// (FramesPerBuffer frames) per overflow PortAudio reports: a lower bound, since PortAudio does
// not say how many it discarded.
func (s *paSource) Dropped() int64 { return s.dropped.Load() }

// Close stops capture, closes the stream and terminates PortAudio. A Read in progress in
// another goroutine is waited for: at most one buffer on a working device. If a hung device
// keeps that Read from returning for three seconds, Close returns an error wrapping
// ErrDeviceLost and leaves the release to the Read, whenever it returns; PortAudio is not
// safe to close under a read in progress.
func (s *paSource) Close() error {
	if s.closed.Swap(true) {
		return nil
	}
	if !s.lockWithin(s.closeWait) {
		return fmt.Errorf("portaudio: %w: a read from %q did not return within %v; the device is released when it does",
			ErrDeviceLost, s.cfg.Device, s.closeWait)
	}
	defer s.mu.Unlock()
	return s.release()
}

// release closes the stream and terminates PortAudio if this source holds them; s.mu is held.
func (s *paSource) release() error {
	var errs []error
	if s.stream != nil {
		if err := s.stream.Abort(); err != nil && !errors.Is(err, portaudio.StreamIsStopped) {
			errs = append(errs, err)
		}
		if err := s.stream.Close(); err != nil {
			errs = append(errs, err)
		}
		s.stream = nil
	}
	if s.inited {
		paMu.Lock()
		if err := paTerminate(); err != nil {
			errs = append(errs, err)
		}
		paMu.Unlock()
		s.inited = false
	}
	if err := errors.Join(errs...); err != nil {
		return fmt.Errorf("portaudio: closing %q: %w", s.devName, err)
	}
	return nil
}

func (s *paSource) Describe() string {
	if s.format.SampleRate == 0 {
		d := s.cfg.Device
		if d == "" {
			d = "default input"
		}
		return "portaudio: " + d
	}
	return fmt.Sprintf("portaudio: %s @%d Hz, channel %d of %d, %s", s.devName, s.format.SampleRate,
		s.format.Channel, s.format.Channels, s.format.Sample)
}

// standardRates are the rates Devices tries.
var standardRates = [...]int{8000, 11025, 16000, 22050, 32000, 44100, 48000, 88200, 96000, 176400, 192000}

// Devices lists the capture devices PortAudio finds now, with the standard rates each
// accepts. It initialises and terminates PortAudio around the listing, so it sees devices
// plugged in since the last call; while a portaudio Source is open it sees that source's list.
// Probing a rate opens the device, so a device in use (by a running node, say) lists no rates.
func Devices() ([]DeviceInfo, error) {
	paMu.Lock()
	defer paMu.Unlock()
	if err := paInit(); err != nil {
		return nil, err
	}
	defer func() {
		// The list is read; a Terminate that fails leaves nothing the next Initialize minds.
		_ = paTerminate()
	}()
	devs, err := portaudio.Devices()
	if err != nil {
		return nil, fmt.Errorf("portaudio: listing devices: %w", err)
	}
	def, _ := portaudio.DefaultInputDevice()
	var out []DeviceInfo
	quietStderr(func() {
		for _, d := range devs {
			if d.MaxInputChannels <= 0 {
				continue
			}
			info := DeviceInfo{Index: d.Index, Name: d.Name, InputChannels: d.MaxInputChannels,
				DefaultRate: int(math.Round(d.DefaultSampleRate)), Default: def != nil && def.Index == d.Index,
				Converts: converts(d)}
			if d.HostApi != nil {
				info.HostAPI = d.HostApi.Name
			}
			for _, r := range standardRates {
				p := portaudio.StreamParameters{
					Input:      portaudio.StreamDeviceParameters{Device: d, Channels: 1, Latency: d.DefaultHighInputLatency},
					SampleRate: float64(r),
				}
				if portaudio.IsFormatSupported(p, make([]float32, 1)) == nil {
					info.Rates = append(info.Rates, r)
				}
			}
			out = append(out, info)
		}
	})
	slices.SortFunc(out, func(a, b DeviceInfo) int { return a.Index - b.Index })
	return out, nil
}
