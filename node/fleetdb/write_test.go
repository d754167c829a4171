package fleetdb

import (
	"context"
	"fmt"
	"testing"
	"time"
)

// TestWriteIdempotent: a batch written twice and an overlapping batch store each record once;
// the arrival ranges merge and the hole between them is listed as missing.
func TestWriteIdempotent(t *testing.T) {
	db, _ := openTestDB(t)
	ctx := context.Background()
	a := decode(t, secondPayload("wendle-cross-03", storeA, 1, 60))
	b := decode(t, secondPayload("wendle-cross-03", storeA, 41, 40))  // 41..80, overlaps a
	c := decode(t, secondPayload("wendle-cross-03", storeA, 101, 10)) // 101..110: hole 81..100
	for i, tt := range []struct {
		rows          []Row
		inserted, dup int
	}{{a, 60, 0}, {a, 0, 60}, {b, 20, 20}, {c, 10, 0}} {
		w, err := db.Write(ctx, Batch{Rows: tt.rows})
		if err != nil {
			t.Fatal(err)
		}
		if w.Inserted != tt.inserted || w.Duplicates != tt.dup {
			t.Errorf("write %d: %+v, want %d inserted and %d duplicates", i, w, tt.inserted, tt.dup)
		}
	}
	var n int
	if err := db.pool.QueryRow(ctx, "SELECT count(*) FROM leqnode.seconds").Scan(&n); err != nil || n != 90 {
		t.Errorf("seconds: %d rows (%v), want 90", n, err)
	}
	type rg struct{ first, last int64 }
	var got []rg
	rs, err := db.pool.Query(ctx, "SELECT first_seq, last_seq FROM leqnode.received ORDER BY first_seq")
	if err != nil {
		t.Fatal(err)
	}
	for rs.Next() {
		var r rg
		if err := rs.Scan(&r.first, &r.last); err != nil {
			t.Fatal(err)
		}
		got = append(got, r)
	}
	if len(got) != 2 || got[0] != (rg{1, 80}) || got[1] != (rg{101, 110}) {
		t.Errorf("ranges %v, want [1 80] [101 110]", got)
	}
	var first, last, count int64
	if err := db.pool.QueryRow(ctx, "SELECT first_seq, last_seq, count FROM leqnode.missing_records").Scan(&first, &last, &count); err != nil {
		t.Fatal(err)
	}
	if first != 81 || last != 100 || count != 20 {
		t.Errorf("missing %d..%d (%d), want 81..100 (20)", first, last, count)
	}
	var laeq float32
	var spec []*float32
	var band int16
	if err := db.pool.QueryRow(ctx, "SELECT LAeq, third_octave_first, third_octave_LZeq FROM leqnode.seconds WHERE seq = 7").Scan(&laeq, &band, &spec); err != nil {
		t.Fatal(err)
	}
	// 1000 Hz is band 0 of the base-ten series (IEC 61260-1:2014, 5.2 and Annex E).
	if laeq != 57 || band != 0 || len(spec) != 2 || spec[0] == nil || *spec[0] != 41.5 || spec[1] != nil {
		t.Errorf("second 7: LAeq %v band %d spectrum %v", laeq, band, spec)
	}
}

// TestRestartIsNotALoss: after a restart the node's numbers jump to the first_seq_second its
// session record states (buffer.Store.FirstSeq); that hole is a restart, not missing data,
// while a hole anywhere else stays missing.
func TestRestartIsNotALoss(t *testing.T) {
	db, _ := openTestDB(t)
	ctx := context.Background()
	at := t0.Add(time.Minute)
	session := fmt.Appendf(nil, `{"schema_version":1,"kind":"session","node":"wendle-cross-03","store":%q,"delivery":"live","seq":2,"start":%q,"start_ms":%d,"software_version":"0.1.0","config_hash":"c0ffee","sensitivity_dBFS":-26,"sample_rate_hz":48000,"device":"synthetic","time_zone":"UTC","first_seq_second":4097,"first_seq_session":2}`,
		storeA, at.Format("2006-01-02T15:04:05.000Z"), at.UnixMilli())
	var rows []Row
	for _, p := range [][]byte{secondPayload("wendle-cross-03", storeA, 1, 60), session,
		secondPayload("wendle-cross-03", storeA, 4097, 60), secondPayload("wendle-cross-03", storeA, 4200, 10)} {
		rows = append(rows, decode(t, p)...)
	}
	if _, err := db.Write(ctx, Batch{Rows: rows}); err != nil {
		t.Fatal(err)
	}
	var first, last, n int64
	if err := db.pool.QueryRow(ctx, "SELECT first_seq, last_seq, (SELECT count(*) FROM leqnode.missing_records WHERE kind = 'second') FROM leqnode.missing_records WHERE kind = 'second'").Scan(&first, &last, &n); err != nil {
		t.Fatal(err)
	}
	if n != 1 || first != 4157 || last != 4199 {
		t.Errorf("missing: %d holes, %d..%d; want one, 4157..4199", n, first, last)
	}
	if err := db.pool.QueryRow(ctx, "SELECT first_seq, last_seq FROM leqnode.restart_skips WHERE kind = 'second'").Scan(&first, &last); err != nil || first != 61 || last != 4096 {
		t.Errorf("restart skip %d..%d (%v), want 61..4096", first, last, err)
	}
}
