package fleetdb

import (
	"context"
	"fmt"
	"sync"
	"testing"
	"time"

	"github.com/leqnode/leqnode/configs/schema"
	"github.com/leqnode/leqnode/node/testrig"
)

// openTestDB starts a PostgreSQL server, creates a database and migrates it.
func openTestDB(t testing.TB) (*DB, *testrig.Postgres) {
	t.Helper()
	pg := testrig.StartPostgres(t, testrig.PostgresOptions{})
	if out, err := pg.Psql("postgres", "CREATE DATABASE fleet"); err != nil {
		t.Fatalf("create database: %v\n%s", err, out)
	}
	ctx := context.Background()
	db, err := Open(ctx, Options{URL: pg.URL("fleet")})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(db.Close)
	if _, err := db.Migrate(ctx); err != nil {
		t.Fatal(err)
	}
	return db, pg
}

// The demo scenario: nodes of the invented town of Wendle Cross.
var t0 = time.Date(2031, 5, 4, 8, 0, 0, 0, time.UTC)

const storeA = "00a1b2c3d4e5f601"

// secondPayload writes a second-record batch as a node's publisher does (configs/schema).
func secondPayload(node, store string, first, n int) []byte {
	var seq, start, dur, laeq, flags, dropped string
	for i := 0; i < n; i++ {
		sep := ","
		if i == 0 {
			sep = ""
		}
		s := first + i
		seq += fmt.Sprintf("%s%d", sep, s)
		start += fmt.Sprintf("%s%d", sep, t0.Add(time.Duration(s-1)*time.Second).UnixMilli())
		dur += sep + "1"
		laeq += fmt.Sprintf("%s%.2f", sep, 50+float64(s%10))
		flags += sep + `[]`
		dropped += sep + "0"
	}
	at := t0.Add(time.Duration(first-1) * time.Second)
	return fmt.Appendf(nil, `{"schema_version":1,"kind":"second","node":%q,"store":%q,"delivery":"live","seq":%d,"start":%q,"start_ms":%d,"last_seq":%d,"count":%d,"bands_hz":["1000","1250"],"columns":{"seq":[%s],"start_ms":[%s],"duration_s":[%s],"LAeq":[%s],"flags":[%s],"dropped_samples":[%s],"third_octave_LZeq":[%s]}}`,
		node, store, first, at.Format("2006-01-02T15:04:05.000Z"), at.UnixMilli(), first+n-1, n, seq, start, dur, laeq, flags, dropped, spectra(n))
}

func spectra(n int) string {
	s := ""
	for i := 0; i < n; i++ {
		if i > 0 {
			s += ","
		}
		s += "[41.5,null]"
	}
	return s
}

// compiled compiles the schemas once for all tests.
var compiled = sync.OnceValues(schema.Compile)

// decode validates and converts a payload as the collector does.
func decode(t testing.TB, payload []byte) []Row {
	t.Helper()
	return decodeAt(t, payload, t0.Add(time.Hour))
}

// decodeAt is decode with the collector's clock at now.
func decodeAt(t testing.TB, payload []byte, now time.Time) []Row {
	t.Helper()
	set, err := compiled()
	if err != nil {
		t.Fatal(err)
	}
	doc, err := schema.Decode(payload)
	if err != nil {
		t.Fatal(err)
	}
	m := doc.(map[string]any)
	if err := set.Validate(m["kind"].(string), doc); err != nil {
		t.Fatalf("payload invalid: %v\n%s", err, payload)
	}
	rows, err := NewDecoder().Rows(m, now)
	if err != nil {
		t.Fatal(err)
	}
	return rows
}
