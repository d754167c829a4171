package main

import (
	"context"
	"io"
	"math"
	"strings"
	"testing"
	"time"
)

// TestRunStopsWhileStdinWaits: a node reading standard input whose feed has gone quiet (the
// writer keeps the pipe open and sends nothing more) stops at once when told to, instead of
// waiting 5 s for a Read that never returns and leaving the source behind (issue 19 item 9).
func TestRunStopsWhileStdinWaits(t *testing.T) {
	dir := t.TempDir()
	cfg := writeConfig(t, dir, "kind = \"stdin\"\nstdin_format = \"raw\"\nsample_rate = 48000\nsample_format = \"int16\"\nchannels = 1",
		`timestamps = "samples"`)
	pr, pw := io.Pipe()
	defer pw.Close()
	fed := make(chan struct{})
	go func() {
		// 2 s of raw 16-bit samples, a 1 kHz tone at half scale; then nothing, pipe open.
		b := make([]byte, 2*48000*2)
		for i := 0; i < len(b)/2; i++ {
			v := int16(16384 * math.Sin(2*math.Pi*1000*float64(i)/48000))
			b[2*i], b[2*i+1] = byte(v), byte(v>>8)
		}
		pw.Write(b)
		close(fed)
	}()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out, errb strings.Builder
	done := make(chan int, 1)
	go func() { done <- run(ctx, stdio{in: pr, out: &out, err: &errb}, []string{"run", "--config", cfg}) }()
	select {
	case <-fed:
	case <-time.After(time.Minute):
		t.Fatal("the node did not read the feed")
	}
	time.Sleep(200 * time.Millisecond) // let the node wait for more input
	cancel()                           // what SIGTERM does
	var code int
	select {
	case code = <-done:
	case <-time.After(30 * time.Second):
		t.Fatal("the node did not stop")
	}
	if code != 0 {
		t.Errorf("exit %d: %s", code, errb.String())
	}
	if strings.Contains(errb.String(), "did not stop") {
		t.Errorf("the node waited for the audio source:\n%s", errb.String())
	}
}
