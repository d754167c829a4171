package profiles

import (
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/testrig"
)

func mustLoad(t *testing.T, name string) *Profile {
	t.Helper()
	p, err := Load(name)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func TestBuiltins(t *testing.T) {
	if got := strings.Join(Names(), ","); got != "eu-lden,india-2000,ldn" {
		t.Errorf("built-in profiles %s", got)
	}
	// Directive 2002/49/EC Annex I §1: day 07-19, evening 19-23 (+5 dB), night 23-07 (+10 dB).
	// Ldn: day 07-22, night 22-07 (+10 dB) (US EPA 1974, from memory).
	// India, Noise Pollution (Regulation and Control) Rules 2000, Schedule: day 06-22, night 22-06.
	tests := []struct {
		name  string
		want  string
		hours []float64
	}{
		{"eu-lden", "day 07:00 +0, evening 19:00 +5, night 23:00 +10", []float64{12, 4, 8}},
		{"ldn", "day 07:00 +0, night 22:00 +10", []float64{15, 9}},
		{"india-2000", "day 06:00 +0, night 22:00 +0", []float64{16, 8}},
	}
	for _, tc := range tests {
		p := mustLoad(t, tc.name)
		var parts []string
		for _, per := range p.Periods {
			parts = append(parts, per.Name+" "+per.Start.String()+" +"+strconv.FormatFloat(per.Penalty, 'g', -1, 64))
		}
		if got := strings.Join(parts, ", "); got != tc.want {
			t.Errorf("%s: %s, want %s", tc.name, got, tc.want)
		}
		day := time.Date(2026, 6, 10, 0, 0, 0, 0, time.UTC)
		for i, iv := range p.Day(day, time.UTC) {
			if iv.Hours() != tc.hours[i] {
				t.Errorf("%s period %d: %g h, want %g h", tc.name, i, iv.Hours(), tc.hours[i])
			}
		}
	}
}

// TestIndiaZones checks the Schedule of the Noise Pollution (Regulation and Control) Rules, 2000
// (via the medindia.net print copy of the Schedule): limits in dB(A) Leq.
func TestIndiaZones(t *testing.T) {
	p := mustLoad(t, "india-2000")
	want := map[string][2]float64{"industrial": {75, 70}, "commercial": {65, 55}, "residential": {55, 45}, "silence": {50, 40}}
	for name, w := range want {
		z, err := p.Zone(name)
		if err != nil {
			t.Fatal(err)
		}
		if z.Limits["day"] != w[0] || z.Limits["night"] != w[1] {
			t.Errorf("zone %s: %v, want day %g night %g", name, z.Limits, w[0], w[1])
		}
	}
	if _, err := p.Zone("harbour"); err == nil || !strings.Contains(err.Error(), "residential") {
		t.Errorf("unknown zone: %v", err)
	}
}

// TestDSTNights: in Europe/Berlin clocks go forward on the last Sunday of March (29 March 2026)
// and back on the last Sunday of October (25 October 2026) (EU Directive 2000/84/EC, Articles 2
// and 3: at 01:00 UTC), so the Lden night from 23:00 to 07:00 lasts 7 and 9 hours.
func TestDSTNights(t *testing.T) {
	berlin, err := time.LoadLocation("Europe/Berlin")
	if err != nil {
		testrig.Missing(t, "no time zone data (install the Debian package tzdata): "+err.Error())
	}
	p := mustLoad(t, "eu-lden")
	tests := []struct {
		day   time.Time
		night float64
		total float64
	}{
		{time.Date(2026, 3, 28, 0, 0, 0, 0, berlin), 7, 23},
		{time.Date(2026, 10, 24, 0, 0, 0, 0, berlin), 9, 25},
		{time.Date(2026, 7, 1, 0, 0, 0, 0, berlin), 8, 24},
	}
	for _, tc := range tests {
		ivs := p.Day(tc.day, berlin)
		if got := ivs[2].Hours(); got != tc.night {
			t.Errorf("%s: night of %g h, want %g h", tc.day.Format(time.DateOnly), got, tc.night)
		}
		if got := ivs[2].To.Sub(ivs[0].From).Hours(); got != tc.total {
			t.Errorf("%s: reporting day of %g h, want %g h", tc.day.Format(time.DateOnly), got, tc.total)
		}
	}
}

func TestIntervalsAndLastClosed(t *testing.T) {
	p := mustLoad(t, "eu-lden")
	from := time.Date(2026, 6, 10, 0, 0, 0, 0, time.UTC)
	ivs := p.Intervals(from, from.Add(48*time.Hour), time.UTC)
	// 00:00-07:00 of the 10th is the night of the 9th; then day, evening, night of the 10th and 11th.
	var got []string
	for _, iv := range ivs {
		got = append(got, iv.Day.Format("02")+p.Periods[iv.Period].Name)
	}
	if s := strings.Join(got, " "); s != "09night 10day 10evening 10night 11day 11evening 11night" {
		t.Errorf("intervals %s", s)
	}
	lc := p.LastClosed(time.Date(2026, 6, 10, 23, 0, 0, 0, time.UTC), time.UTC)
	if p.Periods[lc.Period].Name != "evening" || lc.To.Hour() != 23 {
		t.Errorf("last closed at 23:00: %+v", lc)
	}
	lc = p.LastClosed(time.Date(2026, 6, 11, 6, 0, 0, 0, time.UTC), time.UTC)
	if p.Periods[lc.Period].Name != "evening" || lc.From.Day() != 10 {
		t.Errorf("last closed at 06:00: %+v", lc)
	}
}

func TestParseErrors(t *testing.T) {
	tests := []struct {
		name, text, want string
	}{
		{"unknown key", "title = \"x\"\n[[period]]\nname = \"day\"\nstrat = \"07:00\"\n", "p.toml:4: unknown key \"period[0].strat\""},
		// Keys differ in case: go-toml matched them without regard to case (issue 20).
		{"key in another case", "TITLE = \"x\"\n[[period]]\nname = \"day\"\nstart = \"07:00\"\n", "p.toml:1: unknown key \"TITLE\" (keys are case-sensitive: write \"title\")"},
		{"table in another case", "[[Period]]\nname = \"day\"\nstart = \"07:00\"\n", "p.toml:1: unknown key \"Period\""},
		{"limit of the wrong type", "[[period]]\nname = \"day\"\nstart = \"07:00\"\n[[zone]]\nname = \"z\"\nlimits = { day = \"55\" }\n", "key \"zone[0].limits.day\": want a number, got the string \"55\""},
		{"bad clock", "[[period]]\nname = \"day\"\nstart = \"7am\"\n", "p.toml:3:"},
		{"hour 24", "[[period]]\nname = \"day\"\nstart = \"24:00\"\n", "HH:MM from 00:00"},
		{"no periods", "title = \"x\"\n", "no periods"},
		{"no start", "[[period]]\nname = \"day\"\n", "p.toml:1: period \"day\" has no start"},
		{"out of order", "[[period]]\nname = \"a\"\nstart = \"07:00\"\n[[period]]\nname = \"b\"\nstart = \"23:00\"\n[[period]]\nname = \"c\"\nstart = \"19:00\"\n", "out of order"},
		{"same start", "[[period]]\nname = \"a\"\nstart = \"07:00\"\n[[period]]\nname = \"b\"\nstart = \"07:00\"\n", "same time"},
		{"twice", "[[period]]\nname = \"a\"\nstart = \"07:00\"\n[[period]]\nname = \"a\"\nstart = \"08:00\"\n", "p.toml:4: period name \"a\" used twice"},
		{"penalty", "[[period]]\nname = \"a\"\nstart = \"07:00\"\npenalty = 99\n", "penalty 99 dB"},
		{"limit key", "[[period]]\nname = \"day\"\nstart = \"07:00\"\n[[zone]]\nname = \"z\"\nlimits = { nite = 40 }\n", "p.toml:4: zone \"z\" has a limit for \"nite\""},
		{"wrong type", "[[period]]\nname = \"day\"\nstart = \"07:00\"\npenalty = \"five\"\n", "p.toml:4:"},
	}
	for _, tc := range tests {
		_, err := Parse([]byte(tc.text), "p", "p.toml")
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want it to contain %q", tc.name, err, tc.want)
		}
		if err != nil && strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error of more than one line: %q", tc.name, err)
		}
	}
}

func TestUserProfile(t *testing.T) {
	text := `title = "Short evening"
composite = "Lden"
[[period]]
name = "day"
start = "06:00"
[[period]]
name = "evening"
start = "18:00"
penalty = 5
[[period]]
name = "night"
start = "21:00"
penalty = 10
[[zone]]
name = "quiet"
limits = { night = 40, lden = 50 }
`
	p, err := Parse([]byte(text), "short", "short.toml")
	if err != nil {
		t.Fatal(err)
	}
	ivs := p.Day(time.Date(2026, 6, 10, 0, 0, 0, 0, time.UTC), time.UTC)
	if ivs[0].Hours() != 12 || ivs[1].Hours() != 3 || ivs[2].Hours() != 9 {
		t.Errorf("period lengths %g %g %g, want 12 3 9", ivs[0].Hours(), ivs[1].Hours(), ivs[2].Hours())
	}
	z, err := p.Zone("quiet")
	if err != nil || z.Limits["lden"] != 50 {
		t.Errorf("zone: %v %v", z, err)
	}
}

func FuzzParse(f *testing.F) {
	for _, n := range Names() {
		data, _ := builtin.ReadFile(n + ".toml")
		f.Add(data)
	}
	f.Add([]byte("[[period]]\nname=\"a\"\nstart=\"23:59\"\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := Parse(data, "f", "f.toml")
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Errorf("error of more than one line: %q", err)
			}
			return
		}
		// A valid profile tiles every reporting day.
		ivs := p.Day(time.Date(2026, 1, 5, 0, 0, 0, 0, time.UTC), time.UTC)
		if got := ivs[len(ivs)-1].To.Sub(ivs[0].From); got != 24*time.Hour {
			t.Errorf("reporting day of %v", got)
		}
		for i := 1; i < len(ivs); i++ {
			if !ivs[i].From.Equal(ivs[i-1].To) || !ivs[i].To.After(ivs[i].From) {
				t.Errorf("periods do not tile the day: %+v", ivs)
			}
		}
	})
}
