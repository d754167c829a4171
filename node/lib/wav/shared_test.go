package wav

import (
	"bytes"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/testrig"
)

// sharedDir holds the bad recordings several packages' tests share, made by gen.sh there with
// sox (see testdata/README.md).
var sharedDir = filepath.Join("..", "..", "..", "testdata", "wav")

// sharedBad is what the reader makes of each shared bad recording: the error it wraps, a part
// of its one-line message, and the samples delivered before it (-1: the header is refused).
var sharedBad = []struct {
	file string
	want error
	text string
	good int
}{
	{"empty.wav", ErrNotWAV, "empty", -1},
	{"not-a-wav.wav", ErrNotWAV, `"hell"`, -1},
	{"truncated-header.wav", ErrTruncated, `"fmt " chunk`, -1},
	{"header-only.wav", ErrNoData, "no samples", -1},
	{"short-data.wav", ErrTruncated, "", 11500},
	{"nan-sample.wav", ErrBadSample, "NaN float sample in frame 11000 (1.375 s)", 11000},
	{"inf-sample.wav", ErrBadSample, "infinite float sample in frame 11000", 11000},
	{"eight-bit.wav", ErrUnsupported, "8-bit unsigned PCM", -1},
	{"mu-law.wav", ErrUnsupported, "mu-law", -1},
	{"a-law.wav", ErrUnsupported, "A-law", -1},
}

// TestSharedBadRecordings: each shared bad recording, written by sox (not by this package's
// writer) or cut from one, gets its one-line error, after the good samples before the fault.
func TestSharedBadRecordings(t *testing.T) {
	for _, tc := range sharedBad {
		t.Run(tc.file, func(t *testing.T) {
			f, err := os.Open(filepath.Join(sharedDir, tc.file))
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			r, err := NewReader(f)
			got := -1
			if err == nil {
				got = 0
				buf := make([]float32, 1000)
				for {
					var n int
					n, err = r.Read(buf)
					got += n
					if err != nil {
						break
					}
				}
			}
			if err == nil || errors.Is(err, io.EOF) {
				t.Fatalf("read %d samples and no error", got)
			}
			if !errors.Is(err, tc.want) || !strings.Contains(err.Error(), tc.text) || strings.Contains(err.Error(), "\n") {
				t.Errorf("error %q; want one line wrapping %q with %q", err, tc.want, tc.text)
			}
			if got != tc.good {
				t.Errorf("%d samples before the error, want %d", got, tc.good)
			}
		})
	}
}

// TestSharedRecordingsReproducible: gen.sh, run again, writes exactly the committed files,
// so testdata/README.md's account of how they were made is true.
func TestSharedRecordingsReproducible(t *testing.T) {
	testrig.Need(t, "sox", "sox")
	dir := t.TempDir()
	if out, err := exec.Command("bash", filepath.Join(sharedDir, "gen.sh"), dir).CombinedOutput(); err != nil {
		t.Fatalf("gen.sh: %v\n%s", err, out)
	}
	made, err := filepath.Glob(filepath.Join(dir, "*"))
	if err != nil {
		t.Fatal(err)
	}
	committed, err := filepath.Glob(filepath.Join(sharedDir, "*.wav"))
	if err != nil {
		t.Fatal(err)
	}
	if len(made) != len(committed) || len(made) != len(sharedBad) {
		t.Errorf("gen.sh made %d files, %d are committed, %d are tested", len(made), len(committed), len(sharedBad))
	}
	for _, m := range made {
		a, err := os.ReadFile(m)
		if err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(filepath.Join(sharedDir, filepath.Base(m)))
		if err != nil {
			t.Errorf("gen.sh made %s, which is not committed", filepath.Base(m))
			continue
		}
		if !bytes.Equal(a, b) {
			t.Errorf("%s: gen.sh makes %d bytes that differ from the committed %d: run testdata/wav/gen.sh", filepath.Base(m), len(a), len(b))
		}
	}
}
