package export_test

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/export"
)

var t0 = time.Date(2031, 5, 4, 7, 0, 0, 0, time.UTC)

// store holds three seconds of the invented node "wendle-cross-05": bands 12.5-20 Hz (x = -19
// to -17), then 16-25 Hz (x = -18 to -16), then digital silence without a spectrum; and an
// annotation whose reason needs CSV quoting.
func store(t *testing.T) *buffer.Store {
	t.Helper()
	st, err := buffer.Open(filepath.Join(t.TempDir(), "wendle-cross-05.db"), &buffer.Options{NoSync: true, Now: func() time.Time { return t0.Add(time.Hour) }})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := st.Close(); err != nil {
			t.Error(err)
		}
	})
	nan := math.NaN()
	for _, r := range []record.Record{
		&record.Second{Start: t0, Duration: time.Second, LAeq: 52.41, FirstBand: -19, Spectrum: []float64{30, 31, 32}},
		&record.Second{Start: t0.Add(time.Second), Duration: time.Second, LAeq: 53, FirstBand: -18, Spectrum: []float64{41, 42, nan}},
		&record.Second{Start: t0.Add(2 * time.Second), Duration: time.Second, LAeq: nan},
		&record.Annotation{From: t0, To: t0.Add(time.Minute), Flags: record.Excluded, Reason: `market day, "stalls" by the mast`},
	} {
		if _, err := st.Append(r); err != nil {
			t.Fatal(err)
		}
	}
	return st
}

func TestCSVColumns(t *testing.T) {
	st := store(t)
	var out bytes.Buffer
	if err := export.Write(context.Background(), &out, st, record.KindSecond, t0, t0.Add(time.Hour), export.CSV); err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(&out).ReadAll() // RFC 4180: every row has the header's fields
	if err != nil {
		t.Fatal(err)
	}
	h := rows[0]
	col := map[string]int{}
	for i, c := range h {
		col[c] = i
	}
	// The header spans every band any record holds: 12.5 Hz to 25 Hz (IEC 61260-1 Annex E names).
	if got := strings.Join(h[len(h)-4:], ","); got != "third_octave_LZeq_12.5,third_octave_LZeq_16,third_octave_LZeq_20,third_octave_LZeq_25" {
		t.Errorf("band columns %s", got)
	}
	for _, tc := range []struct {
		row       int
		key, want string
	}{
		{1, "store", st.ID()}, {1, "start", "2031-05-04T07:00:00Z"}, {1, "LAeq", "52.41"},
		{1, "third_octave_LZeq_12.5", "30.00"}, {1, "third_octave_LZeq_25", ""},
		{2, "third_octave_LZeq_12.5", ""}, {2, "third_octave_LZeq_20", "42.00"}, {2, "third_octave_LZeq_25", ""},
		{3, "LAeq", ""}, {3, "third_octave_LZeq_16", ""},
	} {
		if got := rows[tc.row][col[tc.key]]; got != tc.want {
			t.Errorf("row %d %s = %q, want %q", tc.row, tc.key, got, tc.want)
		}
	}
}

func TestJSONLines(t *testing.T) {
	st := store(t)
	for _, tc := range []struct {
		kind     record.Kind
		from, to time.Time
		lines    int
		check    func(m map[string]any) bool
	}{
		// The range is half-open: the record at `to` is left out.
		{record.KindSecond, t0, t0.Add(2 * time.Second), 2, func(m map[string]any) bool { return m["third_octave_LZeq"] != nil }},
		{record.KindSecond, t0.Add(2 * time.Second), t0.Add(time.Hour), 1, func(m map[string]any) bool { return m["LAeq"] == nil && m["third_octave_LZeq"] == nil }},
		{record.KindAnnotation, t0, t0.Add(time.Hour), 1, func(m map[string]any) bool {
			return m["reason"] == `market day, "stalls" by the mast` && fmt.Sprint(m["flags"]) == "[excluded]"
		}},
	} {
		var out bytes.Buffer
		if err := export.Write(context.Background(), &out, st, tc.kind, tc.from, tc.to, export.JSONL); err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSuffix(out.String(), "\n"), "\n")
		if len(lines) != tc.lines {
			t.Errorf("%s [%s, %s): %d lines, want %d:\n%s", tc.kind, tc.from, tc.to, len(lines), tc.lines, out.String())
			continue
		}
		var m map[string]any
		if err := json.Unmarshal([]byte(lines[len(lines)-1]), &m); err != nil || !tc.check(m) {
			t.Errorf("%s: %v %s", tc.kind, err, lines[len(lines)-1])
		}
	}
}

func TestWriteErrors(t *testing.T) {
	st := store(t)
	if err := export.Write(context.Background(), new(bytes.Buffer), st, record.KindSecond, t0, t0.Add(time.Hour), "xml"); err == nil || !strings.Contains(err.Error(), "csv or jsonl") {
		t.Errorf("format xml: %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := export.Write(ctx, new(bytes.Buffer), st, record.KindSecond, t0, t0.Add(time.Hour), export.JSONL); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
	if err := export.Write(context.Background(), failingWriter{}, st, record.KindSecond, t0, t0.Add(time.Hour), export.JSONL); err == nil {
		t.Error("a writer that fails: no error")
	}
}

type failingWriter struct{}

func (failingWriter) Write([]byte) (int, error) { return 0, errors.New("disk full") }

func ExampleWrite() {
	dir, err := os.MkdirTemp("", "leqnode-export")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)
	st, err := buffer.Open(filepath.Join(dir, "node.db"), &buffer.Options{NoSync: true})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer st.Close()
	start := time.Now().UTC().Truncate(time.Second)
	if _, err := st.Append(&record.Gap{From: start, To: start.Add(3 * time.Second), Reason: "source reopened"}); err != nil {
		fmt.Println(err)
		return
	}
	var out strings.Builder
	if err := export.Write(context.Background(), &out, st, record.KindGap, start.Add(-time.Minute), start.Add(time.Minute), export.CSV); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(strings.SplitN(out.String(), "\n", 2)[0])
	// Output: store,seq,start,end,duration_s,reason
}
