# trajvault: the two commands of the README are `make demo` and `make test`.
# Both install what they need on Debian when it is missing (.ci/deps.sh).

GO     := $(shell .ci/deps.sh go)
BIN    := bin/trajvault
PYTHON ?= /usr/bin/python3
export TRAJVAULT_PYTHON := $(PYTHON)
export CGO_ENABLED := 1
# VERSION is stamped into the binary, and through it into every file and
# bundle it writes (creator version, provenance, Bag-Software-Agent).
VERSION ?= $(shell git describe --tags --always --dirty 2>/dev/null || echo unknown)

.PHONY: all build install demo test readme deps-build deps-test vet fmt-check fuzz bench clean

# Fuzz targets: package:Target. make test runs each for FUZZTIME_TEST
# executions. A count, not a duration: Go 1.26's fuzz coordinator can report
# "context deadline exceeded" as a failure when a duration runs out while a
# worker is mid-input (go.dev/issue/75804, fixed in Go 1.27); a count has no
# deadline to race.
FUZZ_TARGETS := ./ingest:FuzzXYZ ./ingest:FuzzTable ./ingest:FuzzLog ./internal/textnum:FuzzParse ./validate:FuzzValidateImage ./internal/bagit:FuzzInfo ./internal/bagit:FuzzManifest
FUZZTIME_TEST ?= 3000x
FUZZTIME ?= 5m

all: build

deps-build:
	@.ci/deps.sh build

deps-test:
	@.ci/deps.sh test

# The binary links Debian's static libhdf5.a when it is there (package
# libhdf5-dev ships it): the shared library pulls in libcurl and about 30
# other libraries for a network driver trajvault never uses, and loading
# them was half of every command's start-up. Recursive (=) so pkg-config is
# asked only after deps-build has installed it.
HDF5_LIBDIR = $(patsubst -L%,%,$(filter -L%,$(shell pkg-config --libs-only-L hdf5 2>/dev/null)))
HDF5_STATIC = $(firstword $(wildcard $(addsuffix /libhdf5.a,$(HDF5_LIBDIR))))
GOLINK = $(if $(HDF5_STATIC),CGO_CFLAGS="-O2 -g $$(pkg-config --cflags hdf5)" CGO_LDFLAGS="$(HDF5_STATIC) -lsz -laec -lz -lm") \
	$(GO) $(1) $(if $(HDF5_STATIC),-tags hdf5static) -ldflags "-X main.version=$(VERSION)"

build: deps-build
	$(call GOLINK,build) -o $(BIN) ./cmd/trajvault

# install: put trajvault on PATH (GOBIN, or ~/go/bin).
install: deps-build
	$(call GOLINK,install) ./cmd/trajvault

# readme: rewrite README.md's example outputs and vocabulary table from
# real runs (make test fails when they drift).
readme: deps-test
	$(GO) test -count=1 ./internal/quantity -run TestReadmeVocabulary -update-readme
	$(GO) test -count=1 -timeout 30m ./cmd/trajvault -run TestReadmeExamples -update-readme

# demo: the whole job on the invented demo ensemble: legacy text logs are
# scanned, packed into a BagIt bundle (trajectory files, RO-Crate,
# DataCite, data description), validated (folder and archive), inspected,
# audited and exported back to text.
RECIPE := testdata/recipes/tarnol.yaml
demo: build
	rm -rf demo
	$(BIN) demo --text --trajectories 8 --steps 10000 demo/logs
	$(BIN) scan --recipe $(RECIPE) demo/logs
	$(BIN) init -o demo/deposit.yaml --title "Surface hopping of tarnol (invented demo data)" \
		--description "Invented demo ensemble: fewest-switches surface hopping of a model triatomic on two coupled surfaces." \
		--creator "Doe, Jane|0000-0002-1825-0097|Tarn Valley University (fictional)" \
		--contact "Jane Doe|jane.doe@example.org" --program "tarnol-md|1.0"
	$(BIN) pack demo/logs -o demo/bundle --deposit demo/deposit.yaml --recipe $(RECIPE) --archive tar.zst
	$(BIN) validate demo/bundle demo/bundle.tar.zst
	$(BIN) inspect demo/bundle/data/trajectories/traj-001.h5
	$(BIN) audit --report demo/audit.html demo/bundle/data/trajectories
	$(BIN) export demo/bundle/data/trajectories/traj-001.h5 -o demo/export --format extxyz
	@echo "demo: bundle demo/bundle (upload file demo/bundle.tar.zst), data description demo/bundle/data/README.md, audit report demo/audit.html"

fmt-check:
	@out="$$($(dir $(GO))gofmt -l $$(git ls-files '*.go' 2>/dev/null || find . -name '*.go'))"; \
	if [ -n "$$out" ]; then echo "gofmt needed:"; echo "$$out"; exit 1; fi

vet: deps-build
	$(GO) vet ./...

test: deps-test fmt-check vet
	$(GO) test -count=1 -timeout 45m ./...
	@for t in $(FUZZ_TARGETS); do \
		echo "fuzz $$t ($(FUZZTIME_TEST))"; \
		$(GO) test $${t%%:*} -run '^$$' -fuzz "^$${t##*:}\$$" -fuzztime $(FUZZTIME_TEST) >.fuzz.log 2>&1 || { cat .fuzz.log; exit 1; }; \
	done; rm -f .fuzz.log

# fuzz: run every fuzz target longer (FUZZTIME=5m by default), and the
# hostile corpus with 170 byte-flipped files per HDF5 format (510 in all).
fuzz: deps-test
	TRAJVAULT_CORPUS_MUTANTS=170 $(GO) test -count=1 -timeout 60m -run '^TestHostileCorpus$$' -v ./cmd/trajvault
	@for t in $(FUZZ_TARGETS); do \
		echo "fuzz $$t ($(FUZZTIME))"; \
		$(GO) test $${t%%:*} -run '^$$' -fuzz "^$${t##*:}\$$" -fuzztime $(FUZZTIME) || exit 1; \
	done

# bench: conversion speed and size against general-purpose compressors.
bench: build
	bench/run.sh

clean:
	rm -rf bin demo .tools
