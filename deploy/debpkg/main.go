// Command debpkg builds the leqnode Debian package for one architecture from a built binary,
// with github.com/goreleaser/nfpm/v2 as a library (no dpkg-dev, no debian/ directory).
//
// Usage:
//
//	go run ./deploy/debpkg --arch arm64 --binary dist/bin/linux-arm64/leqnode --version 0.1.0 --out dist
//
// # Model
//
// A package is the binary, the systemd unit (deploy/leqnode.service, installed in
// /lib/systemd/system), the default configuration (deploy/leqnode.toml, installed as the
// conffile /etc/leqnode/leqnode.toml, which dpkg keeps on upgrade), the state directory
// /var/lib/leqnode, the documentation in /usr/share/doc/leqnode, and the maintainer scripts in
// deploy/debpkg/scripts (a processor check before unpacking, the system user "leqnode" in group
// "audio", the configuration check on upgrade, the service).
//
// The dependencies come from the binary itself: every shared library its ELF header needs
// (DT_NEEDED) maps to the Debian package that ships it, and the highest GLIBC symbol version it
// imports sets the lower bound on libc6, as dpkg-shlibdeps would (Debian policy 8.6). A library
// that the table does not know is an error, so that a new dependency cannot slip into a package
// unnoticed. A pure-Go binary (no cgo) therefore depends on no library at all.
//
// The package is reproducible: file times are the --mtime given (the commit time in `make
// package`), the generated files are compressed without names or times, and nfpm sorts the
// archive.
package main

import (
	"bytes"
	"compress/gzip"
	"context"
	"debug/elf"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/goreleaser/nfpm/v2"
	"github.com/goreleaser/nfpm/v2/deb"
	"github.com/goreleaser/nfpm/v2/files"
)

// Spec describes one package to build.
type Spec struct {
	// Arch is the Debian architecture: amd64, arm64 or armhf.
	Arch string
	// Binary is the leqnode executable for Arch.
	Binary string
	// Version is the Debian version (policy 5.6.12): it must start with a digit. "~" sorts
	// before anything, so 0.1.0~git20261201 < 0.1.0.
	Version string
	// Root is the source tree (deploy/ and README.md are read from it).
	Root string
	// OutDir receives leqnode_VERSION_ARCH.deb.
	OutDir string
	// MTime is the time of every file in the package.
	MTime time.Time
	// Compression is gzip (the default: every dpkg reads it), xz (smaller, slower to build)
	// or none.
	Compression string
	// ManFrom, when not empty, is a leqnode binary that runs on the build machine; the manual
	// page leqnode(1) is made from its `leqnode help`. Empty leaves the page out.
	ManFrom string
}

// debArch maps Debian architectures to the ELF machine and class their binaries must have.
var debArch = map[string]struct {
	machine elf.Machine
	class   elf.Class
}{
	"amd64": {elf.EM_X86_64, elf.ELFCLASS64},
	"arm64": {elf.EM_AARCH64, elf.ELFCLASS64},
	"armhf": {elf.EM_ARM, elf.ELFCLASS32},
}

// sonamePackages maps the shared libraries a leqnode binary may need to the Debian package that
// ships them (Debian 12). Add a line here when the binary gains a library.
var sonamePackages = map[string]string{
	"libc.so.6":         "libc6",
	"libm.so.6":         "libc6",
	"libpthread.so.0":   "libc6",
	"libdl.so.2":        "libc6",
	"libresolv.so.2":    "libc6",
	"libportaudio.so.2": "libportaudio2 (>= 19.6)",
	"libasound.so.2":    "libasound2 (>= 1.0.16)",
}

// Dependencies returns the Depends entries the ELF binary at path needs, sorted, and reports
// an error when its machine or class is not that of arch or when it needs a library that
// sonamePackages does not know.
func Dependencies(path, arch string) ([]string, error) {
	want, ok := debArch[arch]
	if !ok {
		return nil, fmt.Errorf("architecture %q: use amd64, arm64 or armhf", arch)
	}
	f, err := elf.Open(path)
	if err != nil {
		return nil, fmt.Errorf("binary %s: %w", path, err)
	}
	defer func() { _ = f.Close() }() // read only: a failing Close loses nothing
	if f.Machine != want.machine || f.Class != want.class {
		return nil, fmt.Errorf("binary %s is %v %v, not a %s binary: build it with the %s toolchain", path, f.Class, f.Machine, arch, arch)
	}
	libs, err := f.ImportedLibraries()
	if err != nil {
		return nil, fmt.Errorf("binary %s: reading its libraries: %w", path, err)
	}
	deps := map[string]bool{}
	for _, l := range libs {
		p, ok := sonamePackages[l]
		if !ok {
			return nil, fmt.Errorf("binary %s needs %s, which deploy/debpkg does not know: add its Debian package to sonamePackages", path, l)
		}
		if p != "libc6" {
			deps[p] = true
		}
	}
	if len(libs) > 0 {
		glibc, err := maxGlibc(f)
		if err != nil {
			return nil, fmt.Errorf("binary %s: %w", path, err)
		}
		if glibc != "" {
			deps["libc6 (>= "+glibc+")"] = true
		} else {
			deps["libc6"] = true
		}
	}
	out := make([]string, 0, len(deps))
	for d := range deps {
		out = append(out, d)
	}
	slices.Sort(out)
	return out, nil
}

var glibcVersion = regexp.MustCompile(`^GLIBC_([0-9]+(?:\.[0-9]+)*)$`)

// maxGlibc returns the highest GLIBC_x.y symbol version the binary imports, "" for none.
func maxGlibc(f *elf.File) (string, error) {
	syms, err := f.ImportedSymbols()
	if err != nil {
		return "", fmt.Errorf("reading its imported symbols: %w", err)
	}
	var best []int
	var bestS string
	for _, s := range syms {
		m := glibcVersion.FindStringSubmatch(s.Version)
		if m == nil {
			continue
		}
		var v []int
		for _, p := range strings.Split(m[1], ".") {
			n, _ := strconv.Atoi(p)
			v = append(v, n)
		}
		if best == nil || slices.Compare(v, best) > 0 {
			best, bestS = v, m[1]
		}
	}
	return bestS, nil
}

// Build writes the package described by s and returns its path.
func Build(ctx context.Context, s Spec) (string, error) {
	if err := ctx.Err(); err != nil {
		return "", err
	}
	if s.Version == "" || s.Version[0] < '0' || s.Version[0] > '9' {
		return "", fmt.Errorf("version %q: a Debian version starts with a digit, e.g. 0.1.0", s.Version)
	}
	deps, err := Dependencies(s.Binary, s.Arch)
	if err != nil {
		return "", err
	}
	deps = append([]string{"adduser"}, deps...)
	if s.MTime.IsZero() {
		s.MTime = time.Unix(0, 0).UTC()
	}
	tmp, err := os.MkdirTemp("", "debpkg-")
	if err != nil {
		return "", fmt.Errorf("temporary directory: %w", err)
	}
	// Best effort: a temporary directory left behind spoils no package, and the build's own
	// error, if any, is the one to report.
	defer func() { _ = os.RemoveAll(tmp) }()
	gen := func(name string, data []byte) (string, error) {
		p := filepath.Join(tmp, name)
		return p, os.WriteFile(p, data, 0o644)
	}
	changelog, err := gzipped(changelogEntry(s))
	if err != nil {
		return "", err
	}
	// A version without a Debian revision ("-1") is a native package: its changelog is
	// changelog.gz (policy 12.7).
	changelogPath, err := gen("changelog.gz", changelog)
	if err != nil {
		return "", err
	}
	copyrightPath, err := gen("copyright", fmt.Appendf(nil, copyrightText, s.MTime.Year()))
	if err != nil {
		return "", err
	}
	overridesPath, err := gen("lintian-overrides", []byte(lintianOverrides))
	if err != nil {
		return "", err
	}
	// Every file comes from a snapshot in tmp: nfpm takes a file's size and its bytes at
	// different moments, and a file being edited between the two breaks the archive.
	sources := []string{"deploy/leqnode.service", "deploy/leqnode.toml", "README.md", "deploy/leqnode-collect.service", "configs/collector.toml",
		"deploy/debpkg/scripts/preinst", "deploy/debpkg/scripts/postinst", "deploy/debpkg/scripts/prerm", "deploy/debpkg/scripts/postrm"}
	fleet, err := filepath.Glob(filepath.Join(s.Root, "deploy", "fleet", "*"))
	if err != nil {
		return "", err
	}
	var fleetDocs []string
	for _, f := range fleet {
		if st, err := os.Stat(f); err == nil && st.Mode().IsRegular() && !strings.HasSuffix(f, "_test.go") {
			fleetDocs = append(fleetDocs, "deploy/fleet/"+filepath.Base(f))
		}
	}
	if !slices.Contains(fleetDocs, "deploy/fleet/README.md") {
		return "", fmt.Errorf("source tree %s: no deploy/fleet/README.md (run from the repository's top or give --root)", s.Root)
	}
	// The README links into docs/: the pages go beside it, so that its links work where the
	// package installs it.
	pages, err := filepath.Glob(filepath.Join(s.Root, "docs", "*.md"))
	if err != nil {
		return "", err
	}
	var userDocs []string
	for _, f := range pages {
		userDocs = append(userDocs, "docs/"+filepath.Base(f))
	}
	if !slices.Contains(userDocs, "docs/installing.md") {
		return "", fmt.Errorf("source tree %s: no docs/installing.md (run from the repository's top or give --root)", s.Root)
	}
	for _, p := range append(append(sources, fleetDocs...), userDocs...) {
		data, err := os.ReadFile(filepath.Join(s.Root, filepath.FromSlash(p)))
		if err != nil {
			return "", fmt.Errorf("source tree %s: %w (run from the repository's top or give --root)", s.Root, err)
		}
		dst := filepath.Join(tmp, "src", filepath.FromSlash(p))
		if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
			return "", err
		}
		if err := os.WriteFile(dst, data, 0o644); err != nil {
			return "", err
		}
	}
	src := func(p string) string { return filepath.Join(tmp, "src", filepath.FromSlash(p)) }
	var manPath string
	if s.ManFrom != "" {
		help, err := exec.CommandContext(ctx, s.ManFrom, "help").Output()
		if err != nil {
			return "", fmt.Errorf("manual page: %s help: %w", s.ManFrom, err)
		}
		page, err := ManPage(help, s)
		if err != nil {
			return "", fmt.Errorf("manual page from %s help: %w", s.ManFrom, err)
		}
		gz, err := gzipped(page)
		if err != nil {
			return "", err
		}
		if manPath, err = gen("leqnode.1.gz", gz); err != nil {
			return "", err
		}
	}
	fi := func(mode os.FileMode) *files.ContentFileInfo {
		return &files.ContentFileInfo{Owner: "root", Group: "root", Mode: mode, MTime: s.MTime}
	}
	doc := "/usr/share/doc/leqnode/"
	contents := files.Contents{
		{Source: s.Binary, Destination: "/usr/bin/leqnode", FileInfo: fi(0o755)},
		{Source: src("deploy/leqnode.service"), Destination: "/lib/systemd/system/leqnode.service", FileInfo: fi(0o644)},
		{Destination: "/etc/leqnode", Type: files.TypeDir, FileInfo: fi(0o750)},
		{Source: src("deploy/leqnode.toml"), Destination: "/etc/leqnode/leqnode.toml", Type: files.TypeConfig, FileInfo: fi(0o640)},
		{Destination: "/var/lib/leqnode", Type: files.TypeDir, FileInfo: fi(0o750)},
		{Source: src("README.md"), Destination: doc + "README.md", FileInfo: fi(0o644)},
		{Source: src("deploy/leqnode.toml"), Destination: doc + "leqnode.toml", FileInfo: fi(0o644)},
		// The central collector: its unit (never enabled by the package) and an example
		// configuration to copy to /etc/leqnode/collector.toml.
		{Source: src("deploy/leqnode-collect.service"), Destination: "/lib/systemd/system/leqnode-collect.service", FileInfo: fi(0o644)},
		{Source: src("configs/collector.toml"), Destination: doc + "collector.toml", FileInfo: fi(0o644)},
		{Source: copyrightPath, Destination: doc + "copyright", FileInfo: fi(0o644)},
		{Source: changelogPath, Destination: doc + "changelog.gz", FileInfo: fi(0o644)},
		{Source: overridesPath, Destination: "/usr/share/lintian/overrides/leqnode", FileInfo: fi(0o644)},
	}
	if manPath != "" {
		contents = append(contents, &files.Content{Source: manPath, Destination: "/usr/share/man/man1/leqnode.1.gz", FileInfo: fi(0o644)})
	}
	for _, f := range fleetDocs {
		contents = append(contents, &files.Content{Source: src(f), Destination: doc + "fleet/" + filepath.Base(f), FileInfo: fi(0o644)})
	}
	for _, f := range userDocs {
		contents = append(contents, &files.Content{Source: src(f), Destination: doc + f, FileInfo: fi(0o644)})
	}
	info := &nfpm.Info{
		Name:          "leqnode",
		Arch:          s.Arch,
		Platform:      "linux",
		Version:       s.Version,
		VersionSchema: "none",
		Section:       "science",
		Priority:      "optional",
		Maintainer:    "leqnode developers <leqnode@example.org>",
		Description:   description,
		License:       "Apache-2.0",
		MTime:         s.MTime,
		Overridables: nfpm.Overridables{
			Depends:    deps,
			Recommends: []string{"alsa-utils", "systemd-timesyncd | time-daemon"},
			Suggests:   []string{"mosquitto-clients"},
			Contents:   contents,
			Umask:      0o022,
			Scripts: nfpm.Scripts{
				PreInstall:  src("deploy/debpkg/scripts/preinst"),
				PostInstall: src("deploy/debpkg/scripts/postinst"),
				PreRemove:   src("deploy/debpkg/scripts/prerm"),
				PostRemove:  src("deploy/debpkg/scripts/postrm"),
			},
			Deb: nfpm.Deb{Compression: s.Compression},
		},
	}
	info = nfpm.WithDefaults(info)
	if err := nfpm.PrepareForPackager(info, "deb"); err != nil {
		return "", fmt.Errorf("package contents: %w", err)
	}
	if err := os.MkdirAll(s.OutDir, 0o755); err != nil {
		return "", fmt.Errorf("output directory: %w", err)
	}
	name := filepath.Join(s.OutDir, deb.Default.ConventionalFileName(info))
	var buf bytes.Buffer
	if err := deb.Default.Package(info, &buf); err != nil {
		return "", fmt.Errorf("building %s: %w", name, err)
	}
	// Write through a temporary name so that a failed build never leaves a truncated package.
	part := name + ".part"
	if err := os.WriteFile(part, buf.Bytes(), 0o644); err != nil {
		return "", fmt.Errorf("writing %s: %w", part, err)
	}
	if err := os.Rename(part, name); err != nil {
		return "", fmt.Errorf("writing %s: %w", name, err)
	}
	return name, nil
}

const description = `noise monitoring node: LAeq, LAFmax, percentiles, spectra, over MQTT
 leqnode turns a single-board computer with a measurement microphone into an
 unattended noise monitoring node: it captures the microphone without pause,
 computes A- and C-weighted levels with Fast, Slow and Impulse time weighting
 (LAeq every second, per-minute LAFmax, LAFmin and percentile levels,
 one-third-octave spectra, events with their LAE), keeps every record in a
 crash-safe store through power cuts and network outages, publishes them over
 MQTT in order, and checks itself against a sound calibrator.
 .
 Levels are indicative: legally valid measurements need a type-approved class 1
 instrument with traceable calibration.`

const copyrightText = `Format: https://www.debian.org/doc/packaging-manuals/copyright-format/1.0/
Upstream-Name: leqnode
Source: the leqnode source repository

Files: *
Copyright: %d the leqnode developers
License: Apache-2.0

License: Apache-2.0
 Licensed under the Apache License, Version 2.0 (the "License");
 you may not use this file except in compliance with the License.
 You may obtain a copy of the License at
 .
     http://www.apache.org/licenses/LICENSE-2.0
 .
 Unless required by applicable law or agreed to in writing, software
 distributed under the License is distributed on an "AS IS" BASIS,
 WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
 See the License for the specific language governing permissions and
 limitations under the License.
 .
 On Debian systems, the complete text of the Apache License, Version 2.0
 can be found in "/usr/share/common-licenses/Apache-2.0".
`

// arecordCapture replaces the capture keys of the PortAudio example for builds without
// PortAudio: ALSA's arecord on the USB microphone's hardware device, in the 16-bit format such
// microphones deliver natively (int16 is read without loss; the node scales by 32768).
var arecordCapture = []struct{ from, to string }{
	{`kind = "portaudio"`, `kind = "arecord"`},
	{`device = "USB"`, `device = "hw:CARD=Device,DEV=0"   # see arecord -L; card names survive re-plugging`},
	{`sample_format = "float32"`, `sample_format = "int16"`},
}

// ArecordConfig turns the PortAudio example configuration (deploy/leqnode.toml) into one for the
// arecord source, line by line; it fails if a line it must change is not there exactly once.
func ArecordConfig(data []byte) ([]byte, error) {
	out := data
	for _, r := range arecordCapture {
		if n := bytes.Count(out, []byte("\n"+r.from+"\n")); n != 1 {
			return nil, fmt.Errorf("expected the line %q once, found it %d times", r.from, n)
		}
		out = bytes.Replace(out, []byte("\n"+r.from+"\n"), []byte("\n"+r.to+"\n"), 1)
	}
	return out, nil
}

// ManPage returns the manual page leqnode(1) in man(7) format, its command list taken from
// the output of `leqnode help` (lines "  NAME  SUMMARY" after "commands:").
func ManPage(help []byte, s Spec) ([]byte, error) {
	esc := strings.NewReplacer(`\`, `\e`, "-", `\-`, "'", `\(aq`)
	var cmds [][2]string
	in := false
	for _, line := range strings.Split(string(help), "\n") {
		switch {
		case strings.TrimSpace(line) == "commands:":
			in = true
		case in && strings.HasPrefix(line, "  "):
			name, summary, ok := strings.Cut(strings.TrimSpace(line), " ")
			if !ok {
				return nil, fmt.Errorf("command line %q has no summary", line)
			}
			cmds = append(cmds, [2]string{name, strings.TrimSpace(summary)})
		case in && strings.TrimSpace(line) == "":
			in = len(cmds) == 0
		}
	}
	if len(cmds) == 0 {
		return nil, errors.New("no commands listed after \"commands:\"")
	}
	var b bytes.Buffer
	fmt.Fprintf(&b, ".TH LEQNODE 1 %q \"leqnode %s\" \"User Commands\"\n", s.MTime.UTC().Format("2006-01-02"), esc.Replace(s.Version))
	b.WriteString(`.SH NAME
leqnode \- noise monitoring node and its tools
.SH SYNOPSIS
.B leqnode
.I command
.RI [ flags ]
.RI [ args ]
.SH DESCRIPTION
.B leqnode
turns a single\-board computer with a measurement microphone into an unattended noise
monitoring node: A\- and C\-weighted levels with Fast, Slow and Impulse time weighting,
one\-third\-octave spectra, events, a crash\-safe store and MQTT publishing, checked against a
sound calibrator.
Every command follows one set of conventions: a recording is a positional FILE
.RB ( \- " is standard input);"
the store comes from
.B \-\-config
.I FILE
or
.B \-\-db
.IR FILE ;
time ranges are
.B \-\-from
and
.B \-\-to
(RFC 3339 or YYYY\-MM\-DD, half\-open). Run
.B leqnode
.I command
.B \-h
for a command's flags.
.SH COMMANDS
`)
	for _, c := range cmds {
		fmt.Fprintf(&b, ".TP\n.B %s\n%s\n", esc.Replace(c[0]), esc.Replace(c[1]))
	}
	b.WriteString(`.SH EXIT STATUS
0 on success, 2 for bad input or usage, 1 for a failure at run time.
.SH FILES
.TP
.I /etc/leqnode/leqnode.toml
the node's configuration; check it with
.B leqnode config check
.TP
.I /var/lib/leqnode
the store and the calibration state
.TP
.I /lib/systemd/system/leqnode.service
the service
.TP
.I /usr/share/doc/leqnode
the documentation, the example configuration and the fleet examples
.SH CAUTIONS
Levels are indicative: legally valid measurements need a type\-approved class 1 instrument with
traceable calibration, the whole chain verified; defer to local regulations and accredited
practice. Long exposure to levels above 85 dB(A), a sound calibrator's included, damages hearing.
`)
	return b.Bytes(), nil
}

// lintianOverrides explains to lintian (Debian's package checker) the departures that are
// meant: the configuration may hold broker credentials and the state directory holds the
// measurements, so neither is world-readable.
const lintianOverrides = `# The configuration may hold MQTT credentials: readable by the service's group only.
leqnode: non-standard-dir-perm 0750 != 0755 [etc/leqnode/]
leqnode: non-standard-file-perm 0640 != 0644 [etc/leqnode/leqnode.toml]
# The measurements: readable by the service's group only.
leqnode: non-standard-dir-perm 0750 != 0755 [var/lib/leqnode/]
`

// changelogEntry returns a one-entry Debian changelog (policy 4.4) for the build.
func changelogEntry(s Spec) []byte {
	return fmt.Appendf(nil, "leqnode (%s) unstable; urgency=medium\n\n  * Package built from the leqnode source tree.\n\n -- leqnode developers <leqnode@example.org>  %s\n",
		s.Version, s.MTime.UTC().Format(time.RFC1123Z))
}

// gzipped compresses data at the best level with no file name or time in the header.
func gzipped(data []byte) ([]byte, error) {
	var b bytes.Buffer
	w, err := gzip.NewWriterLevel(&b, gzip.BestCompression)
	if err != nil {
		return nil, err
	}
	if _, err := w.Write(data); err != nil {
		return nil, err
	}
	if err := w.Close(); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

func main() {
	os.Exit(run(context.Background(), os.Args[1:], os.Stdout, os.Stderr))
}

func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("debpkg", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var s Spec
	var mtime int64
	fs.StringVar(&s.Arch, "arch", "amd64", "Debian architecture: amd64, arm64 or armhf")
	fs.StringVar(&s.Binary, "binary", "", "the leqnode binary for that architecture")
	fs.StringVar(&s.Version, "version", "", "Debian version of the package, starting with a digit")
	fs.StringVar(&s.Root, "root", ".", "the source tree")
	fs.StringVar(&s.OutDir, "out", "dist", "output directory")
	fs.Int64Var(&mtime, "mtime", 0, "time of the files in the package, Unix seconds (default: $SOURCE_DATE_EPOCH, else 0)")
	fs.StringVar(&s.Compression, "compression", "gzip", "gzip, xz or none")
	fs.StringVar(&s.ManFrom, "man-from", "", "a leqnode binary that runs here: make the manual page from its help (default: none)")
	arecordFrom := fs.String("arecord-config", "", "print this configuration turned to the arecord source (for builds without PortAudio) and exit")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if *arecordFrom != "" {
		data, err := os.ReadFile(*arecordFrom)
		if err != nil {
			complain(stderr, "debpkg: %v\n", err)
			return 2
		}
		out, err := ArecordConfig(data)
		if err != nil {
			complain(stderr, "debpkg: %s: %v\n", *arecordFrom, err)
			return 2
		}
		_, err = stdout.Write(out)
		if err != nil {
			return 1
		}
		return 0
	}
	if s.Binary == "" || s.Version == "" || fs.NArg() != 0 {
		complain(stderr, "debpkg: give --binary FILE and --version VERSION (and no other arguments)\n")
		return 2
	}
	switch s.Compression {
	case "gzip", "xz", "none":
	default:
		complain(stderr, "debpkg: --compression %q: use gzip, xz or none\n", s.Compression)
		return 2
	}
	if mtime == 0 {
		if e := os.Getenv("SOURCE_DATE_EPOCH"); e != "" {
			n, err := strconv.ParseInt(e, 10, 64)
			if err != nil {
				complain(stderr, "debpkg: SOURCE_DATE_EPOCH=%q: give Unix seconds\n", e)
				return 2
			}
			mtime = n
		}
	}
	s.MTime = time.Unix(mtime, 0).UTC()
	log := slog.New(slog.NewTextHandler(stderr, nil))
	start := time.Now()
	p, err := Build(ctx, s)
	if err != nil {
		complain(stderr, "debpkg: %v\n", err)
		return 1
	}
	log.Info("package built", "file", p, "arch", s.Arch, "seconds", time.Since(start).Seconds())
	if _, err := fmt.Fprintln(stdout, p); err != nil {
		return 1 // the caller reads the package's name from standard output
	}
	return 0
}

// complain writes a message for the user to standard error. The exit status already says the
// run failed; a standard error that cannot be written leaves nowhere else to say so, so a
// failed write is dropped.
func complain(stderr io.Writer, format string, args ...any) {
	_, _ = fmt.Fprintf(stderr, format, args...)
}
