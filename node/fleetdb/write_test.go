package fleetdb

import (
	"context"
	"encoding/json"
	"fmt"
	"strings"
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

// TestFleet: the fleet summary of one node from its status, records, health and calibration.
func TestFleet(t *testing.T) {
	db, _ := openTestDB(t)
	ctx := context.Background()
	now := time.Now().UTC().Truncate(time.Second)
	if err := db.NoteStatus(ctx, map[string]any{"node": "wendle-cross-03", "store": storeA, "state": "online",
		"site": "Harrowby Lane, Wendle Cross", "commands": true, "backlog": false}); err != nil {
		t.Fatal(err)
	}
	at := func(d time.Duration) (string, int64) {
		x := now.Add(d)
		return x.Format("2006-01-02T15:04:05.000Z"), x.UnixMilli()
	}
	calStart, calMs := at(-36 * time.Hour)
	hStart, hMs := at(-time.Minute)
	payloads := [][]byte{
		fmt.Appendf(nil, `{"schema_version":1,"kind":"calibration","node":"wendle-cross-03","store":%q,"delivery":"live","seq":1,"start":%q,"start_ms":%d,"reference_dB":94,"measured_dB":94.1,"deviation_dB":0.1,"frequency_hz":1000,"stability_dB":0.02,"sensitivity_before_dBFS":-26,"sensitivity_after_dBFS":-26,"applied":true,"passed":true,"flags":[]}`, storeA, calStart, calMs),
		fmt.Appendf(nil, `{"schema_version":1,"kind":"health","node":"wendle-cross-03","store":%q,"delivery":"live","seq":1,"start":%q,"start_ms":%d,"flags":["dc-offset"],"clipped_samples":0,"under_range_seconds":0,"dropped_samples":0,"queue_overflows":0,"store_bytes":1,"self_test_checks":1,"self_test_failed":0,"silent":false,"stuck":false,"clock_synced":false,"dc_offset":0.01,"cpu_percent":5,"memory_mb":20,"disk_free_mb":900,"clock_error_ms":null,"temperature_c":40}`, storeA, hStart, hMs),
	}
	var rows []Row
	for _, p := range payloads {
		doc := decodeAt(t, p, now)
		rows = append(rows, doc...)
	}
	// 30 second records in the last hour; the last has LAeq 50 + 30 % 10 = 50.
	for _, r := range decodeAt(t, secondPayload("wendle-cross-03", storeA, 1, 30), now.Add(24*365*10*time.Hour)) {
		r.Time = now.Add(-time.Hour).Add(time.Duration(r.Seq) * time.Second)
		r.vals[3] = r.Time
		rows = append(rows, r)
	}
	if _, err := db.Write(ctx, Batch{Rows: rows}); err != nil {
		t.Fatal(err)
	}
	got, err := db.Fleet(ctx, now.Add(-time.Hour), now)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 1 {
		t.Fatalf("%d nodes, want 1", len(got))
	}
	n := got[0]
	if n.Node != "wendle-cross-03" || !n.Online || n.Site != "Harrowby Lane, Wendle Cross" {
		t.Errorf("node %+v", n)
	}
	if strings.Join(n.Health, ",") != "dc-offset,clock-unsynced" {
		t.Errorf("health flags %v, want dc-offset and clock-unsynced", n.Health)
	}
	if n.DaysSinceCalibration == nil || *n.DaysSinceCalibration < 1.49 || *n.DaysSinceCalibration > 1.51 {
		t.Errorf("days since calibration %v, want 1.5", n.DaysSinceCalibration)
	}
	// 30 one-second records in a one-hour range: 30/3600 (arithmetic).
	if n.Coverage < 30.0/3600-1e-9 || n.Coverage > 30.0/3600+1e-9 || n.Missing != 0 {
		t.Errorf("coverage %v missing %d, want %v and 0", n.Coverage, n.Missing, 30.0/3600)
	}
	if n.LAeq == nil || *n.LAeq != 50 {
		t.Errorf("last LAeq %v, want 50", n.LAeq)
	}
}

// TestPeriods: a node's period message lands in period_indicators; sent again with new values
// (the node recomputed it), it replaces the first.
func TestPeriods(t *testing.T) {
	db, _ := openTestDB(t)
	ctx := context.Background()
	period := func(laeq float64) []byte {
		return fmt.Appendf(nil, `{"schema_version":1,"kind":"period","node":"wendle-cross-03","store":%q,"profile":"eu-lden","period":"night","day":"2031-05-03","start":"2031-05-03T21:00:00.000Z","start_ms":%d,"end":"2031-05-04T05:00:00.000Z","end_ms":%d,"hours":8,"penalty_dB":10,"LAeq":%g,"LCeq":55.2,"LAF10":48.1,"LAF90":38.2,"LAFmax":71.3,"events":4,"limit_dB":45,"exceeds":false,"coverage":0.98,"coverage_low":false,"bound":"lower","valid_seconds":28224,"overload_seconds":3}`,
			storeA, time.Date(2031, 5, 3, 21, 0, 0, 0, time.UTC).UnixMilli(), time.Date(2031, 5, 4, 5, 0, 0, 0, time.UTC).UnixMilli(), laeq)
	}
	for _, l := range []float64{43.2, 44.9} {
		if _, err := db.Write(ctx, Batch{Rows: decode(t, period(l))}); err != nil {
			t.Fatal(err)
		}
	}
	var n, overload int
	var laeq float32
	var end time.Time
	var bound string
	if err := db.pool.QueryRow(ctx, "SELECT count(*) OVER (), LAeq, end_time, bound, overload_seconds FROM leqnode.period_indicators").Scan(&n, &laeq, &end, &bound, &overload); err != nil {
		t.Fatal(err)
	}
	if n != 1 || laeq != 44.9 || !end.Equal(time.Date(2031, 5, 4, 5, 0, 0, 0, time.UTC)) || bound != "lower" || overload != 3 {
		t.Errorf("%d periods, LAeq %v, end %s, bound %s, %d overloaded; want one, 44.9, 05:00, lower, 3", n, laeq, end, bound, overload)
	}
}

// TestTailHole: the node's status says it committed and sent events up to 5, three arrived:
// events 4 and 5 are missing; while the status says some are still pending, nothing is.
func TestTailHole(t *testing.T) {
	db, _ := openTestDB(t)
	ctx := context.Background()
	var rows []Row
	for seq := 1; seq <= 3; seq++ {
		at := t0.Add(time.Duration(seq) * time.Minute)
		rows = append(rows, decode(t, fmt.Appendf(nil, `{"schema_version":1,"kind":"event","node":"wendle-cross-03","store":%q,"delivery":"live","seq":%d,"start":%q,"start_ms":%d,"end":%q,"end_ms":%d,"duration_s":4,"LAFmax":81.2,"LAeq":75.1,"LAE":81.1,"LCpeak":99.5,"flags":[]}`,
			storeA, seq, at.Format("2006-01-02T15:04:05.000Z"), at.UnixMilli(), at.Add(4*time.Second).Format("2006-01-02T15:04:05.000Z"), at.Add(4*time.Second).UnixMilli()))...)
	}
	if _, err := db.Write(ctx, Batch{Rows: rows}); err != nil {
		t.Fatal(err)
	}
	status := func(pending int) map[string]any {
		return map[string]any{"node": "wendle-cross-03", "store": storeA, "state": "online", "commands": true, "backlog": false,
			"time_ms":  json.Number(fmt.Sprint(t0.Add(time.Hour).UnixMilli())),
			"last_seq": map[string]any{"event": json.Number("5")}, "pending": map[string]any{"event": json.Number(fmt.Sprint(pending))}}
	}
	for _, tt := range []struct {
		pending, want int
	}{{2, 0}, {0, 2}} {
		if err := db.NoteStatus(ctx, status(tt.pending)); err != nil {
			t.Fatal(err)
		}
		var n int
		var first, last int64
		_ = db.pool.QueryRow(ctx, "SELECT count(*) OVER (), first_seq, last_seq FROM leqnode.missing_records").Scan(&n, &first, &last)
		if got := int(last - first + 1); (tt.want == 0 && n != 0) || (tt.want > 0 && (n != 1 || first != 4 || got != tt.want)) {
			t.Errorf("pending %d: %d holes, %d..%d; want %d missing from 4", tt.pending, n, first, last, tt.want)
		}
	}
}

// TestDropPartitions: partitions wholly older than the cut go, with their records; the
// partition that holds the cut stays, and the dropped records are not counted as missing.
func TestDropPartitions(t *testing.T) {
	db, _ := openTestDB(t)
	ctx := context.Background()
	// Second records on 2031-05-04 (t0) and, 2 days later, 2031-05-06.
	rows := decode(t, secondPayload("wendle-cross-03", storeA, 1, 10))
	later := decode(t, secondPayload("wendle-cross-03", storeA, 11, 10))
	for i := range later {
		later[i].Time = later[i].Time.Add(48 * time.Hour)
		later[i].vals[3] = later[i].Time
	}
	if _, err := db.Write(ctx, Batch{Rows: append(rows, later...)}); err != nil {
		t.Fatal(err)
	}
	dropped, err := db.DropPartitionsBefore(ctx, "second", time.Date(2031, 5, 6, 12, 0, 0, 0, time.UTC))
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(dropped, ",") != "seconds_20310504" {
		t.Errorf("dropped %v, want seconds_20310504", dropped)
	}
	var n, missing int
	if err := db.pool.QueryRow(ctx, "SELECT (SELECT count(*) FROM leqnode.seconds), (SELECT count(*) FROM leqnode.missing_records)").Scan(&n, &missing); err != nil || n != 10 || missing != 0 {
		t.Errorf("%d seconds and %d holes left (%v), want 10 and none", n, missing, err)
	}
	// A record for a dropped day comes again (a resend): its partition is created anew.
	if _, err := db.Write(ctx, Batch{Rows: rows[:1]}); err != nil {
		t.Fatal(err)
	}
	if _, err := db.DropPartitionsBefore(ctx, "session", time.Now()); err == nil {
		t.Error("sessions have no partitions: want an error")
	}
}
