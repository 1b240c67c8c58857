#!/usr/bin/env bash
# Bulk autolabel throughput: the Beam pipeline (beam/autolabel) on the
# embedded Prism runner beside the single-process path (one
# learner.Machine.Label call over every item, as `loop autolabel` scores),
# on 1,000,000 short texts, with 1 and 2 cores (GOMAXPROCS); the model is
# made and exported with `loop round` and `loop model export`. Writes
# bench/beam/RESULTS.md and the raw runs to bench/beam/runs.jsonl (the report
# can be redrawn from them: cd beam && go run ./internal/bench report -runs
# ../bench/beam/runs.jsonl -features ../bench/features/RESULTS.md). Needs only
# Go (the Beam SDK is a module of beam/).
#
#   bash bench/beam/run.sh            # N=1000000 REPS=3 by default
set -euo pipefail
cd "$(dirname "$0")/../.."
root=$PWD
N=${N:-1000000}
REPS=${REPS:-3}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

go build -o "$work/loop" ./cmd/loop
(cd beam && go build -o "$work/bench" ./internal/bench)
"$work/bench" gen -dir "$work" -n "$N" -pkgdesc "$root/testdata/pkgdesc.jsonl" -loop "$work/loop" >&2
: > "$work/runs.jsonl"
for rep in $(seq "$REPS"); do
	for procs in 1 2; do
		for mode in single prism; do
			rm -rf "$work/single" "$work/prism"
			GOMAXPROCS=$procs "$work/bench" $mode -dir "$work" 2>>"$work/log" | tee -a "$work/runs.jsonl" >&2
		done
	done
done
load=$(cut -d' ' -f1-3 /proc/loadavg | sed 's/ / \/ /g')
cp "$work/runs.jsonl" bench/beam/runs.jsonl
"$work/bench" report -runs bench/beam/runs.jsonl -features "$root/bench/features/RESULTS.md" -load "$load" > bench/beam/RESULTS.md
cat bench/beam/RESULTS.md
