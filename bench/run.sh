#!/usr/bin/env bash
# The smoothing benchmark of docs/performance.md. Builds the tool and the benchmark programs in
# build-bench/, generates a 1,000,000-row log (2 channels, 10% missing) and times, alternating, REPEAT
# runs of: the I/O floor, `statewise smooth` end to end, the engine alone, and (on 50,000 rows) the
# numpy reference. Prints the best wall time of each and the peak resident memory.
# Usage: bench/run.sh [ROWS] [REPEAT]
set -euo pipefail
rows=${1:-1000000}
repeat=${2:-5}
here=$(cd "$(dirname "$0")" && pwd)
top=$(dirname "$here")
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cmake -S "$top" -B "$top/build-bench" -DCMAKE_BUILD_TYPE=Release -DSTATEWISE_BUILD_TESTS=OFF -DSTATEWISE_BUILD_BENCH=ON >/dev/null
cmake --build "$top/build-bench" -j"$(nproc)" >/dev/null
bin=$top/build-bench
/usr/bin/python3 "$here/make_log.py" "$rows" "$work/log.csv"
head -n 50001 "$work/log.csv" > "$work/log50k.csv"
echo "log: $rows rows, $(stat -c %s "$work/log.csv") bytes; machine: $(nproc) cores, $(uname -m)"

best() { sort -n | head -n 1; }
: > "$work/floor" ; : > "$work/smooth" ; : > "$work/filter"
for _ in $(seq "$repeat"); do
  /usr/bin/time -f "%e %M" -a -o "$work/floor" "$bin/bench/statewise_io_floor" "$work/log.csv" "$work/floor.csv"
  /usr/bin/time -f "%e %M" -a -o "$work/smooth" "$bin/statewise" smooth -m "$here/model.json" "$work/log.csv" -o "$work/smooth.csv"
  /usr/bin/time -f "%e %M" -a -o "$work/filter" "$bin/statewise" filter -m "$here/model.json" "$work/log.csv" -o "$work/filter.csv"
done
floor=$(cut -d' ' -f1 "$work/floor" | best)
smooth=$(cut -d' ' -f1 "$work/smooth" | best)
filter=$(cut -d' ' -f1 "$work/filter" | best)
echo "I/O floor (parse + write 13 numbers/row): best ${floor} s, peak $(cut -d' ' -f2 "$work/floor" | sort -n | tail -n1) KB"
echo "statewise smooth end to end:             best ${smooth} s, peak $(cut -d' ' -f2 "$work/smooth" | sort -n | tail -n1) KB"
echo "statewise filter end to end:             best ${filter} s, peak $(cut -d' ' -f2 "$work/filter" | sort -n | tail -n1) KB"
awk -v s="$smooth" -v f="$floor" 'BEGIN { printf "smooth / floor = %.2f\n", s / f }'
for _ in 1 2 3; do "$bin/bench/statewise_engine_bench" "$here/model.json" "$work/log.csv"; done
/usr/bin/python3 "$here/numpy_reference.py" "$here/model.json" "$work/log50k.csv" "$work/numpy.csv"
"$bin/statewise" smooth -m "$here/model.json" "$work/log50k.csv" -o "$work/statewise50k.csv"
/usr/bin/python3 - "$work/numpy.csv" "$work/statewise50k.csv" <<'PY'
import sys
import numpy as np
a = np.genfromtxt(sys.argv[1], delimiter=",")
b = np.genfromtxt(sys.argv[2], delimiter=",", skip_header=1)
print(f"numpy reference vs statewise, 50,000 rows: largest absolute difference {np.nanmax(np.abs(a - b)):.3g}")
PY
