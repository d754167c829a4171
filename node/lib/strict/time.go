package strict

import (
	"fmt"
	"regexp"
	"strconv"
	"strings"
	"time"
)

// dateTimeRe is the date-time production of RFC 3339 section 5.6: full-date "T" full-time,
// where time-secfrac is "." 1*DIGIT and time-offset is "Z" / ("+" / "-") hh ":" mm. "T" and
// "Z" may be lower case (section 5.6, NOTE). Digits are ASCII only.
var dateTimeRe = regexp.MustCompile(`^([0-9]{4})-([0-9]{2})-([0-9]{2})[Tt]([0-9]{2}):([0-9]{2}):([0-9]{2})(\.[0-9]+)?([Zz]|([+-])([0-9]{2}):([0-9]{2}))$`)

// ParseTime parses s as an RFC 3339 date-time (section 5.6) and nothing else: four-digit
// year, two-digit month, day, hour, minute and second, an optional fraction, and "Z" or a
// numeric offset. The ranges are those of section 5.7: month 01-12, day within the month,
// hour 00-23, minute 00-59, second 00-60, offset hour 00-23 and minute 00-59; second 60 (a
// leap second) only at 23:59 UTC. A leap second reads as the first instant of the next
// second, since time.Time has no leap seconds; a fraction beyond nanoseconds is cut off.
func ParseTime(s string) (time.Time, error) {
	m := dateTimeRe.FindStringSubmatch(s)
	shown := s
	if len(shown) > 40 {
		shown = shown[:40] + "..."
	}
	if m == nil {
		return time.Time{}, fmt.Errorf("%q is not an RFC 3339 time: write YYYY-MM-DDThh:mm:ssZ, e.g. 2031-05-04T07:00:00Z (two digits each for hour, minute and second)", shown)
	}
	n := func(i int) int { v, _ := strconv.Atoi(m[i]); return v }
	year, month, day, hour, minute, sec := n(1), n(2), n(3), n(4), n(5), n(6)
	offset := 0
	if m[9] != "" {
		oh, om := n(10), n(11)
		if oh > 23 || om > 59 {
			return time.Time{}, fmt.Errorf("%q: the offset %s%s:%s is out of range (hours 00-23, minutes 00-59)", shown, m[9], m[10], m[11])
		}
		offset = (oh*60 + om) * 60
		if m[9] == "-" {
			offset = -offset
		}
	}
	if month < 1 || month > 12 || day < 1 || day > daysIn(year, month) || hour > 23 || minute > 59 || sec > 60 {
		return time.Time{}, fmt.Errorf("%q: a date or time field is out of range", shown)
	}
	leap := sec == 60
	if leap {
		utcMin := ((hour*60+minute-offset/60)%1440 + 1440) % 1440
		if utcMin != 23*60+59 {
			return time.Time{}, fmt.Errorf("%q: second 60 (a leap second) is only valid at 23:59 UTC", shown)
		}
		sec = 59
	}
	nanos := 0
	if f := m[7]; f != "" {
		digits := (f[1:] + strings.Repeat("0", 9))[:9]
		nanos, _ = strconv.Atoi(digits)
	}
	zone := time.UTC
	if m[8] != "Z" && m[8] != "z" {
		zone = time.FixedZone("", offset)
	}
	t := time.Date(year, time.Month(month), day, hour, minute, sec, nanos, zone)
	if leap {
		t = t.Add(time.Second)
	}
	return t, nil
}

func daysIn(year, month int) int {
	return time.Date(year, time.Month(month)+1, 0, 0, 0, 0, 0, time.UTC).Day()
}
