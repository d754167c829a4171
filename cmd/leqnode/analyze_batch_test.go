package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// TestAnalyzeBatch: several files and a directory at once, on two workers, give each recording
// exactly the lines that analysing it alone gives (plus its path), in the order of the inputs;
// a bad recording gets its one-line error and the others are still measured.
func TestAnalyzeBatch(t *testing.T) {
	dir := t.TempDir()
	sub := filepath.Join(dir, "station")
	if err := os.MkdirAll(sub, 0o755); err != nil {
		t.Fatal(err)
	}
	f48 := wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.PCM16}
	f16 := wav.Format{SampleRate: 16000, Channels: 1, Encoding: wav.PCM16}
	files := []string{
		writeWAV(t, dir, "first.wav", f48, sineSamples(48000*3/2, 500, 0.05, 48000)),
		writeWAV(t, sub, "b.wav", f16, sineSamples(16000*2, 2000, 0.2, 16000)),
		writeWAV(t, sub, "a.wav", f48, sineSamples(48000, 100, 0.3, 48000)),
		writeWAV(t, dir, "last.wav", f48, sineSamples(48000/2, 8000, 0.1, 48000)),
	}
	order := []string{files[0], files[2], files[1], files[3]} // the directory in lexical order
	code, out, errs := runCmd(t, nil, "analyze", "-j", "2", "--format", "jsonl", files[0], sub, files[3])
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := jsonLines(t, out)
	k := 0
	for _, f := range order {
		_, alone, _ := runCmd(t, nil, "analyze", "-j", "1", "--format", "jsonl", f)
		for _, want := range jsonLines(t, alone) {
			if k >= len(lines) {
				t.Fatalf("batch output ends early, at %s", f)
			}
			got := lines[k]
			k++
			if got["file"] != f {
				t.Fatalf("line %d is of %v, want %s", k, got["file"], f)
			}
			delete(got, "file")
			if g, w := fmt.Sprint(got), fmt.Sprint(want); g != w {
				t.Errorf("%s: batch line\n%s\nwant (alone)\n%s", f, g, w)
			}
		}
	}
	if k != len(lines) {
		t.Errorf("%d lines, want %d", len(lines), k)
	}

	// --summary: one line per recording; csv: a new header only where the columns change.
	_, out, _ = runCmd(t, nil, "analyze", "--summary", "--format", "jsonl", dir)
	if n := len(jsonLines(t, out)); n != 4 {
		t.Errorf("--summary gave %d lines, want 4", n)
	}
	_, out, _ = runCmd(t, nil, "analyze", "--summary", "--format", "csv", files[0], files[2], files[1], files[3])
	rows := strings.Split(strings.TrimSpace(out), "\n")
	if len(rows) != 4+3 || !strings.HasPrefix(rows[0], "file,kind,") || !strings.HasPrefix(rows[3], "file,kind,") || !strings.HasPrefix(rows[5], "file,kind,") {
		t.Errorf("csv summaries: want a header, two 48 kHz rows, a header, the 16 kHz row, a header, a 48 kHz row:\n%s", out)
	}

	// A bad recording in the middle: its error on one line, the others measured, exit 2.
	bad := sharedTestdata("wav", "not-a-wav.wav")
	code, out, errs = runCmd(t, nil, "analyze", "--summary", "-j", "2", "--format", "jsonl", files[0], bad, files[3])
	if code != 2 || len(jsonLines(t, out)) != 2 || !strings.Contains(errs, "not-a-wav.wav") || !strings.Contains(errs, "1 of 3 recordings") {
		t.Errorf("with a bad recording: exit %d, %d lines, stderr %q", code, len(jsonLines(t, out)), errs)
	}
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"-", files[0]}, "standard input"},
		{[]string{"--start", "2026-05-04T07:00:00Z", files[0], files[3]}, "--start"},
		{[]string{"-j", "0", files[0]}, "-j 0"},
		{[]string{filepath.Join(dir, "nope"), files[0]}, "nope: cannot open"},
	} {
		code, out, errs := runCmd(t, nil, append([]string{"analyze"}, tc.args...)...)
		if code != 2 || out != "" || !strings.Contains(errs, tc.want) {
			t.Errorf("%v: exit %d, stdout %q, stderr %q, want exit 2 naming %q", tc.args, code, out, errs, tc.want)
		}
	}
}

// TestTruncatedRecording: a WAV file whose data chunk ends before the size its header declares
// (a copy cut short at a whole frame: a 10 s header with 5.67 s of data) is refused with exit 2
// and one line naming the file and the fix, by analyze and by calibrate. The RIFF specification
// (Multimedia Programming Interface and Data Specifications 1.0) makes the chunk size the size
// of its data, so the rest of the recording is missing.
func TestTruncatedRecording(t *testing.T) {
	dir := t.TempDir()
	const fs = 16000
	full := writeWAV(t, dir, "full.wav", wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.PCM16}, sineSamples(10*fs, 1000, 0.1, fs))
	data, err := os.ReadFile(full)
	if err != nil {
		t.Fatal(err)
	}
	start := bytes.Index(data, []byte("data")) + 8 // the first sample byte
	cut := filepath.Join(dir, "cut.wav")
	if err := os.WriteFile(cut, data[:start+2*int(5.67*fs)], 0o644); err != nil {
		t.Fatal(err)
	}
	for _, args := range [][]string{{"analyze", "--format", "jsonl", cut}, {"calibrate", "--format", "json", "--sensitivity", "-26", cut}} {
		code, out, errs := runCmd(t, nil, args...)
		if code != 2 {
			t.Errorf("%s: exit %d, want 2 (stderr %q)", args[0], code, errs)
		}
		if args[0] == "analyze" && out != "" {
			t.Errorf("%s: stdout not empty: %q", args[0], out)
		}
		if strings.Count(strings.TrimSpace(errs), "\n") != 0 || !strings.Contains(errs, "cut.wav") ||
			!strings.Contains(errs, "5.67 s of 10.00 s") || !strings.Contains(errs, "sox --ignore-length") {
			t.Errorf("%s: stderr %q, want one line naming cut.wav, 5.67 s of 10.00 s and the fix", args[0], errs)
		}
	}
}
