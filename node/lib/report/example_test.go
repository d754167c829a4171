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

// Indicators of one evening from a store: an hour at 60 dB and an hour at 70 dB give
// LAeq 67.4 dB over the two hours.
func ExampleCompute() {
	dir, err := os.MkdirTemp("", "leqnode-example")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)
	start := time.Date(2026, 6, 10, 19, 0, 0, 0, time.UTC)
	st, err := buffer.Open(filepath.Join(dir, "harrowby-lane-1.db"), &buffer.Options{NoSync: true, Now: func() time.Time { return start }})
	if err != nil {
		fmt.Println(err)
		return
	}
	for i := range 7200 {
		l := 60.0
		if i >= 3600 {
			l = 70
		}
		st.Append(&record.Second{Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: l, LCeq: l + 4})
	}
	prof, _ := profiles.Load("eu-lden")
	r, err := report.Compute(context.Background(), st, report.Config{Profile: prof, From: start, To: start.Add(2 * time.Hour)})
	st.Close()
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, p := range r.Periods {
		// The range holds 2 h of the 4 h evening: the period is partial, and its coverage counts
		// against its whole length.
		fmt.Printf("%s from %s: LAeq %.1f dB, LCeq-LAeq %.1f dB, %.0f %% valid, partial %v\n", p.Name, p.From.Format("15:04"), p.LAeq, p.LowFrequency, 100*p.Coverage.Share, p.Partial)
	}
	// Output: evening from 19:00: LAeq 67.4 dB, LCeq-LAeq 4.0 dB, 50 % valid, partial true
}
