#!/bin/sh
# Installs the built tree into a temporary prefix with `cmake --install`, checks that everything a
# user and an embedding program need is in place, builds examples/embed against the installed
# tree (with CMake's find_package, or with pkg-config) and runs it on examples/cold-room: its
# output must equal the statewise program's own.
# Usage: install_test.sh cmake|pkg-config BUILD_DIR SOURCE_DIR CXX_COMPILER [EXTRA_FLAGS]
# EXTRA_FLAGS are added to the example's compile and link lines (the sanitizer flags when the tree
# was built with them). Exit 77 (skipped) when the pkg-config variant finds no pkg-config.
set -eu
mode=$1 build=$2 source=$3 cxx=$4 extra=${5:-}
if [ "$mode" = pkg-config ] && ! command -v pkg-config >/dev/null 2>&1; then
  echo "SKIPPED: pkg-config (Debian package pkgconf) is not installed"
  exit 77
fi
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
prefix=$work/prefix
cmake --install "$build" --prefix "$prefix" >"$work/install.log"

fail=0
for file in bin/statewise include/statewise/filter.h include/statewise/filter_state.h include/statewise/version.h \
    share/man/man1/statewise.1 share/bash-completion/completions/statewise share/zsh/vendor-completions/_statewise \
    share/doc/statewise/cli.md share/doc/statewise/examples/cold-room/data.csv; do
  [ -f "$prefix/$file" ] || { echo "not installed: $file"; fail=1; }
done
libdir=$(dirname "$(find "$prefix" -name libstatewise.a | head -n 1)")
[ -f "$libdir/libstatewise.a" ] || { echo "not installed: libstatewise.a"; fail=1; }
[ -f "$libdir/cmake/statewise/statewiseConfig.cmake" ] || { echo "not installed: statewiseConfig.cmake"; fail=1; }
[ -f "$libdir/pkgconfig/statewise.pc" ] || { echo "not installed: statewise.pc"; fail=1; }
[ $fail -eq 0 ] || exit 1

"$prefix/bin/statewise" --version

data=$source/examples/cold-room
if [ "$mode" = cmake ]; then
  cmake -S "$source/examples/embed" -B "$work/embed" -DCMAKE_PREFIX_PATH="$prefix" -DCMAKE_CXX_COMPILER="$cxx" \
    -DCMAKE_BUILD_TYPE= -DCMAKE_CXX_FLAGS="-Wall -Wextra -Wpedantic -Wshadow -Wconversion -Werror $extra" \
    >"$work/configure.log" || { cat "$work/configure.log"; exit 1; }
  cmake --build "$work/embed" >"$work/build.log" 2>&1 || { cat "$work/build.log"; exit 1; }
  logger=$work/embed/logger batch=$work/embed/batch
else
  export PKG_CONFIG_PATH="$libdir/pkgconfig"
  flags=$(pkg-config --cflags statewise) libs=$(pkg-config --libs statewise)
  # shellcheck disable=SC2086
  "$cxx" -std=c++20 -Wall -Wextra -Werror $extra $flags "$source/examples/embed/logger.cpp" $libs -o "$work/logger"
  logger=$work/logger batch=
fi

# The batch program builds the cold-room model in code and smooths: the very table the CLI writes.
if [ -n "$batch" ]; then
  "$batch" "$data/data.csv" >"$work/batch.csv"
  "$prefix/bin/statewise" smooth -m "$data/model.json" --missing -999 "$data/data.csv" -o "$work/smooth.csv"
  cmp "$work/batch.csv" "$work/smooth.csv"
fi

# The logger stops after the first half of the log and resumes from its saved state on the whole
# log: together its two runs print what `statewise filter` prints for every row.
head -n 1441 "$data/data.csv" >"$work/half.csv"
"$logger" "$data/model.json" "$work/half.csv" "$work/state.json" >"$work/first.txt"
"$logger" "$data/model.json" "$data/data.csv" "$work/state.json" >"$work/second.txt"
"$prefix/bin/statewise" filter -m "$data/model.json" --missing -999 "$data/data.csv" | tail -n +2 | cut -d, -f1-5 \
  >"$work/filter.txt"
cat "$work/first.txt" "$work/second.txt" | cmp - "$work/filter.txt"
grep -q '"rows_processed": 2880' "$work/state.json"
echo "ok: installed to a temporary prefix; examples/embed built with $mode and matches the CLI"
