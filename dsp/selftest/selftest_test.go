package selftest

import (
	"encoding/json"
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/dsp/reference"
)

// TestRunPasses: the node's own chain meets the class 1 limits of IEC 61672-1:2013 (Tables 3,
// 4, 5, 5.5.9, 5.6.5) and IEC 61260-1:2014 (Table 1) in these electrical tests, at the rates
// a node records at. Every group of tests is present.
func TestRunPasses(t *testing.T) {
	for _, fs := range []float64{48000, 44100} {
		r := Run(fs, false)
		if !r.Pass || r.Error != "" {
			for _, c := range r.Failed() {
				t.Errorf("%g Hz: %s: %s: expected %.2f, measured %.3f, limits %+v", fs, c.Group, c.Test, c.Expected, c.Measured, c.Tolerance)
			}
			t.Fatalf("%g Hz: report fails: %s", fs, r.Error)
		}
		groups := map[string]int{}
		for _, c := range r.Checks {
			groups[c.Group]++
		}
		for _, g := range []string{GroupWeighting, GroupLinearity, GroupToneburst, GroupPeak, GroupBands} {
			if groups[g] == 0 {
				t.Errorf("%g Hz: no %s checks", fs, g)
			}
		}
	}
}

// TestRunFull runs the full set at 16 kHz (cheap: a third of the samples of 48 kHz), where
// Table 3 applies up to 0.45 fs = 7.2 kHz (project decision: nominal frequencies below
// 0.45 fs), so 6.3 kHz is the last weighting point, the linearity test moves from 8 kHz to
// 1 kHz, and the report names what it left out.
func TestRunFull(t *testing.T) {
	r := Run(16000, true)
	if !r.Pass {
		for _, c := range r.Failed() {
			t.Errorf("%s: %s: expected %.2f, measured %.3f", c.Group, c.Test, c.Expected, c.Measured)
		}
	}
	var last string
	for _, c := range r.Checks {
		if c.Group == GroupWeighting && strings.HasPrefix(c.Test, "A weighting at ") {
			last = c.Test
		}
		if c.Group == GroupLinearity && !strings.HasPrefix(c.Test, "1 kHz ") {
			t.Errorf("linearity test %q at fs = 16 kHz, want it moved to 1 kHz", c.Test)
		}
	}
	if last != "A weighting at 6300 Hz" {
		t.Errorf("last A weighting point %q, want 6300 Hz", last)
	}
	if len(r.Skipped) == 0 || !strings.Contains(strings.Join(r.Skipped, ";"), "frequency weighting at 8000 Hz") {
		t.Errorf("skipped %q, want the 8 kHz weighting point named", r.Skipped)
	}
}

// TestRunFailsOnDamagedChain: a weighting coefficient changed by 0.1 % (the first numerator
// coefficient of the A-from-C high-pass, which places its double zero at DC) moves the
// A weighting far outside IEC 61672-1:2013 Table 3; the report fails and names the test. The
// same for the C chain.
func TestRunFailsOnDamagedChain(t *testing.T) {
	const fs = 48000
	c, a, err := dsp.WeightingSections(fs)
	if err != nil {
		t.Fatal(err)
	}
	badA := append([]dsp.Section(nil), a...)
	badA[0].B1 *= 1.001
	badC := append([]dsp.Section(nil), c...)
	badC[0].B1 *= 1.001
	for _, tc := range []struct {
		name string
		o    Options
		want string
	}{
		{"A perturbed", Options{ASections: badA}, "A weighting at 63 Hz"},
		{"C perturbed", Options{CSections: badC}, "C weighting at 63 Hz"},
	} {
		r := RunOptions(fs, tc.o)
		if r.Pass {
			t.Errorf("%s: report passes", tc.name)
			continue
		}
		found := false
		for _, f := range r.Failed() {
			found = found || f.Test == tc.want
		}
		if !found {
			t.Errorf("%s: failed checks %v do not name %q", tc.name, r.Failed(), tc.want)
		}
	}
}

func TestRunBadRate(t *testing.T) {
	r := Run(1000, false)
	if r.Pass || r.Error == "" || len(r.Checks) != 1 || r.Checks[0].Group != GroupSetup {
		t.Errorf("rate 1 kHz: %+v", r)
	}
}

func TestCheckJSON(t *testing.T) {
	c := Check{Group: GroupBands, Test: "1000 Hz band at 5.3919 fm", Expected: 0, Measured: 80.1,
		Tolerance: reference.Tolerance{Lower: 70, Upper: math.Inf(1)}, Pass: true, Source: "IEC 61260-1:2014 Table 1 (class 1)"}
	b, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	want := `{"group":"one-third-octave band attenuation","test":"1000 Hz band at 5.3919 fm","expected_dB":0,"measured_dB":80.1,"tolerance_lower_dB":70,"tolerance_upper_dB":null,"pass":true,"source":"IEC 61260-1:2014 Table 1 (class 1)"}`
	if string(b) != want {
		t.Errorf("JSON\n%s\nwant\n%s", b, want)
	}
}

// BenchmarkRun times the default self-test at 48 kHz, as the daemon runs it at start-up and
// daily. (The full set costs about five times as much; it is not benchmarked, to keep
// `make test` quick.)
func BenchmarkRun(b *testing.B) {
	for b.Loop() {
		if r := Run(48000, false); !r.Pass {
			b.Fatal("self-test fails")
		}
	}
}

func ExampleRun() {
	r := Run(48000, false)
	fmt.Println("pass:", r.Pass)
	for _, c := range r.Checks[:2] {
		fmt.Printf("%s: expected %.1f dB, measured %.1f dB, pass %v\n", c.Test, c.Expected, c.Measured, c.Pass)
	}
	// Output:
	// pass: true
	// A weighting at 63 Hz: expected -26.2 dB, measured -26.2 dB, pass true
	// C weighting at 63 Hz: expected -0.8 dB, measured -0.8 dB, pass true
}
