#!/usr/bin/env bash
# make bench: runs every benchmark in bench/ side by side with its peer, then
# rewrites bench/README.md as one table from the "## Summary" table each
# bench/<area>/RESULTS.md ends with (figure | ours | peer | ratio | target | result).
# BENCH="import crowd" runs only those areas; the table is rebuilt from every
# RESULTS.md either way. Each area's run.sh installs what its peer needs.
set -euo pipefail
cd "$(dirname "$0")/.."
areas=${BENCH:-"import crowd features learner active verdict service beam"}
failed=""
for a in $areas; do
  if [ -f "bench/$a/run.sh" ]; then
    echo "== bench/$a"
    if ! bash "bench/$a/run.sh"; then
      echo "bench/$a failed" >&2
      failed="$failed $a"
    fi
  fi
done
go run ./bench/summary > bench/README.md.partial && mv bench/README.md.partial bench/README.md
echo "wrote bench/README.md"
if [ -n "$failed" ]; then
  echo "failed:$failed" >&2
  exit 1
fi
