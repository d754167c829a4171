package query_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/query"
	"github.com/leqnode/leqnode/node/testrig"
)

var t0 = time.Date(2031, 5, 3, 18, 30, 0, 0, time.UTC) // 2031-05-04 00:00 in Asia/Kolkata (UTC+05:30)

// store holds a session in the zone Asia/Kolkata and ten seconds from t0.
func store(t *testing.T) *buffer.Store {
	t.Helper()
	st, err := buffer.Open(filepath.Join(t.TempDir(), "ferry-row-3.db"), &buffer.Options{NoSync: true, Now: func() time.Time { return t0.Add(time.Hour) }})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := st.Close(); err != nil {
			t.Error(err)
		}
	})
	if _, err := st.Append(&record.Session{At: t0, TimeZone: "Asia/Kolkata", NodeID: "ferry-row-3"}); err != nil {
		t.Fatal(err)
	}
	for i := range 10 {
		if _, err := st.Append(&record.Second{Start: t0.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 50}); err != nil {
			t.Fatal(err)
		}
	}
	return st
}

func TestParseWhen(t *testing.T) {
	ist, err := time.LoadLocation("Asia/Kolkata")
	if err != nil {
		testrig.Missing(t, "no time zone data ("+err.Error()+"): install the Debian package tzdata (make test-deps does, as root)")
	}
	for _, tc := range []struct {
		v    string
		want time.Time
		bad  bool
	}{
		{"2031-05-04T07:00:00Z", time.Date(2031, 5, 4, 7, 0, 0, 0, time.UTC), false},
		{"2031-05-04T07:00:00+05:30", time.Date(2031, 5, 4, 1, 30, 0, 0, time.UTC), false},
		{"2031-05-04", time.Date(2031, 5, 3, 18, 30, 0, 0, time.UTC), false}, // midnight in the zone
		{"May 4", time.Time{}, true},
		{"2031-02-30", time.Time{}, true},
		{"", time.Time{}, true},
	} {
		got, err := query.ParseWhen("from", tc.v, ist)
		if tc.bad {
			if !errors.Is(err, query.ErrBadRequest) || !strings.HasPrefix(err.Error(), "--from ") {
				t.Errorf("ParseWhen(%q): %v, want a bad request naming --from", tc.v, err)
			}
			continue
		}
		if err != nil || !got.Equal(tc.want) {
			t.Errorf("ParseWhen(%q) = %v, %v; want %v", tc.v, got, err, tc.want)
		}
	}
}

func TestDo(t *testing.T) {
	st := store(t)
	for _, tc := range []struct {
		name    string
		req     query.Request
		bad     bool   // errors.Is ErrBadRequest
		failed  bool   // another error
		want    string // in the output, or in the error
		noLines int    // lines of output, when > 0
	}{
		{name: "no command", req: query.Request{}, bad: true, want: "exactly one command"},
		{name: "two commands", req: query.Request{Export: &query.Export{Kind: "second"}, Check: &query.Check{}}, bad: true},
		{name: "export by date in the session's zone", req: query.Request{Export: &query.Export{Kind: "second", From: "2031-05-04", To: "2031-05-05"}}, noLines: 10},
		{name: "export by date in UTC", req: query.Request{Export: &query.Export{Kind: "second", To: "2031-05-04", TimeZone: "UTC"}}, noLines: 10},
		{name: "export half-open", req: query.Request{Export: &query.Export{Kind: "second", From: "2031-05-03T18:30:02Z", To: "2031-05-03T18:30:05Z"}}, noLines: 3},
		{name: "export no kind", req: query.Request{Export: &query.Export{}}, bad: true, want: "--kind"},
		{name: "export unknown kind", req: query.Request{Export: &query.Export{Kind: "weather"}}, bad: true, want: "weather"},
		{name: "export bad format", req: query.Request{Export: &query.Export{Kind: "second", Format: "html"}}, bad: true, want: "csv, jsonl"},
		{name: "export empty range", req: query.Request{Export: &query.Export{Kind: "second", From: "2031-05-04", To: "2031-05-04"}}, bad: true, want: "not before"},
		{name: "check", req: query.Request{Check: &query.Check{}}, want: "store " + st.ID() + " ok: "},
		{name: "check json", req: query.Request{Check: &query.Check{Format: "json"}}, want: `"ok":true`},
		{name: "check bad format", req: query.Request{Check: &query.Check{Format: "csv"}}, bad: true, want: "table, json"},
		{name: "report no out", req: query.Request{Report: &query.Report{From: "2031-05-04", To: "2031-05-05", Profile: "ldn", MinCoverage: 75}}, bad: true, want: "--out DIR"},
		{name: "report too long", req: query.Request{Report: &query.Report{From: "2031-01-01", To: "2032-06-01", Profile: "ldn", MinCoverage: 75, Out: t.TempDir()}}, bad: true, want: "at most 400 days"},
		{name: "report coverage", req: query.Request{Report: &query.Report{From: "2031-05-04", To: "2031-05-05", Profile: "ldn", Out: t.TempDir()}}, bad: true, want: "--min-coverage 0"},
		{name: "report profile text", req: query.Request{Report: &query.Report{From: "2031-05-04", To: "2031-05-05", Profile: "/home/quay.toml", ProfileText: "title = 1", MinCoverage: 75, Out: t.TempDir()}}, bad: true, want: "/home/quay.toml"},
		{name: "report cannot write", req: query.Request{Report: &query.Report{From: "2031-05-04", To: "2031-05-05", Profile: "ldn", MinCoverage: 75, Out: "/proc/leqnode-no"}}, failed: true},
		{name: "report", req: query.Request{Report: &query.Report{From: "2031-05-04", To: "2031-05-05", Profile: "ldn", MinCoverage: 75, Out: filepath.Join(t.TempDir(), "r"), OutName: "r"}},
			want: "wrote report.html, daily.csv and hourly.csv in r for node ferry-row-3: "},
	} {
		var out strings.Builder
		err := query.Do(context.Background(), st, tc.req, &out)
		switch {
		case tc.bad != errors.Is(err, query.ErrBadRequest):
			t.Errorf("%s: %v, bad request %v", tc.name, err, tc.bad)
		case tc.failed != (err != nil && !tc.bad):
			t.Errorf("%s: %v, want a failure %v", tc.name, err, tc.failed)
		case err != nil && !strings.Contains(err.Error(), tc.want):
			t.Errorf("%s: %v, want %q", tc.name, err, tc.want)
		case err == nil && !strings.Contains(out.String(), tc.want):
			t.Errorf("%s: output %q, want %q", tc.name, out.String(), tc.want)
		case tc.noLines > 0 && strings.Count(out.String(), "\n") != tc.noLines:
			t.Errorf("%s: %d lines, want %d", tc.name, strings.Count(out.String(), "\n"), tc.noLines)
		case err != nil && out.Len() > 0:
			t.Errorf("%s: output before the error %v: %q", tc.name, err, out.String())
		}
	}
}

func ExampleDo() {
	dir, err := os.MkdirTemp("", "leqnode-query")
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
	// A request as the command line builds it from `export --kind minute --from 2031-05-04`.
	req := query.Request{Export: &query.Export{Kind: "minute", From: "2031-05-04", Format: "csv"}}
	var out strings.Builder
	if err := query.Do(context.Background(), st, req, &out); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(strings.HasPrefix(out.String(), "store,seq,start,"))
	// A time that does not parse is the request's fault.
	req.Export.To = "tomorrow"
	err = query.Do(context.Background(), st, req, &out)
	fmt.Println(errors.Is(err, query.ErrBadRequest), err)
	// Output:
	// true
	// true --to "tomorrow" is not a time: write RFC 3339 (2026-05-04T07:00:00Z) or a date (2026-05-04, in zone UTC)
}
