#!/usr/bin/env bash
# The fixed-lag benchmark of docs/performance.md: on a generated log (bench/make_log.py, invented
# data) times, alternating, REPEAT runs of `statewise filter`, `statewise smooth` and
# `statewise smooth --lag LAG`, and prints the best wall time and the largest peak resident memory
# of each (/usr/bin/time). Builds the tool in build-bench/ as bench/run.sh does, unless STATEWISE
# names a Release build of the program to time instead.
# Usage: [STATEWISE=build/statewise] bench/lag.sh [ROWS] [REPEAT] [LAG]
set -euo pipefail
rows=${1:-1000000}
repeat=${2:-5}
lag=${3:-10}
here=$(cd "$(dirname "$0")" && pwd)
top=$(dirname "$here")
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
bin=${STATEWISE:-}
if [ -z "$bin" ]; then
  cmake -S "$top" -B "$top/build-bench" -DCMAKE_BUILD_TYPE=Release -DSTATEWISE_BUILD_TESTS=OFF >/dev/null
  cmake --build "$top/build-bench" --target statewise -j"$(nproc)" >/dev/null
  bin=$top/build-bench/statewise
fi
/usr/bin/python3 "$here/make_log.py" "$rows" "$work/log.csv"
echo "log: $rows rows, $(stat -c %s "$work/log.csv") bytes; machine: $(nproc) cores, $(uname -m)"

: > "$work/filter" ; : > "$work/smooth" ; : > "$work/lag"
for _ in $(seq "$repeat"); do
  /usr/bin/time -f "%e %M" -a -o "$work/filter" "$bin" filter -m "$here/model.json" "$work/log.csv" -o "$work/filter.csv"
  /usr/bin/time -f "%e %M" -a -o "$work/smooth" "$bin" smooth -m "$here/model.json" "$work/log.csv" -o "$work/smooth.csv"
  /usr/bin/time -f "%e %M" -a -o "$work/lag" "$bin" smooth --lag "$lag" -m "$here/model.json" "$work/log.csv" -o "$work/lag.csv"
done
report() {
  printf '%-34s best %s s, peak %s KB\n' "$1" "$(cut -d' ' -f1 "$2" | sort -n | head -n 1)" \
    "$(cut -d' ' -f2 "$2" | sort -n | tail -n 1)"
}
report "statewise filter" "$work/filter"
report "statewise smooth" "$work/smooth"
report "statewise smooth --lag $lag" "$work/lag"
# The last LAG rows are the fixed-interval smoother's (docs/cli.md): a check that the run was sound.
if [ "$(tail -n "$lag" "$work/lag.csv")" = "$(tail -n "$lag" "$work/smooth.csv")" ]; then
  echo "last $lag rows of smooth --lag $lag equal smooth's: yes"
else
  echo "last $lag rows of smooth --lag $lag equal smooth's: NO"
fi
