package main

import (
	"context"
	"debug/buildinfo"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// fullRun skips a test outside the full run (make package-test).
func fullRun(t *testing.T) string {
	t.Helper()
	d := distDir()
	if d == "" {
		t.Skip("full packaging run only: make package-test (LEQNODE_PACKAGE_DIST=dist)")
	}
	return d
}

// crossTargets are the builds of `make package`: the directory under dist/bin, the Debian
// architecture whose ELF header it must have, the build settings debug/buildinfo must show, and
// the qemu user-mode emulator with the library prefix that runs it.
var crossTargets = []struct {
	dir, arch string
	settings  map[string]string
	qemu      string
	triplet   string // cgo builds: the cross toolchain's library directory and the sysroot's
}{
	{"linux-arm64", "arm64", map[string]string{"GOARCH": "arm64", "CGO_ENABLED": "1"}, "qemu-aarch64-static", "aarch64-linux-gnu"},
	{"linux-armhf", "armhf", map[string]string{"GOARCH": "arm", "GOARM": "7", "CGO_ENABLED": "1"}, "qemu-arm-static", "arm-linux-gnueabihf"},
	{"linux-armv6-purego", "armhf", map[string]string{"GOARCH": "arm", "GOARM": "6", "CGO_ENABLED": "0", "-tags": "noportaudio"}, "qemu-arm-static", ""},
	{"linux-arm64-purego", "arm64", map[string]string{"GOARCH": "arm64", "CGO_ENABLED": "0", "-tags": "noportaudio"}, "qemu-aarch64-static", ""},
	{"linux-amd64-purego", "amd64", map[string]string{"GOARCH": "amd64", "CGO_ENABLED": "0", "-tags": "noportaudio"}, "", ""},
}

func TestCrossBinaries(t *testing.T) {
	d := fullRun(t)
	need(t, "qemu-aarch64-static", "qemu-arm-static")
	for _, tc := range crossTargets {
		t.Run(tc.dir, func(t *testing.T) {
			bin := filepath.Join(d, "bin", tc.dir, "leqnode")
			f := checkELF(t, bin, tc.arch)
			libs, err := f.ImportedLibraries()
			if err != nil {
				t.Fatal(err)
			}
			cgo := tc.settings["CGO_ENABLED"] == "1"
			hasPA := false
			for _, l := range libs {
				hasPA = hasPA || l == "libportaudio.so.2"
			}
			if cgo != hasPA {
				t.Errorf("%s: links PortAudio %v, want %v (libraries %q)", bin, hasPA, cgo, libs)
			}
			if !cgo && len(libs) != 0 {
				t.Errorf("%s: a pure-Go build needs shared libraries %q", bin, libs)
			}
			// The settings the Go toolchain recorded in the binary (debug/buildinfo).
			bi, err := buildinfo.ReadFile(bin)
			if err != nil {
				t.Fatal(err)
			}
			got := map[string]string{}
			for _, s := range bi.Settings {
				got[s.Key] = s.Value
			}
			for k, want := range tc.settings {
				if got[k] != want {
					t.Errorf("%s: build setting %s = %q, want %q", bin, k, got[k], want)
				}
			}
			if tc.qemu == "" {
				out := mustRun(t, bin, "help")
				if !strings.Contains(out, "usage: leqnode") {
					t.Errorf("%s help: %q", bin, out)
				}
				return
			}
			// Run it: a cgo build through the cross toolchain's dynamic loader and the sysroot's
			// PortAudio and ALSA, the way the board's own loader would.
			var env []string
			if cgo {
				env = []string{
					"QEMU_LD_PREFIX=/usr/" + tc.triplet,
					"LD_LIBRARY_PATH=" + filepath.Join(d, "sysroot", strings.TrimPrefix(tc.dir, "linux-"), "usr", "lib", tc.triplet),
				}
			}
			out, err := runCmd(context.Background(), "", env, tc.qemu, bin, "help")
			if err != nil || !strings.Contains(out, "usage: leqnode") {
				t.Errorf("%s %s help: %v\n%s", tc.qemu, bin, err, out)
			}
		})
	}
}

// TestQemuPackageTests runs the dsp and buffer tests of the pure-Go ARM builds under
// qemu-user-static: the measurement core and the store on the boards' instruction sets (arm64,
// and ARMv6 with its 32-bit words and software-checked alignment).
func TestQemuPackageTests(t *testing.T) {
	d := fullRun(t)
	need(t, "qemu-aarch64-static", "qemu-arm-static", "go")
	root := repoRoot(t)
	targets := []struct {
		name string
		env  []string
		qemu string
	}{
		{"arm64", []string{"GOARCH=arm64"}, "qemu-aarch64-static"},
		{"armv6", []string{"GOARCH=arm", "GOARM=6"}, "qemu-arm-static"},
	}
	for _, tg := range targets {
		for _, pkg := range []string{"dsp", "buffer"} {
			t.Run(tg.name+"/"+pkg, func(t *testing.T) {
				bin := filepath.Join(d, "bin", "qemu-tests", tg.name, pkg+".test")
				env := append([]string{"CGO_ENABLED=0", "GOOS=linux"}, tg.env...)
				start := time.Now()
				if _, err := runCmd(context.Background(), root, env, "go", "test", "-c", "-tags", "noportaudio", "-o", bin, "./"+pkg); err != nil {
					t.Fatal(err)
				}
				built := time.Since(start)
				start = time.Now()
				// The test binary runs in the package's directory, as go test runs it (testdata).
				out, err := runCmd(context.Background(), filepath.Join(root, pkg), nil, tg.qemu, bin, "-test.short", "-test.count=1")
				t.Logf("%s %s: built in %.0f s, ran in %.0f s under %s", tg.name, pkg, built.Seconds(), time.Since(start).Seconds(), tg.qemu)
				if err != nil {
					t.Fatalf("%s tests under %s: %v", pkg, tg.qemu, err)
				}
				if !strings.Contains(out, "PASS") {
					t.Fatalf("%s tests under %s did not pass:\n%s", pkg, tg.qemu, out)
				}
			})
		}
	}
	os.RemoveAll(filepath.Join(d, "bin", "qemu-tests"))
}

// TestLintian checks every package with lintian, Debian's own package checker (Debian policy
// as code): no error may remain; warnings are logged. The departures that are meant are
// overridden in the package, with their reason.
func TestLintian(t *testing.T) {
	fullRun(t)
	need(t, "lintian")
	for arch, deb := range debs(t) {
		t.Run(arch, func(t *testing.T) {
			out, err := runCmd(context.Background(), "", nil, "lintian", "--fail-on", "error", "--tag-display-limit", "0", deb)
			t.Logf("lintian %s:\n%s", filepath.Base(deb), out)
			if err != nil {
				t.Errorf("lintian found errors in %s: %v", filepath.Base(deb), err)
			}
		})
	}
}
