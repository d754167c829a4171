package strict

import (
	"fmt"
	"net/url"
	"regexp"
	"strconv"
)

// Param returns the one value of the query parameter name: ok false when it is absent, an
// error when it is given more than once (net/url keeps every value and Get returns the first,
// so "?minutes=1&minutes=999" would read as 1 while a proxy or log reads 999).
func Param(q url.Values, name string) (v string, ok bool, err error) {
	vs, ok := q[name]
	switch {
	case !ok:
		return "", false, nil
	case len(vs) > 1:
		return "", true, fmt.Errorf("%s is given %d times: give it once", name, len(vs))
	}
	return vs[0], true, nil
}

var (
	wholeRe   = regexp.MustCompile(`^[0-9]{1,18}$`)
	decimalRe = regexp.MustCompile(`^[0-9]{1,15}(\.[0-9]{1,15})?$`)
)

// Whole parses s as a whole number written in decimal digits only: no sign, no spaces, no
// "0x" or "1e3" (strconv.Atoi takes "+5", and ParseFloat takes "0x1p3", "Inf" and "NaN").
func Whole(s string) (int64, error) {
	if !wholeRe.MatchString(s) {
		return 0, fmt.Errorf("%.20q is not a whole number in decimal digits", s)
	}
	return strconv.ParseInt(s, 10, 64)
}

// Decimal parses s as a non-negative decimal number: digits with an optional fraction after
// a point, nothing else.
func Decimal(s string) (float64, error) {
	if !decimalRe.MatchString(s) {
		return 0, fmt.Errorf("%.20q is not a decimal number such as 94 or 94.0", s)
	}
	return strconv.ParseFloat(s, 64)
}
