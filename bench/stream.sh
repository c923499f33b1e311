#!/bin/sh
# The streaming benchmark of docs/performance.md: `statewise filter` over a ROWS-row log (bench/make_log.py:
# 2 channels, 10% missing) read from the file, read through a pipe (`cat log | statewise filter -`), and
# read through a pipe with the estimates written to a pipe too. Prints, per way, the best wall time of
# REPEAT runs and the largest peak resident memory (GNU time's %M, in KB).
# Usage: [LOG=FILE] bench/stream.sh [ROWS] [REPEAT] [STATEWISE]   (STATEWISE defaults to build/statewise)
set -eu
rows=${1:-10000000}
repeat=${2:-3}
here=$(cd "$(dirname "$0")" && pwd)
bin=${3:-$(dirname "$here")/build/statewise}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
# LOG=FILE reuses a log made earlier by make_log.py with the same ROWS.
if [ -n "${LOG:-}" ]; then ln -s "$LOG" "$work/log.csv"; else python3 "$here/make_log.py" "$rows" "$work/log.csv"; fi
echo "log: $rows rows, $(stat -L -c %s "$work/log.csv") bytes; machine: $(nproc) cores, load $(cut -d' ' -f1-3 /proc/loadavg)"
: > "$work/file"; : > "$work/pipe"; : > "$work/pipes"
for _ in $(seq "$repeat"); do
  /usr/bin/time -f "%e %M" -a -o "$work/file" "$bin" filter -m "$here/model.json" "$work/log.csv" -o "$work/out-file.csv"
  cat "$work/log.csv" | /usr/bin/time -f "%e %M" -a -o "$work/pipe" "$bin" filter -m "$here/model.json" - -o "$work/out-pipe.csv"
  cat "$work/log.csv" | /usr/bin/time -f "%e %M" -a -o "$work/pipes" "$bin" filter -m "$here/model.json" - | cat > "$work/out-pipes.csv"
done
cmp "$work/out-file.csv" "$work/out-pipe.csv"
cmp "$work/out-file.csv" "$work/out-pipes.csv"
for way in file pipe pipes; do
  best=$(cut -d' ' -f1 "$work/$way" | sort -n | head -n 1)
  peak=$(cut -d' ' -f2 "$work/$way" | sort -n | tail -n 1)
  awk -v w="$way" -v b="$best" -v p="$peak" -v r="$rows" \
    'BEGIN { printf "%-6s best %6.2f s  %9.0f rows/s  peak %6d KB\n", w, b, r / b, p }'
done
