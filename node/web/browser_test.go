package web_test

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"net"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/lib/wav"
	"github.com/leqnode/leqnode/node/testrig"
	"github.com/leqnode/leqnode/node/web"
)

// artefactsEnv names the directory the browser test writes its screenshots to.
const artefactsEnv = "LEQNODE_WEB_ARTIFACTS"

// The levels of the test signal, in dB SPL with the node's sensitivity of -30 dBFS for
// 94 dB: a 1 kHz sine of level L dBFS (AES17: peak A reads 20 lg A dBFS) reads
// 94 + L - (-30) dB, and A-weighting is 0 dB at 1 kHz (IEC 61672-1:2013 Table 3).
const (
	sensitivityDBFS = -30.0
	loudDBFS        = -20.0 // 104 dB
	quietDBFS       = -50.0 // 74 dB
	phase           = 3     // seconds per loud or quiet phase
)

// writeSignal writes a WAV file of seconds of a 1 kHz sine that alternates every phase
// seconds between loudDBFS and quietDBFS, over a little white noise so that every band of
// the spectrum has a level.
func writeSignal(t *testing.T, path string, seconds int) {
	t.Helper()
	const fs = 48000
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := wav.NewWriter(f, wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.PCM16})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(7, 11))
	block := make([]float32, fs/10)
	for n := 0; n < seconds*fs; n += len(block) {
		for i := range block {
			k := n + i
			l := loudDBFS
			if (k/fs/phase)%2 == 1 {
				l = quietDBFS
			}
			amp := math.Pow(10, l/20) // AES17: a sine of peak A reads 20 lg A dBFS
			block[i] = float32(amp*math.Sin(2*math.Pi*1000*float64(k)/fs) + 0.0005*(rng.Float64()*2-1))
		}
		if err := w.Write(block); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

// The status page in headless chromium against a real node replaying a WAV file in real time
// into a real store: the page loads without console errors, the live level follows the signal,
// the chart and the spectrum are drawn, and screenshots at phone and desktop widths are kept.
func TestBrowser(t *testing.T) {
	testrig.NeedChromium(t)
	dir := t.TempDir()
	art := os.Getenv(artefactsEnv)
	if art == "" {
		art = t.TempDir()
	} else if err := os.MkdirAll(art, 0o755); err != nil {
		t.Fatal(err)
	}

	// The node: the file source in real time, one-third-octave spectra every second, and a
	// store that already holds 50 minutes of invented history.
	wavPath := filepath.Join(dir, "harrowby-lane.wav")
	writeSignal(t, wavPath, 60)
	st := openStore(t)
	fillHistory(t, st, time.Now().Add(-20*time.Second), true)
	log := debugLogger(&testrig.SyncBuffer{})
	src, err := capture.New(capture.Config{Kind: capture.KindFile, File: wavPath, Realtime: true}, log)
	if err != nil {
		t.Fatal(err)
	}
	n, err := node.New(node.Options{Source: src, Store: st, SensitivityDBFS: sensitivityDBFS, Bands: dsp.Third,
		SecondSpectra: true, Settling: time.Nanosecond, Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	started := time.Now()
	status := func() web.Status {
		return web.Status{NodeID: "wc-harrowby-02", Site: "Harrowby Lane, Wendle Cross (invented)",
			Version: "leqnode browser test", TimeZone: "Europe/London", Started: started, Source: src.Describe(),
			SampleRate: 48000, Counters: &web.Counters{Seconds: n.Counters.Seconds.Load(), Minutes: n.Counters.Minutes.Load(), Gaps: n.Counters.Gaps.Load()},
			Calibration: &web.CalibrationStatus{SensitivityDBFS: sensitivityDBFS, NominalDBFS: -30},
			SelfCheck:   &web.SelfCheckStatus{At: started, Pass: true, Checks: 96, SampleRate: 48000}}
	}
	const token = "harrowby-field-9c1e"
	srv, err := web.New(web.Options{Store: st, Live: func() web.Live { return web.Live{LAF: n.Counters.Level(), At: time.Now()} }, Status: status, Logger: log, Token: token})
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	var wg sync.WaitGroup
	defer wg.Wait()
	defer cancel()
	wg.Add(2)
	go func() {
		defer wg.Done()
		if err := n.Run(ctx); err != nil && !errors.Is(err, context.Canceled) && !errors.Is(err, context.DeadlineExceeded) {
			t.Errorf("node: %v", err)
		}
	}()
	go func() {
		defer wg.Done()
		if err := srv.Serve(ctx, ln); err != nil {
			t.Errorf("web: %v", err)
		}
	}()
	url := "http://" + ln.Addr().String() + "/"

	b := testrig.NewBrowser(t)
	defer b.Close(t)
	bctx := b.Ctx

	// Open the page the way a field worker would with a token: once with ?token=, after which
	// the cookie carries the access for the page's own requests and its live stream.
	if err := chromedp.Do(bctx,
		chromedp.EmulateViewport(390, 844),
		chromedp.Navigate(url+"?token="+token),
		chromedp.WaitVisible(chromedp.ID("live-level")),
	); err != nil {
		t.Fatalf("loading %s: %v", url, err)
	}
	if loc, err := chromedp.Run(bctx, chromedp.Location()); err != nil || strings.Contains(loc, token) {
		t.Errorf("the address bar still holds the token: %q (%v)", loc, err)
	}

	// The live level follows the signal: it must read near the loud level and near the quiet
	// level, each more than once, as the phases alternate. The Fast detector settles within a
	// few time constants of 125 ms (IEC 61672-1:2013 5.8), far inside a 3 s phase.
	loud, quiet := 94+loudDBFS-sensitivityDBFS, 94+quietDBFS-sensitivityDBFS
	var readings []float64
	seenLoud, seenQuiet, changes := 0, 0, 0
	last := 0 // 1 loud, -1 quiet
	deadline := time.Now().Add(30 * time.Second)
	for time.Now().Before(deadline) && (seenLoud < 2 || seenQuiet < 2 || changes < 2) {
		txt, err := chromedp.Run(bctx, chromedp.Evaluate[string](`document.getElementById('live-level').textContent`))
		if err != nil {
			t.Fatal(err)
		}
		if v, err := strconv.ParseFloat(txt, 64); err == nil {
			readings = append(readings, v)
			switch {
			case math.Abs(v-loud) < 1.5:
				seenLoud++
				if last == -1 {
					changes++
				}
				last = 1
			case math.Abs(v-quiet) < 1.5:
				seenQuiet++
				if last == 1 {
					changes++
				}
				last = -1
			}
		}
		time.Sleep(150 * time.Millisecond)
	}
	if seenLoud < 2 || seenQuiet < 2 || changes < 2 {
		t.Fatalf("the live level did not follow the signal (want readings near %.0f and %.0f dB, alternating): %v", loud, quiet, readings)
	}
	t.Logf("live level readings: %d, near %.0f dB: %d, near %.0f dB: %d, changes: %d", len(readings), loud, seenLoud, quiet, seenQuiet, changes)

	// The chart and the spectrum are drawn: count the pixels in the line and bar colour, and
	// read what the script says it drew.
	countLead := func(id string) int {
		js := `(() => {
			const c = document.getElementById(` + strconv.Quote(id) + `);
			const d = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
			const hex = getComputedStyle(document.documentElement).getPropertyValue('--lead').trim();
			const r = parseInt(hex.slice(1, 3), 16), g = parseInt(hex.slice(3, 5), 16), b = parseInt(hex.slice(5, 7), 16);
			let n = 0;
			for (let i = 0; i < d.length; i += 4) {
				if (d[i + 3] > 200 && Math.abs(d[i] - r) + Math.abs(d[i + 1] - g) + Math.abs(d[i + 2] - b) < 40) n++;
			}
			return n;
		})()`
		v, err := chromedp.Run(bctx, chromedp.Evaluate[int](js))
		if err != nil {
			t.Fatalf("reading the pixels of #%s: %v", id, err)
		}
		return v
	}
	attr := func(id, name string) int {
		v, err := chromedp.Run(bctx, chromedp.Evaluate[string](`document.getElementById(`+strconv.Quote(id)+`).dataset.`+name+` || '0'`))
		if err != nil {
			t.Fatal(err)
		}
		i, _ := strconv.Atoi(v)
		return i
	}
	// Wait for a spectrum from the node's own second records (not only the history's).
	if err := chromedp.Do(bctx, chromedp.Sleep(2500*time.Millisecond)); err != nil {
		t.Fatal(err)
	}
	if pts, px := attr("hour-chart", "points"), countLead("hour-chart"); pts < 3000 || px < 300 {
		t.Errorf("hour chart: %d points drawn, %d line pixels; want at least 3000 points (the history) and 300 pixels", pts, px)
	} else {
		t.Logf("hour chart: %d seconds, %d pixels in the line colour", pts, px)
	}
	if bands, px := attr("spectrum", "bands"), countLead("spectrum"); bands < 30 || px < 2000 {
		t.Errorf("spectrum: %d bands drawn, %d bar pixels", bands, px)
	} else {
		t.Logf("spectrum: %d bands, %d pixels in the bar colour", bands, px)
	}
	if pts := attr("live-trace", "points"); pts < 10 {
		t.Errorf("live trace: %d points", pts)
	}
	body, err := chromedp.Run(bctx, chromedp.Text(chromedp.CSS("body")))
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Node wc-harrowby-02", "Harrowby Lane", "passed", "not available", "indicative", "hearing",
		"travel unencrypted"} {
		if !strings.Contains(body, want) {
			t.Errorf("the page does not show %q", want)
		}
	}
	rows, err := chromedp.Run(bctx, chromedp.Evaluate[int](`document.querySelectorAll('#cal-table tbody tr').length`))
	if err != nil || rows != 3 {
		t.Errorf("calibration table: %d rows (%v), want the 3 stored checks", rows, err)
	}

	// Screenshots at phone and desktop widths. At 390 px nothing may stick out sideways.
	for _, vp := range []testrig.Viewport{testrig.Phone, {Name: "phone-412", Width: 412, Height: 915}, testrig.Desktop} {
		shot := b.Shot(t, vp, 600*time.Millisecond)
		// Every table is shown whole: no column cut off behind a scroll edge (the
		// calibration table read "Deviatio..." at 412 and 1280 px, issue 19 item 7).
		cut, err := chromedp.Run(bctx, chromedp.Evaluate[[]string](`[...document.querySelectorAll('table')].filter(t => {
			const box = t.parentElement.getBoundingClientRect();
			return [...t.querySelectorAll('th, td')].some(c => c.getBoundingClientRect().right > box.right + 0.5 || c.scrollWidth > c.clientWidth + 0.5);
		}).map(t => t.id)`))
		if err != nil {
			t.Fatal(err)
		}
		if len(cut) > 0 {
			t.Errorf("%s: tables cut off: %v", vp.Name, cut)
		}
		path := filepath.Join(art, "status-page-"+vp.Name+".png")
		if err := os.WriteFile(path, shot, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("screenshot %s", path)
	}

}
