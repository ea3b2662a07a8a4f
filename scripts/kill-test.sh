#!/usr/bin/env bash
# Kill test (issue 16): a batch over a small simulated archive is killed with SIGKILL at random moments three times,
# resumed, and must then equal an uninterrupted run byte for byte apart from timing (the summary's seconds column,
# report.json's created_utc, done.json's seconds). Needs a Release build of the CLI. Bounded: every run has a timeout.
# Usage: scripts/kill-test.sh [ITEMS]   (ITEMS defaults to 300; KILL_TEST_SEED fixes the kill moments, as fractions of the uninterrupted run's time)
set -euo pipefail
cd "$(dirname "$0")/.."
items="${1:-300}"
seed="${KILL_TEST_SEED:-$RANDOM}"
RANDOM=$seed
cli=(dotnet src/OrderUnfold.Cli/bin/Release/net10.0/OrderUnfold.Cli.dll)
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

echo "kill test: seed $seed, $items simulated items, work folder $work"
timeout 300 "${cli[@]}" simulate-archive --out "$work/archive" --items "$items" >/dev/null
# reference: one uninterrupted run (exit 1: the archive holds a few damaged items on purpose)
start_ns=$(date +%s%N)
timeout 600 "${cli[@]}" batch "$work/archive/manifest.csv" --out "$work/reference" --jobs 2 --quiet >/dev/null || [ $? -eq 1 ]
# the kill moments scale with how long the uninterrupted run took (a faster solver or machine must not let every run
# finish before its kill): each kill lands 10-35 % of that time after its run starts, so three of them leave work to resume
reference_ms=$(( ($(date +%s%N) - start_ns) / 1000000 ))
echo "kill test: the uninterrupted run took ${reference_ms} ms"

kills=0
for attempt in 1 2 3 4 5 6 7 8; do
  [ "$kills" -lt 3 ] || break
  "${cli[@]}" batch "$work/archive/manifest.csv" --out "$work/killed" --jobs 2 --quiet >/dev/null 2>&1 &
  pid=$!
  delay_ms=$(( reference_ms * (10 + RANDOM % 26) / 100 ))
  sleep "$(printf '%d.%03d' $((delay_ms / 1000)) $((delay_ms % 1000)))"
  if kill -0 "$pid" 2>/dev/null; then
    kill -KILL "$pid" || true
    kills=$((kills + 1))
    echo "kill test: run $attempt killed with SIGKILL after ${delay_ms} ms"
  else
    echo "kill test: run $attempt had finished before ${delay_ms} ms (no kill)"
  fi
  wait "$pid" 2>/dev/null || true
done
if [ "$kills" -lt 3 ]; then echo "kill test: FAILED: only $kills kill(s) landed before the batch finished; use more items"; exit 1; fi
timeout 600 "${cli[@]}" batch "$work/archive/manifest.csv" --out "$work/killed" --jobs 2 --quiet >/dev/null || [ $? -eq 1 ]

if [ -d "$work/killed/staging" ] && [ -n "$(ls -A "$work/killed/staging")" ]; then
  echo "kill test: FAILED: staging/ not empty after the resumed run"; exit 1
fi
# compare, with the timing fields left out (scripts/compare-batch.sh)
if compared=$(scripts/compare-batch.sh "$work/reference" "$work/killed"); then
  echo "kill test: ok: the resumed run equals the uninterrupted one ($compared; summary, item files and records byte for byte apart from timing)"
else
  echo "kill test: FAILED: the resumed run differs from the uninterrupted one"
  echo "$compared"
  exit 1
fi
