#!/bin/sh
# A full disk: `statewise filter -o` into a 64 KiB tmpfs that the estimates do not fit must exit with
# status 4 and "No space left on device" naming the file, keep the old output intact and leave no
# temporary file (docs/outputs.md, "What happens to existing files"). Mounting needs root
# (CAP_SYS_ADMIN); without it the test is skipped (exit 77).
# Usage: full_disk_test.sh STATEWISE_BINARY
set -u
binary=$1
work=$(mktemp -d "${TMPDIR:-/tmp}/statewise_full_disk_XXXXXX") || exit 1
disk=$work/disk
mkdir "$disk"
cleanup() {
  umount "$disk" 2>/dev/null
  rm -rf "$work"
}
trap cleanup EXIT
if [ "$(id -u)" != 0 ] || ! mount -t tmpfs -o size=64k tmpfs "$disk" 2>/dev/null; then
  echo "skipped: cannot mount a small tmpfs (needs root)"
  exit 77
fi
fail() {
  echo "FAIL: $*"
  exit 1
}
cat > "$work/model.json" <<'MODEL'
{"version": 1, "observations": ["a"], "A": 1, "C": 1, "Q": 0.01, "R": 0.1}
MODEL
# 20000 rows: about 1.5 MB of estimates, far more than the disk holds.
printf 'a\n' > "$work/log.csv"
seq 1 20000 >> "$work/log.csv"
printf 'old estimates\n' > "$disk/out.csv"

"$binary" filter -m "$work/model.json" "$work/log.csv" -o "$disk/out.csv" 2> "$work/stderr" > /dev/null
status=$?
[ "$status" = 4 ] || fail "exit status $status, expected 4"
grep -q "^statewise: error: $disk/out.csv: cannot write: No space left on device\$" "$work/stderr" ||
  fail "unexpected message: $(cat "$work/stderr")"
[ "$(cat "$disk/out.csv")" = "old estimates" ] || fail "the old output was changed"
leftover=$(ls -A "$disk" | grep -v '^out.csv$')
[ -z "$leftover" ] || fail "left behind: $leftover"
echo "ok"
