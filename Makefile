# modegrid — build, test and demo. `make test` is the project's test command.
GO      ?= go
BIN     ?= bin
VERSION ?= $(shell git describe --tags --always --dirty 2>/dev/null || echo dev)
LDFLAGS := -s -w -X main.version=$(VERSION)
PKGS    := ./...

# The eigensolver's lapack build (physics/eigen: OpenBLAS's LAPACK through
# cgo for large matrices) is the one the container ships. OPENBLAS is "yes"
# when OpenBLAS can be linked here (Debian/Ubuntu: libopenblas-dev); then
# modegridd is built with the tag and the tests run in both builds.
# `make build OPENBLAS=no` builds pure Go regardless.
ifndef OPENBLAS
OPENBLAS := $(shell printf 'int main(void){return 0;}\n' | $(CC) -x c - -lopenblas -o /dev/null 2>/dev/null && echo yes || echo no)
endif
ifeq ($(OPENBLAS),yes)
DAEMON_FLAGS := -tags lapack
endif

.PHONY: all build test demo proto proto-check lint vet bench image clean fuzz fuzz-short adversarial

all: build

# modegridd as the image builds it (lapack tag when OpenBLAS links here),
# and the CLI alike, so that its embedded server computes as fast as the
# image; `make build OPENBLAS=no` gives pure-Go binaries, the CLI then a
# single static file to hand out.
build:
	$(GO) build $(DAEMON_FLAGS) -trimpath -ldflags '$(LDFLAGS)' -o $(BIN)/modegridd ./server/cmd/modegridd
	$(GO) build $(DAEMON_FLAGS) -trimpath -ldflags '$(LDFLAGS)' -o $(BIN)/modegrid ./client/cmd/modegrid

# Everything: generated code fresh, buf lint, go vet, gofmt, a short fuzz
# of every fuzz target, race tests; the engine's tests again in the lapack
# build when OpenBLAS links here (deploy/'s tests build the image's binary,
# which needs it: .ci/run installs libopenblas-dev).
test: proto-check lint fuzz-short
	$(GO) test -race -count=1 -timeout 9m $(PKGS)
ifeq ($(OPENBLAS),yes)
	CGO_ENABLED=1 $(GO) test -race -count=1 -timeout 5m -tags lapack ./physics/...
else
	@echo "OpenBLAS not found (apt-get install libopenblas-dev): the lapack build of physics/ is not tested"
endif

# Fuzz targets (package:function): the model file decoder, every RPC
# handler, the CLI's parsers. Seeds: <package>/testdata/fuzz/<function>/.
FUZZ_TARGETS := ./server:FuzzModelJSON ./server:FuzzCheckModel ./server:FuzzComputeModes \
  ./server:FuzzComputeDispersion ./server:FuzzComputeDos ./server:FuzzComputeThermal ./server:FuzzUploadModel \
  ./server:FuzzComputeGruneisen ./server:FuzzComputeQuasiHarmonic ./server:FuzzComputeConductivity \
  ./server:FuzzFit ./server:FuzzComputeInfrared ./server:FuzzComputeScattering \
  ./client/cmd/modegrid:FuzzParseQList ./client/cmd/modegrid:FuzzParseMesh \
  ./client/cmd/modegrid:FuzzParsePath ./client/cmd/modegrid:FuzzParseTemps \
  ./client/cmd/modegrid:FuzzParseSamples ./client/cmd/modegrid:FuzzParseScatterers
FUZZTIME ?= 10m
FUZZTIME_SHORT ?= 3s
FUZZ_VMEM_KB ?= 8000000

# Each fuzz target for FUZZTIME (10 minutes each by default). Address space
# is limited to FUZZ_VMEM_KB so that an input exhausting memory fails its
# worker (and is reported) instead of the machine.
fuzz:
	@ulimit -v $(FUZZ_VMEM_KB) 2>/dev/null || true; \
	for t in $(FUZZ_TARGETS); do pkg=$${t%%:*}; fn=$${t##*:}; \
	  echo "fuzz $$fn in $$pkg for $(FUZZTIME)"; \
	  $(GO) test -run '^$$' -fuzz "^$$fn\$$" -fuzztime $(FUZZTIME) $$pkg || exit 1; \
	done

# Each fuzz target for a few seconds (part of make test).
fuzz-short:
	@$(MAKE) --no-print-directory fuzz FUZZTIME=$(FUZZTIME_SHORT)

# The adversarial suite at full size (minutes): each request that once took
# a replica down, against a fresh modegridd child on loopback; prints the
# markdown table of DEVELOPERS.md's reliability section. Its short form
# runs in make test (TestAdversarialShort).
adversarial: build
	$(GO) build -trimpath -o $(BIN)/modegrid-load ./client/cmd/modegrid-load
	$(BIN)/modegrid-load --spawn $(BIN)/modegridd --adversarial --long

demo:
	$(GO) run ./client/cmd/modegrid demo

# The code generators (buf, protoc-gen-go, protoc-gen-go-grpc) are pinned in
# a module of their own, proto/tools/go.mod, so that their dependency graph
# stays out of the main module; `go tool -modfile=...` runs them from there.
BUF := $(GO) tool -modfile=tools/go.mod buf

# Regenerate the committed Go code from proto/ with the pinned generators.
proto:
	cd proto && $(BUF) generate

# Fails when the committed generated code differs from a fresh generation.
proto-check:
	@tmp=$$(mktemp -d) && trap 'rm -rf $$tmp' EXIT && \
	  (cd proto && $(BUF) generate -o $$tmp) && \
	  for f in $$(cd $$tmp && find . -name '*.go'); do \
	    cmp -s $$tmp/$$f proto/$$f || { echo "proto/$$f is stale: run 'make proto' and commit"; exit 1; }; \
	  done && echo "generated code is fresh"

lint: vet
	cd proto && $(BUF) lint
	@out=$$(gofmt -l $$(git ls-files '*.go' | grep -v '\.pb\.go$$')); \
	  if [ -n "$$out" ]; then echo "gofmt needed:"; echo "$$out"; exit 1; fi

vet:
	$(GO) vet $(PKGS)
ifeq ($(OPENBLAS),yes)
	CGO_ENABLED=1 $(GO) vet -tags lapack ./physics/eigen
endif

bench:
	$(GO) test -run '^$$' -bench . -benchmem $(PKGS)

# Container image (needs a Docker engine; none runs on the CI machine, where
# the Dockerfile is checked statically by the tests in deploy/).
IMAGE ?= modegrid/modegridd:$(VERSION)
image:
	docker build -f deploy/Dockerfile --build-arg VERSION=$(VERSION) -t $(IMAGE) .

clean:
	rm -rf $(BIN)
	$(GO) clean -testcache
