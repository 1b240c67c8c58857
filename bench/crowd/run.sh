#!/usr/bin/env bash
# Crowd consensus: accuracy and scale. Writes bench/crowd/RESULTS.md from
# the raw figures it keeps beside it (grid.json, results.json).
#
# Two parts (PARTS="grid scale" by default):
# - grid: bench/crowd/grid's accuracy of every method against the truth on
#   simulated sparse crowds (labels per annotator × classes) and on
#   testdata/pkgdesc.jsonl with a simulated crowd. About 3 minutes on one core.
# - scale: our default consensus (-method auto: the model choice, then the
#   model chosen) and a vectorised numpy peer of the same model
#   (peer_ds.py) on the same 40,000,000 generated labels (1,000,000 items,
#   100,000 annotators, 5 classes), side by side in one run. A few minutes,
#   both cores.
# Run it once, not in a loop.
#
#   bash bench/crowd/run.sh                     # everything, full size
#   PARTS=grid bash bench/crowd/run.sh          # the accuracy tables only
#   ITEMS=100000 ANNOTATORS=10000 PARTS=scale bash bench/crowd/run.sh   # a quick small scale run
#   REPORT_ONLY=1 bash bench/crowd/run.sh       # rewrite RESULTS.md from the raw figures
set -euo pipefail
cd "$(dirname "$0")/../.."
PARTS=${PARTS:-"grid scale"}
ITERS=${ITERS:-10}
SKIP=${SKIP:-10} # iterations run before the timed ones (covers the hierarchical model's warm-up)
ITEMS=${ITEMS:-1000000}
ANNOTATORS=${ANNOTATORS:-100000}
PER_ITEM=${PER_ITEM:-40}
METHOD=${METHOD:-auto}
SEEDS=${SEEDS:-5}
GRID_ITEMS=${GRID_ITEMS:-2000}
DATA=${DATA:-/tmp/crowd-bench-$ITEMS-$ANNOTATORS-$PER_ITEM.bin}
OUT=${OUT:-bench/crowd/RESULTS.md}
RAW=${RAW:-bench/crowd/results.json}
GRID_RAW=${GRID_RAW:-bench/crowd/grid.json}
trap 'rm -f "$OUT.partial" "$GRID_RAW.partial"' EXIT

if [ -z "${REPORT_ONLY:-}" ]; then
for part in $PARTS; do
  case $part in
  grid)
    go build -o /tmp/crowd-bench-grid ./bench/crowd/grid
    /tmp/crowd-bench-grid -items "$GRID_ITEMS" -seeds "$SEEDS" > "$GRID_RAW.partial"
    mv "$GRID_RAW.partial" "$GRID_RAW"
    ;;
  scale)
    if ! /usr/bin/python3 -c 'import numpy' 2>/dev/null; then
      flock /tmp/apt.lock apt-get update -qq
      flock /tmp/apt.lock apt-get install -y -qq python3-numpy
    fi
    if ! /usr/bin/python3 -c 'import scipy.special' 2>/dev/null; then
      flock /tmp/apt.lock apt-get install -y -qq python3-scipy || true # the peer falls back to math.lgamma
    fi
    go build -o /tmp/crowd-bench-gen ./bench/crowd/gen
    go build -o /tmp/crowd-bench-ours ./bench/crowd/ours
    /tmp/crowd-bench-gen -o "$DATA" -items "$ITEMS" -annotators "$ANNOTATORS" -per-item "$PER_ITEM"
    LOAD_BEFORE=$(cut -d' ' -f1-3 /proc/loadavg)
    OURS=$(/tmp/crowd-bench-ours -i "$DATA" -iters "$ITERS" -skip "$SKIP" -method "$METHOD")
    echo "ours: $OURS" >&2
    # The peer runs the model ours used (for auto: the one chosen); it has
    # Dawid–Skene and the hierarchical model.
    MODEL=$(printf '%s' "$OURS" | /usr/bin/python3 -c 'import json,sys; print(json.load(sys.stdin)["model"])')
    case $MODEL in
      hierarchical|dawid-skene) ;;
      *) echo "ours used $MODEL, which the peer does not have" >&2; exit 1 ;;
    esac
    PEER=$(/usr/bin/python3 bench/crowd/peer_ds.py "$DATA" "$ITERS" "$MODEL" "$SKIP")
    echo "peer: $PEER" >&2
    LOAD_AFTER=$(cut -d' ' -f1-3 /proc/loadavg)
    rm -f "$DATA"
    printf '%s\n%s\n%s\n%s\n' "$OURS" "$PEER" "$LOAD_BEFORE" "$LOAD_AFTER" > "$RAW"
    ;;
  *) echo "unknown part $part (want grid or scale)" >&2; exit 2 ;;
  esac
done
fi
/usr/bin/python3 bench/crowd/report.py "$RAW" "$GRID_RAW" > "$OUT.partial"
mv "$OUT.partial" "$OUT"
echo "wrote $OUT" >&2
