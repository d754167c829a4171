// Package testrig starts the real servers that leqnode's tests run against: a mosquitto broker
// and a PostgreSQL server, each on 127.0.0.1 and a free port, in a temporary directory, owned
// and stopped by the test that started it.
//
// The servers are Debian's own packages (mosquitto, postgresql), installed by `make test`
// through the Makefile's TEST_DEBS. Under CI=true a missing server fails the test; elsewhere it
// skips it with the command that installs the package.
package testrig

import (
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"testing"
)

// FreePort returns a TCP port on 127.0.0.1 that was free a moment ago.
func FreePort(t testing.TB) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer func() { _ = l.Close() }() // it accepted nothing: closing frees the port, or the OS does at exit
	return l.Addr().(*net.TCPAddr).Port
}

// need makes sure every program in bins exists (as a path or on PATH); if one is missing the
// test fails under CI=true and skips elsewhere, naming the Debian package to install.
func need(t testing.TB, pkg string, bins ...string) {
	t.Helper()
	for _, b := range bins {
		Need(t, pkg, b)
	}
}

// Need returns the path of program bin (a path, or a name on PATH) from Debian package pkg.
// When it is missing the test fails under CI=true (CI installs every package the tests use,
// through make test-deps) and is skipped elsewhere, naming the package. Tests never install
// packages themselves.
func Need(t testing.TB, pkg, bin string) string {
	t.Helper()
	if filepath.IsAbs(bin) {
		if _, err := os.Stat(bin); err == nil {
			return bin
		}
	} else if p, err := exec.LookPath(bin); err == nil {
		return p
	}
	Missing(t, bin+" not found: install the Debian package "+pkg+" (make test-deps does, as root)")
	return ""
}

// Missing ends a test that lacks something it needs from the machine: a failure under
// CI=true, a skip elsewhere.
func Missing(t testing.TB, msg string) {
	t.Helper()
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

// RepoRoot returns the top directory of the source tree (where go.mod is).
func RepoRoot() string {
	_, file, _, _ := runtime.Caller(0)
	return filepath.Join(filepath.Dir(file), "..", "..")
}
