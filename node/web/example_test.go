package web_test

import (
	"fmt"
	"log"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/node/web"
)

// A status server over a store, with the node's own knowledge passed in as Status. The lead
// program passes web.LiveFrom(&n.Counters) as Live and calls Run with the daemon's context.
func ExampleNew() {
	dir, err := os.MkdirTemp("", "leqnode-web")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	st, err := buffer.Open(filepath.Join(dir, "node.db"), nil)
	if err != nil {
		log.Fatal(err)
	}
	defer st.Close()
	now := time.Now().Truncate(time.Second)
	st.Append(&buffer.Second{Start: now.Add(-time.Second), Duration: time.Second, LAeq: 58.37, LAFmax: 61.2, LAFmin: 55.9})

	srv, err := web.New(web.Options{
		Store: st,
		Live:  func() web.Live { return web.Live{LAF: 58.1, At: time.Now()} },
		Status: func() web.Status {
			return web.Status{NodeID: "wc-mill-row-01", Site: "Mill Row, Wendle Cross (invented)"}
		},
	})
	if err != nil {
		log.Fatal(err)
	}
	// In the daemon: go srv.Run(ctx). Here the handler answers one request.
	rec := httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, httptest.NewRequest(http.MethodGet, "/api/seconds?minutes=1", nil))
	fmt.Println(rec.Code, rec.Header().Get("Content-Type"))

	rec = httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, httptest.NewRequest(http.MethodPost, "/api/status", nil))
	fmt.Println(rec.Code, rec.Header().Get("Allow"))
	// Output:
	// 200 application/json; charset=utf-8
	// 405 GET, HEAD
}
