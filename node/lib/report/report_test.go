package report

import (
	"bytes"
	"context"
	"encoding/csv"
	"image"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"gonum.org/v1/plot/font"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
	"github.com/leqnode/leqnode/node/testrig"
)

// The test store: the node "wendle-cross-2" on Harrowby Lane (an invented street) in UTC, with a
// level that follows the hour of day: hourLevel(h) dB(A) every second of hour h.
func hourLevel(h int) float64 {
	switch {
	case h >= 7 && h < 19:
		return 62
	case h >= 19 && h < 23:
		return 58
	default:
		return 48
	}
}

// testStore fills a real bbolt store with days of second and minute records from start (UTC
// midnight), plus events, a gap, a calibrating stretch and a calibration record. Each minute
// record's histogram holds ten level samples per second (the node holds a hundred), its
// spectrum a smooth shape with the level spread over the bands.
func testStore(tb testing.TB, path string, start time.Time, days int) {
	tb.Helper()
	end := start.Add(time.Duration(days) * 24 * time.Hour)
	st, add := fillStore(tb, path, end)
	add(&record.Session{At: start, SoftwareVersion: "test", SensitivityDBFS: -26, SampleRate: 48000, Device: "test", TimeZone: "UTC"})
	// A gap on the first day from 03:00 to 04:00 and a calibration check at 10:00-10:02.
	gapFrom, gapTo := start.Add(3*time.Hour), start.Add(4*time.Hour)
	calFrom, calTo := start.Add(10*time.Hour), start.Add(10*time.Hour+2*time.Minute)
	add(&record.Gap{From: gapFrom, To: gapTo, Reason: "power cut"})
	add(&record.Calibration{At: calTo, Reference: 94, Measured: 94.1, Deviation: 0.1, Frequency: 1000, Stability: 0.02,
		SensitivityBefore: -26, SensitivityAfter: -26.1, Applied: true, OK: true})
	offsets := [10]float64{-3, -2, -1.5, -1, -0.5, 0, 0.5, 1, 2, 4}
	spec := make([]float64, 31) // bands -17 (20 Hz) to 13 (20 kHz)
	for m := start; m.Before(end); m = m.Add(time.Minute) {
		if !m.Before(gapFrom) && m.Before(gapTo) {
			continue
		}
		l := hourLevel(m.Hour())
		var h dsp.Histogram
		var flags record.Flags
		for s := range 60 {
			t := m.Add(time.Duration(s) * time.Second)
			f := record.Flags(0)
			ls := l
			if !t.Before(calFrom) && t.Before(calTo) {
				f, ls = record.Calibrating, 94
			}
			flags |= f
			add(&record.Second{Start: t, Duration: time.Second, LAeq: ls, LCeq: ls + 6, LZeq: ls + 8, LAFmax: ls + 4, LAFmin: ls - 3,
				LASmax: ls + 2, LASmin: ls - 2, LAImax: ls + 5, LCpeak: ls + 20, LZpeak: ls + 21, LAE: ls, Flags: f})
			for _, o := range offsets {
				h.Add(ls + o)
			}
		}
		for i := range spec {
			x := i - 17
			spec[i] = l - 8 - 0.1*float64(x*x)/4
		}
		first, counts := h.Span()
		valid := 60
		if flags != 0 {
			valid = 0
		}
		add(&record.Minute{Start: m, LAeq: l, LCeq: l + 6, LZeq: l + 8, LAFmax: l + 4, LAFmin: l - 3, LAF10: h.Exceeded(10), LAF90: h.Exceeded(90),
			LAImax: l + 5.5, LAE: l + 17.8, LCpeak: l + 20, Spectrum: append([]float64(nil), spec...), FirstBand: -17,
			Histogram: record.LevelHistogram{First: first, Counts: append([]uint32(nil), counts...)}, ValidSeconds: valid, Flags: flags})
	}
	for d := range days {
		for _, hh := range []float64{8.5, 17.25, 23.5} {
			s := start.Add(time.Duration(d)*24*time.Hour + time.Duration(hh*float64(time.Hour)))
			add(&record.Event{Start: s, End: s.Add(6 * time.Second), LAFmax: 80, LAeq: 75, LAE: 75 + 10*math.Log10(6), LCpeak: 98})
		}
	}
	if err := st.Close(); err != nil {
		tb.Fatal(err)
	}
}

// fillStore opens a new store for filling fast (one commit an hour, no sync) whose clock reads
// end, and returns it with a function that appends a record or fails tb.
func fillStore(tb testing.TB, path string, end time.Time) (*buffer.Store, func(record.Record)) {
	tb.Helper()
	st, err := buffer.Open(path, &buffer.Options{Now: func() time.Time { return end }, NoSync: true, CommitInterval: time.Hour, MaxHeld: 1 << 16})
	if err != nil {
		tb.Fatal(err)
	}
	return st, func(r record.Record) {
		if _, err := st.Append(r); err != nil {
			tb.Fatal(err)
		}
	}
}

func loadProfile(tb testing.TB, name string) *profiles.Profile {
	tb.Helper()
	p, err := profiles.Load(name)
	if err != nil {
		tb.Fatal(err)
	}
	return p
}

// TestReportFromStore builds a two-day store, computes the indicators through the store and
// checks them against values written out from the data: Lday 62, Levening 58, Lnight 48 give
// Lden = 10 lg[(12·10^6.2 + 4·10^6.3 + 8·10^5.8)/24] (Directive 2002/49/EC Annex I formula).
func TestReportFromStore(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "wendle-cross-2.db")
	start := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	testStore(t, path, start, 2)
	st, err := buffer.OpenReadOnly(path, time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	prof := loadProfile(t, "eu-lden")
	r, err := Compute(context.Background(), st, Config{Profile: prof, Location: time.UTC, From: start, To: start.Add(48 * time.Hour)})
	if err != nil {
		t.Fatal(err)
	}
	// Reporting days start at 07:00: the night of May 31 (cut), June 1 (complete), June 2 (cut).
	if len(r.Days) != 3 || !r.Days[1].Complete {
		t.Fatalf("%d days, second complete %v", len(r.Days), len(r.Days) > 1 && r.Days[1].Complete)
	}
	p := func(l float64) float64 { return math.Pow(10, l/10) }
	lden := 10 * math.Log10((12*p(62)+4*p(58+5)+8*p(48+10))/24)
	if got := r.Days[1].Composite; math.Abs(got-lden) > 1e-6 {
		t.Errorf("Lden %.4f, want %.4f", got, lden)
	}
	day := r.Periods[r.Days[1].Periods[0]]
	if math.Abs(day.LAeq-62) > 1e-9 || day.Events != 2 {
		t.Errorf("day: LAeq %.3f, %d events", day.LAeq, day.Events)
	}
	// The calibrating two minutes are left out and counted; they are no missing data.
	if day.Coverage.LeftOut[record.ReasonCalibrating] != 120 || day.Coverage.Valid != 12*3600-120 {
		t.Errorf("day coverage %+v", day.Coverage)
	}
	// The first reporting day's night (May 31 23:00 - June 1 07:00, inside the range from 00:00)
	// holds the one-hour gap: 6 h valid of the whole 8 h night (the range cuts its first hour,
	// and a cut period counts its coverage against its whole length) is 75 %.
	night := r.Periods[0]
	if night.Name != "night" || !night.Partial || night.Coverage.Gap != 3600 || math.Abs(night.Coverage.Share-6.0/8) > 1e-9 {
		t.Errorf("first night %s partial %v coverage %+v", night.Name, night.Partial, night.Coverage)
	}
	// LAF10 and LAF90 from the merged histograms (ISO 1996-1:2016, N percent exceedance level,
	// rank ⌈N/100·count⌉ from the loudest, reported as the centre of its 0.1 dB bin, the bins
	// centred on the 0.1 dB grid): a tenth of the samples sit at l + 4 dB, so LAF10 is in the bin
	// of l + 4; LAF90 is at rank 9 of every 10, the samples at l - 2 dB.
	if math.Abs(day.LAF10-(62+4)) > 1e-9 || math.Abs(day.LAF90-(62-2)) > 1e-9 {
		t.Errorf("LAF10 %.2f LAF90 %.2f", day.LAF10, day.LAF90)
	}
	if math.Abs(day.LowFrequency-6) > 1e-9 || math.Abs(day.Impulsiveness-1.5) > 1e-9 {
		t.Errorf("LCeq-LAeq %.2f, impulsiveness %.2f", day.LowFrequency, day.Impulsiveness)
	}
	if len(r.Calibrations) != 1 || len(r.Gaps) != 1 {
		t.Errorf("%d calibrations, %d gaps", len(r.Calibrations), len(r.Gaps))
	}

	// ClosedPeriod at 23:30 on June 1: the evening 19:00-23:00.
	cp, iv, err := ClosedPeriod(context.Background(), st, prof, nil, time.UTC, start.Add(23*time.Hour+30*time.Minute), indicator.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if cp.Name != "evening" || iv.From.Hour() != 19 || math.Abs(cp.LAeq-58) > 1e-9 || cp.Events != 0 {
		t.Errorf("closed period %s from %v LAeq %.2f events %d", cp.Name, iv.From, cp.LAeq, cp.Events)
	}

	// The report files.
	out := filepath.Join(dir, "out")
	if err := Write(out, r, Meta{Node: "wendle-cross-2.db", NodeID: "wendle-cross-2", Site: "Harrowby Lane, Wendle Cross", StoreID: st.ID(), Created: start}); err != nil {
		t.Fatal(err)
	}
	rows := readCSV(t, filepath.Join(out, DailyFile))
	if len(rows) != 4 {
		t.Fatalf("daily.csv has %d rows", len(rows))
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	if got := rows[2][col["Lden"]]; got != strconv.FormatFloat(lden, 'f', 1, 64) {
		t.Errorf("daily.csv Lden %s, want %.1f", got, lden)
	}
	if got := rows[2][col["night_LAeq"]]; got != "48.0" {
		t.Errorf("daily.csv night_LAeq %s", got)
	}
	hours := readCSV(t, filepath.Join(out, HourlyFile))
	hcol := map[string]int{}
	for i, h := range hours[0] {
		hcol[h] = i
	}
	if len(hours) != 49 || hours[4][hcol["LAeq"]] != "" || hours[4][hcol["gap_s"]] != "3600" {
		t.Errorf("hourly.csv: %d rows, 03:00 row %v", len(hours), hours[min(4, len(hours)-1)])
	}
	// Every CSV row names the node and its site.
	for name, rs := range map[string][][]string{DailyFile: rows, HourlyFile: hours} {
		for i, row := range rs {
			want := []string{"wendle-cross-2", "Harrowby Lane, Wendle Cross"}
			if i == 0 {
				want = []string{"node_id", "site"}
			}
			if row[0] != want[0] || row[1] != want[1] {
				t.Errorf("%s row %d starts %q, %q", name, i, row[0], row[1])
				break
			}
		}
	}
	page, err := os.ReadFile(filepath.Join(out, HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Lden", "wendle-cross-2, Harrowby Lane, Wendle Cross (store file wendle-cross-2.db", "type-approved", "Calibration history", "power cut", "data:image/png;base64,",
		"6 events in the range", "<td class=\"l\">2026-06-01 23:30:00</td><td class=\"l\">night</td><td>6.0</td><td>80.0</td>"} {
		if !bytes.Contains(page, []byte(want)) {
			t.Errorf("report.html lacks %q", want)
		}
	}
	// Self-contained: no external resource.
	for _, bad := range []string{"http://", "https://", "<script", "<link"} {
		if bytes.Contains(page, []byte(bad)) {
			t.Errorf("report.html holds %q", bad)
		}
	}
	screenshot(t, filepath.Join(out, HTMLFile))
}

func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return rows
}

// oneDayStore returns a read-only store of one day of testStore's data from 2026-06-01 and
// that day's start; it is closed when the test ends.
func oneDayStore(t *testing.T) (*buffer.Store, time.Time) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "s.db")
	start := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	testStore(t, path, start, 1)
	st, err := buffer.OpenReadOnly(path, time.Second)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	return st, start
}

// TestPlotsNonEmpty: every plot is a PNG image with pixels of more than one colour.
func TestPlotsNonEmpty(t *testing.T) {
	st, start := oneDayStore(t)
	prof := loadProfile(t, "india-2000")
	zone, _ := prof.Zone("commercial")
	r, err := Compute(context.Background(), st, Config{Profile: prof, Zone: zone, Location: time.UTC, From: start, To: start.Add(24 * time.Hour)})
	if err != nil {
		t.Fatal(err)
	}
	for name, f := range map[string]func(*indicator.Result) ([]byte, error){
		"history": historyPlot, "daily": dailyPlot, "hourmap": hourMapPlot, "spectrum": spectrumPlot, "coverage": coveragePlot,
	} {
		data, err := f(r)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		checkPNG(t, name, data)
	}
	// The commercial limits are 65 dB(A) by day and 55 at night (Noise Pollution (Regulation
	// and Control) Rules 2000, Schedule, area B). The range holds the end of the night of May 31
	// (00:00-06:00 at 48 dB), the day (06:00-22:00: 1 h at 48, 12 h at 62 less the two
	// calibrating minutes, 3 h at 58) and the first two hours of the next night (1 h at 58 and
	// 1 h at 48 dB): only that night is above its limit. Energy means written out (ISO
	// 1996-1:2016, 3.1.7).
	want := []struct {
		name    string
		exceeds bool
		laeq    float64
	}{
		{"night", false, 48},
		{"day", false, 10 * math.Log10((3600*math.Pow(10, 4.8)+(12*3600-120)*math.Pow(10, 6.2)+3*3600*math.Pow(10, 5.8))/(16*3600-120))},
		{"night", true, 10 * math.Log10((math.Pow(10, 5.8)+math.Pow(10, 4.8))/2)},
	}
	if len(r.Periods) != len(want) {
		t.Fatalf("%d periods", len(r.Periods))
	}
	for i, w := range want {
		p := r.Periods[i]
		if p.Name != w.name || p.Exceeds != w.exceeds || math.Abs(p.LAeq-w.laeq) > 1e-9 {
			t.Errorf("period %d: %s LAeq %.3f exceeds %v, want %s %.3f %v", i, p.Name, p.LAeq, p.Exceeds, w.name, w.laeq, w.exceeds)
		}
	}
}

func checkPNG(t *testing.T, name string, data []byte) {
	t.Helper()
	img, err := png.Decode(bytes.NewReader(data))
	if err != nil {
		t.Fatalf("%s: not a PNG: %v", name, err)
	}
	b := img.Bounds()
	if b.Dx() < 100 || b.Dy() < 50 {
		t.Errorf("%s: %v image", name, b)
	}
	if !manyColours(img) {
		t.Errorf("%s: the image is blank", name)
	}
}

func manyColours(img image.Image) bool {
	b := img.Bounds()
	first := img.At(b.Min.X, b.Min.Y)
	r0, g0, b0, _ := first.RGBA()
	n := 0
	for y := b.Min.Y; y < b.Max.Y; y += 3 {
		for x := b.Min.X; x < b.Max.X; x += 3 {
			r, g, bb, _ := img.At(x, y).RGBA()
			if r != r0 || g != g0 || bb != b0 {
				n++
			}
		}
	}
	return n > 50
}

// screenshot renders page in headless Debian chromium and checks the screenshot. The browser
// comes with make test-deps (testrig.Need: missing fails under CI=true, skips elsewhere).
func screenshot(t *testing.T, page string) {
	t.Helper()
	const browser = "/usr/lib/chromium/chromium"
	testrig.Need(t, "chromium", browser)
	shot := filepath.Join(t.TempDir(), "report.png")
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
		"--disable-background-networking", "--disable-component-update", "--disable-sync", "--no-first-run",
		"--user-data-dir="+t.TempDir(), "--screenshot="+shot, "--window-size=1200,3000", "file://"+page)
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("chromium: %v: %s", err, lastLines(out))
	}
	data, err := os.ReadFile(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v: %s", err, lastLines(out))
	}
	checkPNG(t, "screenshot", data)
}

func lastLines(b []byte) string {
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	return strings.Join(lines[max(0, len(lines)-5):], " | ")
}

// BenchmarkReport computes and renders a report over days of second and minute records from a
// real bbolt store: LEQNODE_REPORT_DAYS days (default 2; the figure in docs/reports.md uses 30). With
// LEQNODE_REPORT_STORE=FILE the store is built there once and reused by later runs.
func BenchmarkReport(b *testing.B) {
	days := 2
	if v := os.Getenv("LEQNODE_REPORT_DAYS"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 {
			b.Fatalf("LEQNODE_REPORT_DAYS=%q: give a whole number of days", v)
		}
		days = n
	}
	start := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	path := os.Getenv("LEQNODE_REPORT_STORE")
	if path == "" {
		path = filepath.Join(b.TempDir(), "bench.db")
	}
	if _, err := os.Stat(path); err != nil {
		testStore(b, path, start, days)
	}
	prof := loadProfile(b, "eu-lden")
	out := b.TempDir()
	b.ResetTimer()
	for range b.N {
		st, err := buffer.OpenReadOnly(path, time.Second)
		if err != nil {
			b.Fatal(err)
		}
		r, err := Compute(context.Background(), st, Config{Profile: prof, Location: time.UTC, From: start, To: start.Add(time.Duration(days) * 24 * time.Hour)})
		if err != nil {
			b.Fatal(err)
		}
		if err := Write(out, r, Meta{Node: "bench"}); err != nil {
			b.Fatal(err)
		}
		st.Close()
	}
	b.ReportMetric(float64(days), "days")
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/report")
}

// TestReportEmptyRange: a range without records still gives a report, every period marked low
// (coverage 0 %), no level invented.
func TestReportEmptyRange(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "s.db")
	start := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	testStore(t, path, start, 1)
	st, err := buffer.OpenReadOnly(path, time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	from := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
	r, err := Compute(context.Background(), st, Config{Profile: loadProfile(t, "eu-lden"), From: from, To: from.Add(24 * time.Hour)})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range r.Periods {
		if !math.IsNaN(p.LAeq) || !p.Coverage.Low || p.Coverage.Share != 0 {
			t.Errorf("%s: LAeq %v coverage %+v", p.Name, p.LAeq, p.Coverage)
		}
	}
	if err := Write(filepath.Join(dir, "out"), r, Meta{Node: "empty"}); err != nil {
		t.Fatal(err)
	}
}

// TestPlotsShowLimitsAndSansSerif: the per-day bar chart's axis reaches down to every limit,
// so a low night limit is drawn, not only named in the legend (issue 19 item 7: the axis
// started at 50 dB with a 40 dB limit); and the plots' text is sans-serif like the page.
func TestPlotsShowLimitsAndSansSerif(t *testing.T) {
	st, start := oneDayStore(t)
	// An invented zone of Wendle Cross with limits far below the stored levels (48 to 62 dB).
	prof, err := profiles.Parse([]byte("[[period]]\nname = \"day\"\nstart = \"06:00\"\n[[period]]\nname = \"night\"\nstart = \"22:00\"\n"+
		"[[zone]]\nname = \"quiet\"\nlimits = { day = 35, night = 25 }\n"), "quiet-test", "quiet.toml")
	if err != nil {
		t.Fatal(err)
	}
	zone, _ := prof.Zone("quiet")
	r, err := Compute(context.Background(), st, Config{Profile: prof, Zone: zone, Location: time.UTC, From: start, To: start.Add(24 * time.Hour)})
	if err != nil {
		t.Fatal(err)
	}
	p, err := dailyChart(r)
	if err != nil {
		t.Fatal(err)
	}
	// The axis's lowest labelled value lies at or below the lowest limit.
	lowest := math.Inf(1)
	for _, tk := range p.Y.Tick.Marker.Ticks(p.Y.Min, p.Y.Max) {
		if tk.Label == "" {
			continue
		}
		v, err := strconv.ParseFloat(tk.Label, 64)
		if err != nil {
			t.Fatalf("tick label %q", tk.Label)
		}
		lowest = min(lowest, v)
	}
	if lowest > 25 {
		t.Errorf("the bar chart's axis starts at %g dB: the 25 dB night limit is not drawn", lowest)
	}
	for name, f := range map[string]font.Font{"title": p.Title.TextStyle.Font, "y label": p.Y.Label.TextStyle.Font,
		"x ticks": p.X.Tick.Label.Font, "y ticks": p.Y.Tick.Label.Font, "legend": p.Legend.TextStyle.Font} {
		if f.Variant != "Sans" {
			t.Errorf("%s: font %s %s, want a sans-serif", name, f.Typeface, f.Variant)
		}
	}
	data, err := dailyPlot(r)
	if err != nil {
		t.Fatal(err)
	}
	checkPNG(t, "daily", data)
}
