package web_test

import (
	"context"
	"fmt"
	"log"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/dsp/selftest"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/publish"
	"github.com/leqnode/leqnode/node/web"
)

// A status server over a store, with the node's own knowledge passed in as Status. The daemon
// passes a Live function reading the node's counters and calls Run with its context.
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
	st.Append(&record.Second{Start: now.Add(-time.Second), Duration: time.Second, LAeq: 58.37, LAFmax: 61.2, LAFmin: 55.9})

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

// How a daemon wires the status server to a running node: the live level from the node's
// counters, the rest of its state through Status. (Compiled, not run: it would serve until
// interrupted.)
func Example_daemon() {
	ctx := context.Background() // the daemon's signal-aware context
	logger := slog.Default()
	st, err := buffer.Open("/var/lib/leqnode/node.db", nil)
	if err != nil {
		log.Fatal(err)
	}
	defer st.Close()
	src, err := capture.New(capture.Config{Kind: capture.KindSynthetic, Realtime: true}, logger)
	if err != nil {
		log.Fatal(err)
	}
	n, err := node.New(node.Options{Source: src, Store: st, SensitivityDBFS: -38, Bands: dsp.Third, Logger: logger})
	if err != nil {
		log.Fatal(err)
	}
	started := time.Now()
	check := selftest.Run(48000, false) // the self-verification run at start
	selfCheck := &web.SelfCheckStatus{At: time.Now(), Pass: check.Pass, Checks: len(check.Checks), SampleRate: check.SampleRate}
	for _, c := range check.Failed() {
		selfCheck.Failed = append(selfCheck.Failed, c.Test)
	}
	var mqtt func() publish.Status // the publisher's Status method, when MQTT is configured

	// Package web knows only its own types: the program copies the node's state into them.
	srv, err := web.New(web.Options{
		Addr:  web.DefaultAddr,
		Store: st,
		Live:  func() web.Live { return web.Live{LAF: n.Counters.Level(), At: time.Now()} },
		Status: func() web.Status {
			synced := node.KernelClockSynced()
			s := web.Status{
				NodeID: "wc-harrowby-02", Site: "Harrowby Lane, Wendle Cross (invented)", TimeZone: "Europe/London",
				Started: started, Source: src.Describe(),
				Counters:    &web.Counters{Seconds: n.Counters.Seconds.Load(), Minutes: n.Counters.Minutes.Load(), Gaps: n.Counters.Gaps.Load()},
				ClockSynced: &synced, SelfCheck: selfCheck,
				Calibration: &web.CalibrationStatus{SensitivityDBFS: -38, NominalDBFS: -38},
			}
			if mqtt != nil {
				p := mqtt()
				s.MQTT = &web.MQTTStatus{Connected: p.Connected, Broker: p.Broker, LastPublish: p.LastPublish}
			}
			return s
		},
		Logger: logger.With("part", "web"),
	})
	if err != nil {
		log.Fatal(err)
	}
	go func() {
		if err := srv.Run(ctx); err != nil {
			logger.Error("status page stopped", "err", err)
		}
	}()
	if err := n.Run(ctx); err != nil {
		log.Fatal(err)
	}
}
