package capture

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"testing"
)

// The node closes a source and opens it again after a failure. Streams that go on (stdin, a
// file, the synthetic scene) resume where they stopped: the samples read across the Close
// and Open equal the samples of one uninterrupted read.
func TestReopenResumes(t *testing.T) {
	x := signal(9000, 8000, 0.5)
	raw, want := encode(x, Int16, 1, 0)
	path := writeWAV(t, x, 8000)
	wantF := make([]float32, len(x))
	for i, v := range x {
		wantF[i] = float32(v)
	}
	sc, err := New(Config{Kind: KindSynthetic, SampleRate: 8000, DurationSeconds: 9000.0 / 8000}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := sc.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	wantS, _ := readAll(t, sc, 1000, 1<<20)
	if len(wantS) != 9000 {
		t.Fatalf("the synthetic scene gave %d samples, want 9000", len(wantS))
	}
	sc.Close()

	tests := []struct {
		name string
		cfg  Config
		in   []byte
		want []float32
	}{
		{"stdin", Config{Kind: KindStdin, SampleRate: 8000, Sample: Int16}, raw, want},
		{"file", Config{Kind: KindFile, File: path}, nil, wantF},
		{"file realtime", Config{Kind: KindFile, File: path, Realtime: true, FramesPerBuffer: 500}, nil, wantF},
		{"synthetic", Config{Kind: KindSynthetic, SampleRate: 8000, DurationSeconds: 9000.0 / 8000}, nil, wantS},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src, err := NewReader(tc.cfg, bytes.NewReader(tc.in), nil)
			if err != nil {
				t.Fatal(err)
			}
			var got []float32
			for k := 0; ; k++ {
				if _, err := src.Open(context.Background()); err != nil {
					t.Fatalf("open %d: %v", k, err)
				}
				if _, err := src.Open(context.Background()); err == nil {
					t.Fatal("a second Open of an open source succeeded")
				}
				part, err := readAll(t, src, 700, 2000)
				got = append(got, part...)
				if err := src.Close(); err != nil {
					t.Fatal(err)
				}
				if _, err := src.Read(make([]float32, 4)); !errors.Is(err, ErrClosed) {
					t.Fatalf("Read after Close = %v, want ErrClosed", err)
				}
				if isEOF(err) {
					break
				}
				if err != nil {
					t.Fatal(err)
				}
			}
			sameSamples(t, got, tc.want)
		})
	}
}

// arecord starts afresh on every Open: a new process, reading the device again.
func TestArecordReopen(t *testing.T) {
	dir := t.TempDir()
	raw, want := encode(signal(2000, 48000, 0.5), Int32, 1, 0)
	data := filepath.Join(dir, "d.raw")
	os.WriteFile(data, raw, 0o644)
	script := standIn(t, fmt.Sprintf("cat %q\nsleep 30\n", data))
	src, _ := New(Config{Kind: KindArecord, ArecordPath: script}, nil)
	for range 2 {
		if _, err := src.Open(context.Background()); err != nil {
			t.Fatal(err)
		}
		got, err := readAll(t, src, 512, len(want))
		if err != nil {
			t.Fatal(err)
		}
		sameSamples(t, got, want)
		if err := src.Close(); err != nil {
			t.Fatal(err)
		}
	}
}
