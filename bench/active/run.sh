#!/bin/sh
# Uncertainty sampling (entropy) against random sampling on pkgdesc.jsonl
# (text) and the UCI digits (images): budgets 100..1,000 in steps of 50,
# seeds 1-10, plus a penalty sweep with seeds 1-5. Writes RESULTS.md,
# curves-text.svg and curves-images.svg here. The peer is random sampling,
# run by the same program on the same splits (no external program).
# Needs only Go; takes a few minutes on 2 cores.
set -eu
cd "$(dirname "$0")"
go build -o /tmp/handoff-bench-active .
/tmp/handoff-bench-active -root ../.. -out . "$@"
rm -f /tmp/handoff-bench-active
