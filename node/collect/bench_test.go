package collect

import (
	"context"
	"fmt"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"github.com/leqnode/leqnode/node/fleetdb"
	"github.com/leqnode/leqnode/node/testrig"
)

// benchHours is the backlog's length: LEQNODE_BENCH_HOURS (make bench sets 24), else 3 minutes.
func benchHours() float64 {
	if h, err := strconv.ParseFloat(os.Getenv("LEQNODE_BENCH_HOURS"), 64); err == nil && h > 0 {
		return h
	}
	return 0.05
}

// benchRig is a database (fsync on, as in service) and a broker without persistence (a
// day's backlog of a fleet is hundreds of megabytes: mosquitto's persistence would rewrite it
// every second) that keeps the collector's session in memory.
func benchRig(b *testing.B) *rig {
	r := &rig{t: b, dir: b.TempDir()}
	r.pg = testrig.StartPostgres(b, testrig.PostgresOptions{Durable: true})
	if out, err := r.pg.Psql("postgres", "CREATE DATABASE fleet"); err != nil {
		b.Fatalf("%v\n%s", err, out)
	}
	r.broker = testrig.StartMosquitto(b, testrig.BrokerOptions{ExtraConfigLines: []string{"max_inflight_messages 1000", "max_queued_messages 0"}})
	db, err := fleetdb.Open(context.Background(), fleetdb.Options{URL: r.pg.URL("fleet")})
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(db.Close)
	r.db = db
	return r
}

// secondsPayload is a node's message of n second records from seq first on (all eleven
// quantities, as the publisher sends them by default), each second ending at its start + 1 s.
func secondsPayload(node, store, delivery string, first int, start time.Time, n int) []byte {
	var b strings.Builder
	fmt.Fprintf(&b, `{"schema_version":1,"kind":"second","node":%q,"store":%q,"delivery":%q,"seq":%d,"start":%q,"start_ms":%d,"last_seq":%d,"count":%d,"columns":{`,
		node, store, delivery, first, start.UTC().Format("2006-01-02T15:04:05.000Z"), start.UnixMilli(), first+n-1, n)
	col := func(name string, f func(i int) string) {
		b.WriteString(`"` + name + `":[`)
		for i := range n {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString(f(i))
		}
		b.WriteString("],")
	}
	col("seq", func(i int) string { return strconv.Itoa(first + i) })
	col("start_ms", func(i int) string { return strconv.FormatInt(start.Add(time.Duration(i)*time.Second).UnixMilli(), 10) })
	col("duration_s", func(int) string { return "1" })
	for k, q := range []string{"LAeq", "LCeq", "LZeq", "LAFmax", "LAFmin", "LASmax", "LASmin", "LAImax", "LCpeak", "LZpeak", "LAE"} {
		col(q, func(i int) string { return strconv.FormatFloat(45+float64((first+i+k)%23)+0.37, 'f', 2, 64) })
	}
	col("dropped_samples", func(int) string { return "0" })
	b.WriteString(`"flags":[`)
	for i := range n {
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString("[]")
	}
	b.WriteString("]}}")
	return []byte(b.String())
}

func minutePayload(node, store string, seq int, start time.Time) []byte {
	return fmt.Appendf(nil, `{"schema_version":1,"kind":"minute","node":%q,"store":%q,"delivery":"backlog","seq":%d,"start":%q,"start_ms":%d,"LAeq":53.41,"LCeq":61.2,"LZeq":65.03,"LAFmax":68.1,"LAFmin":44.22,"LAF1":66,"LAF5":62.1,"LAF10":59.3,"LAF50":52.4,"LAF90":46.5,"LAF95":45.1,"LAF99":44.5,"LAE":71.2,"LCpeak":90.3,"LAImax":70.2,"valid_seconds":60,"flags":[]}`,
		node, store, seq, start.UTC().Format("2006-01-02T15:04:05.000Z"), start.UnixMilli())
}

// BenchmarkBacklog: 50 nodes return from an outage with their stored records (a day under make
// bench: 4.32 million second and 72,000 minute records in 60-second messages) queued on the
// broker for the collector's persistent session; the collector starts and drains them into
// PostgreSQL. Goal of the central-side issue: a 50-node 24-hour backlog in under 5 minutes.
func BenchmarkBacklog(b *testing.B) {
	const nodes = 50
	secs := int(benchHours() * 3600)
	secs -= secs % 60
	start := time.Now().UTC().Truncate(time.Minute).Add(-time.Duration(secs) * time.Second)
	for range b.N {
		r := benchRig(b)
		cfg := r.config(func(c *Config) { c.Broker.ShareGroup = ""; c.Batch.MaxWait = Duration(200 * time.Millisecond) })
		_, stop := runCollector(b, cfg, Options{Logger: nil})
		stop() // the session stays on the broker and queues what follows

		pub := mqtt.NewClient(mqtt.NewClientOptions().AddBroker(r.broker.URL("tcp")).SetClientID("wendle-backlog").SetWriteTimeout(time.Minute))
		if tok := pub.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
			b.Fatal(tok.Error())
		}
		var toks []mqtt.Token
		var total int64
		for m := 0; m < secs/60; m++ {
			for n := range nodes {
				node, store := fmt.Sprintf("wendle-cross-%02d", n+1), fmt.Sprintf("%016x", 0xbac0+n)
				at := start.Add(time.Duration(m) * time.Minute)
				toks = append(toks, pub.Publish("wendlecross/"+node+"/backlog/second", 1, false, secondsPayload(node, store, "backlog", m*60+1, at, 60)),
					pub.Publish("wendlecross/"+node+"/backlog/minute", 1, false, minutePayload(node, store, m+1, at)))
				total += 61
			}
			if len(toks) > 2000 {
				for _, t := range toks {
					t.Wait()
				}
				toks = toks[:0]
			}
		}
		for _, t := range toks {
			t.Wait()
		}
		pub.Disconnect(100)

		var stored atomic.Int64
		doneAt := make(chan time.Time, 1)
		t0 := time.Now()
		b.ResetTimer()
		_, stop = runCollector(b, cfg, Options{OnCommit: func(rows []fleetdb.Row, at time.Time) {
			if stored.Add(int64(len(rows))) == total {
				doneAt <- at
			}
		}})
		var end time.Time
		select {
		case end = <-doneAt:
		case <-time.After(30 * time.Minute):
			b.Fatalf("backlog not drained after 30 min: %d of %d records", stored.Load(), total)
		}
		b.StopTimer()
		stop()
		d := end.Sub(t0)
		b.ReportMetric(d.Seconds(), "s/drain")
		b.ReportMetric(float64(total)/d.Seconds(), "records/s")
		b.ReportMetric(float64(total), "records")
	}
	b.ReportMetric(0, "ns/op")
}

// BenchmarkLiveDelay: 50 nodes send each second record live as soon as the second ends (one
// record per message); the delay is from the end of the second to the commit of its row.
// Goal of the central-side issue: under 2 s at the 90th percentile (this measures the
// collector's share; the node's own delay before it publishes adds to it).
func BenchmarkLiveDelay(b *testing.B) {
	const nodes = 50
	run := 5 * time.Second
	if benchHours() >= 1 {
		run = 60 * time.Second
	}
	for range b.N {
		r := benchRig(b)
		var mu sync.Mutex
		var delays []float64
		_, stop := runCollector(b, r.config(nil), Options{OnCommit: func(rows []fleetdb.Row, at time.Time) {
			mu.Lock()
			defer mu.Unlock()
			for _, row := range rows {
				delays = append(delays, at.Sub(row.Time.Add(time.Second)).Seconds())
			}
		}})
		pub := mqtt.NewClient(mqtt.NewClientOptions().AddBroker(r.broker.URL("tcp")).SetClientID("wendle-live"))
		if tok := pub.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
			b.Fatal(tok.Error())
		}
		b.ResetTimer()
		end := time.Now().Add(run)
		for seq := 1; time.Now().Before(end); seq++ {
			next := time.Now().Truncate(time.Second).Add(time.Second)
			time.Sleep(time.Until(next))
			for n := range nodes {
				node := fmt.Sprintf("wendle-cross-%02d", n+1)
				pub.Publish("wendlecross/"+node+"/live/second", 1, false, secondsPayload(node, fmt.Sprintf("%016x", 0x11e0+n), "live", seq, next.Add(-time.Second), 1))
			}
		}
		time.Sleep(2 * time.Second)
		b.StopTimer()
		stop()
		pub.Disconnect(100)
		mu.Lock()
		slices.Sort(delays)
		if len(delays) == 0 {
			b.Fatal("no record arrived")
		}
		q := func(p float64) float64 { return delays[int(p*float64(len(delays)-1))] }
		b.ReportMetric(q(0.5), "s_p50")
		b.ReportMetric(q(0.9), "s_p90")
		b.ReportMetric(delays[len(delays)-1], "s_max")
		mu.Unlock()
	}
	b.ReportMetric(0, "ns/op")
}
