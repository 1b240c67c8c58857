# The README's test command is `make test`; .ci/run calls exactly that.
GO ?= go

.PHONY: test vet unit build bench fuzz chromium

# The browser tests (web/) need Chromium: install it when missing, and make
# the tests fail rather than skip if it still cannot be found.
test: export HANDOFF_REQUIRE_BROWSER = 1
test: chromium vet unit

chromium:
	sh scripts/install-chromium.sh

vet:
	$(GO) vet ./...

# Both modules' tests; ends with a "N passed, M failed" line (scripts/unit.sh).
unit:
	GO=$(GO) bash scripts/unit.sh

build:
	$(GO) build -o bin/loop ./cmd/loop

bench:
	bash bench/run.sh

fuzz:
	bash scripts/fuzz.sh
