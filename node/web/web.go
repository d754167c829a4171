package web

import (
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"crypto/subtle"
	"embed"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"net"
	"net/http"
	"strconv"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"github.com/leqnode/leqnode/buffer"
)

// DefaultAddr is where the server listens when Options.Addr is empty: the loopback interface
// only.
const DefaultAddr = "127.0.0.1:8080"

// Options set up a Server. Every field is optional; without a store the history endpoints
// answer with empty lists.
type Options struct {
	// Addr is the TCP address to listen on, host:port. Empty means DefaultAddr.
	//
	// Danger: a host other than a loopback address (or an empty host, ":8080") serves the page
	// to the whole network. Set Token as well, and reach the node through an SSH tunnel or a
	// TLS proxy: the server itself speaks plain HTTP.
	Addr string

	// Token, when set, is required on every request: as "Authorization: Bearer TOKEN", or as
	// "?token=TOKEN" once, after which a cookie (derived from the token, HttpOnly, SameSite
	// Strict) carries the access for the page's own requests.
	//
	// Danger: over plain HTTP the token and the cookie travel in clear text and anyone on the
	// network path can read them. The token keeps out the casual visitor, not an attacker on
	// the link. The server never logs it.
	Token string

	// Store is the node's store: the history shown (last hour of seconds, latest spectrum,
	// calibration checks, health snapshots, gaps) and the store's size.
	Store *buffer.Store

	// Live returns the current A-weighted Fast level; nil sends no levels. The daemon reads
	// it from the running node's counters.
	Live func() Live
	// LiveInterval is the time between live level events on /api/live. Default 200 ms (five
	// a second); at least 50 ms.
	//
	// Trade-off: each connected page costs one small write per interval; a phone on a poor
	// link keeps up with 200 ms comfortably.
	LiveInterval time.Duration
	// MaxLiveClients caps the pages connected to /api/live at once; a page beyond the cap
	// gets 503 and retries. Default 8, which a small board serves without noticing.
	MaxLiveClients int

	// Status returns what only the running node knows. It is called once per request to
	// /api/status, /api/health, /api/calibrations and /metrics, from the request's goroutine,
	// and must be safe for concurrent use. nil shows only what the store knows.
	Status func() Status

	// Logger receives the server's logs; nil means slog.Default(). Requests are logged at
	// debug level without their query strings, so a token given as ?token= is never logged.
	Logger *slog.Logger

	// Now is the clock (default time.Now); tests inject their own.
	Now func() time.Time
}

//go:embed assets
var assetFS embed.FS

// Server serves the status page, the JSON endpoints and the metrics. Create one with New.
type Server struct {
	o        Options
	log      *slog.Logger
	handler  http.Handler
	registry *prometheus.Registry
	cookie   string        // the cookie value that stands for the token
	live     chan struct{} // a semaphore: one slot per live client
}

// cookieName is the name of the access cookie.
const cookieName = "leqnode_access"

// New checks o and returns a Server. It does not listen: Run does.
func New(o Options) (*Server, error) {
	if o.Addr == "" {
		o.Addr = DefaultAddr
	}
	if _, _, err := net.SplitHostPort(o.Addr); err != nil {
		return nil, fmt.Errorf("web: address %q: %w (give host:port, e.g. %s)", o.Addr, err, DefaultAddr)
	}
	if o.Token != "" && (len(o.Token) < 8 || strings.ContainsAny(o.Token, " \t\r\n")) {
		return nil, errors.New("web: the access token must be at least 8 characters without spaces (generate one with: openssl rand -hex 16)")
	}
	if o.LiveInterval == 0 {
		o.LiveInterval = 200 * time.Millisecond
	}
	o.LiveInterval = max(o.LiveInterval, 50*time.Millisecond)
	if o.MaxLiveClients <= 0 {
		o.MaxLiveClients = 8
	}
	if o.Logger == nil {
		o.Logger = slog.Default()
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	s := &Server{o: o, log: o.Logger, live: make(chan struct{}, o.MaxLiveClients)}
	if o.Token != "" {
		m := hmac.New(sha256.New, []byte(o.Token))
		m.Write([]byte("leqnode status page cookie"))
		s.cookie = hex.EncodeToString(m.Sum(nil))
	}
	reg, err := s.newRegistry()
	if err != nil {
		return nil, fmt.Errorf("web: metrics: %w", err)
	}
	s.registry = reg
	s.handler = s.routes()
	return s, nil
}

// Handler returns the server's handler: method check, access check, then the routes.
func (s *Server) Handler() http.Handler { return s.handler }

// Run listens on Options.Addr and serves until ctx ends. It returns nil after a clean
// shutdown.
func (s *Server) Run(ctx context.Context) error {
	var lc net.ListenConfig
	ln, err := lc.Listen(ctx, "tcp", s.o.Addr)
	if err != nil {
		return fmt.Errorf("web: listening on %s: %w (choose a free port with the address setting)", s.o.Addr, err)
	}
	return s.Serve(ctx, ln)
}

// Serve serves on ln until ctx ends, then closes ln. Open connections get 5 s to finish;
// live streams end at once.
func (s *Server) Serve(ctx context.Context, ln net.Listener) error {
	addr := ln.Addr().String()
	s.warnAccess(addr)
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	hs := &http.Server{
		Handler:           s.handler,
		ReadHeaderTimeout: 10 * time.Second,
		ReadTimeout:       30 * time.Second,
		IdleTimeout:       120 * time.Second,
		MaxHeaderBytes:    16 << 10,
		BaseContext:       func(net.Listener) context.Context { return ctx },
		ErrorLog:          slog.NewLogLogger(s.log.Handler(), slog.LevelDebug),
	}
	errc := make(chan error, 1)
	go func() { errc <- hs.Serve(ln) }()
	s.log.Info("status page serving", "url", "http://"+addr+"/", "token", s.o.Token != "")
	select {
	case err := <-errc:
		return fmt.Errorf("web: serving on %s: %w", addr, err)
	case <-ctx.Done():
	}
	sctx, scancel := context.WithTimeout(context.WithoutCancel(ctx), 5*time.Second)
	defer scancel()
	err := hs.Shutdown(sctx)
	<-errc
	if err != nil {
		return fmt.Errorf("web: shutting down: %w", err)
	}
	return nil
}

// warnAccess logs what the address and token mean for who can read the page.
func (s *Server) warnAccess(addr string) {
	host, _, _ := net.SplitHostPort(addr)
	ip := net.ParseIP(host)
	loopback := host == "localhost" || ip != nil && ip.IsLoopback()
	switch {
	case !loopback && s.o.Token == "":
		s.log.Warn("the status page is served beyond this machine without an access token: anyone on the network can read it; set a token, or bind to 127.0.0.1 and use an SSH tunnel", "addr", addr)
	case s.o.Token != "":
		s.log.Warn("the access token travels in clear text over plain HTTP and can be read on the network: reach the page through an SSH tunnel or a TLS proxy", "addr", addr)
	}
}

// routes builds the handler tree.
func (s *Server) routes() http.Handler {
	mux := http.NewServeMux()
	assets, _ := fs.Sub(assetFS, "assets")
	mux.HandleFunc("GET /assets/{name...}", func(w http.ResponseWriter, r *http.Request) {
		name := r.PathValue("name")
		if fi, err := fs.Stat(assets, name); !fs.ValidPath(name) || err != nil || fi.IsDir() {
			writeError(w, http.StatusNotFound, "no such asset "+strconv.Quote(name))
			return
		}
		http.ServeFileFS(w, r, assets, name)
	})
	mux.HandleFunc("GET /{$}", func(w http.ResponseWriter, r *http.Request) {
		http.ServeFileFS(w, r, assets, "index.html")
	})
	mux.HandleFunc("GET /favicon.ico", func(w http.ResponseWriter, r *http.Request) {
		http.ServeFileFS(w, r, assets, "icon.svg")
	})
	mux.HandleFunc("GET /api/status", s.apiStatus)
	mux.HandleFunc("GET /api/seconds", s.apiSeconds)
	mux.HandleFunc("GET /api/spectrum", s.apiSpectrum)
	mux.HandleFunc("GET /api/calibrations", s.apiCalibrations)
	mux.HandleFunc("GET /api/health", s.apiHealth)
	mux.HandleFunc("GET /api/live", s.apiLive)
	mux.Handle("GET /metrics", s.metricsHandler())
	mux.HandleFunc("/", func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotFound, fmt.Sprintf("no such page %s: see / for the status page and /api/status for JSON", r.URL.Path))
	})
	return s.guard(mux)
}

// securityHeaders apply to every response: nothing outside the node may be loaded, the page
// may not be framed, and nothing is sniffed.
func securityHeaders(h http.Header) {
	h.Set("Content-Security-Policy", "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'")
	h.Set("X-Content-Type-Options", "nosniff")
	h.Set("X-Frame-Options", "DENY")
	h.Set("Referrer-Policy", "no-referrer")
}

// guard applies the read-only rule and the access check, and logs each request.
func (s *Server) guard(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		start := time.Now()
		rec := &statusRecorder{ResponseWriter: w, code: http.StatusOK}
		securityHeaders(w.Header())
		defer func() {
			// The path only: a query string may carry the token.
			s.log.Debug("web request", "method", r.Method, "path", r.URL.Path, "status", rec.code,
				"duration", time.Since(start).Round(time.Microsecond), "remote", r.RemoteAddr)
		}()
		if r.Method != http.MethodGet && r.Method != http.MethodHead {
			w.Header().Set("Allow", "GET, HEAD")
			writeError(rec, http.StatusMethodNotAllowed, fmt.Sprintf("%s %s: the status page is read-only; use GET", r.Method, r.URL.Path))
			return
		}
		if s.o.Token != "" {
			switch s.access(rec, r) {
			case denied:
				w.Header().Set("WWW-Authenticate", `Bearer realm="leqnode"`)
				writeError(rec, http.StatusUnauthorized, "access token required: send \"Authorization: Bearer TOKEN\" or open the page once with ?token=TOKEN")
				return
			case redirected:
				return
			}
		}
		next.ServeHTTP(rec, r)
	})
}

// accessResult is the outcome of the access check.
type accessResult int

const (
	denied     accessResult = iota
	granted                 // serve the request
	redirected              // answered with a redirect that drops the token from the URL
)

// access checks the bearer header, the token query parameter and the cookie, in constant
// time. A valid ?token= sets the cookie; on the page itself it also redirects to the same URL
// without the token, so that it does not stay in the address bar or the history.
func (s *Server) access(w http.ResponseWriter, r *http.Request) accessResult {
	same := func(a, b string) bool { return subtle.ConstantTimeCompare([]byte(a), []byte(b)) == 1 }
	if h := r.Header.Get("Authorization"); h != "" {
		scheme, tok, ok := strings.Cut(h, " ")
		if ok && strings.EqualFold(scheme, "Bearer") && same(strings.TrimSpace(tok), s.o.Token) {
			return granted
		}
		return denied
	}
	if c, err := r.Cookie(cookieName); err == nil && same(c.Value, s.cookie) {
		return granted
	}
	q := r.URL.Query()
	if !q.Has("token") || !same(q.Get("token"), s.o.Token) {
		return denied
	}
	http.SetCookie(w, &http.Cookie{Name: cookieName, Value: s.cookie, Path: "/", HttpOnly: true, SameSite: http.SameSiteStrictMode})
	if r.URL.Path == "/" && r.Method == http.MethodGet {
		q.Del("token")
		u := *r.URL
		u.RawQuery = q.Encode()
		http.Redirect(w, r, u.RequestURI(), http.StatusSeeOther)
		return redirected
	}
	return granted
}

// statusRecorder remembers the status code for the request log. It passes Flush and the
// other optional interfaces through Unwrap (http.ResponseController).
type statusRecorder struct {
	http.ResponseWriter
	code    int
	written bool
}

func (r *statusRecorder) WriteHeader(code int) {
	if !r.written {
		r.code, r.written = code, true
	}
	r.ResponseWriter.WriteHeader(code)
}

func (r *statusRecorder) Write(b []byte) (int, error) {
	r.written = true
	return r.ResponseWriter.Write(b)
}

func (r *statusRecorder) Unwrap() http.ResponseWriter { return r.ResponseWriter }
