package publish

import (
	"context"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
)

// benchHours is the backlog size of BenchmarkBacklog in hours of records: 1 by default (cheap
// in make test), LEQNODE_BENCH_HOURS=24 for the figure in docs/mqtt.md.
func benchHours(b *testing.B) int {
	h := 1
	if s := os.Getenv("LEQNODE_BENCH_HOURS"); s != "" {
		v, err := strconv.Atoi(s)
		if err != nil || v < 1 || v > 240 {
			b.Fatalf("LEQNODE_BENCH_HOURS=%q: use 1 to 240", s)
		}
		h = v
	}
	return h
}

// BenchmarkBacklog delivers a backlog of hours × (3,600 second records + 60 minute records) to
// a local mosquitto with the default configuration (spectra per minute, 10 seconds a message,
// backlog rate limit 250 messages/s) and, as "unlimited", without the rate limit. It reports
// the time a 24-hour backlog takes (s/24h, scaled from the hours delivered) and messages/s.
// Delivered means acknowledged by the broker (PUBACK) with the store's cursor moved.
func BenchmarkBacklog(b *testing.B) {
	hours := benchHours(b)
	m := startMosquitto(b, brokerOpts{})
	for _, bc := range []struct {
		name string
		rate float64
	}{{"default", 0}, {"unlimited", -1}} {
		b.Run(bc.name, func(b *testing.B) {
			var elapsed time.Duration
			msgs := 0
			for range b.N {
				b.StopTimer()
				store := openStore(b, filepath.Join(b.TempDir(), "node.db"))
				for i := range hours * 3600 {
					mustAppend(b, store, second(i, true))
					if i%60 == 0 {
						mustAppend(b, store, minute(i/60, true))
					}
				}
				if err := store.Flush(); err != nil {
					b.Fatal(err)
				}
				p, err := New(Config{Brokers: []string{m.url("tcp")}, TopicPrefix: "wendlecross", BacklogMessagesPerSecond: bc.rate},
					store, Identity{NodeID: "wendle-cross-03"}, newLogger(new(testrig.SyncBuffer)))
				if err != nil {
					b.Fatal(err)
				}
				ctx, cancel := context.WithCancel(context.Background())
				done := make(chan struct{})
				b.StartTimer()
				start := time.Now()
				go func() { _ = p.Run(ctx); close(done) }()
				for {
					st, err := store.Stats()
					if err != nil {
						b.Fatal(err)
					}
					s := st.Streams[DefaultStream]
					if s[record.KindSecond].Acked == uint64(hours*3600) && s[record.KindMinute].Acked == uint64(hours*60) {
						break
					}
					time.Sleep(2 * time.Millisecond)
				}
				elapsed += time.Since(start)
				b.StopTimer()
				msgs += int(p.Status().Messages)
				cancel()
				<-done
				store.Close()
			}
			per24h := elapsed.Seconds() / float64(b.N) * 24 / float64(hours)
			b.ReportMetric(per24h, "s/24h")
			b.ReportMetric(float64(msgs)/elapsed.Seconds(), "msgs/s")
		})
	}
}
