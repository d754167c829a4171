package web_test

import (
	"net/http"
	"testing"

	"github.com/leqnode/leqnode/node/web"
)

// benchServer returns a server over a store holding 50 minutes of seconds with spectra,
// the worst case a page or a scraper reads.
func benchServer(b *testing.B) *web.Server {
	b.Helper()
	st := openStore(b)
	fillHistory(b, st, testNow(), true)
	s, err := web.New(web.Options{Store: st, Now: testNow, Status: func() web.Status {
		return web.Status{NodeID: "wc-harrowby-02", Counters: &web.Counters{Seconds: 3000}}
	}})
	if err != nil {
		b.Fatal(err)
	}
	return s
}

// BenchmarkEndpoints measures one request to each endpoint a page or a scraper polls, with
// the store's records held in memory and committed (both paths of Store.Range).
func BenchmarkEndpoints(b *testing.B) {
	s := benchServer(b)
	for _, path := range []string{"/api/seconds?minutes=60", "/api/health", "/api/spectrum", "/api/status", "/metrics"} {
		b.Run(path, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				res, body := get(b, s.Handler(), http.MethodGet, path, "Accept-Encoding", "gzip")
				if res.StatusCode != http.StatusOK {
					b.Fatalf("%s: %d", path, res.StatusCode)
				}
				b.SetBytes(int64(len(body)))
			}
		})
	}
}
