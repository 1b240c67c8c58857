# The README's test command is `make test`; .ci/run calls exactly that.
GO ?= go

.PHONY: test vet unit build bench fuzz

test: vet unit

vet:
	$(GO) vet ./...

unit:
	$(GO) test ./...
	cd beam && $(GO) vet ./... && $(GO) test ./...

build:
	$(GO) build -o bin/loop ./cmd/loop

bench:
	bash bench/run.sh

fuzz:
	bash scripts/fuzz.sh
