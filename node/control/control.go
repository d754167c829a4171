// Package control is the daemon's control socket: a Unix socket in the runtime directory
// through which local commands ask a running node for its status, live levels and health,
// request a calibration check, and read the store the daemon holds (bbolt lets only one process
// open the file for writing, and a reader cannot open it while the writer holds it).
//
// The protocol is HTTP/1.1 over the socket, so that any HTTP client can talk to it (curl
// --unix-socket). GET /status, /live and /health answer JSON; POST /calibrate asks for a
// calibration check; POST /read carries one reading command (export, db check, report) as a
// typed request (a query.Request in JSON), which the daemon answers by calling package query
// against its open store, streaming the output back as the body.
//
// Errors are values on both sides. The outcome of a read travels in the trailer
// Leqnode-Outcome as a small JSON object {"kind": ..., "message": ...}: kind "ok", or
// "bad_request" for a request that cannot be answered as given, or "failed" for a failure at run
// time; message is the error's one line. The client turns it back into an *Error that
// errors.Is matches with ErrBadRequest or ErrFailed; no text is parsed.
//
// Access: the socket file is made readable and writable by its owner and group only (0660), and
// every connection's peer credentials (SO_PEERCRED) are checked again: root, the daemon's own
// user and members of the socket's group are served; anyone else is refused. There is no network
// listener.
package control

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"strconv"
	"strings"
	"time"

	"golang.org/x/sys/unix"

	"github.com/leqnode/leqnode/node/lib/query"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// Handlers answer the requests. Nil handlers answer 404.
type Handlers struct {
	Status func() any
	Live   func() any
	Health func() any
	// Calibrate asks the node to take the next stable calibrator tone; it returns the check.
	Calibrate func(ctx context.Context, reference float64) (any, error)
	// Read answers a reading command against the daemon's store, writing the command's output
	// to w as it goes. An error that wraps ErrBadRequest is the request's fault; any other is a
	// failure at run time.
	Read func(ctx context.Context, req query.Request, w io.Writer) error
}

// Server serves the control socket.
type Server struct {
	path string
	ln   net.Listener
	srv  *http.Server
	log  *slog.Logger
	gid  int
}

// DefaultPath is where the daemon listens unless configured otherwise: systemd's runtime
// directory for the service.
const DefaultPath = "/run/leqnode/control.sock"

// Listen creates the socket at path (a stale socket left by a crash is removed; any other file
// there is an error), restricted to its owner and to group gid (-1: the process's group).
func Listen(path string, gid int, h Handlers, log *slog.Logger) (*Server, error) {
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	if fi, err := os.Lstat(path); err == nil {
		if fi.Mode()&os.ModeSocket == 0 {
			return nil, fmt.Errorf("control socket %s: a file that is not a socket is in the way: move it or set another path", path)
		}
		if c, err := net.DialTimeout("unix", path, 200*time.Millisecond); err == nil {
			_ = c.Close() // a probe: nothing was sent on it
			return nil, fmt.Errorf("control socket %s: another leqnode daemon is listening there: stop it or set another path", path)
		}
		if err := os.Remove(path); err != nil && !errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("control socket %s: a stale socket is in the way and cannot be removed: %w", path, err)
		}
	}
	if gid < 0 {
		gid = os.Getgid()
	}
	// Create the socket with no access for others from the start, then hand it to the group.
	old := unix.Umask(0o117)
	ln, err := net.Listen("unix", path)
	unix.Umask(old)
	if err != nil {
		return nil, fmt.Errorf("control socket %s: %w", path, err)
	}
	if err := os.Chown(path, -1, gid); err != nil && !errors.Is(err, os.ErrPermission) {
		return nil, errors.Join(fmt.Errorf("control socket %s: %w", path, err), ln.Close())
	}
	if err := os.Chmod(path, 0o660); err != nil {
		return nil, errors.Join(fmt.Errorf("control socket %s: %w", path, err), ln.Close())
	}
	s := &Server{path: path, ln: ln, log: log, gid: gid}
	mux := http.NewServeMux()
	getJSON := func(name string, f func() any) {
		mux.HandleFunc("GET /"+name, func(w http.ResponseWriter, r *http.Request) {
			if f == nil {
				http.Error(w, name+" is not available", http.StatusNotFound)
				return
			}
			s.writeJSON(w, f())
		})
	}
	getJSON("status", h.Status)
	getJSON("live", h.Live)
	getJSON("health", h.Health)
	mux.HandleFunc("POST /calibrate", func(w http.ResponseWriter, r *http.Request) {
		if h.Calibrate == nil {
			http.Error(w, "this daemon takes no calibration requests", http.StatusNotFound)
			return
		}
		ref := 94.0
		v, ok, err := strict.Param(r.URL.Query(), "reference")
		if err != nil {
			http.Error(w, err.Error(), http.StatusBadRequest)
			return
		}
		if ok {
			f, err := strict.Decimal(v)
			if err != nil || f < 70 || f > 140 {
				http.Error(w, "reference must be a level in dB between 70 and 140", http.StatusBadRequest)
				return
			}
			ref = f
		}
		res, err := h.Calibrate(r.Context(), ref)
		if err != nil {
			http.Error(w, err.Error(), http.StatusConflict)
			return
		}
		s.writeJSON(w, res)
	})
	mux.HandleFunc("POST /read", func(w http.ResponseWriter, r *http.Request) { s.read(w, r, h.Read) })
	s.srv = &http.Server{
		Handler:           s.authorise(mux),
		ReadHeaderTimeout: 5 * time.Second,
		ConnContext: func(ctx context.Context, c net.Conn) context.Context {
			return context.WithValue(ctx, connKey{}, c)
		},
	}
	return s, nil
}

type connKey struct{}

// Path returns the socket's path.
func (s *Server) Path() string { return s.path }

// Serve answers requests until ctx ends, then removes the socket.
func (s *Server) Serve(ctx context.Context) error {
	go func() {
		<-ctx.Done()
		sctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		if err := s.srv.Shutdown(sctx); err != nil {
			s.log.Warn("control socket: requests still running at shutdown were cut off", "err", err)
		}
	}()
	err := s.srv.Serve(s.ln)
	if rerr := os.Remove(s.path); rerr != nil && !errors.Is(rerr, os.ErrNotExist) {
		s.log.Warn("control socket: the socket file was left behind", "path", s.path, "err", rerr)
	}
	if errors.Is(err, http.ErrServerClosed) {
		return nil
	}
	return err
}

// authorise checks the peer's credentials: root, the daemon's user, or a member of the
// socket's group.
func (s *Server) authorise(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		c, _ := r.Context().Value(connKey{}).(*net.UnixConn)
		if c == nil || !s.allowed(c) {
			s.log.Warn("control socket: refused a client outside the service's group")
			http.Error(w, "not allowed: join the service's group", http.StatusForbidden)
			return
		}
		next.ServeHTTP(w, r)
	})
}

func (s *Server) allowed(c *net.UnixConn) bool {
	raw, err := c.SyscallConn()
	if err != nil {
		return false
	}
	var cred *unix.Ucred
	var cerr error
	if err := raw.Control(func(fd uintptr) {
		cred, cerr = unix.GetsockoptUcred(int(fd), unix.SOL_SOCKET, unix.SO_PEERCRED)
	}); err != nil || cerr != nil || cred == nil {
		return false
	}
	if cred.Uid == 0 || int(cred.Uid) == os.Getuid() || int(cred.Gid) == s.gid {
		return true
	}
	return inGroup(int(cred.Pid), s.gid)
}

// inGroup reports whether process pid has gid among its supplementary groups.
func inGroup(pid, gid int) bool {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return false
	}
	for _, line := range strings.Split(string(b), "\n") {
		if rest, ok := strings.CutPrefix(line, "Groups:"); ok {
			for _, g := range strings.Fields(rest) {
				if g == strconv.Itoa(gid) {
					return true
				}
			}
		}
	}
	return false
}

// writeJSON answers v as indented JSON. A failure is the client's (it went away): logged.
func (s *Server) writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(v); err != nil {
		s.log.Debug("control socket: an answer was not delivered", "err", err)
	}
}

// Client talks to a daemon's control socket.
type Client struct {
	path string
	hc   *http.Client
}

// NewClient returns a client for the socket at path.
func NewClient(path string) *Client {
	return &Client{path: path, hc: &http.Client{Transport: &http.Transport{
		DialContext: func(ctx context.Context, _, _ string) (net.Conn, error) {
			var d net.Dialer
			return d.DialContext(ctx, "unix", path)
		},
	}}}
}

// Available reports whether a daemon answers on the socket.
func (c *Client) Available() bool {
	conn, err := net.DialTimeout("unix", c.path, time.Second)
	if err != nil {
		return false
	}
	_ = conn.Close() // a probe: nothing was sent on it
	return true
}

// Get fetches a JSON answer (status, live, health) into v.
func (c *Client) Get(ctx context.Context, name string, v any) error {
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, "http://leqnode/"+name, nil)
	if err != nil {
		return fmt.Errorf("control socket %s: %w", c.path, err)
	}
	return c.do(req, v)
}

// Calibrate asks the daemon to take the next stable calibrator tone of the given level.
func (c *Client) Calibrate(ctx context.Context, reference float64, v any) error {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, "http://leqnode/calibrate?reference="+strconv.FormatFloat(reference, 'f', -1, 64), nil)
	if err != nil {
		return fmt.Errorf("control socket %s: %w", c.path, err)
	}
	return c.do(req, v)
}

func (c *Client) do(req *http.Request, v any) error {
	resp, err := c.hc.Do(req)
	if err != nil {
		return fmt.Errorf("control socket %s: %w", c.path, err)
	}
	defer closeBody(resp.Body)
	if resp.StatusCode != http.StatusOK {
		b, err := io.ReadAll(io.LimitReader(resp.Body, 4096))
		if err != nil {
			return fmt.Errorf("control socket %s: %s, and the answer was cut off: %w", c.path, resp.Status, err)
		}
		return fmt.Errorf("control socket %s: %s", c.path, strings.TrimSpace(string(b)))
	}
	return json.NewDecoder(resp.Body).Decode(v)
}
