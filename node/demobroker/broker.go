// Package demobroker is the MQTT broker that `leqnode demo` starts in its own process, so that
// the demo shows the node publishing without a broker installed. It is for the demo only: it
// accepts any client without a password and keeps nothing, so it listens on loopback only, and
// neither the daemon's run path nor package publish imports it (a production node publishes
// to a broker of the operator's, see node/publish).
//
// The broker is mochi-mqtt (github.com/mochi-mqtt/server/v2), an MQTT 3.1.1 and 5 broker in Go.
package demobroker

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"sync"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/hooks/auth"
	"github.com/mochi-mqtt/server/v2/listeners"
)

// Start starts the in-process broker and returns its URL ("tcp://127.0.0.1:PORT") and a
// function that stops it and returns the broker's error in closing (it may be called more
// than once; later calls return the first call's error). addr must be a loopback address
// such as "127.0.0.1:0" (port 0 picks a free port): the broker accepts anyone, so it never
// listens on another interface. The broker also stops when ctx ends.
func Start(ctx context.Context, addr string) (url string, stop func() error, err error) {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return "", nil, fmt.Errorf("local broker address %q: write host:port, such as 127.0.0.1:1883", addr)
	}
	if ip := net.ParseIP(host); host != "localhost" && (ip == nil || !ip.IsLoopback()) {
		return "", nil, fmt.Errorf("local broker address %q is not a loopback address: use 127.0.0.1 (the demo broker accepts anyone)", addr)
	}
	srv := mochi.New(&mochi.Options{
		InlineClient: false,
		Logger:       slog.New(slog.NewTextHandler(io.Discard, nil)),
	})
	if err := srv.AddHook(new(auth.AllowHook), nil); err != nil {
		return "", nil, fmt.Errorf("local broker: %w", err)
	}
	tcp := listeners.NewTCP(listeners.Config{ID: "loopback", Address: addr})
	if err := srv.AddListener(tcp); err != nil {
		return "", nil, fmt.Errorf("local broker on %s: %w (choose another port, or 127.0.0.1:0 for any free one)", addr, err)
	}
	if err := srv.Serve(); err != nil {
		return "", nil, errors.Join(fmt.Errorf("local broker: %w", err), srv.Close())
	}
	stopped := make(chan struct{})
	var once sync.Once
	var closeErr error
	stop = func() error {
		once.Do(func() {
			close(stopped)
			closeErr = srv.Close()
		})
		return closeErr
	}
	go func() {
		select {
		case <-ctx.Done():
			// Stopped by its context: the caller that ended the context also calls stop,
			// and gets the error there.
			_ = stop()
		case <-stopped:
		}
	}()
	return "tcp://" + tcp.Address(), stop, nil
}
