#!/bin/sh
# The scale-out recipes of docs/scale-out.md, run with GNU parallel on the local host only
# (--sshlogin :, no ssh): (a) many logs, one job per log; (b) one long table split by group with
# --pipe --group-by. Each must write byte for byte what plain local runs write (first principles:
# the jobs are the same independent runs). Exits 77 (skipped) when GNU parallel is not installed.
# Usage: scale_out_test.sh STATEWISE
set -eu
statewise=$1
if ! command -v parallel >/dev/null 2>&1; then
  echo "skipped: GNU parallel is not installed (Debian package parallel)"
  exit 77
fi
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$work"
export HOME="$work"  # GNU parallel keeps its own files in ~/.parallel

# A random walk seen by one probe (invented numbers).
cat > model.json <<'JSON'
{"states": ["level"], "observations": ["probe"], "time": {"column": "time"},
 "A": 1, "C": 1, "Q": 0.05, "R": 0.2, "initial": {"mean": 10, "covariance": 4}}
JSON

# Six sensors of 200 rows each, each sensor's rows together, invented values.
mkdir logs
echo "time,sensor,probe" > table.csv
for g in 1 2 3 4 5 6; do
  echo "time,probe" > "logs/s$g.csv"
  t=0
  while [ "$t" -lt 200 ]; do
    v="$((10 + g)).$(((t * 37 + g * 11) % 100))"
    echo "$((60 * t)),s$g,$v" >> table.csv
    echo "$((60 * t)),$v" >> "logs/s$g.csv"
    t=$((t + 1))
  done
done

fail() {
  echo "FAILED: $1"
  exit 1
}

# (a) Many logs, one job per log.
parallel --will-cite --sshlogin : "$statewise" smooth -m model.json {} -o {.}.est.csv ::: logs/*.csv
for g in 1 2 3 4 5 6; do
  "$statewise" smooth -m model.json "logs/s$g.csv" -o "local-s$g.csv"
  cmp "logs/s$g.est.csv" "local-s$g.csv" || fail "recipe (a): logs/s$g.est.csv differs from a local run"
done

# (b) One table split by group: the header once, then whole groups per job, output kept in order.
# --block 6k makes several jobs (of two groups each) out of this small table.
{
  head -n 1 table.csv | "$statewise" filter -m model.json --by sensor -
  parallel --will-cite --sshlogin : --joblog jobs.tsv --pipe --block 6k --header : --colsep , --group-by sensor -k \
    "$statewise" filter -m model.json --by sensor --no-header - < table.csv
} > sharded.csv
[ "$(wc -l < jobs.tsv)" -gt 2 ] || fail "recipe (b) ran $(($(wc -l < jobs.tsv) - 1)) job(s); expected several"
"$statewise" filter -m model.json --by sensor table.csv -o local.csv
[ "$(wc -l < local.csv)" -eq 1201 ] || fail "the local run wrote $(wc -l < local.csv) lines, expected 1201"
cmp sharded.csv local.csv || fail "recipe (b): the sharded table differs from one local --by run"
echo "ok"
