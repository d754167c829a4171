package web_test

import (
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"net/url"
	"testing"

	"github.com/leqnode/leqnode/node/web"
)

// FuzzRequest sends arbitrary paths and query strings, with and without a token: the server
// answers every one with a known status, never panics, and every JSON answer parses.
func FuzzRequest(f *testing.F) {
	for _, seed := range []string{
		"/api/seconds?minutes=60", "/api/seconds?minutes=", "/api/seconds?minutes=-1", "/api/seconds?minutes=9999999999999999999999",
		"/api/status?token=x", "/?token=%00", "/assets/../web.go", "/assets/", "/api/spectrum?x=%zz", "/metrics?name[]=1",
		"/api/calibrations", "/api/health", "//api//status", "/api/seconds?minutes=1&minutes=2",
	} {
		f.Add(seed, false)
		f.Add(seed, true)
	}
	st := openStore(f)
	fillHistory(f, st, testNow(), true)
	plain, err := web.New(web.Options{Store: st, Now: testNow})
	if err != nil {
		f.Fatal(err)
	}
	guarded, err := web.New(web.Options{Store: st, Now: testNow, Token: "fuzz-token-123"})
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, target string, token bool) {
		u, err := url.ParseRequestURI(target)
		if err != nil || u.Path == "/api/live" {
			return
		}
		s := plain
		if token {
			s = guarded
		}
		req := httptest.NewRequest(http.MethodGet, "/", nil)
		req.URL = u
		req.RequestURI = target
		rec := httptest.NewRecorder()
		s.Handler().ServeHTTP(rec, req)
		switch rec.Code {
		case http.StatusOK, http.StatusBadRequest, http.StatusNotFound, http.StatusUnauthorized,
			http.StatusSeeOther, http.StatusMovedPermanently, http.StatusTemporaryRedirect:
		default:
			t.Fatalf("%q: status %d", target, rec.Code)
		}
		if rec.Header().Get("Content-Type") == "application/json; charset=utf-8" && rec.Header().Get("Content-Encoding") == "" {
			var v any
			if err := json.Unmarshal(rec.Body.Bytes(), &v); err != nil {
				t.Fatalf("%q: invalid JSON %q: %v", target, rec.Body.Bytes(), err)
			}
		}
	})
}
