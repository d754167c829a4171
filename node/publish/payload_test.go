package publish

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/buffer/record"
)

// Nominal midband frequencies of the one-third-octave bands 12.5 Hz to 20 kHz (IEC 61260-1:2014
// Annex E, the R10 series of ISO 266), written out here as the check.
var nominalThirds = []string{"12.5", "16", "20", "25", "31.5", "40", "50", "63", "80", "100", "125", "160", "200",
	"250", "315", "400", "500", "630", "800", "1000", "1250", "1600", "2000", "2500", "3150", "4000", "5000",
	"6300", "8000", "10000", "12500", "16000", "20000"}

func TestSecondPayload(t *testing.T) {
	sch := schemas(t)
	raw := []*record.Second{second(0, true), second(1, true), second(2, false)}
	raw[1].LAFmin = math.NaN() // digital silence has no level
	raw[1].LAeq = 61.23456
	raw[1].Flags = record.Dropped | record.Clipped
	raw[1].DroppedSamples = 480
	recs := storedSeconds(t, 40, raw) // sequence numbers 41, 42, 43
	b := appendSeconds(nil, envelope{node: "wendle-cross-03", store: "0123456789abcdef", delivery: DeliveryBacklog}, recs, true, nil)
	validate(t, sch, "second", b)
	var p struct {
		Seq, LastSeq, Count int64
		Start               string
		StartMS             int64 `json:"start_ms"`
		Delivery            string
		Bands               []string `json:"bands_hz"`
		Columns             map[string]json.RawMessage
	}
	if err := json.Unmarshal(b, &p); err != nil {
		t.Fatal(err)
	}
	if p.Seq != 41 || p.Count != 3 || p.Start != "2031-05-04T08:00:00.000Z" || p.StartMS != t0.UnixMilli() || p.Delivery != "backlog" {
		t.Errorf("envelope %+v", p)
	}
	if strings.Join(p.Bands, ",") != strings.Join(nominalThirds, ",") {
		t.Errorf("bands %v, want %v", p.Bands, nominalThirds)
	}
	col := func(name string) string { return string(p.Columns[name]) }
	for name, want := range map[string]string{
		"seq":             "[41,42,43]",
		"LAeq":            "[55,61.23,57]", // the store keeps 0.01 dB
		"LAFmin":          "[50.2,null,50.2]",
		"flags":           `[["settling"],["clipped","dropped"],[]]`,
		"dropped_samples": "[0,480,0]",
		"duration_s":      "[1,1,1]",
	} {
		if got := col(name); got != want {
			t.Errorf("column %s = %s, want %s", name, got, want)
		}
	}
	var spec [][]any
	if err := json.Unmarshal(p.Columns["third_octave_LZeq"], &spec); err != nil {
		t.Fatal(err)
	}
	if len(spec) != 3 || len(spec[0]) != 33 || spec[2] != nil {
		t.Errorf("spectra shape: %d rows, the third %v (want null: that second had none)", len(spec), spec[2])
	}
}

func TestRecordPayloads(t *testing.T) {
	sch := schemas(t)
	recs := stored(t, 0, append([]record.Record{minute(3, true)}, otherRecords(3)...))
	for _, r := range recs {
		for _, spectra := range []bool{true, false} {
			b := appendRecord(nil, envelope{node: "wendle-cross-03", store: "0123456789abcdef", delivery: DeliveryLive}, r, spectra)
			kind := validate(t, sch, r.Kind().String(), b)
			if kind != r.Kind().String() {
				t.Errorf("kind %s for a %s record", kind, r.Kind())
			}
			var m map[string]any
			_ = json.Unmarshal(b, &m)
			if _, has := m["third_octave_LZeq"]; has != (spectra && (kind == "minute" || kind == "event")) {
				t.Errorf("%s spectra=%v: spectrum present %v", kind, spectra, has)
			}
			if m["seq"] != float64(r.Seq()) || m["start_ms"] != float64(r.Time().UnixMilli()) {
				t.Errorf("%s: seq %v start_ms %v", kind, m["seq"], m["start_ms"])
			}
			if kind == "health" && m["dc_offset"] != nil {
				t.Errorf("health: unmeasured dc_offset %v, want null", m["dc_offset"])
			}
		}
	}
}

// stored appends recs to a new store after skip filler records of each kind and returns them
// read back, with their sequence numbers, as a consumer sees them.
func stored(t testing.TB, skip int, recs []record.Record) []record.Record {
	t.Helper()
	s := openStore(t, filepath.Join(t.TempDir(), "payload.db"))
	defer s.Close()
	kinds := map[record.Kind]bool{}
	for _, r := range recs {
		kinds[r.Kind()] = true
	}
	for k := range kinds {
		for range skip {
			f, _ := record.NewRecord(k)
			switch f := f.(type) {
			case *record.Second:
				f.Start = t0
			case *record.Minute:
				f.Start = t0
			}
			mustAppend(t, s, f)
		}
	}
	for _, r := range recs {
		mustAppend(t, s, r)
	}
	if err := s.Flush(); err != nil {
		t.Fatal(err)
	}
	var out []record.Record
	for _, r := range recs {
		got, err := s.After(r.Kind(), r.Seq()-1, 1)
		if err != nil || len(got) != 1 {
			t.Fatalf("reading back %s %d: %v", r.Kind(), r.Seq(), err)
		}
		out = append(out, got[0])
	}
	return out
}

func storedSeconds(t testing.TB, skip int, recs []*record.Second) []*record.Second {
	t.Helper()
	in := make([]record.Record, len(recs))
	for i, r := range recs {
		in[i] = r
	}
	var out []*record.Second
	for _, r := range stored(t, skip, in) {
		out = append(out, r.(*record.Second))
	}
	return out
}

// monthlyBytes returns the bytes a month (30 days) of MQTT traffic costs for one stream: the
// PUBLISH packets (fixed header, topic, packet id, payload) plus a 4-byte PUBACK each. TCP/IP
// and TLS overheads come on top.
func monthlyBytes(payload, topic, perMonth int) float64 {
	body := 2 + topic + 2 + payload
	header := 2
	for n := body; n > 127; n >>= 7 {
		header++
	}
	return float64(perMonth) * float64(header+body+4)
}

// realistic returns stored records with levels that vary in the last digit, as measured ones
// do, and sequence numbers of seven digits (seconds) and five digits (minutes), as after a month.
func realistic(t testing.TB, n int) ([]*record.Second, []*record.Minute) {
	rng := rand.New(rand.NewPCG(7, 11))
	lvl := func() float64 { return 35 + 50*rng.Float64() }
	var secs []*record.Second
	for i := range n {
		r := second(i, true)
		r.LAeq, r.LCeq, r.LZeq, r.LAFmax, r.LAFmin, r.LASmax, r.LASmin, r.LAImax, r.LCpeak, r.LZpeak, r.LAE =
			lvl(), lvl(), lvl(), lvl(), lvl(), lvl(), lvl(), lvl(), lvl()+20, lvl()+20, lvl()
		for b := range r.Spectrum {
			r.Spectrum[b] = lvl() - 10
		}
		r.Flags = 0
		secs = append(secs, r)
	}
	var mins []*record.Minute
	for i := range n / 60 {
		m := minute(i, true)
		for _, p := range []*float64{&m.LAeq, &m.LCeq, &m.LZeq, &m.LAFmax, &m.LAFmin, &m.LAF1, &m.LAF5, &m.LAF10, &m.LAF50, &m.LAF90, &m.LAF95, &m.LAF99, &m.LAE, &m.LCpeak, &m.LAImax} {
			*p = lvl()
		}
		for b := range m.Spectrum {
			m.Spectrum[b] = lvl() - 10
		}
		mins = append(mins, m)
	}
	all := make([]record.Record, 0, len(secs)+len(mins))
	for _, r := range secs {
		all = append(all, r)
	}
	for _, r := range mins {
		all = append(all, r)
	}
	var ss []*record.Second
	var ms []*record.Minute
	for _, r := range stored(t, 0, all) {
		switch r := r.(type) {
		case *record.Second:
			ss = append(ss, r)
		case *record.Minute:
			ms = append(ms, r)
		}
	}
	return ss, ms
}

// volume measures the mean payload sizes per spectra mode and the bytes a month they cost.
type volume struct {
	mode                                   string
	secondMsg, secondMsg1, minuteMsg, stat int
	month, monthLive                       float64
}

func measureVolume(t testing.TB) []volume {
	secs, mins := realistic(t, 600)
	env := envelope{node: "wendle-cross-03", store: "0123456789abcdef", delivery: DeliveryLive}
	top := newTopics(DefaultTopicPrefix, "wendle-cross-03")
	const month = 30 * 24 * 3600
	var out []volume
	lean := []secondLevel{secondLevels[0], secondLevels[3]} // LAeq, LAFmax
	for _, mode := range []string{SpectraSecond, SpectraMinute, SpectraNone, SpectraMinute + ", seconds LAeq and LAFmax only"} {
		v := volume{mode: mode}
		var sb, mb int
		var q []secondLevel
		if strings.Contains(mode, "only") {
			q = lean
		}
		for i := 0; i < len(secs); i += DefaultSecondsPerMessage {
			sb += len(appendSeconds(nil, env, secs[i:i+DefaultSecondsPerMessage], mode == SpectraSecond, q))
		}
		for _, m := range mins {
			mb += len(appendRecord(nil, env, m, mode != SpectraNone))
		}
		v.secondMsg = sb / (len(secs) / DefaultSecondsPerMessage)
		// With the default live_wait (1.5 s) a live message holds two seconds: the first waits
		// 1.5 s, the second, measured a second later, 0.5 s.
		var two int
		for i := 0; i < len(secs); i += 2 {
			two += len(appendSeconds(nil, env, secs[i:i+2], mode == SpectraSecond, q))
		}
		v.secondMsg1 = two / (len(secs) / 2)
		v.minuteMsg = mb / len(mins)
		p := &Publisher{id: Identity{NodeID: "wendle-cross-03", SoftwareVersion: "0.1.0"}, cfg: Config{Spectra: SpectraMinute, SecondsPerMessage: 10}}
		v.stat = len(p.appendStatusFields(nil, "online", true, Status{Pending: map[string]uint64{}}, "0123456789abcdef", map[string]uint64{}))
		v.month = monthlyBytes(v.secondMsg, len(top.data(DeliveryLive, record.KindSecond)), month/DefaultSecondsPerMessage) +
			monthlyBytes(v.minuteMsg, len(top.data(DeliveryLive, record.KindMinute)), month/60) +
			monthlyBytes(v.stat, len(top.status), month/60)
		v.monthLive = v.month - monthlyBytes(v.secondMsg, len(top.data(DeliveryLive, record.KindSecond)), month/DefaultSecondsPerMessage) +
			monthlyBytes(v.secondMsg1, len(top.data(DeliveryLive, record.KindSecond)), month/2)
		out = append(out, v)
	}
	return out
}

// TestMonthlyVolume prints the README's table of MQTT volume per spectra mode and checks the
// order of magnitude the configuration documentation states.
func TestMonthlyVolume(t *testing.T) {
	vols := measureVolume(t)
	var b strings.Builder
	fmt.Fprintf(&b, "| spectra | second message (10 s) | second message (2 s) | minute message | status | MB per month, messages of 10 s | MB per month, live messages of 2 s (default) |\n|---|---|---|---|---|---|---|\n")
	for _, v := range vols {
		fmt.Fprintf(&b, "| %s | %d B | %d B | %d B | %d B | %.0f | %.0f |\n", v.mode, v.secondMsg, v.secondMsg1, v.minuteMsg, v.stat, v.month/1e6, v.monthLive/1e6)
	}
	t.Logf("MQTT volume per node (payloads measured, 30 days, QoS 1 packets, TCP/TLS not counted):\n%s", b.String())
	// The README quotes these figures; per-second spectra cost about a gigabyte a month before
	// TCP/TLS overheads, at least twice the other modes.
	if v := vols[0]; v.month < 0.8e9 || v.month < 2*vols[1].month {
		t.Errorf("per-second spectra: %.0f MB a month; the README says about a gigabyte, over twice the per-minute mode", v.month/1e6)
	}
	if vols[3].month > vols[1].month || vols[2].month > vols[1].month || vols[1].month > vols[0].month {
		t.Errorf("volumes do not fall from second to minute to none spectra: %+v", vols)
	}
}

// BenchmarkEncodeSecondBatch measures building one 10-second message with spectra.
func BenchmarkEncodeSecondBatch(b *testing.B) {
	secs, _ := realistic(b, 10)
	env := envelope{node: "wendle-cross-03", store: "0123456789abcdef", delivery: DeliveryLive}
	buf := make([]byte, 0, 8192)
	b.ReportAllocs()
	for b.Loop() {
		buf = appendSeconds(buf[:0], env, secs, true, nil)
	}
	b.SetBytes(int64(len(buf)))
}
