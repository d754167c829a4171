package capture

import (
	"context"
	"errors"
	"strings"
	"testing"
)

func TestValidate(t *testing.T) {
	tests := []struct {
		name string
		cfg  Config
		want []string // substrings of the errors, one per problem, in order
	}{
		{"synthetic defaults", Config{Kind: KindSynthetic}, nil},
		{"file", Config{Kind: KindFile, File: "x.wav", Realtime: true}, nil},
		{"raw stdin complete", Config{Kind: KindStdin, StdinFormat: StdinRaw, SampleRate: 48000, Sample: Int24, Channels: 2, Channel: 2}, nil},
		{"arecord", Config{Kind: KindArecord, Device: "hw:CARD=Mic,DEV=0", Sample: Int24in32, Channels: 2, Channel: 1}, nil},
		{"missing kind", Config{}, []string{`kind = "": missing`}},
		{"unknown kind", Config{Kind: "microphone"}, []string{`kind = "microphone": unknown kind`}},
		{"file without path", Config{Kind: KindFile}, []string{`file = "": kind file needs`}},
		{"rate", Config{Kind: KindArecord, SampleRate: 1000}, []string{"sample_rate = 1000: out of range; use 0 (the default) or 8000 to 192000 Hz"}},
		{"raw stdin incomplete", Config{Kind: KindStdin, StdinFormat: StdinRaw}, []string{"sample_format", "sample_rate = 0: raw PCM"}},
		{"format", Config{Kind: KindArecord, Sample: "s24le"}, []string{`sample_format = "s24le": unknown`}},
		{"packed 24 on a device", Config{Kind: KindArecord, Sample: Int24}, []string{"raw stdin only"}},
		{"channel beyond", Config{Kind: KindArecord, Channels: 2, Channel: 3}, []string{"channel = 3: beyond the 2 channel(s)"}},
		{"negative channels", Config{Kind: KindArecord, Channels: -1, Channel: -2}, []string{"channels = -1", "channel = -2"}},
		{"block", Config{Kind: KindSynthetic, FramesPerBuffer: 8}, []string{"frames_per_buffer = 8"}},
		{"stdin format", Config{Kind: KindStdin, StdinFormat: "flac"}, []string{`stdin_format = "flac"`}},
		{"calibrator", Config{Kind: KindSynthetic, CalibratorSeconds: -1}, []string{"calibrator_s = -1"}},
		{"start", Config{Kind: KindSynthetic, Start: "tomorrow"}, []string{`start = "tomorrow": not an RFC 3339 time`}},
		// RFC 3339 section 5.6: time-hour is 2DIGIT (time.Parse takes one digit).
		{"start one-digit hour", Config{Kind: KindSynthetic, Start: "2026-06-01T7:00:00Z"}, []string{`start = "2026-06-01T7:00:00Z": not an RFC 3339 time`}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			errs := tc.cfg.Validate()
			if len(errs) != len(tc.want) {
				t.Fatalf("Validate = %v, want %d errors", errs, len(tc.want))
			}
			for i, err := range errs {
				if !strings.Contains(err.Error(), tc.want[i]) {
					t.Errorf("error %d = %q, want it to contain %q", i, err, tc.want[i])
				}
				if strings.Contains(err.Error(), "\n") {
					t.Errorf("error %d is not one line: %q", i, err)
				}
			}
		})
	}
}

func TestNewRejectsInvalidConfig(t *testing.T) {
	_, err := New(Config{Kind: KindArecord, SampleRate: 5, Channels: 100}, nil)
	if err == nil || !strings.Contains(err.Error(), "sample_rate") || !strings.Contains(err.Error(), "channels") {
		t.Fatalf("New = %v, want the problems with sample_rate and channels", err)
	}
}

func TestPortAudioKindInThisBuild(t *testing.T) {
	errs := Config{Kind: KindPortAudio}.Validate()
	if havePortAudio {
		if len(errs) != 0 {
			t.Fatalf("Validate = %v in a build with PortAudio", errs)
		}
		return
	}
	if len(errs) != 1 || !strings.Contains(errs[0].Error(), "this build has no PortAudio; use kind arecord") {
		t.Fatalf("Validate = %v, want the no-PortAudio error", errs)
	}
	if _, err := Devices(); err == nil || !strings.Contains(err.Error(), "use kind arecord") {
		t.Fatalf("Devices = %v, want the no-PortAudio error", err)
	}
	if _, err := New(Config{Kind: KindPortAudio}, nil); err == nil || !strings.Contains(err.Error(), "no PortAudio") {
		t.Fatalf("New = %v, want the no-PortAudio error", err)
	}
}

// TestSourceErrorsCarryTheirSentinel: what the node decides from a source's error (re-open,
// stop, report bad input) rests on the sentinel the error wraps; real sources wrap the one their
// documentation names.
func TestSourceErrorsCarryTheirSentinel(t *testing.T) {
	garbage, err := NewReader(Config{Kind: KindStdin, StdinFormat: "wav"}, strings.NewReader("this is not a WAV file at all"), nil)
	if err != nil {
		t.Fatal(err)
	}
	_, openErr := garbage.Open(context.Background())
	garbage.Close()
	_, closedErr := garbage.Read(make([]float32, 8))
	for _, tc := range []struct {
		what string
		err  error
		want error
	}{
		{"stdin that is not a WAV stream", openErr, ErrBadInput},
		{"a read after Close", closedErr, ErrClosed},
	} {
		if !errors.Is(tc.err, tc.want) {
			t.Errorf("%s: %v, want an error wrapping %v", tc.what, tc.err, tc.want)
		}
		for _, other := range []error{ErrDeviceLost, ErrNoDevice, ErrClosed, ErrBadInput} {
			if other != tc.want && errors.Is(tc.err, other) {
				t.Errorf("%s: %v also wraps %v", tc.what, tc.err, other)
			}
		}
	}
}
