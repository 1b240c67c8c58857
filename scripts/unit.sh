#!/usr/bin/env bash
# The unit tests of both modules (the main one and beam/), as `make test`
# runs them. Prints each package's result and every failure, keeps the whole
# verbose log in testdata/artefacts/test.log, and ends with one line
# "N passed, M failed" counting top-level tests.
set -uo pipefail
cd "$(dirname "$0")/.."
GO=${GO:-go}
mkdir -p testdata/artefacts
log=testdata/artefacts/test.log
: >"$log"
status=0
show='^(ok|FAIL|--- FAIL|panic:)'
$GO test -v ./... 2>&1 | tee -a "$log" | { grep -E "$show" || true; }
[ "${PIPESTATUS[0]}" -eq 0 ] || status=1
(cd beam && $GO vet ./... && $GO test -v ./...) 2>&1 | tee -a "$log" | { grep -E "$show" || true; }
[ "${PIPESTATUS[0]}" -eq 0 ] || status=1
if grep -qE '^(--- FAIL|panic:)' "$log"; then
  echo "== failures (the whole log is in $log):"
  # Each failing test's output: from its "=== RUN" line to its "--- FAIL".
  awk '/^[[:space:]]*=== RUN/ {buf = ""} {buf = buf $0 "\n"}
       /^[[:space:]]*--- FAIL/ {printf "%s", buf; buf = ""}
       /^panic:/ {p = 40} p > 0 {print; p--}' "$log" | head -400
fi
passed=$(grep -cE '^--- PASS' "$log" || true)
failed=$(grep -cE '^--- FAIL' "$log" || true)
if [ "$status" -ne 0 ] && [ "$failed" -eq 0 ]; then
  failed=1 # a build failure or panic outside any test
fi
echo "$passed passed, $failed failed"
exit $status
