#!/usr/bin/env bash
# Crowd consensus at scale: our Dawid–Skene (Go, package crowd) and a
# vectorised numpy Dawid–Skene (peer_ds.py) on the same 40,000,000 generated
# labels (1,000,000 items, 100,000 annotators, 5 classes), side by side in
# one run. Writes bench/crowd/RESULTS.md. Takes a few minutes and both cores;
# run it once, not in a loop.
#
#   bash bench/crowd/run.sh            # full size
#   ITEMS=100000 ANNOTATORS=10000 bash bench/crowd/run.sh   # a quick small run
set -euo pipefail
cd "$(dirname "$0")/../.."
ITERS=${ITERS:-10}
ITEMS=${ITEMS:-1000000}
ANNOTATORS=${ANNOTATORS:-100000}
PER_ITEM=${PER_ITEM:-40}
DATA=${DATA:-/tmp/crowd-bench-$ITEMS-$ANNOTATORS-$PER_ITEM.bin}
OUT=${OUT:-bench/crowd/RESULTS.md}
RAW=${RAW:-bench/crowd/results.json}

if [ -z "${REPORT_ONLY:-}" ]; then
if ! /usr/bin/python3 -c 'import numpy' 2>/dev/null; then
  flock /tmp/apt.lock apt-get update -qq
  flock /tmp/apt.lock apt-get install -y -qq python3-numpy
fi
go build -o /tmp/crowd-bench-gen ./bench/crowd/gen
go build -o /tmp/crowd-bench-ours ./bench/crowd/ours
/tmp/crowd-bench-gen -o "$DATA" -items "$ITEMS" -annotators "$ANNOTATORS" -per-item "$PER_ITEM"
LOAD_BEFORE=$(cut -d' ' -f1-3 /proc/loadavg)
OURS=$(/tmp/crowd-bench-ours -i "$DATA" -iters "$ITERS")
echo "ours: $OURS" >&2
PEER=$(/usr/bin/python3 bench/crowd/peer_ds.py "$DATA" "$ITERS")
echo "peer: $PEER" >&2
LOAD_AFTER=$(cut -d' ' -f1-3 /proc/loadavg)
rm -f "$DATA"
printf '%s\n%s\n%s\n%s\n' "$OURS" "$PEER" "$LOAD_BEFORE" "$LOAD_AFTER" > "$RAW"
fi
# REPORT_ONLY=1 rewrites the report from the raw figures of the last run.
OURS=$(sed -n 1p "$RAW"); PEER=$(sed -n 2p "$RAW")
LOAD_BEFORE=$(sed -n 3p "$RAW"); LOAD_AFTER=$(sed -n 4p "$RAW")

/usr/bin/python3 - "$OURS" "$PEER" "$LOAD_BEFORE" "$LOAD_AFTER" > "$OUT" <<'PY'
import json, sys, datetime, os
o, p = json.loads(sys.argv[1]), json.loads(sys.argv[2])
ratio = p["seconds_per_iter"] / o["seconds_per_iter"]
def ok(b): return "pass" if b else "short"
acc_equal = abs(o["accuracy_ds"] - p["accuracy_ds"]) <= 0.001
print(f"""# Crowd consensus at scale: results

Report written {datetime.datetime.now(datetime.timezone.utc).strftime('%Y-%m-%d %H:%M UTC')} by `bash bench/crowd/run.sh` from the figures in
`results.json` (one line each: ours, the peer, load average before and after), measured on this machine
({os.cpu_count()} cores, shared with other jobs: load average {sys.argv[3]} before, {sys.argv[4]} after).

Data: {o['labels']:,} generated labels on {o['items']:,} items from {o['annotators']:,} annotators,
{o['classes']} classes (gen/: 70% fair annotators, 20% spammers, 10% biased; labels written once
to a binary file both tools read, so generation is outside the timing).
Both run {o['iterations']} EM iterations with no early stop.

| figure | ours (Go, crowd.DawidSkene) | peer (numpy {p['numpy']} Dawid–Skene) | ratio | target | result |
| --- | --- | --- | --- | --- | --- |
| seconds per EM iteration (setup excluded, as for the peer) | {o['seconds_per_iter']:.3f} | {p['seconds_per_iter']:.2f} | {ratio:.1f}× faster | ≤ 0.5 s | {ok(o['seconds_per_iter'] <= 0.5)} |
| speed ratio against the peer run here | | | {ratio:.1f}× | ≥ 20× | {ok(ratio >= 20)} |
| speed ratio against the issue's reference peer (≈ 10.6 s per iteration) | | | {10.6/o['seconds_per_iter']:.0f}× | ≥ 20× | {ok(10.6/o['seconds_per_iter'] >= 20)} |
| seconds per EM iteration, whole call ÷ iterations | {o['seconds_per_iter_with_setup']:.3f} | {(p['seconds_per_iter']*p['iterations']+p['seconds_setup'])/p['iterations']:.2f} | {(p['seconds_per_iter']*p['iterations']+p['seconds_setup'])/p['iterations']/o['seconds_per_iter_with_setup']:.1f}× faster | | |
| CPU seconds per EM iteration (all cores) | {o['cpu_seconds_per_iter']:.3f} | {p.get('cpu_seconds_per_iter', float('nan')):.2f} | {p.get('cpu_seconds_per_iter', float('nan'))/o['cpu_seconds_per_iter']:.1f}× less | | |
| peak RSS | {o['peak_rss_mb']:.0f} MB | {p['peak_rss_mb']:.0f} MB | {p['peak_rss_mb']/o['peak_rss_mb']:.1f}× less | ≤ 1,500 MB | {ok(o['peak_rss_mb'] <= 1500)} |
| accuracy vs generated truth | {o['accuracy_ds']:.5f} | {p['accuracy_ds']:.5f} | | equal (±0.001) | {ok(acc_equal)} |
| log-likelihood at the end | {o['log_likelihood']:.6g} | {p['log_likelihood']:.6g} | | | |

Majority vote on the same labels: accuracy {o['accuracy_majority']:.5f}.

How the figures are taken:
- ours: `crowd.DawidSkene` is run once with 1 iteration and once with {o['iterations']}+1; the
  difference divided by {o['iterations']} is the time per iteration without setup (input checks,
  sorting the labels into cache blocks, the initial M-step, the final E-step), measured like the
  peer's. The second row charges the whole call, setup included, to its iterations.
  GOMAXPROCS {o['gomaxprocs']}. On a loaded machine the wall figures are what the process got;
  the CPU seconds per iteration (summed over cores) show the work itself: with two free cores the
  wall time per iteration would be about half of it. Peak RSS is the process's maximum resident
  set (getrusage), including the labels themselves and a majority vote run afterwards.
- peer: mean wall time of its {p['iterations']} iterations, setup ({p['seconds_setup']:.1f} s) excluded;
  peak RSS likewise from getrusage. numpy's bincount and take run on one core.
- Reference from the issue: such a peer took ≈ 10.6 s per iteration and ≈ 3.9 GB here, which is
  where "≤ 0.5 s, ≥ 20×" comes from. The peer written here (index arrays converted to intp
  once, class-major contiguous columns, np.take + np.bincount) is leaner than that reference
  ({p['seconds_per_iter']:.1f} s, {p['peak_rss_mb']/1024:.1f} GB), so the ratio against it is the stricter figure.
- Before the assembly sweeps, 4-byte labels and table-driven exp/log (report of 2026-12-02 04:30 UTC,
  load average 1.55 before): 0.277 s per iteration (0.545 CPU seconds), 699 MB, peer 2.70 s, ratio 9.8×.
- Accuracy and log-likelihood agree between the two to within float32 rounding of our tables
  (we hold the EM tables in float32 from 4,194,304 labels up; the peer is float64).
""")
PY
echo "wrote $OUT" >&2
