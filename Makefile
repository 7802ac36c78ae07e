# Thin aliases over the go tool. See DEVELOPERS.md.
GO          ?= go
BIN         := $(CURDIR)/bin
PROTOC_GEN_GO_VERSION      := v1.36.12
PROTOC_GEN_GO_GRPC_VERSION := v1.6.0
WEB         := cmd/fluxroom/web
PROTOS      := proto/fluxroom/v1/messages.proto proto/fluxroom/v1/service.proto proto/fluxroom/record/v1/records.proto

.PHONY: all build wasm test test-short bench generate verify-generate tools demo serve clean

all: build

## wasm: the dashboard, compiled to WebAssembly, plus its gzip copy, embedded by cmd/fluxroom.
wasm:
	GOOS=js GOARCH=wasm $(GO) build -trimpath -ldflags='-s -w' -o $(WEB)/app.wasm ./wasmclient/app
	gzip -9 -k -f $(WEB)/app.wasm
	cp "$$($(GO) env GOROOT)/lib/wasm/wasm_exec.js" $(WEB)/wasm_exec.js

build: wasm
	$(GO) build -buildvcs=auto -o $(BIN)/fluxroom ./cmd/fluxroom

## test: every test, including the headless-browser one and the import rules
## (internal/importcheck), then the tests of the failpoints build (server/hooks.go).
## Installs Chromium first when it can (.ci/ensure-chromium).
test:
	bash .ci/ensure-chromium
	$(GO) vet ./...
	$(GO) vet -tags failpoints ./server/ ./cmd/fluxroom/
	$(GO) test -count=1 ./...
	$(GO) test -count=1 -tags failpoints -run 'NothingAcknowledgedBeforeCommit' ./server/

test-short:
	$(GO) test -short ./...

## bench: the scale load program (quick sweep, about a minute; BENCH_ARGS=--full for the full one,
## a few minutes), then the Go benchmarks.
BENCH_ARGS ?=
bench: build
	$(GO) build -o $(BIN)/fluxroom-load ./cmd/fluxroom-load
	$(BIN)/fluxroom-load --fluxroom $(BIN)/fluxroom $(BENCH_ARGS)
	$(GO) test -run='^$$' -bench=. -benchmem ./domain/ ./store/
	$(GO) test -tags failpoints -run='^$$' -bench=SubmitReading -benchmem ./server/
	$(GO) test -run='^$$' -bench=ExportTerm -benchtime=1x ./internal/export/

demo: build
	$(BIN)/fluxroom demo

serve: build
	$(BIN)/fluxroom serve

tools:
	GOBIN=$(BIN) $(GO) install google.golang.org/protobuf/cmd/protoc-gen-go@$(PROTOC_GEN_GO_VERSION)
	GOBIN=$(BIN) $(GO) install google.golang.org/grpc/cmd/protoc-gen-go-grpc@$(PROTOC_GEN_GO_GRPC_VERSION)

## generate: protobuf Go code from proto/ (needs Debian's protobuf-compiler), and
## domain/tables.go, the shape tests' critical values from gonum's distuv.
generate: tools
	PATH=$(BIN):$$PATH protoc -I proto \
		--go_out=. --go_opt=module=example.com/fluxroom \
		--go-grpc_out=. --go-grpc_opt=module=example.com/fluxroom \
		$(PROTOS)
	$(GO) run ./domain/internal/gentables > domain/tables.go.new && mv domain/tables.go.new domain/tables.go

GENERATED := proto/ domain/tables.go

## verify-generate: fails when the committed generated code is stale.
verify-generate: generate
	@git diff --exit-code -- $(GENERATED) || (echo "generated code is stale: run make generate and commit" >&2; exit 1)
	@test -z "$$(git status --porcelain -- $(GENERATED))" || (git status --porcelain -- $(GENERATED); echo "generated code is not committed" >&2; exit 1)

clean:
	rm -rf $(BIN) $(WEB)/app.wasm $(WEB)/app.wasm.gz
