package testrig

import (
	"bytes"
	"context"
	"fmt"
	"image/png"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// ChromiumPath is where Debian's chromium package puts the browser itself (/usr/bin/chromium is
// a shell wrapper around it).
const ChromiumPath = "/usr/lib/chromium/chromium"

// NeedChromium makes sure Debian's chromium is installed (see the package doc for what happens
// when it is not).
func NeedChromium(t testing.TB) {
	t.Helper()
	need(t, "chromium", ChromiumPath)
}

// Viewport is a browser window in CSS pixels, named for messages.
type Viewport struct {
	Name          string
	Width, Height int64
}

// Phone and Desktop are the widths pages are checked at.
var (
	Phone   = Viewport{"phone-390", 390, 844}
	Desktop = Viewport{"desktop-1280", 1280, 900}
)

// CheckPage loads url in headless chromium at each viewport and fails t when the browser
// reports a console error or an uncaught exception, or when the page is wider than the
// viewport (sideways scrolling on a phone). It returns a full-page PNG screenshot per viewport,
// by name.
func CheckPage(t testing.TB, url string, views ...Viewport) map[string][]byte {
	t.Helper()
	NeedChromium(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(ChromiumPath), chromedp.NoSandbox, chromedp.Headless, chromedp.DisableGPU, chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true), chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true), chromedp.Flag("disable-dev-shm-usage", true), chromedp.UserDataDir(t.TempDir()))
	actx, acancel := chromedp.NewExecAllocator(ctx, opts...)
	defer acancel()
	bctx, bcancel := chromedp.NewContext(actx)
	defer bcancel()
	if err := chromedp.Do(bctx); err != nil {
		t.Fatalf("starting chromium: %v", err)
	}
	var mu sync.Mutex
	var problems []string
	done := make(chan struct{})
	console := chromedp.Console(bctx)
	go func() {
		defer close(done)
		for m, err := range console {
			if err != nil {
				return
			}
			if m.Type == chromedp.ConsoleError || m.IsException() {
				mu.Lock()
				problems = append(problems, fmt.Sprintf("%s: %s (%s:%d)", m.Type, m.Text, m.URL, m.Line+1))
				mu.Unlock()
			}
		}
	}()
	shots := map[string][]byte{}
	for i, vp := range views {
		steps := []chromedp.Action[chromedp.Void]{chromedp.EmulateViewport(vp.Width, vp.Height)}
		if i == 0 {
			steps = append(steps, chromedp.Navigate(url))
		}
		steps = append(steps, chromedp.WaitReady(chromedp.CSS("body")), chromedp.Sleep(300*time.Millisecond))
		if err := chromedp.Do(bctx, steps...); err != nil {
			t.Fatalf("%s: loading %s: %v", vp.Name, url, err)
		}
		wide, err := chromedp.Run(bctx, chromedp.Evaluate[bool](`document.documentElement.scrollWidth > window.innerWidth`))
		if err != nil {
			t.Fatal(err)
		}
		if wide {
			t.Errorf("%s: the page is wider than the screen", vp.Name)
		}
		shot, err := chromedp.Run(bctx, chromedp.FullScreenshot(100))
		if err != nil {
			t.Fatal(err)
		}
		if cfg, err := png.DecodeConfig(bytes.NewReader(shot)); err != nil || int64(cfg.Width) != vp.Width {
			t.Errorf("%s: screenshot %dx%d (%v), want width %d", vp.Name, cfg.Width, cfg.Height, err, vp.Width)
		}
		shots[vp.Name] = shot
	}
	bcancel()
	<-done
	mu.Lock()
	defer mu.Unlock()
	if len(problems) > 0 {
		t.Errorf("console errors:\n%s", strings.Join(problems, "\n"))
	}
	return shots
}
