package web

import (
	"bytes"
	"log/slog"
	"strings"
	"testing"
)

// The start-up warnings say who can read the page, for each kind of address, without
// binding anything beyond loopback.
func TestWarnAccess(t *testing.T) {
	for _, tc := range []struct {
		addr, token, want string
	}{
		{"127.0.0.1:8080", "", ""},
		{"[::1]:8080", "", ""},
		{"localhost:8080", "", ""},
		{"0.0.0.0:8080", "", "without an access token"},
		{"[::]:8080", "", "without an access token"},
		{":8080", "", "without an access token"},
		{"192.0.2.10:8080", "", "without an access token"}, // RFC 5737 documentation address
		{"192.0.2.10:8080", "wendle-cross-0a9d4c", "clear text"},
		{"127.0.0.1:8080", "wendle-cross-0a9d4c", "clear text"},
	} {
		var buf bytes.Buffer
		s, err := New(Options{Addr: tc.addr, Token: tc.token, Logger: slog.New(slog.NewTextHandler(&buf, nil))})
		if err != nil {
			t.Fatal(err)
		}
		s.warnAccess(tc.addr)
		got := buf.String()
		switch {
		case tc.want == "" && got != "":
			t.Errorf("%s: unexpected warning %q", tc.addr, got)
		case tc.want != "" && (!strings.Contains(got, "level=WARN") || !strings.Contains(got, tc.want)):
			t.Errorf("%s token %v: log %q, want a warning saying %q", tc.addr, tc.token != "", got, tc.want)
		}
		if tc.token != "" && strings.Contains(got, tc.token) {
			t.Errorf("the token is in the log: %q", got)
		}
	}
}
