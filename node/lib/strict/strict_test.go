package strict_test

import (
	"net/url"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/lib/strict"
)

// TestParseTime: the examples of RFC 3339 section 5.8 are taken with the instants the RFC
// states for them; the forms section 5.6 does not allow are refused.
func TestParseTime(t *testing.T) {
	ok := []struct {
		in   string
		want time.Time
	}{
		// RFC 3339 section 5.8: "20 minutes and 50.52 seconds after the 23rd hour of April 12th,
		// 1985 in UTC".
		{"1985-04-12T23:20:50.52Z", time.Date(1985, 4, 12, 23, 20, 50, 520e6, time.UTC)},
		// "39 minutes and 57 seconds after the 16th hour of December 19th, 1996 with an offset
		// of -08:00 from UTC"; the same instant as 1996-12-20T00:39:57Z.
		{"1996-12-19T16:39:57-08:00", time.Date(1996, 12, 20, 0, 39, 57, 0, time.UTC)},
		// "the same leap second in Pacific Standard Time": both read as the instant after
		// 1990-12-31T23:59:59Z (time.Time has no leap seconds).
		{"1990-12-31T23:59:60Z", time.Date(1991, 1, 1, 0, 0, 0, 0, time.UTC)},
		{"1990-12-31T15:59:60-08:00", time.Date(1991, 1, 1, 0, 0, 0, 0, time.UTC)},
		// "Noon in the Netherlands" in 1937: offset +00:20.
		{"1937-01-01T12:00:27.87+00:20", time.Date(1937, 1, 1, 11, 40, 27, 870e6, time.UTC)},
		// Section 5.6, NOTE: "T" and "Z" may be lower case.
		{"2031-05-01t00:00:00z", time.Date(2031, 5, 1, 0, 0, 0, 0, time.UTC)},
		// February 29 of a leap year (RFC 3339 Appendix C).
		{"2032-02-29T12:00:00Z", time.Date(2032, 2, 29, 12, 0, 0, 0, time.UTC)},
		{"2031-05-01T00:00:00.1234567891Z", time.Date(2031, 5, 1, 0, 0, 0, 123456789, time.UTC)},
	}
	for _, tt := range ok {
		got, err := strict.ParseTime(tt.in)
		if err != nil || !got.Equal(tt.want) {
			t.Errorf("ParseTime(%q) = %v, %v; want %v", tt.in, got, err, tt.want)
		}
	}
	bad := []string{
		"2031-05-01T0:00:00Z",       // one-digit hour (issue 20)
		"2031-05-01T00:0:00Z",       // one-digit minute
		"2031-05-01T00:00:0Z",       // one-digit second
		"2031-5-01T00:00:00Z",       // one-digit month
		"2031-05-01 00:00:00Z",      // space for T (allowed by RFC 3339 only as an application choice)
		"2031-05-01T00:00:00",       // no offset
		"2031-05-01T00:00Z",         // no seconds
		"2031-05-01T24:00:00Z",      // hour 24
		"2031-02-29T00:00:00Z",      // not a leap year
		"2031-05-01T12:00:60Z",      // leap second not at 23:59 UTC
		"2031-05-01T00:00:00+24:00", // offset hour beyond 23
		"2031-05-01T00:00:00+01:60", // offset minute beyond 59
		"2031-05-01T00:00:00.Z",     // fraction without digits
		"2031-05-01T+1:00:00Z",      // a sign for a digit
		"2031-05-01T00:00:00+0100",  // offset without colon
		"２０31-05-01T00:00:00Z",      // non-ASCII digits
		"",
	}
	for _, s := range bad {
		if got, err := strict.ParseTime(s); err == nil {
			t.Errorf("ParseTime(%q) = %v, want an error", s, got)
		} else if strings.Contains(err.Error(), "\n") {
			t.Errorf("ParseTime(%q): error of more than one line", s)
		}
	}
}

type inner struct {
	Rate int     `json:"rate" toml:"rate"`
	Gain float64 `json:"gain" toml:"gain"`
}

type doc struct {
	Name  string         `json:"name" toml:"name"`
	On    bool           `json:"on" toml:"on"`
	In    inner          `json:"in" toml:"in"`
	List  []string       `json:"list" toml:"list"`
	Pair  [2]float64     `json:"pair" toml:"pair"`
	Extra map[string]int `json:"extra" toml:"extra"`
	Any   any            `json:"any" toml:"any"`
	When  time.Time      `json:"when" toml:"when"`
	Opt   *string        `json:"opt,omitempty" toml:"opt"`
}

func TestJSON(t *testing.T) {
	tests := []struct {
		name, in string
		want     []string // problems, in order; empty: accepted
	}{
		{"valid", `{"name":"a","on":true,"in":{"rate":48000,"gain":1.5},"list":["x"],"pair":[1,2],"extra":{"k":1},"any":null,"when":"2031-05-01T00:00:00Z","opt":"o"}`, nil},
		{"case", `{"NAME":"a","In":{"Rate":1}}`, []string{`In: unknown key (keys are case-sensitive: write "in")`, `NAME: unknown key (keys are case-sensitive: write "name")`}},
		{"unknown", `{"colour":"red"}`, []string{"colour: unknown key"}},
		{"types", `{"name":1,"on":"yes","in":{"rate":1.5,"gain":"x"},"list":"x","pair":[1]}`, []string{
			"in.gain: want a number, got the string \"x\"", "in.rate: want a whole number, got 1.5",
			"list: want a list, got the string \"x\"", "name: want a string, got the number 1",
			"on: want true or false, got the string \"yes\"", "pair: want a list of 2 values, got 1"}},
		{"overflow", `{"in":{"rate":99999999999999999999}}`, []string{"in.rate: the number 99999999999999999999 is out of range"}},
		{"null", `{"name":null,"opt":null}`, []string{"name: null is not allowed here: want a string", "opt: null is not allowed here: want a string"}},
		{"duplicate", `{"name":"a","name":"b"}`, []string{"name: the key appears more than once"}},
		{"time", `{"when":"2031-05-01T0:00:00Z"}`, []string{`when: "2031-05-01T0:00:00Z" is not an RFC 3339 time`}},
		{"trailing", `{} {}`, []string{"data after the JSON value"}},
		{"syntax", `{"name":`, []string{"not valid JSON: the text ends early"}},
		{"not an object", `[]`, []string{"want an object, got a list"}},
		{"deep", strings.Repeat("[", 100) + strings.Repeat("]", 100), []string{"not valid JSON: nested deeper than 64 levels"}},
		{"utf8", "{\"name\":\"\xff\"}", []string{"not valid UTF-8 text"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var d doc
			err := strict.JSON([]byte(tt.in), &d)
			if len(tt.want) == 0 {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil {
				t.Fatalf("accepted %s", tt.in)
			}
			probs := strict.Problems(err)
			if len(probs) != len(tt.want) {
				t.Fatalf("problems %q, want %q", err, tt.want)
			}
			for i, p := range probs {
				if !strings.HasPrefix(p.String(), tt.want[i]) {
					t.Errorf("problem %d = %q, want %q", i, p, tt.want[i])
				}
			}
			if strings.Contains(err.Error(), "\n") || strings.Contains(err.Error(), "main.") || strings.Contains(err.Error(), "Go ") {
				t.Errorf("error %q: want one line without Go type names", err)
			}
		})
	}
}

func TestTOML(t *testing.T) {
	d := doc{Name: "default", In: inner{Rate: 48000}}
	err := strict.TOML([]byte("name = \"n\"\n[in]\ngain = 2\n"), &d)
	if err != nil || d.Name != "n" || d.In.Rate != 48000 || d.In.Gain != 2 {
		t.Fatalf("got %+v, %v: want the document over the defaults", d, err)
	}
	err = strict.TOML([]byte("name = \"n\"\n\n[IN]\nrate = \"fast\"\n[in]\nRate = 1\ngain = true\nsize = 3\n"), &d)
	want := []string{
		`line 3: IN: unknown key (keys are case-sensitive: write "in")`,
		`line 6: in.Rate: unknown key (keys are case-sensitive: write "rate")`,
		`line 7: in.gain: want a number, got true`,
		`line 8: in.size: unknown key`,
	}
	probs := strict.Problems(err)
	if len(probs) != len(want) {
		t.Fatalf("problems %v, want %q", err, want)
	}
	for i, p := range probs {
		if p.String() != want[i] {
			t.Errorf("problem %d = %q, want %q", i, p, want[i])
		}
	}
}

func TestQuery(t *testing.T) {
	q := url.Values{"a": {"1"}, "b": {"1", "2"}}
	if v, ok, err := strict.Param(q, "a"); v != "1" || !ok || err != nil {
		t.Errorf("Param a: %q %v %v", v, ok, err)
	}
	if _, ok, err := strict.Param(q, "b"); !ok || err == nil {
		t.Errorf("Param b given twice: %v %v", ok, err)
	}
	if _, ok, err := strict.Param(q, "c"); ok || err != nil {
		t.Errorf("Param c absent: %v %v", ok, err)
	}
	for s, ok := range map[string]bool{"0": true, "180": true, "+5": false, "-1": false, " 5": false, "1e3": false, "0x10": false, "": false, "1_000": false} {
		if _, err := strict.Whole(s); (err == nil) != ok {
			t.Errorf("Whole(%q): %v", s, err)
		}
	}
	for s, ok := range map[string]bool{"94": true, "93.9": true, "114.0": true, "NaN": false, "Inf": false, "0x1p7": false, "+94": false, "9.": false, ".5": false, "1e2": false} {
		if _, err := strict.Decimal(s); (err == nil) != ok {
			t.Errorf("Decimal(%q): %v", s, err)
		}
	}
}
