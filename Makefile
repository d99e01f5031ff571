# bandfold: make demo | make test | make docs | make bench | make bench-large | make test-cluster
SHELL := /bin/bash
GO ?= go
BIN := bin/bandfold
DEBS := libgdal-dev libproj-dev gdal-bin python3-gdal libopenblas-dev pkg-config chromium
VERSION := $(shell git describe --always --dirty 2>/dev/null || echo dev)
export GOFLAGS := -buildvcs=false

.PHONY: all deps build test unit fuzz testdata demo docs bench bench-large test-cluster clean

all: build

deps:
	@bash scripts/deps.sh $(DEBS)
	@command -v $(GO) >/dev/null || { echo "bandfold: Go 1.26 or newer is needed on PATH" >&2; exit 1; }
	@$(GO) mod download

build: deps
	$(GO) build -ldflags "-X main.version=$(VERSION)" -o $(BIN) ./cmd/bandfold

testdata: deps
	@bash scripts/testdata.sh

unit: deps testdata
	$(GO) vet ./...
	$(GO) test -count=1 ./...

test: unit fuzz test-cluster

fuzz: deps testdata
	@GO=$(GO) bash scripts/fuzz.sh

test-cluster: build testdata
	@BANDFOLD=$(BIN) bash scripts/test-cluster.sh

demo: build
	$(BIN) demo --dir demo-out --overwrite

# docs/commands/ (a page per command, from the cobra tree) and
# docs/outputs.md, from the code; make test fails when they are stale.
docs: deps
	$(GO) test -count=1 ./cmd/bandfold -run 'TestDocsAreCurrent|TestWalkthrough' -args -update-docs

bench: build
	@GO=$(GO) bash scripts/bench.sh

# learn on a 224-band 4096 x 4096 Int16 cube (7.5 GB, written once into
# bench-out/) with its peak memory, against the floor.
bench-large: build
	@GO=$(GO) bash scripts/bench.sh large

clean:
	rm -rf bin demo-out bench-out
