package control

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/lib/query"
	"github.com/leqnode/leqnode/node/testrig"
)

// TestMain lets the tests run this binary as a client under another user (a child process
// with other credentials): LEQNODE_CONTROL_CLIENT holds the socket path.
func TestMain(m *testing.M) {
	if path := os.Getenv("LEQNODE_CONTROL_CLIENT"); path != "" {
		var v map[string]any
		err := NewClient(path).Get(context.Background(), "status", &v)
		if err != nil {
			fmt.Println("refused:", err)
			os.Exit(3)
		}
		fmt.Println("served:", v["node"])
		os.Exit(0)
	}
	os.Exit(m.Run())
}

func startServer(t testing.TB, dir string, gid int, h Handlers) *Server {
	t.Helper()
	s, err := Listen(filepath.Join(dir, "control.sock"), gid, h, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Serve(ctx) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("Serve: %v", err)
		}
	})
	return s
}

func handlers() Handlers {
	return Handlers{
		Status: func() any { return map[string]any{"node": "wendle-cross-01"} },
		Read: func(ctx context.Context, req query.Request, w io.Writer) error {
			if req.Check != nil {
				return errors.New("store read failed")
			}
			if req.Export.Kind == "wide" {
				return errors.New("Wendle Cross — café\n\"quay\" 🎧")
			}
			if req.Export.Kind == "fail" {
				if _, err := fmt.Fprintln(w, "partial"); err != nil {
					return err
				}
				return query.BadRequest("--kind: %q is not a kind", req.Export.Kind)
			}
			for i := range 3 {
				if _, err := fmt.Fprintf(w, "line %d of %s %s\n", i, req.Name(), req.Export.Kind); err != nil {
					return err
				}
			}
			return nil
		},
	}
}

func TestStatusAndRead(t *testing.T) {
	s := startServer(t, t.TempDir(), -1, handlers())
	fi, err := os.Stat(s.Path())
	if err != nil {
		t.Fatal(err)
	}
	if perm := fi.Mode().Perm(); perm != 0o660 {
		t.Errorf("socket mode %v, want 0660 (owner and group only)", perm)
	}
	c := NewClient(s.Path())
	var st map[string]any
	if err := c.Get(context.Background(), "status", &st); err != nil || st["node"] != "wendle-cross-01" {
		t.Fatalf("status: %v %v", st, err)
	}
	var out strings.Builder
	if err := c.Read(context.Background(), query.Request{Export: &query.Export{Kind: "second"}}, &out); err != nil {
		t.Fatal(err)
	}
	if want := "line 0 of export second\nline 1 of export second\nline 2 of export second\n"; out.String() != want {
		t.Errorf("read output %q", out.String())
	}
	// Errors come back as values: the kind decides errors.Is, the message is the daemon's line,
	// and what was written before the error is delivered.
	out.Reset()
	err = c.Read(context.Background(), query.Request{Export: &query.Export{Kind: "fail"}}, &out)
	var ce *Error
	if !errors.Is(err, ErrBadRequest) || !errors.Is(err, query.ErrBadRequest) || errors.Is(err, ErrFailed) ||
		!errors.As(err, &ce) || err.Error() != `--kind: "fail" is not a kind` || out.String() != "partial\n" {
		t.Errorf("bad request through the socket: %v (output %q)", err, out.String())
	}
	err = c.Read(context.Background(), query.Request{Check: &query.Check{}}, io.Discard)
	if !errors.Is(err, ErrFailed) || errors.Is(err, ErrBadRequest) || err.Error() != "store read failed" {
		t.Errorf("run-time failure through the socket: %v", err)
	}
	// Any message survives the trailer: non-ASCII, quotes; a line break becomes a space.
	err = c.Read(context.Background(), query.Request{Export: &query.Export{Kind: "wide"}}, io.Discard)
	if want := "Wendle Cross — café \"quay\" 🎧"; err == nil || err.Error() != want {
		t.Errorf("message through the trailer: %v, want %s", err, want)
	}
	// A request that holds no command, or two, is refused as a bad request.
	for _, req := range []query.Request{{}, {Export: &query.Export{Kind: "second"}, Check: &query.Check{}}} {
		if err := c.Read(context.Background(), req, io.Discard); !errors.Is(err, ErrBadRequest) {
			t.Errorf("request %+v: %v, want a bad request", req, err)
		}
	}
	// The body is exactly one JSON request (issue 20): a second value, null for a string, an
	// unknown command, a number for a string and invalid UTF-8 are refused.
	for _, body := range []string{`{"export":{"kind":"second"}} {"check":{}}`, `{"export":{"kind":null}}`, `{"run":{}}`,
		`{"export":{"kind":1}}`, "{\"export\":{\"kind\":\"\xff\"}}", `["export","--kind","second"]`} {
		resp, err := c.hc.Post("http://leqnode/read", "application/json", strings.NewReader(body))
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != http.StatusBadRequest || !strings.Contains(string(b), `"kind":"bad_request"`) {
			t.Errorf("read body %q: status %d %s, want 400 with a bad_request outcome", body, resp.StatusCode, b)
		}
	}
	if err := c.Get(context.Background(), "health", &st); err == nil {
		t.Error("a missing handler should answer an error")
	}
}

func TestStaleSocket(t *testing.T) {
	dir := t.TempDir()
	s := startServer(t, dir, -1, handlers())
	// A second daemon on the same path is refused while the first listens.
	if _, err := Listen(s.Path(), -1, handlers(), nil); err == nil || !strings.Contains(err.Error(), "another leqnode daemon") {
		t.Errorf("second listener: %v", err)
	}
	// A regular file in the way is never removed.
	p := filepath.Join(dir, "file.sock")
	if err := os.WriteFile(p, []byte("keep"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Listen(p, -1, handlers(), nil); err == nil {
		t.Error("listened over a regular file")
	}
	if b, _ := os.ReadFile(p); string(b) != "keep" {
		t.Error("the file in the way was changed")
	}
}

func TestOtherUsersRefused(t *testing.T) {
	// A user outside the service's group is refused; a member of the group is served. This
	// needs root to start clients under other users.
	if os.Getuid() != 0 {
		testrig.Missing(t, "needs root to run a client as another user: run the tests as root (CI does)")
	}
	dir, err := os.MkdirTemp("", "leqnode-control-")
	if err != nil {
		t.Fatal(err)
	}
	defer os.RemoveAll(dir)
	if err := os.Chmod(dir, 0o755); err != nil { // the socket's own mode must be what refuses
		t.Fatal(err)
	}
	const group = 47123
	s := startServer(t, dir, group, handlers())
	// The test binary lives in a directory only root may enter: copy it where nobody can run it.
	self, _ := os.Executable()
	b, err := os.ReadFile(self)
	if err != nil {
		t.Fatal(err)
	}
	exe := filepath.Join(dir, "client.test")
	if err := os.WriteFile(exe, b, 0o755); err != nil {
		t.Fatal(err)
	}
	client := func(groups []uint32) (string, int) {
		cmd := exec.Command(exe)
		cmd.Env = append(os.Environ(), "LEQNODE_CONTROL_CLIENT="+s.Path())
		cmd.SysProcAttr = &syscall.SysProcAttr{Credential: &syscall.Credential{Uid: 65534, Gid: 65534, Groups: groups}}
		cmd.WaitDelay = 10 * time.Second
		out, err := cmd.CombinedOutput()
		code := 0
		var xe *exec.ExitError
		if errors.As(err, &xe) {
			code = xe.ExitCode()
		} else if err != nil {
			t.Fatalf("running the client: %v", err)
		}
		return string(out), code
	}
	if out, code := client(nil); code != 3 || !strings.Contains(out, "permission denied") {
		t.Errorf("outsider: exit %d, %q", code, out)
	}
	if out, code := client([]uint32{group}); code != 0 || !strings.Contains(out, "wendle-cross-01") {
		t.Errorf("group member: exit %d, %q", code, out)
	}
}

// TestCalibrateReference: the reference level is one decimal number from 70 to 140; NaN,
// hexadecimal floats and a repeated parameter are refused (strconv.ParseFloat took "NaN" and
// "0x1p7", and Get took the first of two values; issue 20).
func TestCalibrateReference(t *testing.T) {
	h := handlers()
	h.Calibrate = func(ctx context.Context, reference float64) (any, error) {
		return map[string]float64{"reference": reference}, nil
	}
	s := startServer(t, t.TempDir(), -1, h)
	c := NewClient(s.Path())
	for _, tc := range []struct {
		query string
		code  int
	}{
		{"", http.StatusOK}, {"?reference=114", http.StatusOK}, {"?reference=93.9", http.StatusOK},
		{"?reference=NaN", http.StatusBadRequest}, {"?reference=0x1p7", http.StatusBadRequest},
		{"?reference=+94", http.StatusBadRequest}, {"?reference=94&reference=114", http.StatusBadRequest},
		{"?reference=", http.StatusBadRequest}, {"?reference=150", http.StatusBadRequest},
	} {
		resp, err := c.hc.Post("http://leqnode/calibrate"+tc.query, "", nil)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != tc.code {
			t.Errorf("calibrate%s: status %d, want %d", tc.query, resp.StatusCode, tc.code)
		}
	}
}
