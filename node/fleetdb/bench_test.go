package fleetdb

import (
	"context"
	"fmt"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/testrig"
)

// BenchmarkWrite measures records per second into PostgreSQL (fsync on, as in service): each
// operation is one transaction of 20,000 second records from 50 nodes (400 records each, as
// 60-record messages carry them), COPY into staging, insert skipping duplicates, arrival
// ranges. Goal of the central-side issue: at least 20,000 records/s on a 2-core machine.
func BenchmarkWrite(b *testing.B) {
	pg := testrig.StartPostgres(b, testrig.PostgresOptions{Durable: true})
	if out, err := pg.Psql("postgres", "CREATE DATABASE fleet"); err != nil {
		b.Fatalf("%v\n%s", err, out)
	}
	ctx := context.Background()
	db, err := Open(ctx, Options{URL: pg.URL("fleet")})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	if _, err := db.Migrate(ctx); err != nil {
		b.Fatal(err)
	}
	const nodes, perNode = 50, 400
	batch := func(round int) Batch {
		var rows []Row
		for n := range nodes {
			store := fmt.Sprintf("%016x", 0xbe00+n)
			for m := 0; m < perNode; m += 60 {
				first := round*perNode + m + 1
				rows = append(rows, decode(b, secondPayload(fmt.Sprintf("wendle-cross-%02d", n), store, first, min(60, perNode-m)))...)
			}
		}
		return Batch{Rows: rows}
	}
	next := batch(0)
	start := time.Now()
	var wrote int
	var busy time.Duration
	b.ResetTimer()
	for i := range b.N {
		t := time.Now()
		w, err := db.Write(ctx, next)
		if err != nil {
			b.Fatal(err)
		}
		busy += time.Since(t)
		wrote += w.Inserted
		b.StopTimer()
		next = batch(i + 1)
		b.StartTimer()
	}
	b.StopTimer()
	_ = start
	// Size on disk per second record, table and indexes (all spectra off, as the default
	// publish.spectra = "minute" sends them).
	var bytes, count float64
	if err := db.pool.QueryRow(ctx, `SELECT sum(pg_total_relation_size(c.oid))::float8, (SELECT count(*) FROM leqnode.seconds)::float8
		FROM pg_inherits i JOIN pg_class c ON c.oid = i.inhrelid WHERE i.inhparent = 'leqnode.seconds'::regclass`).Scan(&bytes, &count); err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(bytes/count, "bytes/record")
	b.ReportMetric(float64(wrote)/busy.Seconds(), "records/s")
	b.ReportMetric(0, "ns/op")
}
