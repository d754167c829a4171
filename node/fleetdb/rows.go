package fleetdb

import (
	"encoding/json"
	"errors"
	"fmt"
	"time"
)

// Row is one record ready for its table.
type Row struct {
	Kind  string    // record kind (second, minute, ..., session) or "period"
	Store string    // the node's store id
	Node  string    // the node id
	Seq   int64     // sequence number within (Store, Kind); 0 for periods
	Time  time.Time // the record's own time (its start): decides its partition
	// Delivery is how the record came: live, backlog or resend ("" for periods).
	Delivery string
	vals     []any // every column, in the table's order
}

// Decoder turns validated payloads into rows. Its zero value is not usable: use NewDecoder.
type Decoder struct {
	bands map[string]int
	// Earliest and Ahead bound a record's time: before Earliest or later than Ahead past the
	// present, a record is refused (a node whose clock never synchronised would otherwise
	// create partitions for 1970). Defaults: 2000-01-01 and one day.
	Earliest time.Time
	Ahead    time.Duration
}

// NewDecoder returns a decoder with the default time bounds.
func NewDecoder() *Decoder {
	return &Decoder{bands: bandIndex(), Earliest: time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC), Ahead: 24 * time.Hour}
}

// Rows turns one data payload (decoded by schema.Decode and valid against the schema of its
// kind) into rows. now is the present, for the time bounds. An error says what is wrong with
// the payload in one line.
func (d *Decoder) Rows(doc map[string]any, now time.Time) ([]Row, error) {
	kind, _ := doc["kind"].(string)
	t := tableOf(kind)
	if t == nil {
		return nil, fmt.Errorf("kind %.20q has no table", kind)
	}
	store, _ := doc["store"].(string)
	node, _ := doc["node"].(string)
	delivery, _ := doc["delivery"].(string)
	var rows []Row
	var err error
	if kind == "second" {
		rows, err = d.seconds(t, doc, store, node, delivery)
	} else {
		var r Row
		r, err = d.one(t, doc, store, node, delivery)
		rows = []Row{r}
	}
	if err != nil {
		return nil, err
	}
	for i := range rows {
		rows[i].Delivery = delivery
	}
	for _, r := range rows {
		if r.Time.Before(d.Earliest) || r.Time.After(now.Add(d.Ahead)) {
			return nil, fmt.Errorf("record time %s out of range (clock not synchronised?)", r.Time.Format(time.RFC3339))
		}
	}
	return rows, nil
}

func (d *Decoder) one(t *table, doc map[string]any, store, node, delivery string) (Row, error) {
	r := Row{Kind: t.kind, Store: store, Node: node}
	at, err := value(cTime, doc["start_ms"])
	if err != nil || at == nil {
		return r, errors.New("start_ms missing or not a time")
	}
	r.Time = at.(time.Time)
	if t.kind == periodTable.kind {
		r.vals = []any{store, node, r.Time}
	} else {
		seq, err := value(cInt, doc["seq"])
		if err != nil || seq == nil {
			return r, errors.New("seq missing or not an integer")
		}
		r.Seq = seq.(int64)
		r.vals = []any{store, r.Seq, node, r.Time}
	}
	for _, c := range t.cols {
		if c.typ == cFirstSeq {
			v, err := firstSeqs(doc, c.key)
			if err != nil {
				return r, err
			}
			r.vals = append(r.vals, v)
			continue
		}
		if c.typ == cSpectrum {
			first, lv, err := d.spectrumObject(doc[c.key])
			if err != nil {
				return r, err
			}
			r.vals = append(r.vals, first, lv)
			continue
		}
		v, err := value(c.typ, doc[c.key])
		if err != nil {
			return r, fmt.Errorf("%s: %w", c.key, err)
		}
		r.vals = append(r.vals, v)
	}
	if t.kind != periodTable.kind {
		r.vals = append(r.vals, delivery)
	}
	return r, nil
}

// spectrumObject converts {"12.5": 41.2, ...} to the first band number and the levels of
// consecutive bands (null where a band is missing).
func (d *Decoder) spectrumObject(v any) (any, any, error) {
	m, ok := v.(map[string]any)
	if !ok || len(m) == 0 {
		return nil, nil, nil
	}
	lo, hi := 1000, -1000
	for k := range m {
		x, ok := d.bands[k]
		if !ok {
			return nil, nil, fmt.Errorf("third_octave_LZeq: %.20q is not a nominal one-third-octave midband frequency", k)
		}
		lo, hi = min(lo, x), max(hi, x)
	}
	out := make([]*float32, hi-lo+1)
	for k, lv := range m {
		f, err := value(cReal, lv)
		if err != nil {
			return nil, nil, fmt.Errorf("third_octave_LZeq: %w", err)
		}
		if f != nil {
			x := f.(float32)
			out[d.bands[k]-lo] = &x
		}
	}
	return int16(lo), out, nil
}

// seconds converts a batch of second records in columns.
func (d *Decoder) seconds(t *table, doc map[string]any, store, node, delivery string) ([]Row, error) {
	colsv, _ := doc["columns"].(map[string]any)
	seqs, _ := colsv["seq"].([]any)
	count, err := value(cInt, doc["count"])
	if err != nil || count == nil || int64(len(seqs)) != count.(int64) || len(seqs) == 0 {
		return nil, fmt.Errorf("count %v does not match the %d sequence numbers", doc["count"], len(seqs))
	}
	n := len(seqs)
	for name, c := range colsv {
		if a, ok := c.([]any); !ok || len(a) != n {
			return nil, fmt.Errorf("column %.20s does not hold %d values", name, n)
		}
	}
	var bands []int
	if b, ok := doc["bands_hz"].([]any); ok {
		for _, s := range b {
			x, ok := d.bands[fmt.Sprint(s)]
			if !ok || (len(bands) > 0 && x != bands[len(bands)-1]+1) {
				return nil, fmt.Errorf("bands_hz: %.20v is not the next nominal one-third-octave midband", s)
			}
			bands = append(bands, x)
		}
	}
	at := func(key string, i int) any {
		if a, ok := colsv[key].([]any); ok {
			return a[i]
		}
		return nil
	}
	rows := make([]Row, n)
	var prev int64
	for i := range rows {
		r := Row{Kind: t.kind, Store: store, Node: node}
		seq, err := value(cInt, seqs[i])
		if err != nil || seq == nil || seq.(int64) < 1 || (i > 0 && seq.(int64) <= prev) {
			return nil, fmt.Errorf("columns.seq[%d]: not an increasing sequence number", i)
		}
		r.Seq, prev = seq.(int64), seq.(int64)
		tm, err := value(cTime, at("start_ms", i))
		if err != nil || tm == nil {
			return nil, fmt.Errorf("columns.start_ms[%d]: not a time", i)
		}
		r.Time = tm.(time.Time)
		r.vals = append(make([]any, 0, 20), store, r.Seq, node, r.Time)
		for _, c := range t.cols {
			if c.typ == cSpectrum {
				first, lv, err := spectrumRow(bands, at(c.key, i))
				if err != nil {
					return nil, fmt.Errorf("columns.%s[%d]: %w", c.key, i, err)
				}
				r.vals = append(r.vals, first, lv)
				continue
			}
			v, err := value(c.typ, at(c.key, i))
			if err != nil {
				return nil, fmt.Errorf("columns.%s[%d]: %w", c.key, i, err)
			}
			r.vals = append(r.vals, v)
		}
		r.vals = append(r.vals, delivery)
		rows[i] = r
	}
	if first, _ := value(cInt, doc["seq"]); first == nil || first.(int64) != rows[0].Seq {
		return nil, errors.New("seq differs from columns.seq[0]")
	}
	if last, _ := value(cInt, doc["last_seq"]); last == nil || last.(int64) != rows[n-1].Seq {
		return nil, errors.New("last_seq differs from the last of columns.seq")
	}
	return rows, nil
}

// spectrumRow converts one record's spectrum array (levels of the bands in bands).
func spectrumRow(bands []int, v any) (any, any, error) {
	a, ok := v.([]any)
	if !ok || len(a) == 0 {
		return nil, nil, nil
	}
	if len(a) != len(bands) {
		return nil, nil, fmt.Errorf("%d levels for %d bands", len(a), len(bands))
	}
	out := make([]*float32, len(a))
	for i, lv := range a {
		f, err := value(cReal, lv)
		if err != nil {
			return nil, nil, err
		}
		if f != nil {
			x := f.(float32)
			out[i] = &x
		}
	}
	return int16(bands[0]), out, nil
}

// firstSeqs gathers a session's first sequence numbers per kind (keys prefix+kind, 0 meaning
// "not stated") into a JSON object, or nil when the node states none.
func firstSeqs(doc map[string]any, prefix string) (any, error) {
	m := map[string]int64{}
	for _, t := range tables {
		v, err := value(cInt, doc[prefix+t.kind])
		if err != nil {
			return nil, fmt.Errorf("%s%s: %w", prefix, t.kind, err)
		}
		if v != nil && v.(int64) > 0 {
			m[t.kind] = v.(int64)
		}
	}
	if len(m) == 0 {
		return nil, nil
	}
	b, err := json.Marshal(m)
	return string(b), err
}
