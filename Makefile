# leqnode: build, demo, tests and benchmarks. `make demo` and `make test` set up everything they
# need on a fresh Debian 12 machine (Debian packages through .ci/install-debs, Go modules through
# the module proxy).
SHELL := /bin/bash
export PATH := $(PATH):/usr/local/go/bin
GO ?= go
BIN := bin/leqnode

# Debian packages the tests use: sox (reference measurements of real recordings), alsa-utils
# (arecord, and recordings under /usr/share/sounds/alsa), portaudio19-dev (the PortAudio capture
# source, built with cgo), mosquitto and openssl (the MQTT tests' broker and test CA), systemd
# (systemd-analyze for the unit), chromium (the status page and report in a real browser),
# python3-scipy (the scipy chain that `leqnode analyze` is benchmarked against) and postgresql
# (the central collector's database, started by its tests as user postgres), binutils (readelf,
# the packaging test's independent reading of a binary's library versions) and tzdata (the
# reports' local days and periods in named time zones).
TEST_DEBS := gcc libc6-dev sox alsa-utils portaudio19-dev mosquitto mosquitto-clients openssl systemd chromium python3-scipy postgresql binutils tzdata
# What building the daemon with PortAudio needs.
# Without a C compiler Go turns cgo off quietly and the PortAudio source drops out of the build.
BUILD_DEBS := gcc libc6-dev portaudio19-dev

.PHONY: all build build-purego demo test test-deps bench fuzz lint fmt clean

all: build

build:
	@.ci/install-debs $(BUILD_DEBS)
	$(GO) build -ldflags "-X main.version=$$(.ci/package-version)" -o $(BIN) ./cmd/leqnode

# The pure-Go binary, without PortAudio (the arecord source still works): for cross-compiling.
build-purego:
	CGO_ENABLED=0 $(GO) build -tags noportaudio -o $(BIN)-purego ./cmd/leqnode

demo: build
	./$(BIN) demo

test-deps:
	@.ci/install-debs $(TEST_DEBS)

# Every test; each benchmark once on small data; fuzz targets on their seed corpus only.
test: test-deps
	@test -z "$$(gofmt -l $$(git ls-files '*.go' 2>/dev/null || find . -name '*.go'))" || { echo "gofmt needed:"; gofmt -l .; exit 1; }
	$(GO) vet ./...
	$(GO) test -count=1 ./...
	CGO_ENABLED=0 $(GO) build -tags noportaudio ./...
	CGO_ENABLED=0 $(GO) test -count=1 -tags noportaudio ./node/capture/... ./node ./dsp/... ./buffer/...
	$(GO) test -count=1 -run '^$$' -bench . -benchtime 1x ./...

# The figures recorded in docs/performance.md: benchmarks at full size, five runs each (quote medians).
bench: test-deps
	LEQNODE_BENCH_HOURS=24 LEQNODE_BENCH_SECONDS=300 LEQNODE_FLEET_NODES=50 LEQNODE_FLEET_DAYS=30 $(GO) test -count=5 -run '^$$' -bench . -benchtime 2s ./... | tee bench.txt
	.ci/callgrind-meter | tee -a bench.txt

# Every fuzz target searches for FUZZTIME each (default 60s; e.g. `make fuzz FUZZTIME=10s`).
# Failing inputs land in the package's testdata/fuzz/ and `make test` replays them: commit them.
FUZZTIME ?= 60s
fuzz: test-deps
	GO=$(GO) .ci/fuzz $(FUZZTIME)

# errcheck: no error a call returns goes unused (issue 15): it is returned wrapped, logged, or
# dropped with `_ =` and a comment saying why. It runs on both builds, with PortAudio (cgo) and
# pure Go (noportaudio). Test files are left out (-ignoretests): a test's unchecked Close of a
# temporary file hides no fault of leqnode, and where an ignored error could hide a failure of
# what a test checks, the test checks it by hand. No function is excluded (no -exclude file):
# errcheck's built-in list already leaves out writes to bytes.Buffer, strings.Builder and
# os.Stderr, which cannot fail or have nowhere to report to.
ERRCHECK := github.com/kisielk/errcheck@v1.9.0
lint:
	@.ci/install-debs $(BUILD_DEBS)
	$(GO) vet ./...
	$(GO) run honnef.co/go/tools/cmd/staticcheck@v0.8.2 ./...
	$(GO) run $(ERRCHECK) -ignoretests ./...
	CGO_ENABLED=0 $(GO) run $(ERRCHECK) -ignoretests -tags noportaudio ./...

fmt:
	gofmt -w $$(git ls-files '*.go')

clean:
	rm -rf bin bench.txt

# --- packaging (issue 10) ---
# `make package` builds leqnode for amd64, arm64 and armhf with PortAudio (cgo, Debian's cross
# compilers against sysroots of Debian's own arm64/armhf packages) and pure Go for ARMv6 and as a
# fallback, and packages the cgo builds as .deb files: everything lands in dist/ (see
# deploy/debpkg and .ci/package-build). `make package-test` checks the packages in full: their
# contents with dpkg-deb, the binaries' ELF headers, the dsp and buffer tests of the pure-Go ARM
# builds under qemu-user-static, an install, upgrade and purge of the amd64 package (as root),
# and the unit with systemd-analyze. `make test` runs the small default of the same tests (the
# amd64 package only).
DIST := dist
PKG_VERSION ?= $(shell .ci/package-version)
PKG_TARGETS ?= amd64 arm64 armhf armv6 purego

.PHONY: package package-deps package-test

package-deps:
	@.ci/package-deps $(DIST)/sysroot

package: package-deps
	.ci/package-build $(DIST) $(PKG_VERSION) $(PKG_TARGETS)

package-test: package
	LEQNODE_PACKAGE_DIST=$(abspath $(DIST)) LEQNODE_PACKAGE_INSTALL=1 $(GO) test -count=1 -v -timeout 60m ./deploy/debpkg
