#!/bin/sh
# The generated zsh completion parses, routes each command to its own _arguments call, and hands
# _arguments one well-formed spec per option (a quoting mistake would split a spec into several
# words). _arguments and _describe are replaced by stubs that print what they receive.
# Skips (exit 77) when zsh is not installed.
# Usage: zsh_completion_test.sh PATH/_statewise
set -eu
file=$1
if ! command -v zsh >/dev/null 2>&1; then
  echo "SKIPPED: zsh is not installed"
  exit 77
fi
zsh -n "$file"
specs=$(zsh -f -c '
  _arguments() {
    if [[ $1 == -C ]]; then state=argument; return 0; fi
    print -rl -- "$@"
  }
  _describe() { :; }
  source "$1"
  words=(filter --model)
  _statewise
' zsh "$file")
fail=0
expect() {
  if printf '%s\n' "$specs" | grep -qxF -- "$1"; then :; else
    echo "missing spec: $1"
    fail=1
  fi
}
expect "(-m --model)-m+[Model file (JSON, docs/model-format.md)]:FILE:_files"
expect "(-m --model)--model=[Model file (JSON, docs/model-format.md)]:FILE:_files"
expect "--report=[Write a JSON report of the run to this file]:FILE:_files"
expect "1:input:_files"
expect "--format=[Output format: csv, tsv (tab-separated) or jsonl (JSON Lines, one object per row); the same columns in each]:TEXT:(csv tsv jsonl)"
expect "*--missing=[Extra cell text meaning 'no value' (repeatable), e.g. --missing -999; empty, NA, NaN, nan and null always are]:TOKEN: "
count=$(printf '%s\n' "$specs" | grep -c '^')
# filter: -h and --help, -m and --model, -o and --output (brace expansion gives one spec per name),
# input, --report, --delimiter, --missing, --digits, --format: 12; other branches may add more.
if [ "$count" -lt 12 ]; then
  echo "expected at least 12 specs for filter, got $count:"
  printf '%s\n' "$specs"
  fail=1
fi
[ $fail -eq 0 ] && echo "ok: $count specs for filter"
exit $fail
