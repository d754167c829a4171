package report

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/lib/report/indicator"
)

// Identity names the node a store belongs to, from the latest session record at or before the
// end of the range (session records of format version 3 carry the node id, site and position).
type Identity struct {
	NodeID string // the configured node id; the store file's name when no session says
	// IDFromFile says that no session record named the node: NodeID is the file's base name.
	IDFromFile          bool
	Site                string
	Latitude, Longitude float64 // decimal degrees, WGS 84, as the node rounded them
	HasLocation         bool
	TimeZone            string // the node's configured IANA zone, "" when unknown
	StoreID             string
	Path                string
}

// ReadIdentity returns the identity of the node that wrote st, from its latest session record
// before to (or its latest at all when none is before to).
func ReadIdentity(st *buffer.Store, to time.Time) (Identity, error) {
	id := Identity{StoreID: st.ID(), Path: st.Path()}
	var sess *record.Session
	err := st.Range(record.KindSession, time.Unix(0, 0), to, func(r record.Record) error {
		sess = r.(*record.Session)
		return nil
	})
	if err != nil {
		return id, fmt.Errorf("report: reading session records of %s: %w", st.Path(), err)
	}
	if sess == nil {
		if r, err := st.Last(record.KindSession); err == nil && r != nil {
			sess = r.(*record.Session)
		}
	}
	if sess != nil {
		id.NodeID, id.Site, id.TimeZone = sess.NodeID, sess.Site, sess.TimeZone
		id.Latitude, id.Longitude, id.HasLocation = sess.Latitude, sess.Longitude, sess.HasLocation()
	}
	if id.NodeID == "" {
		id.NodeID = strings.TrimSuffix(filepath.Base(st.Path()), filepath.Ext(st.Path()))
		id.IDFromFile = true
	}
	return id, nil
}

// FleetConfig selects what a fleet report covers.
type FleetConfig struct {
	// Config holds the profile, zone, time zone, range and options every node's indicators
	// are computed with. A nil Location means the zone of the first node's session record
	// (UTC without one): a fleet report counts days and periods in one zone.
	Config
	// Stores are the store files, one per node, opened read-only.
	Stores []string
	// Window is how close in time the starts of events on different nodes must be for them to
	// count as one happening (see Simultaneous). Default 5 s. A wide window joins unrelated
	// events on busy streets; a narrow one splits a passing source between nodes far apart
	// (sound covers about 340 m a second, and a vehicle takes seconds between nodes).
	Window time.Duration
	// Seconds reads second records as well as minute records. By default a fleet report reads
	// minute records only: the node builds each minute from the seconds the validity rule
	// counts (docs/measuring.md, "Which seconds count"), so levels agree with a report from second records
	// to the minute record's 0.01 dB, at about a sixtieth of the reading. Set it for an exact
	// match with single-node reports; it costs some 4 s per node and month.
	Seconds bool
}

// DefaultWindow is FleetConfig.Window's default.
const DefaultWindow = 5 * time.Second

// HealthCount says how many of a node's health snapshots in the range carried a flag.
type HealthCount struct {
	Flag      string
	Snapshots int
}

// FleetNode holds one node's part of a fleet report.
type FleetNode struct {
	Identity
	Result *indicator.Result
	// LAeq is the energy mean over every valid second of the range (ISO 1996-1:2016, 3.1.7),
	// NaN without data; Bound says which way it may be off.
	LAeq  float64
	Bound record.Bound
	// Calibrations counts the calibrator checks in the range, Failed those that failed.
	Calibrations, Failed int
	// Health counts the health snapshots in the range by flag; Snapshots counts them all.
	Health    []HealthCount
	Snapshots int
}

// Fleet holds a fleet report: every node's indicators and the happenings several nodes saw.
type Fleet struct {
	Config FleetConfig
	Nodes  []FleetNode // sorted by node id
	// Happenings are the events seen by two or more nodes within Config.Window.
	Happenings []Happening
}

// ComputeFleet opens each store of cfg.Stores read-only in turn, computes its indicators with
// Compute (the single-node machinery and its one validity rule) and groups simultaneous events.
// Two stores naming the same node are an error: give one store per node.
func ComputeFleet(ctx context.Context, cfg FleetConfig) (*Fleet, error) {
	if len(cfg.Stores) == 0 {
		return nil, fmt.Errorf("report: no stores given for the fleet report")
	}
	f := newFleet(cfg)
	for _, path := range cfg.Stores {
		st, err := buffer.OpenReadOnly(path, 2*time.Second)
		if err != nil {
			return nil, fmt.Errorf("report: opening store %s: %w (a node still writing it holds it: report over a copy)", path, err)
		}
		id, err := ReadIdentity(st, cfg.To)
		if err == nil {
			err = f.add(ctx, id, st)
		}
		_ = st.Close() // opened read only: closing it loses nothing
		if err != nil {
			return nil, err
		}
	}
	return f.finish(), nil
}

// FleetSource is one node's records for ComputeFleetFrom.
type FleetSource struct {
	Identity
	Records Records
}

// ComputeFleetFrom is ComputeFleet over sources other than store files (cfg.Stores unused),
// such as the collector's database (package fleetdb).
func ComputeFleetFrom(ctx context.Context, cfg FleetConfig, sources []FleetSource) (*Fleet, error) {
	if len(sources) == 0 {
		return nil, fmt.Errorf("report: no nodes for the fleet report")
	}
	f := newFleet(cfg)
	for _, s := range sources {
		if err := f.add(ctx, s.Identity, s.Records); err != nil {
			return nil, err
		}
	}
	return f.finish(), nil
}

func newFleet(cfg FleetConfig) *Fleet {
	if cfg.Window <= 0 {
		cfg.Window = DefaultWindow
	}
	return &Fleet{Config: cfg}
}

// add computes one node's part. The first node without a zone set decides the fleet's zone.
func (f *Fleet) add(ctx context.Context, id Identity, recs Records) error {
	for _, n := range f.Nodes {
		if n.NodeID == id.NodeID {
			return fmt.Errorf("report: node %q is in two stores, %s and %s: give one store per node", id.NodeID, n.Path, id.Path)
		}
	}
	if f.Config.Location == nil {
		f.Config.Location = time.UTC
		if id.TimeZone != "" {
			if l, err := time.LoadLocation(id.TimeZone); err == nil {
				f.Config.Location = l
			}
		}
	}
	n, err := computeNode(ctx, id, recs, f.Config)
	if err != nil {
		return err
	}
	f.Nodes = append(f.Nodes, n)
	return nil
}

// finish sorts the nodes and groups their simultaneous events.
func (f *Fleet) finish() *Fleet {
	sort.Slice(f.Nodes, func(i, j int) bool { return f.Nodes[i].NodeID < f.Nodes[j].NodeID })
	evs := make([][]*record.Event, len(f.Nodes))
	for i, n := range f.Nodes {
		evs[i] = n.Result.Events
	}
	f.Happenings = Simultaneous(evs, f.Config.Window)
	return f
}

// computeNode computes one node's indicators, calibrations and health counts.
func computeNode(ctx context.Context, id Identity, recs Records, cfg FleetConfig) (FleetNode, error) {
	n := FleetNode{Identity: id}
	c := cfg.Config
	c.skipSeconds = !cfg.Seconds
	var err error
	if n.Result, err = Compute(ctx, recs, c); err != nil {
		return n, fmt.Errorf("report: node %s (%s): %w", n.NodeID, n.Path, err)
	}
	n.LAeq, n.Bound = rangeLevel(n.Result)
	for _, cal := range n.Result.Calibrations {
		n.Calibrations++
		if !cal.OK {
			n.Failed++
		}
	}
	counts := map[string]int{}
	err = recs.Range(record.KindHealth, cfg.From, cfg.To, func(r record.Record) error {
		n.Snapshots++
		for _, name := range r.(*record.Health).Flags.Names() {
			counts[name]++
		}
		return nil
	})
	if err != nil {
		return n, fmt.Errorf("report: reading health records of node %s (%s): %w", n.NodeID, n.Path, err)
	}
	for name, k := range counts {
		n.Health = append(n.Health, HealthCount{Flag: name, Snapshots: k})
	}
	sort.Slice(n.Health, func(i, j int) bool { return n.Health[i].Flag < n.Health[j].Flag })
	return n, nil
}

// rangeLevel returns the LAeq over the whole range: the energy mean of the hours' levels
// weighted by their valid seconds, which is the energy mean of every valid second (ISO
// 1996-1:2016, 3.1.7: LAeq,T = 10 lg((1/T) Σ 10^(L_i/10) t_i)).
func rangeLevel(r *indicator.Result) (float64, record.Bound) {
	var e, t float64
	var c indicator.Coverage
	for _, h := range r.Hours {
		if math.IsNaN(h.LAeq) || h.Coverage.Valid <= 0 {
			continue
		}
		e += math.Pow(10, h.LAeq/10) * h.Coverage.Valid
		t += h.Coverage.Valid
		c.Valid += h.Coverage.Valid
		c.Overload += h.Coverage.Overload
		c.UnderRange += h.Coverage.UnderRange
	}
	if t == 0 {
		return math.NaN(), record.Exact
	}
	return 10 * math.Log10(e/t), c.Bound()
}

// IndicatorValue returns a node's value of a named indicator over the range, for the map's
// colours: "LAeq" (the whole range), a period name of the profile (its long-term level), or
// the profile's whole-day indicator (Lden, Ldn). ok is false for a name the report does not
// know.
func (n *FleetNode) IndicatorValue(name string) (v float64, ok bool) {
	r := n.Result
	switch {
	case strings.EqualFold(name, "LAeq"):
		return n.LAeq, true
	case r.Profile.Composite != "" && strings.EqualFold(name, r.Profile.Composite):
		return r.Composite, true
	}
	for _, o := range r.Overall {
		if strings.EqualFold(o.Name, name) {
			return o.LAeq, true
		}
	}
	return math.NaN(), false
}

// IndicatorNames returns the names IndicatorValue knows for a profile's results, the default
// first: the whole-day indicator when the profile has one, else LAeq.
func IndicatorNames(r *indicator.Result) []string {
	var names []string
	if r.Profile.Composite != "" {
		names = append(names, r.Profile.Composite)
	}
	names = append(names, "LAeq")
	for _, p := range r.Profile.Periods {
		names = append(names, p.Name)
	}
	return names
}
