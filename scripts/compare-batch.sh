#!/usr/bin/env bash
# Compares two batch outputs (folders holding summary.csv and items/) apart from timing: the summary's seconds
# column, report.json's created_utc, done.json's seconds and the time stamps in report.html are left out; everything else (every summary cell, the
# list of item files and their bytes) must be equal. Prints "N items" and exits 0 when they are; otherwise prints
# the first differences and exits 1. Used by scripts/kill-test.sh and scripts/slurm-test.sh.
# Usage: scripts/compare-batch.sh REFERENCE OTHER
set -euo pipefail
[ $# -eq 2 ] || { echo "usage: $0 REFERENCE OTHER" >&2; exit 2; }
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

normalise() {
  local dir="$1" out="$2"
  mkdir -p "$out"
  # the seconds column, found by its header name
  awk -F, 'BEGIN{OFS=","} NR==1{for (i = 1; i <= NF; i++) if ($i == "seconds") c = i} {if (NR>1 && c) $c=""; print}' \
    "$dir/summary.csv" > "$out/summary.csv"
  (cd "$dir/items" && find . -type f | LC_ALL=C sort) > "$out/files.txt"
  # one process per kind of file, not per file: the hash of each plain file, the lines of the records (prefixed by
  # their file) less their timing lines; a difference shows which file and line
  (cd "$dir/items" && {
    { grep -Ev '/(report|done)\.json$|/report\.html$' "$out/files.txt" || true; } | xargs -r -d '\n' sha256sum
    { grep -E '/report\.json$' "$out/files.txt" || true; } | xargs -r -d '\n' grep -H -v '"created_utc"'
    # the page states when it was written (header, run facts, footer): each UTC time stamp becomes <time>
    { grep -E '/report\.html$' "$out/files.txt" || true; } | xargs -r -d '\n' awk \
      '{ gsub(/[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]T[0-9][0-9]:[0-9][0-9]:[0-9][0-9]Z/, "<time>"); print FILENAME ": " $0 }'
    { grep -E '/done\.json$' "$out/files.txt" || true; } | xargs -r -d '\n' grep -H -v '"seconds"'
  }) > "$out/content.txt"
}

normalise "$1" "$work/reference"
normalise "$2" "$work/other"
if diff -r "$work/reference" "$work/other" >/dev/null; then
  echo "$(($(wc -l < "$work/reference/summary.csv") - 1)) items"
else
  diff -r "$work/reference" "$work/other" | head -20
  exit 1
fi
