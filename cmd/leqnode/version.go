package main

import (
	"context"
	"fmt"
	"runtime"
	"runtime/debug"
	"strings"

	"github.com/leqnode/leqnode/node/capture"
)

// version is the release, set when building for release or packaging:
//
//	go build -ldflags "-X main.version=1.2.0" ./cmd/leqnode
//
// (`make build` and .ci/package-build set it from .ci/package-version). Empty means the module
// version from the build information: a version tag for `go install ...@v1.2.0`, "(devel)" for
// a build from a working tree. Only the linker writes it.
var version string

// versionLine returns the one line `leqnode version` prints: the release, the commit and its
// time when the build recorded them, the Go version, the platform and whether the build has
// PortAudio.
func versionLine() string {
	v := version
	info, ok := debug.ReadBuildInfo()
	if v == "" {
		v = "(devel)"
		if ok && info.Main.Version != "" {
			v = info.Main.Version
		}
	}
	parts := []string{"leqnode " + v}
	if ok {
		var rev, at, dirty string
		for _, s := range info.Settings {
			switch s.Key {
			case "vcs.revision":
				rev = s.Value
			case "vcs.time":
				at = s.Value
			case "vcs.modified":
				if s.Value == "true" {
					dirty = ", modified"
				}
			}
		}
		if rev != "" {
			if len(rev) > 12 {
				rev = rev[:12]
			}
			parts = append(parts, fmt.Sprintf("(commit %s %s%s)", rev, at, dirty))
		}
	}
	parts = append(parts, runtime.Version(), runtime.GOOS+"/"+runtime.GOARCH)
	if capture.HavePortAudio() {
		parts = append(parts, "with PortAudio")
	} else {
		parts = append(parts, "without PortAudio (arecord, stdin and file sources)")
	}
	return strings.Join(parts, " ")
}

func runVersion(ctx context.Context, std stdio, args []string) error {
	fl := newFlags("version", "", std.err)
	pos, err := parseFlags(fl, args)
	if err != nil {
		return err
	}
	if len(pos) != 0 {
		return badInput("version takes no arguments")
	}
	_, err = fmt.Fprintln(std.out, versionLine())
	return err
}
