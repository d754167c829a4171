package profiles_test

import (
	"fmt"
	"time"

	"github.com/leqnode/leqnode/configs/profiles"
)

// The Lden periods of one reporting day in Europe/Berlin: on the day before the last Sunday of
// October the night lasts 9 hours.
func ExampleProfile_Day() {
	p, err := profiles.Load("eu-lden")
	if err != nil {
		fmt.Println(err)
		return
	}
	berlin, err := time.LoadLocation("Europe/Berlin")
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, iv := range p.Day(time.Date(2026, 10, 24, 0, 0, 0, 0, berlin), berlin) {
		per := p.Periods[iv.Period]
		fmt.Printf("%-7s %s  %g h  +%g dB\n", per.Name, iv.From.Format("Jan 2 15:04 MST"), iv.Hours(), per.Penalty)
	}
	// Output:
	// day     Oct 24 07:00 CEST  12 h  +0 dB
	// evening Oct 24 19:00 CEST  4 h  +5 dB
	// night   Oct 24 23:00 CEST  9 h  +10 dB
}

// A user-defined profile with a zone.
func ExampleParse() {
	text := `title = "Quarry permit, Upper Vell"
[[period]]
name = "day"
start = "07:00"
[[period]]
name = "night"
start = "21:00"
[[zone]]
name = "nearest-houses"
limits = { day = 55, night = 42 }
`
	p, err := profiles.Parse([]byte(text), "quarry", "quarry.toml")
	if err != nil {
		fmt.Println(err)
		return
	}
	z, _ := p.Zone("nearest-houses")
	fmt.Println(p.Title, z.Limits["night"])
	_, err = profiles.Parse([]byte("[[period]]\nname = \"day\"\nstart = \"7:00\"\n"), "bad", "bad.toml")
	fmt.Println(err)
	// Output:
	// Quarry permit, Upper Vell 42
	// bad.toml:3: key "period.start": start "7:00" is not a clock time: write HH:MM, e.g. "07:00"
}
