package report_test

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/csv"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/lib/report"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
	"github.com/leqnode/leqnode/node/testrig"
)

// The test array: four invented nodes of Wendle Cross standing about 100 m apart (positions at
// sea, far from any real place), all hearing the same background noise at their own gain, a
// loud burst that reaches them one after the other, and a burst of each node's own. Every node
// hears the same sound energy, so their levels differ by their gains alone.
const (
	fleetRate    = 16000
	fleetSeconds = 240
	bgLevel      = 55.0  // background noise, dB (RMS of a sine of this level, before weighting)
	burstLevel   = 85.0  // burst noise, dB, same spectrum as the background
	burstLength  = 2.0   // s
	burstAt      = 70.0  // s after the start: the first node's burst
	loneAt       = 150.0 // s: each node's own burst starts here or later, 8 s or more apart
)

type fleetSpec struct {
	id, site string
	lat, lon float64
	gainDB   float64 // the node's level offset: its whole signal is scaled by it
	delay    float64 // s: when the burst reaches it after the first node
	lone     float64 // s: a burst of its own, which no other node hears within the window
}

var fleetSpecs = []fleetSpec{
	{"wendle-cross-01", "Harrowby Lane 2", 47.0000, -30.0000, 0, 0, loneAt},
	{"wendle-cross-02", "Harrowby Lane 14", 47.0009, -30.0000, 0.2, 3.0, loneAt + 25},
	{"wendle-cross-03", "Mill Row 1", 47.0000, -29.9987, -0.3, 1.5, loneAt + 8}, // 8 s after 01's: not the same happening
	{"wendle-cross-04", "Mill Row 9", 47.0009, -29.9987, 1.5, 4.5, loneAt + 40},
}

// amp returns the RMS-equivalent sine peak for a level with sensitivity -26 dBFS (94 dB SPL at
// -26 dBFS, AES17 full scale for a sine).
func amp(l float64) float64 { return math.Pow(10, (l-94-26)/20) }

// noise is a uniform white noise generator with a fixed sequence per seed.
type noise uint64

func (n *noise) next() float64 {
	*n = *n*6364136223846793005 + 1442695040888963407
	return float64(uint64(*n)>>11)/float64(1<<53)*2 - 1 // uniform [-1, 1): RMS 1/√3
}

func fleetSignal(s fleetSpec) []byte {
	g := math.Pow(10, s.gainDB/20)
	bg, gen := noise(11), noise(23)
	k := math.Sqrt(3) / math.Sqrt2                       // uniform noise to the RMS of a sine of the same peak
	burst := make([]float64, int(burstLength*fleetRate)) // one burst, the same wherever it is heard
	for i := range burst {
		burst[i] = amp(burstLevel) * k * gen.next()
	}
	out := make([]byte, 4*fleetSeconds*fleetRate)
	for i := range fleetSeconds * fleetRate {
		v := amp(bgLevel) * k * bg.next()
		for _, at := range []float64{burstAt + s.delay, s.lone} {
			if j := i - int(math.Round(at*fleetRate)); j >= 0 && j < len(burst) {
				v += burst[j]
			}
		}
		binary.LittleEndian.PutUint32(out[4*i:], math.Float32bits(float32(g*v)))
	}
	return out
}

var fleetStart = time.Date(2026, 6, 1, 6, 0, 0, 0, time.UTC)

// runFleetNode runs a real node (package node) on the node's signal, replayed faster than real
// time with sample-count time stamps from fleetStart, into a new store; it returns the path.
func runFleetNode(t *testing.T, dir string, s fleetSpec) string {
	t.Helper()
	path := filepath.Join(dir, s.id+".db")
	st, err := buffer.Open(path, &buffer.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	src, err := capture.NewReader(capture.Config{Kind: capture.KindStdin, StdinFormat: capture.StdinRaw, SampleRate: fleetRate,
		Sample: capture.Float32, Channels: 1}, bytes.NewReader(fleetSignal(s)), nil)
	if err != nil {
		t.Fatal(err)
	}
	n, err := node.New(node.Options{
		Source: src, Store: st, SensitivityDBFS: -26, Bands: dsp.Third, SecondSpectra: true, Lossless: true, SampleTimed: true, SampleOrigin: fleetStart,
		Settling: 2 * time.Second, Events: &dsp.EventConfig{Threshold: 70, Hysteresis: 3, MaxDuration: 60},
		Session: record.Session{SoftwareVersion: "test", TimeZone: "UTC", NodeID: s.id, Site: s.site, Latitude: s.lat, Longitude: s.lon},
		Logger:  slog.New(slog.DiscardHandler),
	})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	if err := n.Run(ctx); err != nil {
		t.Fatal(err)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

// fleetStores runs every node of fleetSpecs once per test binary run.
func fleetStores(t *testing.T) []string {
	t.Helper()
	dir := t.TempDir()
	var paths []string
	for _, s := range fleetSpecs {
		paths = append(paths, runFleetNode(t, dir, s))
	}
	return paths
}

// countedSeconds returns a store's second records that the validity rule counts, the rule
// applied by hand (docs/measuring.md, "Which seconds count"): flagged calibrating, settling, excluded,
// suspect or dropped, or without a level, are left out.
func countedSeconds(t *testing.T, path string, from, to time.Time) []*record.Second {
	t.Helper()
	st, err := buffer.OpenReadOnly(path, time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var out []*record.Second
	leftOut := record.Calibrating | record.Settling | record.Excluded | record.Suspect | record.Dropped | record.DigitalSilence
	err = st.Range(record.KindSecond, from, to, func(r record.Record) error {
		s := r.(*record.Second)
		if s.Flags&leftOut == 0 && !math.IsNaN(s.LAeq) {
			out = append(out, s)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// energyMean is LAeq,T = 10 lg((1/T) Σ t_i 10^(L_i/10)), T = Σ t_i (ISO 1996-1:2016, 3.1.7),
// written out here apart from the code under test.
func energyMean(ls, ts []float64) float64 {
	var e, T float64
	for i := range ls {
		e += ts[i] * math.Pow(10, ls[i]/10)
		T += ts[i]
	}
	return 10 * math.Log10(e/T)
}

// TestFleetReport runs four real nodes and checks the fleet report's numbers against each
// node's single-node report, against energy means written out here, against the level offsets
// the signals were built with, and the simultaneous burst against the order and delays it was
// built with.
func TestFleetReport(t *testing.T) {
	paths := fleetStores(t)
	ctx := context.Background()
	prof, err := profiles.Load("eu-lden")
	if err != nil {
		t.Fatal(err)
	}
	from, to := fleetStart, fleetStart.Add(fleetSeconds*time.Second)
	cfg := report.Config{Profile: prof, Location: time.UTC, From: from, To: to}
	f, err := report.ComputeFleet(ctx, report.FleetConfig{Config: cfg, Stores: paths})
	if err != nil {
		t.Fatal(err)
	}
	if len(f.Nodes) != len(fleetSpecs) {
		t.Fatalf("%d nodes", len(f.Nodes))
	}
	for i, s := range fleetSpecs {
		n := f.Nodes[i]
		if n.NodeID != s.id || n.Site != s.site || !n.HasLocation || n.Latitude != s.lat || n.Longitude != s.lon || n.IDFromFile {
			t.Errorf("node %d identity %+v, want %s at %s (%.4f, %.4f)", i, n.Identity, s.id, s.site, s.lat, s.lon)
		}
		// Against the energy mean of the counted seconds, written out here.
		secs := countedSeconds(t, paths[i], from, to)
		ls, ts := make([]float64, len(secs)), make([]float64, len(secs))
		for k, sec := range secs {
			ls[k], ts[k] = sec.LAeq, sec.Duration.Seconds()
		}
		want := energyMean(ls, ts)
		if math.Abs(n.LAeq-want) > 0.02 {
			t.Errorf("%s: fleet LAeq %.3f, energy mean of its counted seconds %.3f", s.id, n.LAeq, want)
		}
		// Against the node's own report from second records.
		single := singleReport(t, paths[i], cfg)
		for k, o := range single.Overall {
			if fo := n.Result.Overall[k]; math.Abs(fo.LAeq-o.LAeq) > 0.02 || fo.Events != o.Events {
				t.Errorf("%s %s: fleet LAeq %.3f with %d events, single-node report %.3f with %d", s.id, o.Name, fo.LAeq, fo.Events, o.LAeq, o.Events)
			}
		}
	}
	// Read from second records as well, the fleet report equals the single-node reports.
	exact, err := report.ComputeFleet(ctx, report.FleetConfig{Config: cfg, Stores: paths, Seconds: true})
	if err != nil {
		t.Fatal(err)
	}
	for i, n := range exact.Nodes {
		single := singleReport(t, paths[i], cfg)
		for k, o := range single.Overall {
			if fo := n.Result.Overall[k]; fo.LAeq != o.LAeq && !(math.IsNaN(fo.LAeq) && math.IsNaN(o.LAeq)) {
				t.Errorf("%s %s from seconds: fleet LAeq %v, single-node report %v", n.NodeID, o.Name, fo.LAeq, o.LAeq)
			}
		}
	}

	// The offsets the signals were built with: every level scales by the node's gain.
	for i, s := range fleetSpecs[1:] {
		if d := f.Nodes[i+1].LAeq - f.Nodes[0].LAeq; math.Abs(d-s.gainDB) > 0.02 {
			t.Errorf("%s reads %+.3f dB against %s, built with %+.1f dB", s.id, d, fleetSpecs[0].id, s.gainDB)
		}
	}

	// One happening: the burst, seen by all four in the order of their delays; the lone bursts
	// 8 s apart stay apart.
	if len(f.Happenings) != 1 {
		t.Fatalf("%d happenings, want 1: %+v", len(f.Happenings), f.Happenings)
	}
	h := f.Happenings[0]
	order := append([]fleetSpec(nil), fleetSpecs...)
	sort.SliceStable(order, func(a, b int) bool { return order[a].delay < order[b].delay })
	if len(h.Sightings) != len(order) {
		t.Fatalf("happening seen by %d nodes", len(h.Sightings))
	}
	// The background's A-weighted level: the burst has its spectrum, 30 dB up.
	for k, sg := range h.Sightings {
		n, s := f.Nodes[sg.Node], order[k]
		if n.NodeID != s.id || math.Abs(sg.Delay.Seconds()-s.delay) > 0.1 {
			t.Errorf("sighting %d: %s after %.2f s, want %s after %.1f s", k+1, n.NodeID, sg.Delay.Seconds(), s.id, s.delay)
		}
		bg := backgroundLA(t, paths[sg.Node])
		// LAFmax of a steady burst is its level; LAE = LAeq,T + 10 lg(T/T0) with T0 = 1 s
		// (ISO 1996-1:2016, 3.1.8, from memory).
		wantMax, wantLAE := bg+burstLevel-bgLevel, bg+burstLevel-bgLevel+10*math.Log10(burstLength)
		if math.Abs(sg.Event.LAFmax-wantMax) > 0.7 || math.Abs(sg.Event.LAE-wantLAE) > 0.5 {
			t.Errorf("%s: burst LAFmax %.2f LAE %.2f, want %.2f and %.2f", n.NodeID, sg.Event.LAFmax, sg.Event.LAE, wantMax, wantLAE)
		}
	}

	// The files.
	out := t.TempDir()
	if err := report.WriteFleet(out, f, report.FleetMeta{Created: fleetStart}); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{report.FleetNodesFile, report.FleetDailyFile, report.FleetHourlyFile, report.FleetCoverageFile, report.SimultaneousFile} {
		rows := readCSVFile(t, filepath.Join(out, name))
		if rows[0][0] != "node_id" && rows[0][2] != "node_id" {
			t.Errorf("%s header %v names no node", name, rows[0])
		}
		if len(rows) < len(fleetSpecs)+1 {
			t.Errorf("%s has %d rows", name, len(rows))
		}
	}
	nodes := readCSVFile(t, filepath.Join(out, report.FleetNodesFile))
	col := map[string]int{}
	for i, c := range nodes[0] {
		col[c] = i
	}
	for i, row := range nodes[1:] {
		if row[col["node_id"]] != fleetSpecs[i].id || row[col["site"]] != fleetSpecs[i].site || row[col["LAeq"]] != strFixed(f.Nodes[i].LAeq) {
			t.Errorf("fleet-nodes.csv row %d: %v", i+1, row)
		}
	}
	sim := readCSVFile(t, filepath.Join(out, report.SimultaneousFile))
	if len(sim) != 5 || sim[1][2] != order[0].id || sim[4][2] != order[3].id || sim[4][4] != "4" {
		t.Errorf("simultaneous.csv:\n%v", sim)
	}
	page, err := os.ReadFile(filepath.Join(out, report.FleetHTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"wendle-cross-04", "Mill Row 9", "type-approved", "data:image/png;base64,", "Simultaneous events"} {
		if !bytes.Contains(page, []byte(want)) {
			t.Errorf("fleet.html lacks %q", want)
		}
	}
	for _, bad := range []string{"http://", "https://", "<script", "<link"} {
		if bytes.Contains(page, []byte(bad)) {
			t.Errorf("fleet.html holds %q", bad)
		}
	}
	saveShots(t, "fleet", testrig.CheckPage(t, "file://"+filepath.Join(out, report.FleetHTMLFile), testrig.Phone, testrig.Desktop))

	// The co-location check on the same nodes: they heard the same sound at gains 0, +0.2,
	// -0.3 and +1.5 dB. The median gain is 0.1 dB, so the offsets are -0.1, +0.1, -0.4 and +1.4
	// dB, overall and in every band: the +1.5 dB node fails at 1 dB, the others pass.
	c, err := report.CheckColocation(ctx, report.ColocationConfig{Stores: paths, From: from, To: to, Tolerance: 1})
	if err != nil {
		t.Fatal(err)
	}
	gains := []float64{0, 0.2, -0.3, 1.5}
	med := (0 + 0.2) / 2.0 // the middle two of -0.3, 0, 0.2, 1.5
	if c.Minutes != 3 || c.Pass || len(c.Nominal) < 20 {
		t.Errorf("co-location: %d minutes, pass %v, %d bands", c.Minutes, c.Pass, len(c.Nominal))
	}
	for i, n := range c.Nodes {
		want := gains[i] - med
		if math.Abs(n.Offset-want) > 0.02 || n.Pass != (i != 3) {
			t.Errorf("co-location %s: offset %+.3f pass %v, want %+.2f pass %v", n.NodeID, n.Offset, n.Pass, want, i != 3)
		}
		for k, b := range n.Bands {
			// The bursts reach the nodes at different times, and the band bank's decimating
			// stages are not exactly shift-invariant: the lowest bands carry up to 0.1 dB of it.
			tol := 0.05
			if c.FirstBand+k < -14 { // below 40 Hz
				tol = 0.1
			}
			if math.Abs(b-want) > tol {
				t.Errorf("co-location %s band %s Hz: offset %+.3f, want %+.2f", n.NodeID, c.Nominal[k], b, want)
			}
		}
	}
	if math.Abs(c.Spread-1.8) > 0.03 {
		t.Errorf("co-location spread %.3f, want 1.8", c.Spread)
	}
	if err := report.WriteColocation(out, c, fleetStart); err != nil {
		t.Fatal(err)
	}
	saveShots(t, "colocation", testrig.CheckPage(t, "file://"+filepath.Join(out, report.ColocationHTMLFile), testrig.Phone, testrig.Desktop))
}

// saveShots writes screenshots into the directory LEQNODE_REPORT_ARTIFACTS names, if any, for a
// person to look at.
func saveShots(t *testing.T, page string, shots map[string][]byte) {
	dir := os.Getenv("LEQNODE_REPORT_ARTIFACTS")
	if dir == "" {
		return
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	for name, png := range shots {
		if err := os.WriteFile(filepath.Join(dir, page+"-"+name+".png"), png, 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// singleReport computes the single-node report of the store at path.
func singleReport(t *testing.T, path string, cfg report.Config) *indicator.Result {
	t.Helper()
	st, err := buffer.OpenReadOnly(path, time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	r, err := report.Compute(context.Background(), st, cfg)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// backgroundLA returns the energy mean of a node's counted seconds in the quiet minute before
// the burst (20 to 60 s), written out as in energyMean.
func backgroundLA(t *testing.T, path string) float64 {
	secs := countedSeconds(t, path, fleetStart.Add(20*time.Second), fleetStart.Add(60*time.Second))
	ls, ts := make([]float64, len(secs)), make([]float64, len(secs))
	for k, s := range secs {
		ls[k], ts[k] = s.LAeq, s.Duration.Seconds()
	}
	return energyMean(ls, ts)
}

func strFixed(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

func readCSVFile(t *testing.T, path string) [][]string {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(bytes.NewReader(data)).ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return rows
}
