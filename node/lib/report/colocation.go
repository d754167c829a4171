package report

import (
	"context"
	"fmt"
	"math"
	"sort"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// DefaultTolerance is the co-location check's default tolerance, dB.
const DefaultTolerance = 1.0

// ColocationConfig selects a co-location check: nodes placed side by side, hearing the same
// sound, compared with one another before an array goes out.
type ColocationConfig struct {
	Stores   []string  // one store per node
	From, To time.Time // [From, To): the time the nodes stood together
	// Tolerance is the largest offset from the group's median, dB, that passes (default 1).
	// The median, not a reference instrument, is the yardstick: a fault shared by most nodes
	// (all with the same wrong sensitivity) passes unseen. Tighter than some 0.5 dB, the
	// nodes' own spread in position and the bands' statistical scatter start to fail good
	// nodes.
	Tolerance float64
}

// NodeOffset is one node's result in a co-location check.
type NodeOffset struct {
	Identity
	LAeq   float64   // energy mean over the common minutes (ISO 1996-1:2016, 3.1.7)
	Offset float64   // LAeq minus the group's median LAeq
	Bands  []float64 // per compared band: the node's LZeq minus the group's median
	// Worst is the band offset of largest magnitude, in band WorstBand (nominal Hz).
	Worst     float64
	WorstBand string
	Pass      bool // |Offset| and every |band offset| within the tolerance
}

// Colocation is the result of a co-location check.
type Colocation struct {
	From, To  time.Time
	Tolerance float64
	// Minutes counts the minutes every node counted whole (sixty valid seconds under the
	// validity rule of package record): only these are compared, so a gap on one node does
	// not bias the comparison.
	Minutes int
	// Nominal names the compared bands (nominal one-third-octave mid-band frequencies, Hz):
	// those every node has in every common minute.
	Nominal     []string
	FirstBand   int
	MedianLAeq  float64
	MedianBands []float64
	// Spread is the largest minus the smallest node LAeq; BandSpread the same per band.
	Spread     float64
	BandSpread []float64
	Nodes      []NodeOffset // sorted by node id
	Pass       bool         // every node passes
}

// colocMinute is one whole valid minute of one node.
type colocMinute struct {
	laeq  float64
	first int
	spec  []float64
}

// CheckColocation compares nodes that stood side by side over [cfg.From, cfg.To): for the
// minutes every node counted whole, each node's LAeq and its one-third-octave LZeq per band
// (energy means over those minutes, ISO 1996-1:2016, 3.1.7) are compared with the group's
// median; a node passes when every offset is within the tolerance. At least three nodes are
// needed: with two, the median lies halfway and cannot say which node is off.
func CheckColocation(ctx context.Context, cfg ColocationConfig) (*Colocation, error) {
	if len(cfg.Stores) < 3 {
		return nil, fmt.Errorf("report: a co-location check needs at least three nodes, got %d: with two the median cannot tell which one is off", len(cfg.Stores))
	}
	if !cfg.From.Before(cfg.To) {
		return nil, fmt.Errorf("report: range start %s is not before its end %s", cfg.From.Format(time.RFC3339), cfg.To.Format(time.RFC3339))
	}
	if cfg.Tolerance <= 0 {
		cfg.Tolerance = DefaultTolerance
	}
	ids := make([]Identity, len(cfg.Stores))
	mins := make([]map[int64]colocMinute, len(cfg.Stores))
	for i, path := range cfg.Stores {
		var err error
		if ids[i], mins[i], err = readWholeMinutes(ctx, path, cfg.From, cfg.To); err != nil {
			return nil, err
		}
		if len(mins[i]) == 0 {
			return nil, fmt.Errorf("report: node %s (%s) has no whole valid minute in %s to %s: check the range and its coverage", ids[i].NodeID, path, cfg.From.Format(time.RFC3339), cfg.To.Format(time.RFC3339))
		}
		for j := range i {
			if ids[j].NodeID == ids[i].NodeID {
				return nil, fmt.Errorf("report: node %q is in two stores, %s and %s: give one store per node", ids[i].NodeID, ids[j].Path, path)
			}
		}
	}
	// The common minutes, and the bands every node has in each of them.
	var common []int64
	for t := range mins[0] {
		ok := true
		for _, m := range mins[1:] {
			if _, in := m[t]; !in {
				ok = false
				break
			}
		}
		if ok {
			common = append(common, t)
		}
	}
	if len(common) == 0 {
		return nil, fmt.Errorf("report: no minute in %s to %s that every node counted whole: check the range and that the nodes ran together", cfg.From.Format(time.RFC3339), cfg.To.Format(time.RFC3339))
	}
	sort.Slice(common, func(i, j int) bool { return common[i] < common[j] })
	lo, hi := math.MinInt, math.MaxInt
	for _, m := range mins {
		for _, t := range common {
			c := m[t]
			lo, hi = max(lo, c.first), min(hi, c.first+len(c.spec)-1)
		}
	}
	nb := max(0, hi-lo+1)
	// Energy sums per node: LAeq, and LZeq per band; a band missing (NaN) in any common
	// minute of any node is not compared.
	laeq := make([]float64, len(mins))
	bands := make([][]float64, len(mins))
	usable := make([]bool, nb)
	for b := range usable {
		usable[b] = true
	}
	for i, m := range mins {
		var e float64
		be := make([]float64, nb)
		for _, t := range common {
			c := m[t]
			e += math.Pow(10, c.laeq/10)
			for b := range nb {
				l := c.spec[lo+b-c.first]
				if math.IsNaN(l) || math.IsInf(l, 0) {
					usable[b] = false
					continue
				}
				be[b] += math.Pow(10, l/10)
			}
		}
		n := float64(len(common))
		laeq[i] = 10 * math.Log10(e/n)
		for b := range be {
			be[b] = 10 * math.Log10(be[b]/n)
		}
		bands[i] = be
	}
	res := &Colocation{From: cfg.From, To: cfg.To, Tolerance: cfg.Tolerance, Minutes: len(common), Pass: true}
	var keep []int
	for b := range nb {
		if usable[b] {
			keep = append(keep, b)
		}
	}
	if len(keep) > 0 {
		res.FirstBand = lo + keep[0]
	}
	res.MedianLAeq = median(laeq)
	res.Spread = spread(laeq)
	for _, b := range keep {
		col := make([]float64, len(bands))
		for i := range bands {
			col[i] = bands[i][b]
		}
		res.Nominal = append(res.Nominal, indicator.Nominal(lo+b))
		res.MedianBands = append(res.MedianBands, median(col))
		res.BandSpread = append(res.BandSpread, spread(col))
	}
	for i := range mins {
		o := NodeOffset{Identity: ids[i], LAeq: laeq[i], Offset: laeq[i] - res.MedianLAeq}
		o.Pass = math.Abs(o.Offset) <= cfg.Tolerance
		for k, b := range keep {
			d := bands[i][b] - res.MedianBands[k]
			o.Bands = append(o.Bands, d)
			if math.Abs(d) >= math.Abs(o.Worst) {
				o.Worst, o.WorstBand = d, res.Nominal[k]
			}
			if math.Abs(d) > cfg.Tolerance {
				o.Pass = false
			}
		}
		res.Pass = res.Pass && o.Pass
		res.Nodes = append(res.Nodes, o)
	}
	sort.Slice(res.Nodes, func(i, j int) bool { return res.Nodes[i].NodeID < res.Nodes[j].NodeID })
	return res, nil
}

// readWholeMinutes reads the minutes of [from, to) that the validity rule counts whole: no
// flag leaves the minute out (record.Judge) and all sixty seconds are valid.
func readWholeMinutes(ctx context.Context, path string, from, to time.Time) (Identity, map[int64]colocMinute, error) {
	st, err := buffer.OpenReadOnly(path, 2*time.Second)
	if err != nil {
		return Identity{}, nil, fmt.Errorf("report: opening store %s: %w (a node still writing it holds it: check a copy)", path, err)
	}
	defer func() { _ = st.Close() }() // opened read only: closing it loses nothing
	id, err := ReadIdentity(st, to)
	if err != nil {
		return id, nil, err
	}
	out := map[int64]colocMinute{}
	err = st.Range(record.KindMinute, from, to, func(r record.Record) error {
		m := r.(*record.Minute)
		t := m.Tally()
		if record.Judge(m.Flags, m.LAeq) != record.Counted || t.Counted < 60 || t.LeftOutTotal() > 0 || len(m.Spectrum) == 0 {
			return ctx.Err()
		}
		out[m.Start.Unix()] = colocMinute{laeq: m.LAeq, first: m.FirstBand, spec: m.Spectrum}
		return ctx.Err()
	})
	if err != nil {
		return id, nil, fmt.Errorf("report: reading minute records of %s: %w", path, err)
	}
	return id, out, nil
}

// median returns the median of v (the mean of the middle two for an even count).
func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

func spread(v []float64) float64 {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, x := range v {
		lo, hi = min(lo, x), max(hi, x)
	}
	return hi - lo
}
