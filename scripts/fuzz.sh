#!/usr/bin/env bash
# Runs every fuzz target for a short while (FUZZTIME, default 15s each).
# Seed corpora live under each package's testdata/fuzz/.
set -euo pipefail
cd "$(dirname "$0")/.."
t=${FUZZTIME:-15s}
for pkg in $(go list ./...); do
  dir=$(go list -f '{{.Dir}}' "$pkg")
  for f in $(grep -ho '^func Fuzz[A-Za-z0-9_]*' "$dir"/*_test.go 2>/dev/null | sed 's/^func //' | sort -u); do
    echo "== $pkg $f ($t)"
    go test "$pkg" -run '^$' -fuzz "^$f\$" -fuzztime "$t"
  done
done
