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

// Browser is a headless Debian chromium for one test, with its console watched from the start:
// every console message is kept, and console errors and uncaught exceptions fail the test when
// the browser is closed. Ctx is the context to run chromedp actions in.
type Browser struct {
	Ctx    context.Context
	cancel []context.CancelFunc
	done   chan struct{}

	mu                 sync.Mutex
	problems, messages []string
}

// NewBrowser starts chromium (see NeedChromium for a machine without it) for at most two
// minutes. Call Close when done.
func NewBrowser(t testing.TB) *Browser {
	t.Helper()
	NeedChromium(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(ChromiumPath), chromedp.NoSandbox, chromedp.Headless, chromedp.DisableGPU, chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true), chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true), chromedp.Flag("disable-dev-shm-usage", true), chromedp.UserDataDir(t.TempDir()))
	actx, acancel := chromedp.NewExecAllocator(ctx, opts...)
	bctx, bcancel := chromedp.NewContext(actx)
	b := &Browser{Ctx: bctx, cancel: []context.CancelFunc{bcancel, acancel, cancel}, done: make(chan struct{})}
	if err := chromedp.Do(bctx); err != nil {
		b.stop()
		t.Fatalf("starting chromium: %v", err)
	}
	console := chromedp.Console(bctx)
	go func() {
		defer close(b.done)
		for m, err := range console {
			if err != nil {
				return
			}
			line := fmt.Sprintf("%s: %s (%s:%d)", m.Type, m.Text, m.URL, m.Line+1)
			b.mu.Lock()
			b.messages = append(b.messages, line)
			if m.Type == chromedp.ConsoleError || m.IsException() {
				b.problems = append(b.problems, line)
			}
			b.mu.Unlock()
		}
	}()
	return b
}

func (b *Browser) stop() {
	for _, c := range b.cancel {
		c()
	}
}

// Shot sets the viewport, lets the page lay itself out for settle, fails t when the page is
// wider than the viewport (sideways scrolling on a phone), and returns a full-page PNG
// screenshot, checked to be the viewport's width.
func (b *Browser) Shot(t testing.TB, vp Viewport, settle time.Duration) []byte {
	t.Helper()
	if err := chromedp.Do(b.Ctx, chromedp.EmulateViewport(vp.Width, vp.Height), chromedp.Sleep(settle)); err != nil {
		t.Fatalf("%s: %v", vp.Name, err)
	}
	wide, err := chromedp.Run(b.Ctx, chromedp.Evaluate[bool](`document.documentElement.scrollWidth > window.innerWidth`))
	if err != nil {
		t.Fatal(err)
	}
	if wide {
		t.Errorf("%s: the page is wider than the screen", vp.Name)
	}
	shot, err := chromedp.Run(b.Ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	if cfg, err := png.DecodeConfig(bytes.NewReader(shot)); err != nil || int64(cfg.Width) != vp.Width {
		t.Errorf("%s: screenshot %dx%d (%v), want width %d", vp.Name, cfg.Width, cfg.Height, err, vp.Width)
	}
	return shot
}

// Close stops the browser and fails t for every console error and uncaught exception seen;
// with go test -v it logs the whole console.
func (b *Browser) Close(t testing.TB) {
	t.Helper()
	b.stop()
	<-b.done
	b.mu.Lock()
	defer b.mu.Unlock()
	if len(b.problems) > 0 {
		t.Errorf("console errors:\n%s", strings.Join(b.problems, "\n"))
	}
	if testing.Verbose() && len(b.messages) > 0 {
		t.Logf("console:\n%s", strings.Join(b.messages, "\n"))
	}
}

// CheckPage loads url in headless chromium at each viewport and fails t when the browser
// reports a console error or an uncaught exception, or when the page is wider than the
// viewport (sideways scrolling on a phone). It returns a full-page PNG screenshot per viewport,
// by name.
func CheckPage(t testing.TB, url string, views ...Viewport) map[string][]byte {
	t.Helper()
	b := NewBrowser(t)
	defer b.Close(t)
	steps := []chromedp.Action[chromedp.Void]{chromedp.Navigate(url), chromedp.WaitReady(chromedp.CSS("body"))}
	if len(views) > 0 { // load at the first width, as a phone would
		steps = append([]chromedp.Action[chromedp.Void]{chromedp.EmulateViewport(views[0].Width, views[0].Height)}, steps...)
	}
	if err := chromedp.Do(b.Ctx, steps...); err != nil {
		t.Fatalf("loading %s: %v", url, err)
	}
	shots := map[string][]byte{}
	for _, vp := range views {
		shots[vp.Name] = b.Shot(t, vp, 300*time.Millisecond)
	}
	return shots
}
