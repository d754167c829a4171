package web_test

import (
	"bufio"
	"context"
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/web"
)

// The live stream sends level events at the configured interval and a second event for each
// new second record, also when several arrive between two ticks.
func TestLive(t *testing.T) {
	st := openStore(t)
	fillHistory(t, st, time.Now(), false)
	s := newServer(t, web.Options{Store: st, Now: time.Now, LiveInterval: 100 * time.Millisecond,
		Live: func() web.Live { return web.Live{LAF: 61.234, At: time.Now()} }})
	ts := httptest.NewServer(s.Handler())
	defer ts.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	req, _ := http.NewRequestWithContext(ctx, http.MethodGet, ts.URL+"/api/live", nil)
	res, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	if ct := res.Header.Get("Content-Type"); ct != "text/event-stream" {
		t.Fatalf("Content-Type %q", ct)
	}
	sc := bufio.NewScanner(res.Body)
	var levels, seconds int
	var name string
	appended := false
	for sc.Scan() && (levels < 8 || seconds < 3) {
		line := sc.Text()
		switch {
		case strings.HasPrefix(line, "event: "):
			name = strings.TrimPrefix(line, "event: ")
		case strings.HasPrefix(line, "data: "):
			data := strings.TrimPrefix(line, "data: ")
			switch name {
			case "level":
				var l struct {
					Time string   `json:"time"`
					LAF  *float64 `json:"LAF"`
				}
				if err := json.Unmarshal([]byte(data), &l); err != nil || l.LAF == nil || *l.LAF != 61.23 {
					t.Fatalf("level event %q: %v", data, err)
				}
				levels++
			case "second":
				var sec struct {
					LAeq *float64 `json:"LAeq"`
				}
				if err := json.Unmarshal([]byte(data), &sec); err != nil || sec.LAeq == nil || *sec.LAeq != 70.5 {
					t.Fatalf("second event %q: %v", data, err)
				}
				seconds++
			}
		}
		if levels == 3 && !appended {
			appended = true
			for i := range 3 { // three at once: each gets its own event
				if _, err := st.Append(&record.Second{Start: time.Now().Truncate(time.Second).Add(time.Duration(i) * time.Second),
					Duration: time.Second, LAeq: 70.5}); err != nil {
					t.Fatal(err)
				}
			}
		}
	}
	if levels < 8 || seconds != 3 {
		t.Fatalf("%d level and %d second events: %v", levels, seconds, sc.Err())
	}
}

// The live stream admits MaxLiveClients at once and refuses more with 503.
func TestLiveLimit(t *testing.T) {
	s := newServer(t, web.Options{MaxLiveClients: 1, Live: func() web.Live { return web.Live{LAF: 50, At: time.Now()} }})
	ts := httptest.NewServer(s.Handler())
	defer ts.Close()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	req, _ := http.NewRequestWithContext(ctx, http.MethodGet, ts.URL+"/api/live", nil)
	first, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer first.Body.Close()
	bufio.NewReader(first.Body).ReadString('\n') // the stream is open
	second, err := http.Get(ts.URL + "/api/live")
	if err != nil {
		t.Fatal(err)
	}
	second.Body.Close()
	if second.StatusCode != http.StatusServiceUnavailable || second.Header.Get("Retry-After") == "" {
		t.Errorf("second client: status %d, Retry-After %q", second.StatusCode, second.Header.Get("Retry-After"))
	}
}
