package web_test

import (
	"bufio"
	"context"
	"encoding/json"
	"io"
	"math"
	"net"
	"net/http"
	"net/http/httptest"
	"net/url"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
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
	var logs logBuffer
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

func TestSeconds(t *testing.T) {
	st := openStore(t)
	hist := fillHistory(t, st, testNow(), true)
	s := newServer(t, web.Options{Store: st})
	type seconds struct {
		From, To string
		Seconds  []struct {
			Start  string   `json:"start"`
			LAeq   *float64 `json:"LAeq"`
			LAFmax *float64 `json:"LAFmax"`
			Flags  []string `json:"flags"`
		}
	}
	for _, tc := range []struct {
		query string
		want  int
	}{
		{"", hist.seconds}, // default: the last hour holds all 50 stored minutes
		{"?minutes=60", hist.seconds},
		{"?minutes=10", 600},
		{"?minutes=1", 60},
		{"?minutes=180", hist.seconds},
	} {
		res, body := get(t, s.Handler(), http.MethodGet, "/api/seconds"+tc.query)
		if res.StatusCode != http.StatusOK {
			t.Fatalf("%s: %d %s", tc.query, res.StatusCode, body)
		}
		var got seconds
		decode(t, body, &got)
		if len(got.Seconds) != tc.want {
			t.Errorf("%s: %d seconds, want %d", tc.query, len(got.Seconds), tc.want)
			continue
		}
		last := got.Seconds[len(got.Seconds)-1]
		if last.Start != hist.last.Format("2006-01-02T15:04:05.000Z07:00") || last.LAeq == nil || *last.LAeq != hist.lastLAeq {
			t.Errorf("%s: last second %+v, want %s LAeq %v", tc.query, last, hist.last, hist.lastLAeq)
		}
		if !slices.IsSortedFunc(got.Seconds, func(a, b struct {
			Start  string   `json:"start"`
			LAeq   *float64 `json:"LAeq"`
			LAFmax *float64 `json:"LAFmax"`
			Flags  []string `json:"flags"`
		}) int {
			return strings.Compare(a.Start, b.Start)
		}) {
			t.Errorf("%s: seconds out of time order", tc.query)
		}
	}
	// "+5" and " 5" passed strconv.Atoi; only decimal digits are a number here (issue 20).
	for _, bad := range []string{"0", "181", "-3", "ten", "1e3", strings.Repeat("9", 40), "+5", "%205", "05%00", ""} {
		res, body := get(t, s.Handler(), http.MethodGet, "/api/seconds?minutes="+bad)
		var e struct{ Error string }
		decode(t, body, &e)
		if res.StatusCode != http.StatusBadRequest || !strings.Contains(e.Error, "minutes=") || !strings.Contains(e.Error, "1 to 180") {
			t.Errorf("minutes=%s: %d %q", bad, res.StatusCode, e.Error)
		}
	}
	// A parameter given twice is refused: net/url's Get took the first.
	res, body := get(t, s.Handler(), http.MethodGet, "/api/seconds?minutes=1&minutes=999")
	var e struct{ Error string }
	decode(t, body, &e)
	if res.StatusCode != http.StatusBadRequest || !strings.Contains(e.Error, "minutes is given 2 times") {
		t.Errorf("minutes given twice: %d %q", res.StatusCode, e.Error)
	}
	// Large answers are compressed for clients that accept it.
	res, _ = get(t, s.Handler(), http.MethodGet, "/api/seconds", "Accept-Encoding", "gzip")
	if res.Header.Get("Content-Encoding") != "gzip" {
		t.Errorf("Content-Encoding %q, want gzip", res.Header.Get("Content-Encoding"))
	}
}

func TestSpectrum(t *testing.T) {
	// Nominal midband frequencies of the one-third-octave bands from band -16 to band 13:
	// IEC 61260-1:2014 Annex E (Table E.1), written out here.
	nominal := []string{"25", "31.5", "40", "50", "63", "80", "100", "125", "160", "200", "250", "315", "400",
		"500", "630", "800", "1000", "1250", "1600", "2000", "2500", "3150", "4000", "5000", "6300", "8000",
		"10000", "12500", "16000", "20000"}
	type spectrum struct {
		Record string `json:"record"`
		Bands  []struct {
			Nominal string   `json:"nominal_hz"`
			LZeq    *float64 `json:"LZeq"`
		} `json:"third_octave_LZeq"`
	}
	for _, tc := range []struct {
		name    string
		spectra bool // second records carry spectra
		record  string
		first   float64 // expected level of the first band
	}{
		{"second spectra", true, "second", -1},
		{"minute spectra only", false, "minute", 60},
	} {
		t.Run(tc.name, func(t *testing.T) {
			st := openStore(t)
			hist := fillHistory(t, st, testNow(), tc.spectra)
			s := newServer(t, web.Options{Store: st})
			_, body := get(t, s.Handler(), http.MethodGet, "/api/spectrum")
			var sp spectrum
			decode(t, body, &sp)
			if sp.Record != tc.record || len(sp.Bands) != hist.bands {
				t.Fatalf("record %q with %d bands, want %q with %d", sp.Record, len(sp.Bands), tc.record, hist.bands)
			}
			for i, b := range sp.Bands {
				if b.Nominal != nominal[i] {
					t.Errorf("band %d named %q, want %q", i, b.Nominal, nominal[i])
				}
			}
			want := tc.first
			if want < 0 {
				want = math.Round((hist.lastLAeq+6-0.4*12)*100) / 100
			}
			if sp.Bands[0].LZeq == nil || math.Abs(*sp.Bands[0].LZeq-want) > 0.011 {
				t.Errorf("first band %v, want %v", sp.Bands[0].LZeq, want)
			}
		})
	}
	// An empty store answers with no bands rather than an error.
	s := newServer(t, web.Options{Store: openStore(t)})
	res, body := get(t, s.Handler(), http.MethodGet, "/api/spectrum")
	var sp spectrum
	decode(t, body, &sp)
	if res.StatusCode != http.StatusOK || sp.Record != "" || len(sp.Bands) != 0 {
		t.Errorf("empty store: %d %s", res.StatusCode, body)
	}
}

func TestCalibrationsAndHealth(t *testing.T) {
	st := openStore(t)
	hist := fillHistory(t, st, testNow(), true)
	synced := false
	s := newServer(t, web.Options{Store: st, Status: func() web.Status {
		return web.Status{NodeID: "wc-harrowby-02", Started: testNow().Add(-2 * time.Hour),
			Calibration: &web.CalibrationStatus{SensitivityDBFS: -38.31, NominalDBFS: -38, SetAt: testNow().AddDate(0, 0, -10)},
			Counters:    &web.Counters{Seconds: 7200, DroppedSamples: 9600, QueueOverflows: 2},
			ClockSynced: &synced,
		}
	}})
	var cal struct {
		State     *web.CalibrationStatus `json:"state"`
		DaysSince *float64               `json:"days_since_last_check"`
		Checks    []struct {
			Deviation float64 `json:"deviation_dB"`
			OK        bool    `json:"ok"`
		} `json:"checks"`
	}
	_, body := get(t, s.Handler(), http.MethodGet, "/api/calibrations")
	decode(t, body, &cal)
	if cal.State == nil || cal.State.SensitivityDBFS != -38.31 {
		t.Errorf("state %+v", cal.State)
	}
	if len(cal.Checks) != len(hist.calibration) {
		t.Fatalf("%d checks, want %d", len(cal.Checks), len(hist.calibration))
	}
	for i, c := range cal.Checks { // newest first
		if want := hist.calibration[len(hist.calibration)-1-i]; c.Deviation != want {
			t.Errorf("check %d: deviation %v, want %v", i, c.Deviation, want)
		}
	}
	if cal.DaysSince == nil || *cal.DaysSince != 10 {
		t.Errorf("days since the last check: %v, want 10", cal.DaysSince)
	}

	var health struct {
		LastHour struct {
			Seconds        int            `json:"seconds"`
			Expected       int            `json:"expected_seconds"`
			DroppedSamples uint64         `json:"dropped_samples"`
			Flagged        map[string]int `json:"flagged_seconds"`
		} `json:"last_hour"`
		Snapshot *struct {
			Clipped    uint64  `json:"clipped_samples"`
			DiskFreeMB float64 `json:"disk_free_mb"`
			AgeSeconds float64 `json:"age_s"`
		} `json:"snapshot"`
		Gaps        []struct{ Reason string } `json:"gaps_last_day"`
		ClockSynced *bool                     `json:"clock_synced"`
		Counters    *web.Counters             `json:"counters"`
		Store       *web.StoreStatus          `json:"store"`
		MQTT        *web.MQTTStatus           `json:"mqtt"`
	}
	_, body = get(t, s.Handler(), http.MethodGet, "/api/health")
	decode(t, body, &health)
	lh := health.LastHour
	if lh.Seconds != hist.seconds || lh.Expected != 3600 || lh.Flagged["clipped"] != hist.clipped ||
		lh.Flagged["overload"] != hist.clipped || lh.Flagged["dropped"] != hist.dropped || lh.DroppedSamples != uint64(4800*hist.dropped) {
		t.Errorf("last hour %+v, want %d seconds, %d clipped, %d dropped", lh, hist.seconds, hist.clipped, hist.dropped)
	}
	if _, ok := lh.Flagged["calibrating"]; !ok {
		t.Error("flags that did not occur are missing from flagged_seconds; want them with 0")
	}
	if health.Snapshot == nil || health.Snapshot.Clipped != 12 || health.Snapshot.DiskFreeMB != 5200 || health.Snapshot.AgeSeconds != 30 {
		t.Errorf("snapshot %+v", health.Snapshot)
	}
	if len(health.Gaps) != 1 || health.Gaps[0].Reason != "device lost" {
		t.Errorf("gaps %+v", health.Gaps)
	}
	// The caller's clock state wins over the stored snapshot's.
	if health.ClockSynced == nil || *health.ClockSynced {
		t.Errorf("clock_synced %v, want false from Status", health.ClockSynced)
	}
	if health.Counters == nil || health.Counters.DroppedSamples != 9600 {
		t.Errorf("counters %+v", health.Counters)
	}
	if health.Store == nil || health.Store.FileBytes <= 0 || health.Store.Records["second"] != uint64(hist.seconds) {
		t.Errorf("store %+v", health.Store)
	}
	if health.MQTT != nil {
		t.Errorf("mqtt %+v, want null when the caller has no publisher", health.MQTT)
	}
}

// Without a Status function and a store the page still gets valid JSON: everything it
// cannot know is absent, and the page shows "not available".
func TestNothingKnown(t *testing.T) {
	s := newServer(t, web.Options{})
	for _, path := range []string{"/api/status", "/api/seconds", "/api/spectrum", "/api/calibrations", "/api/health"} {
		res, body := get(t, s.Handler(), http.MethodGet, path)
		var v map[string]any
		decode(t, body, &v)
		if res.StatusCode != http.StatusOK {
			t.Errorf("%s: %d %s", path, res.StatusCode, body)
		}
	}
	_, body := get(t, s.Handler(), http.MethodGet, "/api/status")
	var v map[string]any
	decode(t, body, &v)
	for _, absent := range []string{"node_id", "counters", "clock_synced", "store", "mqtt", "calibration", "self_check"} {
		if _, ok := v[absent]; ok {
			t.Errorf("status has %q though nothing filled it: %s", absent, body)
		}
	}
}

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
		var logs logBuffer
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

// The coverage of the last hour counts the seconds expected since the later of an hour ago
// and the node's start or its first stored second.
func TestCoverage(t *testing.T) {
	now := testNow()
	for _, tc := range []struct {
		name     string
		stored   int           // seconds stored, ending now
		started  time.Duration // node started this long ago (0: unknown)
		expected int
	}{
		{"fresh node on an empty store", 0, 5 * time.Minute, 300},
		{"fresh node, its own seconds", 600, 10 * time.Minute, 600},
		{"start unknown, first second counts", 600, 0, 600},
		{"running two hours, half the hour missing", 1800, 2 * time.Hour, 3600},
		{"nothing known", 0, 0, 3600},
	} {
		t.Run(tc.name, func(t *testing.T) {
			st := openStore(t)
			for i := tc.stored; i > 0; i-- {
				if _, err := st.Append(&record.Second{Start: now.Add(-time.Duration(i) * time.Second), Duration: time.Second, LAeq: 50}); err != nil {
					t.Fatal(err)
				}
			}
			var started time.Time
			if tc.started > 0 {
				started = now.Add(-tc.started)
			}
			s := newServer(t, web.Options{Store: st, Status: func() web.Status { return web.Status{Started: started} }})
			_, body := get(t, s.Handler(), http.MethodGet, "/api/health")
			var h struct {
				LastHour struct {
					Seconds  int `json:"seconds"`
					Expected int `json:"expected_seconds"`
				} `json:"last_hour"`
			}
			decode(t, body, &h)
			if h.LastHour.Seconds != tc.stored || h.LastHour.Expected != tc.expected {
				t.Errorf("%d of %d seconds, want %d of %d", h.LastHour.Seconds, h.LastHour.Expected, tc.stored, tc.expected)
			}
		})
	}
}

// What the caller leaves out of Status comes from the latest session record where it can.
func TestStatusFromSession(t *testing.T) {
	st := openStore(t)
	sess := &record.Session{At: testNow().Add(-time.Hour), SoftwareVersion: "leqnode v0.9.0", SensitivityDBFS: -37.5,
		SampleRate: 48000, Device: "hw:CARD=Mic,DEV=0", TimeZone: "Europe/Berlin"}
	if _, err := st.Append(sess); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name   string
		status func() web.Status
		want   web.Status
	}{
		{"nothing from the caller", nil, web.Status{Version: "leqnode v0.9.0", SampleRate: 48000, Source: "hw:CARD=Mic,DEV=0",
			TimeZone: "Europe/Berlin", Calibration: &web.CalibrationStatus{SensitivityDBFS: -37.5}}},
		{"the caller wins", func() web.Status {
			return web.Status{Version: "leqnode v1", SampleRate: 44100, Source: "file: a.wav", TimeZone: "UTC",
				Calibration: &web.CalibrationStatus{SensitivityDBFS: -38, Calibrating: true}}
		}, web.Status{Version: "leqnode v1", SampleRate: 44100, Source: "file: a.wav", TimeZone: "UTC",
			Calibration: &web.CalibrationStatus{SensitivityDBFS: -38, Calibrating: true}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newServer(t, web.Options{Store: st, Status: tc.status})
			_, body := get(t, s.Handler(), http.MethodGet, "/api/status")
			var got web.Status
			decode(t, body, &got)
			if got.Version != tc.want.Version || got.SampleRate != tc.want.SampleRate || got.Source != tc.want.Source ||
				got.TimeZone != tc.want.TimeZone || got.Calibration == nil || *got.Calibration != *tc.want.Calibration {
				t.Errorf("status %s, want %+v", body, tc.want)
			}
		})
	}
}
