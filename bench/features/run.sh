#!/usr/bin/env bash
# Throughput of package features beside its peers, in one run; writes
# bench/features/RESULTS.md. Installs what it needs from Debian.
set -euo pipefail
cd "$(dirname "$0")/../.."
PY=/usr/bin/python3
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

need=()
$PY -c "import sklearn" 2>/dev/null || need+=(python3-sklearn)
$PY -c "import skimage" 2>/dev/null || need+=(python3-skimage)
$PY -c "import PIL" 2>/dev/null || need+=(python3-pil)
if ((${#need[@]})); then
	flock /tmp/apt.lock apt-get update
	flock /tmp/apt.lock apt-get install -y "${need[@]}"
fi
if ! apt-cache dumpavail 2>/dev/null | grep -q '^Package:'; then
	flock /tmp/apt.lock apt-get update
fi

apt-cache dumpavail > "$work/dumpavail"
$PY bench/features/corpus.py "$work/dumpavail" > "$work/texts.txt"
echo "texts: $(wc -l < "$work/texts.txt")" >&2

go run ./bench/features -texts "$work/texts.txt" -images "$work/png" -n "${IMAGES:-2000}" > "$work/ours.json"
cat "$work/ours.json" >&2
OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 $PY bench/features/peer.py "$work/texts.txt" "$work/png" > "$work/peer.json"
cat "$work/peer.json" >&2
$PY bench/features/report.py "$work/ours.json" "$work/peer.json" > bench/features/RESULTS.md
cat bench/features/RESULTS.md
