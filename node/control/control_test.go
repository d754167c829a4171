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

func startServer(t *testing.T, dir string, gid int, h Handlers) *Server {
	t.Helper()
	s, err := Listen(filepath.Join(dir, "control.sock"), gid, h, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() { s.Serve(ctx); close(done) }()
	t.Cleanup(func() { cancel(); <-done })
	return s
}

func handlers() Handlers {
	return Handlers{
		Status: func() any { return map[string]any{"node": "wendle-cross-01"} },
		Exec: func(ctx context.Context, args []string, w io.Writer) (bool, error) {
			switch args[len(args)-1] {
			case "fail":
				fmt.Fprintln(w, "partial")
				return true, errors.New("--kind fail is not a kind")
			case "crash":
				return false, errors.New("store read failed")
			}
			for i := range 3 {
				fmt.Fprintf(w, "line %d of %s\n", i, strings.Join(args, " "))
			}
			return false, nil
		},
	}
}

func TestStatusAndExec(t *testing.T) {
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
	if err := c.Exec(context.Background(), []string{"export", "--kind", "second"}, &out); err != nil {
		t.Fatal(err)
	}
	if want := "line 0 of export --kind second\nline 1 of export --kind second\nline 2 of export --kind second\n"; out.String() != want {
		t.Errorf("exec output %q", out.String())
	}
	var ee *ExecError
	err = c.Exec(context.Background(), []string{"export", "fail"}, io.Discard)
	if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(ee.Message, "not a kind") {
		t.Errorf("bad input through the socket: %v", err)
	}
	err = c.Exec(context.Background(), []string{"db", "crash"}, io.Discard)
	if !errors.As(err, &ee) || ee.Code != 1 {
		t.Errorf("run-time failure through the socket: %v", err)
	}
	if err := c.Exec(context.Background(), []string{"run"}, io.Discard); err == nil || !strings.Contains(err.Error(), "cannot run through") {
		t.Errorf("run through the socket: %v", err)
	}
	// The body is exactly one JSON array of strings (issue 20): the old decoder read the
	// first of two values and took null for "".
	for _, body := range []string{`["export","--kind","second"] ["db"]`, `["export",null]`, `{"0":"export"}`, `["export",1]`, "[\"export\",\"\xff\"]"} {
		resp, err := c.hc.Post("http://leqnode/exec", "application/json", strings.NewReader(body))
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusBadRequest {
			t.Errorf("exec body %q: status %d, want 400", body, resp.StatusCode)
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
	os.WriteFile(p, []byte("keep"), 0o644)
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
		t.Skip("needs root to run a client as another user")
	}
	dir, err := os.MkdirTemp("", "leqnode-control-")
	if err != nil {
		t.Fatal(err)
	}
	defer os.RemoveAll(dir)
	os.Chmod(dir, 0o755) // the socket's own mode must be what refuses
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
