package publish

import (
	"time"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp/reference"
)

// SchemaVersion is the version of every payload this package writes. It changes only when a
// field changes meaning or disappears; new fields may appear without a new version.
const SchemaVersion = 1

// Deliveries: how a data message came to be sent (the field "delivery" and the third topic level).
const (
	DeliveryLive    = "live"    // sent as soon as the record was stored
	DeliveryBacklog = "backlog" // stored while the node could not publish, sent after reconnecting
	DeliveryResend  = "resend"  // sent again on a remote resend command
)

// envelope holds what every data message carries besides its records.
type envelope struct {
	node, store string
	delivery    string
	request     string // id of the resend command, for DeliveryResend
}

func (e envelope) head(w *jw, kind string, seq uint64, start time.Time) {
	w.open()
	w.key("schema_version")
	w.int(SchemaVersion)
	w.key("kind")
	w.str(kind)
	w.key("node")
	w.str(e.node)
	w.key("store")
	w.str(e.store)
	w.key("delivery")
	w.str(e.delivery)
	if e.request != "" {
		w.key("request")
		w.str(e.request)
	}
	w.key("seq")
	w.uint(seq)
	w.times("start", start)
}

// flags writes a record's flag names as an array.
func (w *jw) flags(f record.Flags) {
	w.arr()
	for _, n := range f.Names() {
		w.str(n)
	}
	w.end()
}

// spectrumObject writes a one-third-octave spectrum as an object keyed by nominal midband
// frequency, as `leqnode analyze` does: {"12.5": 41.2, ...}.
func (w *jw) spectrumObject(first int, levels []float64) {
	w.key("third_octave_LZeq")
	w.open()
	for i, v := range levels {
		w.key(reference.NominalMidband(3, first+i))
		w.level(v)
	}
	w.close()
}

// appendSeconds appends one message holding recs (at least one, in sequence order) in columns:
// each quantity is an array with one value per record.
// quantities selects the level columns (nil: all of secondLevels).
func appendSeconds(b []byte, e envelope, recs []*record.Second, spectra bool, quantities []secondLevel) []byte {
	if quantities == nil {
		quantities = secondLevels
	}
	w := jw{b}
	e.head(&w, "second", recs[0].Seq(), recs[0].Start)
	w.key("last_seq")
	w.uint(recs[len(recs)-1].Seq())
	w.key("count")
	w.int(int64(len(recs)))
	lo, hi := 0, 0
	if spectra {
		lo, hi = bandSpan(recs)
		if hi > lo {
			w.key("bands_hz")
			w.arr()
			for x := lo; x < hi; x++ {
				w.str(reference.NominalMidband(3, x))
			}
			w.end()
		}
	}
	w.key("columns")
	w.open()
	w.key("seq")
	w.arr()
	for _, r := range recs {
		w.uint(r.Seq())
	}
	w.end()
	w.key("start_ms")
	w.arr()
	for _, r := range recs {
		w.int(r.Start.UnixMilli())
	}
	w.end()
	w.key("duration_s")
	w.arr()
	for _, r := range recs {
		w.num(r.Duration.Seconds(), 6)
	}
	w.end()
	for _, q := range quantities {
		w.key(q.name)
		w.arr()
		for _, r := range recs {
			w.level(q.get(r))
		}
		w.end()
	}
	w.key("flags")
	w.arr()
	for _, r := range recs {
		w.flags(r.Flags)
	}
	w.end()
	w.key("dropped_samples")
	w.arr()
	for _, r := range recs {
		w.uint(r.DroppedSamples)
	}
	w.end()
	if hi > lo {
		w.key("third_octave_LZeq")
		w.arr()
		for _, r := range recs {
			if len(r.Spectrum) == 0 {
				w.null()
				continue
			}
			w.arr()
			for x := lo; x < hi; x++ {
				if i := x - r.FirstBand; i >= 0 && i < len(r.Spectrum) {
					w.level(r.Spectrum[i])
				} else {
					w.null()
				}
			}
			w.end()
		}
		w.end()
	}
	w.close()
	w.close()
	return w.b
}

// bandSpan returns the band numbers [lo, hi) covering every spectrum of recs.
func bandSpan(recs []*record.Second) (lo, hi int) {
	set := false
	for _, r := range recs {
		if len(r.Spectrum) == 0 {
			continue
		}
		a, b := r.FirstBand, r.FirstBand+len(r.Spectrum)
		if !set || a < lo {
			lo = a
		}
		if !set || b > hi {
			hi = b
		}
		set = true
	}
	return lo, hi
}

// secondLevel is one level column of second messages.
type secondLevel struct {
	name string
	get  func(*record.Second) float64
}

// secondLevels are the quantities of a second record, named as leqnode analyze names them.
var secondLevels = []secondLevel{
	{"LAeq", func(r *record.Second) float64 { return r.LAeq }},
	{"LCeq", func(r *record.Second) float64 { return r.LCeq }},
	{"LZeq", func(r *record.Second) float64 { return r.LZeq }},
	{"LAFmax", func(r *record.Second) float64 { return r.LAFmax }},
	{"LAFmin", func(r *record.Second) float64 { return r.LAFmin }},
	{"LASmax", func(r *record.Second) float64 { return r.LASmax }},
	{"LASmin", func(r *record.Second) float64 { return r.LASmin }},
	{"LAImax", func(r *record.Second) float64 { return r.LAImax }},
	{"LCpeak", func(r *record.Second) float64 { return r.LCpeak }},
	{"LZpeak", func(r *record.Second) float64 { return r.LZpeak }},
	{"LAE", func(r *record.Second) float64 { return r.LAE }},
}

// appendRecord appends the message for one record of any kind but second: its fields as the
// record model names and rounds them (record.Fields), then its spectrum.
func appendRecord(b []byte, e envelope, rec record.Record, spectra bool) []byte {
	w := jw{b}
	e.head(&w, rec.Kind().String(), rec.Seq(), rec.Time())
	for _, f := range record.Fields(rec.Kind()) {
		v := f.Value(rec)
		switch f.Type {
		case record.TimeField:
			w.times(f.Name, v.(time.Time))
			continue
		case record.FlagsField:
			w.key(f.Name)
			w.flags(v.(record.Flags))
			continue
		}
		w.key(f.Name)
		switch x := v.(type) {
		case float64:
			w.num(x, f.Decimals)
		case uint64:
			w.uint(x)
		case bool:
			w.bool(x)
		case string:
			w.str(x)
		}
	}
	var first int
	var spec []float64
	switch r := rec.(type) {
	case *record.Minute:
		first, spec = r.FirstBand, r.Spectrum
	case *record.Event:
		first, spec = r.FirstBand, r.Spectrum
	}
	if spectra && len(spec) > 0 {
		w.spectrumObject(first, spec)
	}
	w.close()
	return w.b
}
