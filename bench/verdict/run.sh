#!/usr/bin/env bash
# Verdict benchmark: the large honest-bound simulation and our Clopper–Pearson
# bounds side by side with scipy's. Writes bench/verdict/RESULTS.md.
# Usage: bash bench/verdict/run.sh [projects]   (from the repository root)
set -euo pipefail
cd "$(dirname "$0")/../.."
PROJECTS=${1:-5000}
if ! /usr/bin/python3 -c 'import scipy' 2>/dev/null; then
  flock /tmp/apt.lock apt-get update
  flock /tmp/apt.lock apt-get install -y python3-scipy python3-numpy
fi
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
go run ./bench/verdict/run -projects "$PROJECTS" -cp "$tmp/cp.txt" | tee "$tmp/ours.txt"
/usr/bin/python3 bench/verdict/peer.py "$tmp/cp.txt" | tee "$tmp/peer.txt"
get() { awk -v k="$1" '$1==k {print $2}' "$tmp"/ours.txt "$tmp"/peer.txt; }
projects=$(get projects); go_=$(get go); exceed=$(get exceed)
ngo=$(get naive_go); nexceed=$(get naive_exceed); cov=$(get mean_coverage); simsec=$(get sim_seconds)
cpn=$(get cp_count); cps=$(get cp_seconds); pps=$(get peer_seconds); diff=$(get max_abs_diff)
rate=$(awk -v e="$exceed" -v g="$go_" 'BEGIN{printf "%.2f", 100*e/g}')
nrate=$(awk -v e="$nexceed" -v g="$ngo" 'BEGIN{printf "%.2f", 100*e/g}')
pass=$(awk -v r="$rate" 'BEGIN{print (r<=5)?"pass":"short"}')
dpass=$(awk -v d="$diff" 'BEGIN{print (d<=1e-6)?"pass":"short"}')
ratio=$(awk -v a="$cps" -v b="$pps" 'BEGIN{printf "%.2f", a/b}')
cat > bench/verdict/RESULTS.md <<MD
# Verdict benchmark results

Run by \`bash bench/verdict/run.sh $PROJECTS\` on $(date -u +%Y-%m-%d) ($(nproc) cores, $(go version | awk '{print $3}'), scipy $(/usr/bin/python3 -c 'import scipy; print(scipy.__version__)')).

## An honest bound (issue 5)

$projects simulated projects with known truth (invented by the seeded generator in
bench/verdict/honest.go: held-out sets of 200–1,500 items, archives of 20,000, binary
models from weak to strong, calibrated or over- or under-confident by up to a power 1.4).
The threshold is chosen by fixed-sequence testing with one-sided Clopper–Pearson bounds,
max-error 0.05 at 95%. A GO verdict "exceeds" when the realised error of the autolabelled
archive items is above 0.05.

| rule | GO verdicts | exceeded max-error | rate | target | |
| --- | --- | --- | --- | --- | --- |
| ours: fixed-sequence test, CP bound | $go_ | $exceed | $rate% | ≤ 5% | $pass |
| plug-in: lowest threshold with observed risk ≤ 0.05 (no bound) | $ngo | $nexceed | $nrate% | — | comparison |

Mean archive coverage over our GO verdicts: $cov. Simulation time: ${simsec} s.

## Clopper–Pearson bounds against scipy (peer)

$cpn (k, n) pairs, n from 1 to 10,000; two-sided 95% interval and one-sided 95% upper bound.

| figure | ours | peer (scipy beta.ppf) | ratio | target | |
| --- | --- | --- | --- | --- | --- |
| largest absolute difference | — | — | — | ≤ 1e-6 | $diff, $dpass |
| seconds for all bounds | $cps | $pps | $ratio | — | (vectorised numpy vs a Go loop; for information) |

## Summary

| figure | ours | peer | ratio | target | result |
| --- | --- | --- | --- | --- | --- |
| GO verdicts whose autolabelled error exceeded max-error ($PROJECTS simulated projects) | $rate% of $go_ | plug-in rule $nrate% of $ngo | — | ≤ 5% | $pass |
| Clopper–Pearson bounds, largest difference from scipy | $diff | scipy beta.ppf | — | ≤ 1e-6 | $dpass |
MD
cat bench/verdict/RESULTS.md
