#!/bin/sh
# The generated manual page renders without warnings from man (man-db, which runs groff with
# warnings on). Skips (exit 77) when man is not installed.
# Usage: man_page_lint.sh PATH/statewise.1
set -eu
page=$1
if ! command -v man >/dev/null 2>&1; then
  echo "SKIPPED: man (Debian package man-db) is not installed"
  exit 77
fi
warnings=$(LC_ALL=C.UTF-8 MANWIDTH=80 man --warnings -l "$page" 2>&1 >/dev/null)
if [ -n "$warnings" ]; then
  echo "man reports problems in $page:"
  echo "$warnings"
  exit 1
fi
rendered=$(LC_ALL=C.UTF-8 MANWIDTH=80 man -l "$page" 2>/dev/null)
case $rendered in
  *"statewise filter"*) echo "ok: $page renders without warnings" ;;
  *) echo "the rendered page lacks 'statewise filter'"; exit 1 ;;
esac
