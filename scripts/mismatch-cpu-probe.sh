#!/usr/bin/env bash
# CPU time of whole unfolds whose setup does not match the data (issue 15: no unfold of up to two records of 50 000
# samples may take more than 20 s CPU with the default settings, whatever the model mismatch). For each record length it
# simulates the demo's two cavities (SIMULATED DATA, `orderunfold simulate`), makes one copy per kind of mismatch and
# runs `orderunfold unfold` on each, with the default settings. Prints one row per run: the kind, the samples per record,
# user + system CPU seconds of the whole command, its exit code and the first 110 characters of its last message.
#
# Kinds: none (the setup as simulated); glitch (one sample of A's source record set to 10⁴ × the record's largest
# value); length-3% (B's length 93.7 → 96.5 mm); length-0.07% (B's length 93.7 → 93.77 mm, a datasheet value slightly
# off); swapped (the two source records given to the wrong cavities); finesse (both finesses 150 → 450, held fixed);
# confocal (B stated confocal, so its FSR is halved); calibration-swapped (the calibration records swapped).
#
# Usage: scripts/mismatch-cpu-probe.sh [SAMPLES ...]   (default: 1500 6000 25000 50000)
# The command is $ORDERUNFOLD when set, else the repository's launcher (./orderunfold, which builds on first use).
# Not a CI step: its numbers are CPU times on a shared machine; docs/performance.md records them with the load.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
cli="${ORDERUNFOLD:-$repo/orderunfold}"
sizes=("$@")
[ ${#sizes[@]} -gt 0 ] || sizes=(1500 6000 25000 50000)
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

# sets the third column (the signal) of the data row a third of the way down to 10⁴ × the largest signal value
glitch() {
  local file="$1"
  awk -F, 'BEGIN{OFS=","} {line[NR]=$0} /^time_s,/{h=NR} END{
      for (i = h + 1; i <= NR; i++) if (line[i] != "") { n++; row[n] = i; split(line[i], f, ","); if (n == 1 || f[3] + 0 > mx) mx = f[3] + 0 }
      k = row[int(n / 3)]
      for (i = 1; i <= NR; i++) { if (i == k) { split(line[i], f, ","); f[3] = sprintf("%.6g", 1e4 * mx); print f[1], f[2], f[3] } else print line[i] }
    }' "$file" > "$file.tmp" && mv "$file.tmp" "$file"
}

mismatch() {
  local kind="$1" dir="$2"
  local setup="$dir/setup.toml"
  case "$kind" in
    none) ;;
    glitch) glitch "$dir/A_source.csv" ;;
    length-3%) sed -i 's/length = "93.7 mm"/length = "96.5 mm"/' "$setup" ;;
    length-0.07%) sed -i 's/length = "93.7 mm"/length = "93.77 mm"/' "$setup" ;;
    swapped) sed -i 's/file = "A_source.csv"/file = "@B@"/; s/file = "B_source.csv"/file = "A_source.csv"/; s/file = "@B@"/file = "B_source.csv"/' "$setup" ;;
    finesse) sed -i 's/^finesse = 150/finesse = 450/; s/^fix_finesse = false/fix_finesse = true/' "$setup" ;;
    confocal) awk '/^name = "B"/{b=1} b && /^geometry = "planar"/{sub(/planar/, "confocal"); b=0} {print}' "$setup" > "$setup.tmp" && mv "$setup.tmp" "$setup" ;;
    calibration-swapped) sed -i 's/file = "A_calibration.csv"/file = "@B@"/; s/file = "B_calibration.csv"/file = "A_calibration.csv"/; s/file = "@B@"/file = "B_calibration.csv"/' "$setup" ;;
    *) echo "unknown kind $kind" >&2; exit 2 ;;
  esac
}

kinds=(none glitch length-3% length-0.07% swapped finesse confocal calibration-swapped)
printf 'kind\tsamples\tcpu_s\texit\tlast message\n'
for n in "${sizes[@]}"; do
  "$cli" simulate --out "$work/base-$n" --samples "$n" > /dev/null 2>&1
  for kind in "${kinds[@]}"; do
    dir="$work/$kind-$n"
    cp -r "$work/base-$n" "$dir"
    mismatch "$kind" "$dir"
    TIMEFORMAT='%U %S'
    set +e
    { time "$cli" unfold "$dir/setup.toml" --out "$dir/out" > "$dir/log" 2>&1; } 2> "$dir/time"
    rc=$?
    set -e
    read -r user sys < "$dir/time"
    cpu=$(awk -v u="$user" -v s="$sys" 'BEGIN{printf "%.2f", u + s}')
    last=$(grep -v '^\.\.\.' "$dir/log" | grep -v '^$' | tail -n 1 | sed "s|$dir/||g" | cut -c1-110)
    printf '%s\t%s\t%s\t%s\t%s\n' "$kind" "$n" "$cpu" "$rc" "$last"
  done
done
