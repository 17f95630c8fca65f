# trajvault: the two commands of the README are `make demo` and `make test`.
# Both install what they need on Debian when it is missing (.ci/deps.sh).

GO     := $(shell .ci/deps.sh go)
BIN    := bin/trajvault
PYTHON ?= /usr/bin/python3
export TRAJVAULT_PYTHON := $(PYTHON)
export CGO_ENABLED := 1

.PHONY: all build demo test deps-build deps-test vet fmt-check clean

all: build

deps-build:
	@.ci/deps.sh build

deps-test:
	@.ci/deps.sh test

build: deps-build
	$(GO) build -o $(BIN) ./cmd/trajvault

# demo: generate the invented demo ensemble, validate and inspect it.
demo: build
	rm -rf demo
	$(BIN) demo demo/runs
	$(BIN) validate demo/runs/*.h5
	$(BIN) inspect demo/runs/traj-001.h5

fmt-check:
	@out="$$($(dir $(GO))gofmt -l $$(git ls-files '*.go' 2>/dev/null || find . -name '*.go'))"; \
	if [ -n "$$out" ]; then echo "gofmt needed:"; echo "$$out"; exit 1; fi

vet: deps-build
	$(GO) vet ./...

test: deps-test fmt-check vet
	$(GO) test -count=1 ./...

clean:
	rm -rf bin demo .tools
