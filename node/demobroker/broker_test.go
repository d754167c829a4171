package demobroker_test

import (
	"context"
	"strings"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/node/demobroker"
)

// connect returns a paho client connected to url, disconnected at the end of the test.
func connect(t *testing.T, url, id string) mqtt.Client {
	t.Helper()
	c := mqtt.NewClient(mqtt.NewClientOptions().AddBroker(url).SetClientID(id).SetConnectTimeout(5 * time.Second))
	if tok := c.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("connect to %s: %v", url, tok.Error())
	}
	t.Cleanup(func() { c.Disconnect(100) })
	return c
}

// TestStart: the broker carries a message from one client to another, refuses to listen
// anywhere but on loopback, and stops on stop and when its context ends.
func TestStart(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	url, stop, err := demobroker.Start(ctx, "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(url, "tcp://127.0.0.1:") || strings.HasSuffix(url, ":0") {
		t.Fatalf("url %q", url)
	}
	got := make(chan string, 1)
	sub := connect(t, url, "wendle-cross-listener")
	tok := sub.Subscribe("wendlecross/#", 1, func(_ mqtt.Client, m mqtt.Message) { got <- m.Topic() + " " + string(m.Payload()) })
	if !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	pub := connect(t, url, "wendle-cross-07")
	if tok := pub.Publish("wendlecross/wendle-cross-07/second", 1, false, `{"LAeq":52.4}`); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatalf("publish: %v", tok.Error())
	}
	select {
	case m := <-got:
		if m != `wendlecross/wendle-cross-07/second {"LAeq":52.4}` {
			t.Errorf("received %q", m)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("the message did not arrive")
	}

	for _, addr := range []string{"0.0.0.0:0", "192.0.2.1:1883", ":1883", "nonsense"} {
		if _, _, err := demobroker.Start(ctx, addr); err == nil {
			t.Errorf("Start(%q) accepted a non-loopback address", addr)
		}
	}
	if _, _, err := demobroker.Start(ctx, strings.TrimPrefix(url, "tcp://")); err == nil {
		t.Errorf("a second broker on the same port started")
	}

	if err := stop(); err != nil {
		t.Errorf("stop: %v", err)
	}
	if err := stop(); err != nil {
		t.Errorf("stop again: %v", err)
	}
	// The port is free again once the broker stopped.
	url2, stop2, err := demobroker.Start(context.Background(), strings.TrimPrefix(url, "tcp://"))
	if err != nil {
		t.Fatalf("the port was not freed by stop: %v", err)
	}
	if url2 != url {
		t.Errorf("restarted at %s, want %s", url2, url)
	}
	if err := stop2(); err != nil {
		t.Error(err)
	}
}

// TestStopsWithContext: ending the context stops the broker (its port takes a new one).
func TestStopsWithContext(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	url, stop, err := demobroker.Start(ctx, "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	cancel()
	addr := strings.TrimPrefix(url, "tcp://")
	deadline := time.Now().Add(5 * time.Second)
	for {
		_, stop2, err := demobroker.Start(context.Background(), addr)
		if err == nil {
			if err := stop2(); err != nil {
				t.Error(err)
			}
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("the broker still holds %s after its context ended: %v", addr, err)
		}
		time.Sleep(20 * time.Millisecond)
	}
	if err := stop(); err != nil {
		t.Errorf("stop after the context ended: %v", err)
	}
}

// Example starts the demo's broker on any free loopback port.
func Example() {
	url, stop, err := demobroker.Start(context.Background(), "127.0.0.1:0")
	if err != nil {
		panic(err)
	}
	defer func() { _ = stop() }()
	_ = url // e.g. tcp://127.0.0.1:41803: give it to publish.Config.Brokers
}
