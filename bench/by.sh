#!/usr/bin/env bash
# The --by benchmark of docs/performance.md: GROUPS sensors x ROWS rows in one interleaved table
# (bench/make_groups.py), `statewise filter --by` and `smooth --by` with --threads 1 and 2, best wall time
# of REPEAT alternating runs each, the speed-up, and the serial part that Amdahl's law gives for it
# (T1 = s + p, T2 = s + p / 2, so s = 2 T2 - T1).
# Usage: bench/by.sh [GROUPS] [ROWS] [REPEAT]; STATEWISE=path/to/statewise uses that (Release) binary
# instead of building one in build-bench/; TABLE=path uses a table make_groups.py wrote before.
set -euo pipefail
groups=${1:-10000}
rows=${2:-1000}
repeat=${3:-3}
here=$(cd "$(dirname "$0")" && pwd)
top=$(dirname "$here")
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
if [ -n "${STATEWISE:-}" ]; then
  bin=$STATEWISE
else
  cmake -S "$top" -B "$top/build-bench" -DCMAKE_BUILD_TYPE=Release -DSTATEWISE_BUILD_TESTS=OFF >/dev/null
  cmake --build "$top/build-bench" -j"$(nproc)" --target statewise >/dev/null
  bin=$top/build-bench/statewise
fi
table=${TABLE:-$work/table.csv}
[ -n "${TABLE:-}" ] || /usr/bin/python3 "$here/make_groups.py" "$groups" "$rows" "$table"
echo "table: $groups groups x $rows rows, $(stat -c %s "$table") bytes; machine: $(nproc) cores, $(uname -m)"
best() { cut -d' ' -f1 "$1" | sort -n | head -n 1; }
peak() { cut -d' ' -f2 "$1" | sort -n | tail -n 1; }
cpu() { awk '{ print $3 + $4 }' "$1" | sort -n | head -n 1; }
for command in filter smooth; do
  : > "$work/$command.1"; : > "$work/$command.2"
done
for _ in $(seq "$repeat"); do
  for command in filter smooth; do
    for threads in 1 2; do
      /usr/bin/time -f "%e %M %U %S" -a -o "$work/$command.$threads" \
        "$bin" "$command" -m "$here/model.json" --by sensor --threads "$threads" "$table" -o "$work/out.csv"
    done
  done
done
for command in filter smooth; do
  t1=$(best "$work/$command.1"); t2=$(best "$work/$command.2")
  echo "$command --by: --threads 1 best $t1 s (CPU $(cpu "$work/$command.1") s, peak $(peak "$work/$command.1") KB)," \
    "--threads 2 best $t2 s (CPU $(cpu "$work/$command.2") s, peak $(peak "$work/$command.2") KB)"
  awk -v a="$t1" -v b="$t2" 'BEGIN { printf "  speed-up %.2f; serial part 2 T2 - T1 = %.1f s (%.0f%% of T1)\n", a / b, 2 * b - a, 100 * (2 * b - a) / a }'
done
