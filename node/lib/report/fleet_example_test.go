package report_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/configs/profiles"
	"github.com/leqnode/leqnode/node/lib/report"
)

// A lorry heard by three nodes of Wendle Cross: the first two within the 5 s window make one
// happening; the third hears it too late to be counted with them.
func ExampleSimultaneous() {
	t0 := time.Date(2026, 6, 1, 8, 0, 0, 0, time.UTC)
	ev := func(s float64, lae float64) *record.Event {
		at := t0.Add(time.Duration(s * float64(time.Second)))
		return &record.Event{Start: at, End: at.Add(4 * time.Second), LAFmax: lae - 6, LAE: lae}
	}
	nodes := []string{"wendle-cross-01", "wendle-cross-02", "wendle-cross-03"}
	hs := report.Simultaneous([][]*record.Event{{ev(2.5, 84)}, {ev(0, 88)}, {ev(9, 79)}}, report.DefaultWindow)
	for _, h := range hs {
		for i, s := range h.Sightings {
			fmt.Printf("%d. %s +%.1f s LAE %.0f\n", i+1, nodes[s.Node], s.Delay.Seconds(), s.Event.LAE)
		}
	}
	// Output:
	// 1. wendle-cross-02 +0.0 s LAE 88
	// 2. wendle-cross-01 +2.5 s LAE 84
}

// Two nodes 0.001° of latitude apart stand about 111 m apart on the map.
func ExampleProject() {
	p := report.Project([]float64{47.000, 47.001}, []float64{-30, -30})
	fmt.Printf("%.1f m north\n", p[1].Y-p[0].Y)
	// Output:
	// 111.2 m north
}

// A fleet report over two stores: each names its node in its session record.
func ExampleComputeFleet() {
	dir, _ := os.MkdirTemp("", "fleet")
	defer os.RemoveAll(dir)
	start := time.Date(2026, 6, 1, 19, 0, 0, 0, time.UTC)
	var stores []string
	for i, level := range []float64{58, 64} {
		path := filepath.Join(dir, fmt.Sprintf("n%d.db", i))
		st, _ := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return start.Add(2 * time.Hour) }})
		st.Append(&record.Session{At: start, TimeZone: "UTC", NodeID: fmt.Sprintf("wendle-cross-%02d", i+1), Site: "Harrowby Lane"})
		for m := range 60 {
			st.Append(&record.Minute{Start: start.Add(time.Duration(m) * time.Minute), LAeq: level, ValidSeconds: 60, ValidDuration: time.Minute})
		}
		st.Close()
		stores = append(stores, path)
	}
	prof, _ := profiles.Load("eu-lden")
	f, err := report.ComputeFleet(context.Background(), report.FleetConfig{
		Config: report.Config{Profile: prof, From: start, To: start.Add(time.Hour)},
		Stores: stores,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, n := range f.Nodes {
		fmt.Printf("%s at %s: LAeq %.1f dB, coverage %.0f %%\n", n.NodeID, n.Site, n.LAeq, 100*n.Result.Coverage.Share)
	}
	// Output:
	// wendle-cross-01 at Harrowby Lane: LAeq 58.0 dB, coverage 100 %
	// wendle-cross-02 at Harrowby Lane: LAeq 64.0 dB, coverage 100 %
}
