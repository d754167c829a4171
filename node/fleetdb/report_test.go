package fleetdb

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/lib/report"
)

// reportMinute is one minute of the test fleet: node i's level in minute k.
func reportLevel(node, k int) float64 { return 52 + 3*float64(node) + float64(k%7) }

const reportMinutes = 180

func stamp(t time.Time) string { return t.UTC().Format("2006-01-02T15:04:05.000Z") }

// minutePayload is a minute record as a node's publisher sends it (configs/schema).
func minutePayload(node, store string, seq int, at time.Time, l float64) []byte {
	return fmt.Appendf(nil, `{"schema_version":1,"kind":"minute","node":%q,"store":%q,"delivery":"live","seq":%d,"start":%q,"start_ms":%d,`+
		`"LAeq":%.2f,"LCeq":%.2f,"LZeq":%.2f,"LAFmax":%.2f,"LAFmin":%.2f,"LAF1":null,"LAF5":null,"LAF10":null,"LAF50":null,"LAF90":null,"LAF95":null,"LAF99":null,`+
		`"LAE":%.2f,"LCpeak":null,"LAImax":%.2f,"valid_seconds":60,"flags":[],"third_octave_LZeq":{"500":%.2f,"1000":%.2f}}`,
		node, store, seq, stamp(at), at.UnixMilli(), l, l+5, l+7, l+6, l-4, l+17.78, l+7, l-6, l-5)
}

// eventPayload is an event record as a node's publisher sends it.
func eventPayload(node, store string, seq int, at time.Time, lae float64) []byte {
	end := at.Add(4 * time.Second)
	return fmt.Appendf(nil, `{"schema_version":1,"kind":"event","node":%q,"store":%q,"delivery":"live","seq":%d,"start":%q,"start_ms":%d,`+
		`"end":%q,"end_ms":%d,"duration_s":4,"LAFmax":%.2f,"LAeq":%.2f,"LAE":%.2f,"LCpeak":null,"flags":[]}`,
		node, store, seq, stamp(at), at.UnixMilli(), stamp(end), end.UnixMilli(), lae-4, lae-6, lae)
}

// TestFleetReportFromDatabase writes the minute and event records of three nodes into a real
// PostgreSQL database through the collector's decoder, and the same records into three stores,
// and checks that the fleet report from the database equals the one from the stores and the
// energy means written out here (ISO 1996-1:2016, 3.1.7).
func TestFleetReportFromDatabase(t *testing.T) {
	db, pg := openTestDB(t)
	ctx := context.Background()
	dir := t.TempDir()
	var stores []string
	for node := range 3 {
		id, store := fmt.Sprintf("wendle-cross-%02d", node+1), fmt.Sprintf("00a1b2c3d4e5f6%02d", node)
		path := filepath.Join(dir, id+".db")
		st, err := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return t0.Add(4 * time.Hour) }})
		if err != nil {
			t.Fatal(err)
		}
		st.Append(&record.Session{At: t0, TimeZone: "UTC", NodeID: id, Site: "Harrowby Lane"})
		var rows []Row
		for k := range reportMinutes {
			at, l := t0.Add(time.Duration(k)*time.Minute), reportLevel(node, k)
			rows = append(rows, decode(t, minutePayload(id, store, k+1, at, l))...)
			st.Append(&record.Minute{Start: at, LAeq: l, LCeq: l + 5, LZeq: l + 7, LAFmax: l + 6, LAFmin: l - 4, LAE: l + 17.78, LAImax: l + 7,
				LAF1: math.NaN(), LAF5: math.NaN(), LAF10: math.NaN(), LAF50: math.NaN(), LAF90: math.NaN(), LAF95: math.NaN(), LAF99: math.NaN(),
				LCpeak: math.NaN(), ValidSeconds: 60, Spectrum: []float64{l - 6, math.NaN(), math.NaN(), l - 5}, FirstBand: -3})
		}
		// A lorry heard by all three, 1.5 s apart.
		at := t0.Add(42*time.Minute + time.Duration(node)*1500*time.Millisecond)
		rows = append(rows, decode(t, eventPayload(id, store, 1, at, 88-float64(node)))...)
		st.Append(&record.Event{Start: at, End: at.Add(4 * time.Second), LAFmax: 84 - float64(node), LAeq: 82 - float64(node), LAE: 88 - float64(node), LCpeak: math.NaN()})
		if err := st.Close(); err != nil {
			t.Fatal(err)
		}
		stores = append(stores, path)
		if _, err := db.Write(ctx, Batch{Rows: rows}); err != nil {
			t.Fatal(err)
		}
		// What the node's status message sets (NoteStatus): its site and position.
		if out, err := pg.Psql("fleet", fmt.Sprintf(`UPDATE leqnode.nodes SET site = 'Harrowby Lane', latitude = %g, longitude = -30
			WHERE node_id = '%s'`, 47+0.001*float64(node), id)); err != nil {
			t.Fatalf("%v: %s", err, out)
		}
	}
	prof, err := profiles.Load("eu-lden")
	if err != nil {
		t.Fatal(err)
	}
	from, to := t0, t0.Add(reportMinutes*time.Minute)
	cfg := report.FleetConfig{Config: report.Config{Profile: prof, Location: time.UTC, From: from, To: to}}
	fromStores := cfg
	fromStores.Stores = stores
	want, err := report.ComputeFleet(ctx, fromStores)
	if err != nil {
		t.Fatal(err)
	}
	got, err := db.FleetReport(ctx, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Nodes) != 3 || len(got.Happenings) != 1 || len(got.Happenings[0].Sightings) != 3 {
		t.Fatalf("%d nodes, %d happenings", len(got.Nodes), len(got.Happenings))
	}
	for i, n := range got.Nodes {
		w := want.Nodes[i]
		var ls []float64
		for k := range reportMinutes {
			ls = append(ls, reportLevel(i, k))
		}
		// LAeq,T = 10 lg((1/N) Σ 10^(L_k/10)) over N equal minutes (ISO 1996-1:2016, 3.1.7).
		var e float64
		for _, l := range ls {
			e += math.Pow(10, l/10)
		}
		mean := 10 * math.Log10(e/float64(len(ls)))
		if n.NodeID != w.NodeID || n.Site != "Harrowby Lane" || !n.HasLocation || math.Abs(n.LAeq-w.LAeq) > 0.005 || math.Abs(n.LAeq-mean) > 0.005 {
			t.Errorf("node %d from the database: %s at %q LAeq %.4f; from its store %s LAeq %.4f; energy mean %.4f", i, n.NodeID, n.Site, n.LAeq, w.NodeID, w.LAeq, mean)
		}
		for k, o := range w.Result.Overall {
			if g := n.Result.Overall[k]; math.Abs(g.LAeq-o.LAeq) > 0.005 && !(math.IsNaN(g.LAeq) && math.IsNaN(o.LAeq)) {
				t.Errorf("%s %s: %.4f from the database, %.4f from the store", n.NodeID, o.Name, g.LAeq, o.LAeq)
			}
		}
		if s := got.Happenings[0].Sightings[i]; s.Node != i || math.Abs(s.Delay.Seconds()-1.5*float64(i)) > 0.001 || math.Abs(s.Event.LAE-(88-float64(i))) > 0.005 {
			t.Errorf("sighting %d: node %d after %v, LAE %.2f", i, s.Node, s.Delay, s.Event.LAE)
		}
	}
}
