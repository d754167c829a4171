package main

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/node/control"
	"github.com/leqnode/leqnode/node/lib/query"
)

// holdStore opens the store at path for writing, as the daemon does, and answers reading
// requests on a real control socket with query.Do against it, as node/daemon does.
// It returns the socket's path.
func holdStore(t *testing.T, path string, now time.Time) string {
	t.Helper()
	st, err := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return now }})
	if err != nil {
		t.Fatal(err)
	}
	sock := filepath.Join(t.TempDir(), "control.sock")
	srv, err := control.Listen(sock, -1, control.Handlers{
		Read: func(ctx context.Context, req query.Request, w io.Writer) error { return query.Do(ctx, st, req, w) },
	}, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ctx) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil {
			t.Error(err)
		}
		if err := st.Close(); err != nil {
			t.Error(err)
		}
	})
	return sock
}

var usedBytes = regexp.MustCompile(`"used_bytes":[0-9]+,`)

type outcome struct {
	code        int
	out, stderr string
}

// TestReadThroughSocket: every reading command gives the same output, exit status and message
// when the daemon holds the store (through the control socket) as when it reads the file
// itself; and the client tells a bad request from a failure by errors.Is, not by text.
func TestReadThroughSocket(t *testing.T) {
	expPath, start := exportStore(t)
	repPath := reportStore(t)
	dir := t.TempDir()
	blocker := filepath.Join(dir, "a-file")
	if err := os.WriteFile(blocker, []byte("in the way"), 0o644); err != nil {
		t.Fatal(err)
	}
	profile := filepath.Join(dir, "quay-hours.toml")
	err := os.WriteFile(profile, []byte(`title = "Quay hours, Wendle Cross"
source = "common practice: day 07-19, evening 19-23, night 23-07"
composite = "Lden"
[[period]]
name = "day"
start = "07:00"
[[period]]
name = "evening"
start = "19:00"
penalty = 5
[[period]]
name = "night"
start = "23:00"
penalty = 10
`), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	from, to := start.Add(5*time.Second).Format(time.RFC3339), start.Add(15*time.Second).Format(time.RFC3339)
	cases := []struct {
		name   string
		args   []string
		outDir string // a report's directory: its CSV files must be the same too
		code   int
	}{
		{"export jsonl range", []string{"export", "--db", expPath, "--kind", "second", "--from", from, "--to", to}, "", 0},
		{"export csv by dates", []string{"export", "--db", expPath, "--kind", "second", "--format", "csv", "--from", "2026-05-03", "--to", "2026-05-05"}, "", 0},
		{"export minute", []string{"export", "--db", expPath, "--kind", "minute"}, "", 0},
		{"export annotation csv", []string{"export", "--db", expPath, "--kind", "annotation", "--format", "csv"}, "", 0},
		{"db check", []string{"db", "check", "--db", expPath}, "", 0},
		{"db check json", []string{"db", "check", "--db", expPath, "--format", "json"}, "", 0},
		{"report", []string{"report", "--db", repPath, "--from", "2026-05-03", "--to", "2026-05-04", "--profile", "india-2000", "--zone", "residential", "--out", "rep"}, "rep", 0},
		{"report, profile file", []string{"report", "--db", repPath, "--from", "2026-05-03", "--to", "2026-05-05", "--profile", profile, "--out", "rep-quay"}, "rep-quay", 0},
		{"bad time", []string{"export", "--db", expPath, "--kind", "second", "--from", "May 3"}, "", 2},
		{"empty range", []string{"export", "--db", expPath, "--kind", "second", "--from", "2026-05-04", "--to", "2026-05-04"}, "", 2},
		{"report too long", []string{"report", "--db", repPath, "--from", "2026-01-01", "--to", "2027-06-01", "--profile", "ldn", "--out", "rep"}, "", 2},
		{"report cannot write", []string{"report", "--db", repPath, "--from", "2026-05-03", "--to", "2026-05-04", "--profile", "ldn", "--out", filepath.Join(blocker, "sub")}, "", 1},
	}
	// Relative output directories: the daemon's process writes where the command was given.
	direct := t.TempDir()
	socket := t.TempDir()
	var socks map[string]string // store path to its socket, once held
	run := func(wd string) []outcome {
		t.Chdir(wd)
		var res []outcome
		for _, tc := range cases {
			if socks != nil {
				db := tc.args[slices.Index(tc.args, "--db")+1]
				t.Setenv("LEQNODE_CONTROL", socks[db])
			}
			code, out, errs := runCmd(t, nil, tc.args...)
			res = append(res, outcome{code, out, errs})
		}
		return res
	}
	want := run(direct)
	sock := holdStore(t, expPath, start.Add(time.Hour))
	socks = map[string]string{expPath: sock, repPath: holdStore(t, repPath, time.Date(2026, 5, 4, 0, 0, 0, 0, time.UTC))}
	got := run(socket)
	for i, tc := range cases {
		if want[i].code != tc.code {
			t.Errorf("%s, direct: exit %d, want %d: %s", tc.name, want[i].code, tc.code, want[i].stderr)
		}
		g, w := got[i], want[i]
		if tc.name == "db check json" {
			// The pages bbolt counts as in use differ between a read-only open and the
			// writer's (its free list is read in another way): the store is the same.
			g.out, w.out = usedBytes.ReplaceAllString(g.out, ""), usedBytes.ReplaceAllString(w.out, "")
		}
		if g != w {
			t.Errorf("%s through the socket:\n got exit %d, stdout %q, stderr %q\nwant exit %d, stdout %q, stderr %q",
				tc.name, got[i].code, got[i].out, got[i].stderr, want[i].code, want[i].out, want[i].stderr)
		}
		if tc.code == 0 && want[i].out == "" {
			t.Errorf("%s wrote nothing", tc.name)
		}
		if tc.outDir == "" {
			continue
		}
		for _, f := range []string{"daily.csv", "hourly.csv"} {
			a, err1 := os.ReadFile(filepath.Join(direct, tc.outDir, f))
			b, err2 := os.ReadFile(filepath.Join(socket, tc.outDir, f))
			if err1 != nil || err2 != nil || string(a) != string(b) || len(a) == 0 {
				t.Errorf("%s: %s differs through the socket (%v, %v)", tc.name, f, err1, err2)
			}
		}
	}

	// The client's errors are values: errors.Is tells a bad request from a failure.
	c := control.NewClient(sock)
	ctx := context.Background()
	err = c.Read(ctx, query.Request{Export: &query.Export{Kind: "second", From: "May 3"}}, io.Discard)
	if !errors.Is(err, control.ErrBadRequest) || errors.Is(err, control.ErrFailed) {
		t.Errorf("bad time: %v, want errors.Is control.ErrBadRequest", err)
	}
	err = c.Read(ctx, query.Request{Export: &query.Export{Kind: "weather"}}, io.Discard)
	if !errors.Is(err, control.ErrBadRequest) || !strings.Contains(err.Error(), "weather") {
		t.Errorf("unknown kind sent as is: %v, want errors.Is control.ErrBadRequest", err)
	}
	c = control.NewClient(socks[repPath])
	err = c.Read(ctx, query.Request{Report: &query.Report{From: "2026-05-03", To: "2026-05-04", Profile: "ldn", MinCoverage: 75,
		Out: filepath.Join(blocker, "sub")}}, io.Discard)
	if !errors.Is(err, control.ErrFailed) || errors.Is(err, control.ErrBadRequest) {
		t.Errorf("report that cannot write: %v, want errors.Is control.ErrFailed", err)
	}
}
