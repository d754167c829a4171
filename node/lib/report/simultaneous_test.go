package report

import (
	"math"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

func TestSimultaneous(t *testing.T) {
	t0 := time.Date(2026, 6, 1, 8, 0, 0, 0, time.UTC)
	ev := func(s float64) *record.Event {
		at := t0.Add(time.Duration(s * float64(time.Second)))
		return &record.Event{Start: at, End: at.Add(3 * time.Second), LAFmax: 80, LAE: 85}
	}
	type seen struct {
		node  int
		delay float64
	}
	tests := []struct {
		name   string
		events [][]*record.Event
		want   [][]seen
	}{
		{"one node only", [][]*record.Event{{ev(0), ev(1)}, {}}, nil},
		{"order by start, not by node", [][]*record.Event{{ev(4)}, {ev(0)}, {ev(2.5)}}, [][]seen{{{1, 0}, {2, 2.5}, {0, 4}}}},
		{"the window's edge belongs in", [][]*record.Event{{ev(0)}, {ev(5)}}, [][]seen{{{0, 0}, {1, 5}}}},
		{"just outside stays apart", [][]*record.Event{{ev(0)}, {ev(5.001)}}, nil},
		// The window runs from the first start, not from event to event: 0, 4 and 8 s make one
		// happening of two nodes; the third node's event is left alone.
		{"no chaining", [][]*record.Event{{ev(0)}, {ev(4)}, {ev(8)}}, [][]seen{{{0, 0}, {1, 4}}}},
		// A node's second event in the window is not a second sighting: it may open the next.
		{"one sighting per node", [][]*record.Event{{ev(0), ev(1)}, {ev(2)}, {ev(3)}}, [][]seen{{{0, 0}, {1, 2}, {2, 3}}}},
		{"two happenings", [][]*record.Event{{ev(0), ev(60)}, {ev(1), ev(62)}}, [][]seen{{{0, 0}, {1, 1}}, {{0, 0}, {1, 2}}}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := Simultaneous(tc.events, DefaultWindow)
			if len(got) != len(tc.want) {
				t.Fatalf("%d happenings, want %d: %+v", len(got), len(tc.want), got)
			}
			for i, h := range got {
				if len(h.Sightings) != len(tc.want[i]) {
					t.Fatalf("happening %d: %d sightings, want %d", i, len(h.Sightings), len(tc.want[i]))
				}
				for k, s := range h.Sightings {
					w := tc.want[i][k]
					if s.Node != w.node || math.Abs(s.Delay.Seconds()-w.delay) > 1e-9 || !h.Start.Equal(h.Sightings[0].Event.Start) {
						t.Errorf("happening %d sighting %d: node %d after %v, want node %d after %g s", i, k, s.Node, s.Delay, w.node, w.delay)
					}
				}
			}
		})
	}
}

// TestProject checks the map's projection against great-circle distances by the haversine
// formula, d = 2R asin √(sin²(Δφ/2) + cos φ1 cos φ2 sin²(Δλ/2)) (a handbook formula, written
// out here): over an array of a few kilometres the two agree within 0.1 %.
func TestProject(t *testing.T) {
	const R = 6371008.8
	rad := math.Pi / 180
	haversine := func(lat1, lon1, lat2, lon2 float64) float64 {
		dp, dl := (lat2-lat1)*rad, (lon2-lon1)*rad
		a := math.Pow(math.Sin(dp/2), 2) + math.Cos(lat1*rad)*math.Cos(lat2*rad)*math.Pow(math.Sin(dl/2), 2)
		return 2 * R * math.Asin(math.Sqrt(a))
	}
	for _, tc := range []struct{ lat, lon []float64 }{
		{[]float64{47.0, 47.0009, 47.0, 47.0009}, []float64{-30.0, -30.0, -29.9987, -29.9987}},
		{[]float64{-12.3, -12.31, -12.33}, []float64{150.2, 150.23, 150.21}},
		{[]float64{64.1, 64.12, 64.105}, []float64{-20.5, -20.46, -20.52}},
	} {
		p := Project(tc.lat, tc.lon)
		for i := range p {
			for j := range i {
				got := math.Hypot(p[i].X-p[j].X, p[i].Y-p[j].Y)
				want := haversine(tc.lat[i], tc.lon[i], tc.lat[j], tc.lon[j])
				if math.Abs(got-want) > 0.001*want {
					t.Errorf("nodes at (%g, %g) and (%g, %g): %.2f m on the map, %.2f m on the sphere", tc.lat[i], tc.lon[i], tc.lat[j], tc.lon[j], got, want)
				}
			}
		}
		// North is up and east is right.
		if tc.lat[1] > tc.lat[0] && p[1].Y <= p[0].Y {
			t.Errorf("north is not up: %+v", p)
		}
	}
	for _, c := range []struct{ span, want float64 }{{400, 100}, {1000, 200}, {90, 20}, {3000, 500}} {
		if got := scaleLength(c.span); got != c.want {
			t.Errorf("scale bar for a %g m map: %g m, want %g", c.span, got, c.want)
		}
	}
}

// TestMapPlot draws a map and checks it is a real image with colour in it.
func TestMapPlot(t *testing.T) {
	img, err := mapPlot([]string{"wendle-cross-01", "wendle-cross-02", "wendle-cross-03"}, []float64{47, 47.001, 47.0005},
		[]float64{-30, -30, -29.998}, []float64{55.2, 61.8, math.NaN()}, "Lden")
	if err != nil {
		t.Fatal(err)
	}
	checkPNG(t, "map", img)
	img, err = mapPlot(nil, nil, nil, nil, "Lden")
	if err != nil {
		t.Fatal(err)
	}
	checkPNG(t, "empty map", img)
}
