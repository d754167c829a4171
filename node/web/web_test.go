package web_test

import (
	"context"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
	"github.com/leqnode/leqnode/node/web"
)

// endpoints lists every path the server answers, for the access and method tests.
func endpoints() []string {
	return []string{"/", "/assets/app.js", "/assets/style.css", "/assets/icon.svg", "/favicon.ico",
		"/api/status", "/api/seconds", "/api/seconds?minutes=5", "/api/spectrum", "/api/calibrations",
		"/api/health", "/api/live", "/metrics"}
}

func newServer(t testing.TB, o web.Options) *web.Server {
	t.Helper()
	if o.Now == nil {
		o.Now = testNow
	}
	s, err := web.New(o)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// Every endpoint is read-only: any method but GET and HEAD gets 405 and an Allow header,
// with or without a token, and nothing in the store changes.
func TestReadOnly(t *testing.T) {
	st := openStore(t)
	fillHistory(t, st, testNow(), true)
	before, err := st.Stats()
	if err != nil {
		t.Fatal(err)
	}
	for _, token := range []string{"", "harrowby-lane-7f3a"} {
		s := newServer(t, web.Options{Store: st, Token: token})
		for _, path := range append(endpoints(), "/no/such/page") {
			for _, method := range []string{http.MethodPost, http.MethodPut, http.MethodDelete, http.MethodPatch,
				http.MethodOptions, "PROPFIND"} {
				res, body := get(t, s.Handler(), method, path, "Authorization", "Bearer "+token)
				if res.StatusCode != http.StatusMethodNotAllowed {
					t.Errorf("token %q: %s %s: status %d, want 405", token, method, path, res.StatusCode)
				}
				if got := res.Header.Get("Allow"); got != "GET, HEAD" {
					t.Errorf("%s %s: Allow %q", method, path, got)
				}
				if !strings.Contains(string(body), "read-only") {
					t.Errorf("%s %s: body %q does not say why", method, path, body)
				}
			}
		}
	}
	after, err := st.Stats()
	if err != nil {
		t.Fatal(err)
	}
	for _, k := range record.Kinds() {
		if before.Kinds[k].Count != after.Kinds[k].Count || before.Kinds[k].LastSeq != after.Kinds[k].LastSeq {
			t.Errorf("kind %s changed: %+v -> %+v", k, before.Kinds[k], after.Kinds[k])
		}
	}
}

// GET and HEAD work on every endpoint without a token set. /api/live is checked with HEAD
// here (GET streams) and with GET in TestLive.
func TestEndpointsAnswer(t *testing.T) {
	st := openStore(t)
	fillHistory(t, st, testNow(), true)
	s := newServer(t, web.Options{Store: st})
	ts := httptest.NewServer(s.Handler())
	defer ts.Close()
	for _, path := range endpoints() {
		for _, method := range []string{http.MethodGet, http.MethodHead} {
			if path == "/api/live" && method == http.MethodGet {
				continue
			}
			req, _ := http.NewRequest(method, ts.URL+path, nil)
			res, err := http.DefaultClient.Do(req)
			if err != nil {
				t.Fatal(err)
			}
			body, _ := io.ReadAll(res.Body)
			res.Body.Close()
			if res.StatusCode != http.StatusOK {
				t.Errorf("%s %s: status %d: %s", method, path, res.StatusCode, body)
			}
			if method == http.MethodHead && len(body) != 0 {
				t.Errorf("HEAD %s: %d bytes of body", path, len(body))
			}
			if csp := res.Header.Get("Content-Security-Policy"); !strings.Contains(csp, "default-src 'none'") {
				t.Errorf("%s: Content-Security-Policy %q", path, csp)
			}
		}
	}
	res, body := get(t, s.Handler(), http.MethodGet, "/no/such/page")
	if res.StatusCode != http.StatusNotFound || !strings.Contains(string(body), "/api/status") {
		t.Errorf("unknown page: %d %s", res.StatusCode, body)
	}
	// No directory listing of the assets.
	if res, _ := get(t, s.Handler(), http.MethodGet, "/assets/"); res.StatusCode != http.StatusNotFound {
		t.Errorf("/assets/: status %d, want 404", res.StatusCode)
	}
}

// The page refers to nothing outside the node: no URL with a scheme or a protocol-relative
// one in the embedded HTML, script or style.
func TestAssetsSelfContained(t *testing.T) {
	s := newServer(t, web.Options{})
	for _, path := range []string{"/", "/assets/app.js", "/assets/style.css"} {
		_, body := get(t, s.Handler(), http.MethodGet, path)
		b := string(body)
		for _, bad := range []string{"http://", "https://", "//cdn", "@import", "url(", "@font-face"} {
			if strings.Contains(b, bad) {
				t.Errorf("%s contains %q", path, bad)
			}
		}
	}
	_, page := get(t, s.Handler(), http.MethodGet, "/")
	for _, want := range []string{"indicative", "hearing", "SSH tunnel", `name="viewport"`} {
		if !strings.Contains(string(page), want) {
			t.Errorf("page lacks %q", want)
		}
	}
}

func TestAccessToken(t *testing.T) {
	const token = "wendle-cross-0a9d4c"
	st := openStore(t)
	fillHistory(t, st, testNow(), true)
	var logs testrig.SyncBuffer
	s := newServer(t, web.Options{Store: st, Token: token, Logger: debugLogger(&logs)})
	h := s.Handler()
	for _, path := range endpoints() {
		if res, _ := get(t, h, http.MethodGet, path); res.StatusCode != http.StatusUnauthorized {
			t.Errorf("GET %s without a token: status %d, want 401", path, res.StatusCode)
		} else if !strings.HasPrefix(res.Header.Get("WWW-Authenticate"), "Bearer") {
			t.Errorf("GET %s: WWW-Authenticate %q", path, res.Header.Get("WWW-Authenticate"))
		}
		for _, wrong := range []string{"Bearer " + token + "x", "Bearer " + token[:len(token)-1], "Basic " + token, token} {
			if res, _ := get(t, h, http.MethodGet, path, "Authorization", wrong); res.StatusCode != http.StatusUnauthorized {
				t.Errorf("GET %s with %q: status %d, want 401", path, wrong, res.StatusCode)
			}
		}
		if res, _ := get(t, h, http.MethodGet, path+sep(path)+"token=nope-nope-nope"); res.StatusCode != http.StatusUnauthorized {
			t.Errorf("GET %s with a wrong ?token: status %d", path, res.StatusCode)
		}
		if path == "/api/live" {
			continue // streams; its access is checked with HEAD below
		}
		if res, body := get(t, h, http.MethodGet, path, "Authorization", "Bearer "+token); res.StatusCode != http.StatusOK {
			t.Errorf("GET %s with the token: status %d: %s", path, res.StatusCode, body)
		}
	}
	if res, _ := get(t, h, http.MethodHead, "/api/live", "Authorization", "Bearer "+token); res.StatusCode != http.StatusOK {
		t.Errorf("HEAD /api/live with the token: status %d", res.StatusCode)
	}

	// ?token= on the page sets the cookie and redirects to the URL without the token.
	res, _ := get(t, h, http.MethodGet, "/?token="+token)
	if res.StatusCode != http.StatusSeeOther || strings.Contains(res.Header.Get("Location"), token) {
		t.Fatalf("GET /?token=: status %d, Location %q", res.StatusCode, res.Header.Get("Location"))
	}
	cookies := res.Cookies()
	if len(cookies) != 1 || !cookies[0].HttpOnly || cookies[0].SameSite != http.SameSiteStrictMode || strings.Contains(cookies[0].Value, token) {
		t.Fatalf("cookies %+v: want one HttpOnly, SameSite=Strict cookie that does not hold the token", cookies)
	}
	c := cookies[0]
	if res, _ := get(t, h, http.MethodGet, "/api/status", "Cookie", c.Name+"="+c.Value); res.StatusCode != http.StatusOK {
		t.Errorf("GET /api/status with the cookie: status %d", res.StatusCode)
	}
	if res, _ := get(t, h, http.MethodGet, "/api/status", "Cookie", c.Name+"="+c.Value+"0"); res.StatusCode != http.StatusUnauthorized {
		t.Errorf("GET /api/status with a wrong cookie: status %d", res.StatusCode)
	}
	if res, _ := get(t, h, http.MethodGet, "/api/status?token="+token); res.StatusCode != http.StatusOK {
		t.Errorf("GET /api/status?token=: status %d", res.StatusCode)
	}
	// The status says a token is in use, so the page can warn about plain HTTP.
	_, body := get(t, h, http.MethodGet, "/api/status", "Authorization", "Bearer "+token)
	var stat web.Status
	decode(t, body, &stat)
	if !stat.TokenRequired {
		t.Error("status: token_required is false")
	}
	if strings.Contains(logs.String(), token) || strings.Contains(logs.String(), c.Value) {
		t.Errorf("the logs hold the token or the cookie:\n%s", logs.String())
	}
	if !strings.Contains(logs.String(), "path=/api/status") {
		t.Errorf("requests are not logged at debug level:\n%s", logs.String())
	}
}

func sep(path string) string {
	if strings.Contains(path, "?") {
		return "&"
	}
	return "?"
}

func TestNewRejects(t *testing.T) {
	for _, o := range []web.Options{
		{Addr: "8080"},
		{Addr: "localhost"},
		{Token: "short"},
		{Token: "has a space in it"},
	} {
		if _, err := web.New(o); err == nil {
			t.Errorf("New(%+v): no error", o)
		} else if strings.Contains(err.Error(), "\n") {
			t.Errorf("New(%+v): error of several lines: %v", o, err)
		}
	}
}

// Run serves on its address until the context ends, and warns that a token travels in clear
// text over plain HTTP. (The warning for an address beyond loopback is checked in
// TestWarnAccess without binding one: tests talk to loopback only.)
func TestRunAndWarnings(t *testing.T) {
	for _, tc := range []struct {
		addr, token, warn string
	}{
		{"127.0.0.1:0", "", ""},
		{"127.0.0.1:0", "harrowby-lane-7f3a", "clear text"},
	} {
		var logs testrig.SyncBuffer
		s := newServer(t, web.Options{Addr: tc.addr, Token: tc.token, Logger: debugLogger(&logs)})
		ctx, cancel := context.WithCancel(context.Background())
		done := make(chan error, 1)
		go func() { done <- s.Run(ctx) }()
		var addr string
		for i := 0; i < 200 && addr == ""; i++ {
			time.Sleep(10 * time.Millisecond)
			if _, rest, ok := strings.Cut(logs.String(), "url=http://"); ok {
				addr, _, _ = strings.Cut(rest, "/")
			}
		}
		if addr == "" {
			cancel()
			t.Fatalf("%s: no serving line in the logs:\n%s", tc.addr, logs.String())
		}
		u := url.URL{Scheme: "http", Host: addr, Path: "/api/status"}
		req, _ := http.NewRequest(http.MethodGet, u.String(), nil)
		req.Header.Set("Authorization", "Bearer "+tc.token)
		res, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		if res.StatusCode != http.StatusOK {
			t.Errorf("%s: status %d", tc.addr, res.StatusCode)
		}
		cancel()
		if err := <-done; err != nil {
			t.Errorf("Run: %v", err)
		}
		l := logs.String()
		if tc.warn != "" && !strings.Contains(l, "level=WARN") || tc.warn != "" && !strings.Contains(l, tc.warn) {
			t.Errorf("%s token %v: no warning %q:\n%s", tc.addr, tc.token != "", tc.warn, l)
		}
		if tc.warn == "" && strings.Contains(l, "level=WARN") {
			t.Errorf("%s: unexpected warning:\n%s", tc.addr, l)
		}
		if tc.token != "" && strings.Contains(l, tc.token) {
			t.Errorf("the token is in the logs:\n%s", l)
		}
	}
	// A port in use is a one-line error naming the address.
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	s := newServer(t, web.Options{Addr: ln.Addr().String()})
	err = s.Run(context.Background())
	if err == nil || !strings.Contains(err.Error(), ln.Addr().String()) || strings.Contains(err.Error(), "\n") {
		t.Errorf("Run on a busy port: %v", err)
	}
}
