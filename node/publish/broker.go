package publish

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"sync"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/hooks/auth"
	"github.com/mochi-mqtt/server/v2/listeners"
)

// StartLocalBroker starts an in-process MQTT broker (mochi-mqtt) for `leqnode demo` and
// returns its URL ("tcp://127.0.0.1:PORT") and a function that stops it. addr must be a
// loopback address such as "127.0.0.1:0" (port 0 picks a free port); the broker accepts anyone,
// so it never listens on another interface. The broker also stops when ctx ends.
func StartLocalBroker(ctx context.Context, addr string) (url string, stop func(), err error) {
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
		srv.Close()
		return "", nil, fmt.Errorf("local broker: %w", err)
	}
	stopped := make(chan struct{})
	var once sync.Once
	stop = func() {
		once.Do(func() {
			close(stopped)
			srv.Close()
		})
	}
	go func() {
		select {
		case <-ctx.Done():
			stop()
		case <-stopped:
		}
	}()
	return "tcp://" + tcp.Address(), stop, nil
}
