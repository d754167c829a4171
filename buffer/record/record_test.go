package record

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestJudge(t *testing.T) {
	nan := math.NaN()
	for _, tc := range []struct {
		flags Flags
		level float64
		want  Reason
	}{
		{0, 55, Counted},
		{Overload | Clipped, 112, Counted}, // kept: a lower bound
		{UnderRange, 21, Counted},          // kept: an upper bound
		{ClockUnsynced, 55, Counted},
		{Calibrating, 94, ReasonCalibrating},
		{Calibrating | Overload, 114, ReasonCalibrating},
		{Settling, 40, ReasonSettling},
		{Excluded, 70, ReasonExcluded},
		{Suspect, 60, ReasonSuspect},
		{Dropped, 55, ReasonNoData},
		{0, nan, ReasonSilence},
		{DigitalSilence, nan, ReasonSilence},
	} {
		if got := Judge(tc.flags, tc.level); got != tc.want {
			t.Errorf("Judge(%v, %v) = %v, want %v", tc.flags, tc.level, got, tc.want)
		}
	}
}

func TestTallyBound(t *testing.T) {
	var a, b Tally
	a.Add(0, 50, 1)
	a.Add(Calibrating, 94, 1)
	b.Add(UnderRange, 20, 1)
	if a.Bound() != Exact || b.Bound() != Upper {
		t.Errorf("bounds %v %v", a.Bound(), b.Bound())
	}
	a.Merge(b)
	a.Add(Overload, 120, 1)
	if a.Counted != 3 || a.LeftOutTotal() != 1 || a.Bound() != Lower || a.Flags() != Overload|UnderRange {
		t.Errorf("merged tally %+v", a)
	}
	if Lower.Sign() != "≥" || Upper.Sign() != "≤" || Exact.Sign() != "" {
		t.Error("bound signs")
	}
}

// TestExceeds: the reported 0.1 dB value is compared with the limit; equal complies (common
// practice).
func TestExceeds(t *testing.T) {
	for _, tc := range []struct {
		level, limit float64
		want         bool
	}{
		{45, 45, false}, {45.04, 45, false}, {45.05, 45, false}, // 45.05 is stored as 45.04999…: prints 45.0
		{45.051, 45, true}, {45.06, 45, true}, {55.0000001, 55, false}, {44.9, 45, false},
		{math.NaN(), 45, false}, {50, math.NaN(), false},
	} {
		if got := Exceeds(tc.level, tc.limit); got != tc.want {
			t.Errorf("Exceeds(%v, %v) = %v, want %v", tc.level, tc.limit, got, tc.want)
		}
	}
}

// TestREADMEListsEveryFlag: the README's "Which seconds count" names every flag and reason.
func TestREADMEListsEveryFlag(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	i := strings.Index(s, "## Which seconds count")
	if i < 0 {
		t.Fatal("README has no section \"Which seconds count\"")
	}
	sec := s[i:]
	if j := strings.Index(sec[3:], "\n#"); j > 0 {
		sec = sec[:j+3]
	}
	for _, n := range FlagNames() {
		if !strings.Contains(sec, "`"+n+"`") {
			t.Errorf("README's rule does not name the flag %q", n)
		}
		if FlagMeaning(n) == "" {
			t.Errorf("flag %q has no meaning", n)
		}
	}
	for r := ReasonCalibrating; r < NumReasons; r++ {
		if !strings.Contains(sec, "`"+r.String()+"`") {
			t.Errorf("README's rule does not name the reason %q", r)
		}
	}
}

func ExampleTally() {
	// A minute: 50 seconds at 60 dB, 8 seconds with a calibrator on, 2 seconds overloaded.
	var t Tally
	for range 50 {
		t.Add(0, 60, 1)
	}
	for range 8 {
		t.Add(Calibrating, 94, 1)
	}
	for range 2 {
		t.Add(Overload|Clipped, 121, 1)
	}
	fmt.Println(t.Counted, t.LeftOut[ReasonCalibrating], t.Bound(), t.Bound().Sign())
	// Output: 52 8 lower ≥
}
