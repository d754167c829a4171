package query

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"sort"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

// Check verifies a store (bbolt's page check, every record decodes, the time index and the
// counters agree: buffer.Store.Check) and summarises it: one line (table) or one JSON object.
type Check struct {
	Format string `json:"format"` // table or json; empty: table
}

func doCheck(st *buffer.Store, c Check, w io.Writer) error {
	format := c.Format
	if format == "" {
		format = "table"
	}
	if format != "table" && format != "json" {
		return BadRequest("--format %q is not allowed: use one of table, json", format)
	}
	checkErr := st.Check()
	stats, err := st.Stats()
	if err != nil {
		return err
	}
	line := checkSummary(stats, checkErr)
	if format == "json" {
		if line, err = checkJSON(stats, checkErr); err != nil {
			return err
		}
	}
	if _, err := fmt.Fprintln(w, line); err != nil {
		return err
	}
	if checkErr != nil {
		n := strings.Count(checkErr.Error(), "\n") + 1
		if !errors.Is(checkErr, buffer.ErrDamaged) {
			return checkErr
		}
		return fmt.Errorf("store %s failed its check (%d problems, listed above): copy the file aside; the daemon moves a file it cannot open aside at its next start", stats.Path, n)
	}
	return nil
}

func megabytes(n int64) string { return fmt.Sprintf("%.1f MB", float64(n)/1e6) }

// checkSummary is the one-line summary: store id, records per kind, time span, size, pending
// per stream. Problems found by the check follow on their own lines.
func checkSummary(s buffer.Stats, checkErr error) string {
	var b strings.Builder
	state := "ok"
	if checkErr != nil {
		state = "DAMAGED"
	}
	fmt.Fprintf(&b, "store %s %s:", s.ID, state)
	var kinds []string
	var oldest, newest time.Time
	for _, k := range record.Kinds() {
		ks := s.Kinds[k]
		kinds = append(kinds, fmt.Sprintf("%d %s", ks.Count, k))
		if ks.Count > 0 {
			if oldest.IsZero() || ks.Oldest.Before(oldest) {
				oldest = ks.Oldest
			}
			if ks.Newest.After(newest) {
				newest = ks.Newest
			}
		}
	}
	b.WriteString(" " + strings.Join(kinds, ", ") + ";")
	if oldest.IsZero() {
		b.WriteString(" no records;")
	} else {
		fmt.Fprintf(&b, " %s to %s;", oldest.Format(time.RFC3339), newest.Format(time.RFC3339))
	}
	fmt.Fprintf(&b, " file %s, used %s of %s cap;", megabytes(s.FileBytes), megabytes(s.UsedBytes), megabytes(s.MaxBytes))
	streams := make([]string, 0, len(s.Streams))
	for name := range s.Streams {
		streams = append(streams, name)
	}
	sort.Strings(streams)
	if len(streams) == 0 {
		b.WriteString(" no consumer streams")
	}
	for i, name := range streams {
		var parts []string
		for _, k := range record.Kinds() {
			ss, ok := s.Streams[name][k]
			if !ok || ss.Pending == 0 && ss.Dropped == 0 {
				continue
			}
			p := fmt.Sprintf("%s %d", k, ss.Pending)
			if ss.Dropped > 0 {
				p += fmt.Sprintf(" (%d dropped)", ss.Dropped)
			}
			parts = append(parts, p)
		}
		if len(parts) == 0 {
			parts = []string{"nothing"}
		}
		if i > 0 {
			b.WriteString(";")
		}
		fmt.Fprintf(&b, " pending %s: %s", name, strings.Join(parts, ", "))
	}
	if checkErr != nil {
		b.WriteString("\nproblem: " + strings.ReplaceAll(checkErr.Error(), "\n", "\nproblem: "))
	}
	return b.String()
}

// checkJSON is the summary as one JSON object.
func checkJSON(s buffer.Stats, checkErr error) (string, error) {
	type kindJSON struct {
		Count         uint64 `json:"count"`
		Oldest        string `json:"oldest,omitempty"`
		Newest        string `json:"newest,omitempty"`
		RemovedByAge  uint64 `json:"removed_by_age"`
		RemovedBySize uint64 `json:"removed_by_size"`
	}
	type streamJSON struct {
		Acked   uint64 `json:"acked_seq"`
		Pending uint64 `json:"pending"`
		Dropped uint64 `json:"dropped"`
	}
	out := struct {
		Store     string                           `json:"store"`
		OK        bool                             `json:"ok"`
		Problems  []string                         `json:"problems,omitempty"`
		FileBytes int64                            `json:"file_bytes"`
		UsedBytes int64                            `json:"used_bytes"`
		MaxBytes  int64                            `json:"max_bytes"`
		Kinds     map[string]kindJSON              `json:"kinds"`
		Streams   map[string]map[string]streamJSON `json:"streams"`
	}{Store: s.ID, OK: checkErr == nil, FileBytes: s.FileBytes, UsedBytes: s.UsedBytes, MaxBytes: s.MaxBytes,
		Kinds: map[string]kindJSON{}, Streams: map[string]map[string]streamJSON{}}
	if checkErr != nil {
		out.Problems = strings.Split(checkErr.Error(), "\n")
	}
	for k, ks := range s.Kinds {
		kj := kindJSON{Count: ks.Count, RemovedByAge: ks.RemovedByAge, RemovedBySize: ks.RemovedBySize}
		if ks.Count > 0 {
			kj.Oldest, kj.Newest = ks.Oldest.Format(time.RFC3339Nano), ks.Newest.Format(time.RFC3339Nano)
		}
		out.Kinds[k.String()] = kj
	}
	for name, m := range s.Streams {
		out.Streams[name] = map[string]streamJSON{}
		for k, ss := range m {
			out.Streams[name][k.String()] = streamJSON{ss.Acked, ss.Pending, ss.Dropped}
		}
	}
	b, err := json.Marshal(out)
	if err != nil {
		return "", fmt.Errorf("store summary as JSON: %w", err)
	}
	return string(b), nil
}
