# trajvault: the two commands of the README are `make demo` and `make test`.
# Both install what they need on Debian when it is missing (.ci/deps.sh).

GO     := $(shell .ci/deps.sh go)
BIN    := bin/trajvault
PYTHON ?= /usr/bin/python3
export TRAJVAULT_PYTHON := $(PYTHON)
export CGO_ENABLED := 1

.PHONY: all build demo test deps-build deps-test vet fmt-check fuzz bench clean

# Fuzz targets: package:Target. make test runs each for FUZZTIME_TEST.
FUZZ_TARGETS := ./pack:FuzzXYZ ./pack:FuzzTable ./pack:FuzzLog ./internal/textnum:FuzzParse
FUZZTIME_TEST ?= 4s
FUZZTIME ?= 5m

all: build

deps-build:
	@.ci/deps.sh build

deps-test:
	@.ci/deps.sh test

build: deps-build
	$(GO) build -o $(BIN) ./cmd/trajvault

# demo: the main job on the invented demo ensemble: legacy text logs are
# scanned, converted to trajectory files, validated, inspected and
# exported back to text.
RECIPE := testdata/recipes/tarnol.yaml
demo: build
	rm -rf demo
	$(BIN) demo --text --trajectories 8 --steps 10000 demo/logs
	$(BIN) scan --recipe $(RECIPE) demo/logs
	$(BIN) convert --recipe $(RECIPE) --author "Tarn Valley photophysics group (fictional)" demo/logs -o demo/h5
	$(BIN) validate demo/h5/*.h5
	$(BIN) inspect demo/h5/traj-001.h5
	$(BIN) export demo/h5/traj-001.h5 -o demo/export --format extxyz
	$(BIN) audit --report demo/audit.html demo/h5
	@echo "demo: logs in demo/logs, trajectory files in demo/h5, audit report in demo/audit.html"

fmt-check:
	@out="$$($(dir $(GO))gofmt -l $$(git ls-files '*.go' 2>/dev/null || find . -name '*.go'))"; \
	if [ -n "$$out" ]; then echo "gofmt needed:"; echo "$$out"; exit 1; fi

vet: deps-build
	$(GO) vet ./...

test: deps-test fmt-check vet
	$(GO) test -count=1 ./...
	@for t in $(FUZZ_TARGETS); do \
		echo "fuzz $$t ($(FUZZTIME_TEST))"; \
		$(GO) test $${t%%:*} -run '^$$' -fuzz "^$${t##*:}\$$" -fuzztime $(FUZZTIME_TEST) >/dev/null || exit 1; \
	done

# fuzz: run every fuzz target longer (FUZZTIME=5m by default).
fuzz: deps-test
	@for t in $(FUZZ_TARGETS); do \
		echo "fuzz $$t ($(FUZZTIME))"; \
		$(GO) test $${t%%:*} -run '^$$' -fuzz "^$${t##*:}\$$" -fuzztime $(FUZZTIME) || exit 1; \
	done

# bench: conversion speed and size against general-purpose compressors.
bench: build
	bench/run.sh

clean:
	rm -rf bin demo .tools
