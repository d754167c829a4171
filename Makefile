# leqnode: build, demo, tests and benchmarks. `make demo` and `make test` set up everything they
# need on a fresh Debian 12 machine (Debian packages through .ci/install-debs, Go modules through
# the module proxy).
SHELL := /bin/bash
export PATH := $(PATH):/usr/local/go/bin
GO ?= go
BIN := bin/leqnode

# Debian packages the tests use: sox (reference measurements of real recordings) and alsa-utils
# (recordings shipped under /usr/share/sounds/alsa).
TEST_DEBS := sox alsa-utils

.PHONY: all build demo test test-deps bench lint fmt clean

all: build

build:
	$(GO) build -o $(BIN) ./cmd/leqnode

demo: build
	./$(BIN) demo

test-deps:
	@.ci/install-debs $(TEST_DEBS)

# Every test; each benchmark once on small data; fuzz targets on their seed corpus only.
test: test-deps
	@test -z "$$(gofmt -l $$(git ls-files '*.go' 2>/dev/null || find . -name '*.go'))" || { echo "gofmt needed:"; gofmt -l .; exit 1; }
	$(GO) vet ./...
	$(GO) test -count=1 ./...
	$(GO) test -count=1 -run '^$$' -bench . -benchtime 1x ./...

# The figures recorded in the README: benchmarks at full size, five runs each (quote medians).
bench: test-deps
	$(GO) test -count=5 -run '^$$' -bench . -benchtime 2s ./... | tee bench.txt

lint:
	$(GO) vet ./...
	$(GO) run honnef.co/go/tools/cmd/staticcheck@v0.8.2 ./...

fmt:
	gofmt -w $$(git ls-files '*.go')

clean:
	rm -rf bin bench.txt
