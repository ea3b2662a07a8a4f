#!/usr/bin/env bash
# Slurm test (issue 18): docs/cluster/slurm-array.sh, byte for byte as shipped, run as a job array by a real one-node
# Slurm cluster on this machine (Debian's slurm-wlm and munge, installed if missing; a minimal slurm.conf in a
# temporary folder; daemons stopped on exit, whatever happens). Over a simulated archive it checks that
#   1. four array tasks (one shard each), merged, equal a single-machine batch apart from timing, and
#   2. a second array, with one task killed hard (SIGKILL), one cancelled (scancel) and one warned of its time limit
#      (SIGUSR1 to its shell) mid-way, resumes when just those tasks are submitted again, and equals the same reference.
# Prints the time of each phase. Needs root (it starts munged, slurmctld and slurmd). Every wait is bounded.
# Usage: scripts/slurm-test.sh [ITEMS]   (ITEMS defaults to 1200: each shard then runs for several seconds, so the
# kills land mid-way; SLURM_TEST_KEEP=1 keeps the work folder)
set -euo pipefail
cd "$(dirname "$0")/.."
repo="$(pwd)"
items="${1:-1200}"
shards=4
script="$repo/docs/cluster/slurm-array.sh"
work="$(mktemp -d /tmp/slurm-test.XXXXXX)"
say() { echo "slurm test: $*"; }
fail() { say "FAILED: $*"; exit 1; }
now_ms() { echo $(( $(date +%s%N) / 1000000 )); }
seconds() { printf '%d.%01d s' $(( $1 / 1000 )) $(( $1 % 1000 / 100 )); }
declare -A took
phase_start=0
start_phase() { phase_start=$(now_ms); }
end_phase() { took[$1]=$(( $(now_ms) - phase_start )); say "time of $1: $(seconds "${took[$1]}")${2:+ ($2)}"; }

# --- daemons: stopped on exit (jobs first), with their logs printed when the test failed ---
ctld_pid="" slurmd_pid="" munged_pid=""
cleanup() {
  local rc=$?
  set +e
  if [ -n "$ctld_pid" ]; then
    scancel --quiet --user=root 2>/dev/null
    for _ in $(seq 1 20); do [ -z "$(squeue -h -o %A 2>/dev/null)" ] && break; sleep 1; done
    for job in $(squeue -h -o %A 2>/dev/null); do   # tasks that outlived the cancel: their processes, by pid
      pids=$(scontrol listpids "$job" 2>/dev/null | awk 'NR > 1 {print $1}'); [ -z "$pids" ] || kill -KILL $pids
    done
  fi
  if [ "$rc" -ne 0 ]; then
    for f in "$work"/log/*.log "$work"/tasks/*.log; do [ -f "$f" ] && { echo "----- $f (last 40 lines)"; tail -n 40 "$f"; }; done
  fi
  for pid in $slurmd_pid $ctld_pid $munged_pid; do kill -TERM "$pid" 2>/dev/null; done
  for pid in $slurmd_pid $ctld_pid $munged_pid; do wait "$pid" 2>/dev/null; done
  if [ "${SLURM_TEST_KEEP:-0}" = 1 ]; then say "work folder kept: $work"; else rm -rf "$work"; fi
  exit "$rc"
}
trap cleanup EXIT
trap 'say "stopped by a signal"; exit 143' TERM INT HUP

# --- install (Debian packages) ---
start_phase
if ! command -v slurmctld >/dev/null || ! command -v slurmd >/dev/null || ! command -v munged >/dev/null; then
  apt-get update
  DEBIAN_FRONTEND=noninteractive apt-get -o DPkg::Lock::Timeout=300 install -y slurm-wlm munge
fi
end_phase install "apt-get, when slurm-wlm or munge was missing"

# --- a one-node cluster on localhost ---
start_phase
if [ ! -s /etc/munge/munge.key ]; then
  install -d -o munge -g munge -m 0700 /etc/munge
  dd if=/dev/urandom of=/etc/munge/munge.key bs=1024 count=1 status=none
  chown munge:munge /etc/munge/munge.key && chmod 0400 /etc/munge/munge.key
fi
if ! munge -n 2>/dev/null | unmunge >/dev/null 2>&1; then   # a munged already running is used, and left running
  install -d -o munge -g munge -m 0755 /run/munge
  mkdir -p "$work/log"
  setsid setpriv --reuid=munge --regid=munge --init-groups /usr/sbin/munged --foreground >"$work/log/munged.log" 2>&1 &
  munged_pid=$!
  for _ in $(seq 1 20); do munge -n 2>/dev/null | unmunge >/dev/null 2>&1 && break; sleep 0.5; done
  munge -n | unmunge >/dev/null || fail "munged does not answer"
fi

mkdir -p "$work"/{etc,state,spool,log,tasks}
cpus=$(nproc)
memory_mb=2048   # what the node offers the scheduler: two tasks of 1 CPU × 600 MB at once, as --mem-per-cpu below asks
cat > "$work/etc/slurm.conf" <<EOF
# minimal one-node cluster for scripts/slurm-test.sh (written by it)
ClusterName=orderunfold-test
SlurmctldHost=localhost
SlurmUser=root
AuthType=auth/munge
StateSaveLocation=$work/state
SlurmdSpoolDir=$work/spool
SlurmctldPidFile=$work/state/slurmctld.pid
SlurmdPidFile=$work/spool/slurmd.pid
SlurmctldLogFile=$work/log/slurmctld.log
SlurmdLogFile=$work/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
MpiDefault=none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
ReturnToService=2
KillWait=10
MinJobAge=600
NodeName=localhost NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$memory_mb State=UNKNOWN
PartitionName=test Nodes=localhost Default=YES MaxTime=INFINITE State=UP
EOF
printf 'CgroupPlugin=autodetect\nIgnoreSystemd=yes\n' > "$work/etc/cgroup.conf"
export SLURM_CONF="$work/etc/slurm.conf"
setsid slurmctld -D >/dev/null 2>&1 &   # own sessions: a timeout's signal to this script's group leaves them to cleanup
ctld_pid=$!
setsid slurmd -D -N localhost >/dev/null 2>&1 &
slurmd_pid=$!
for _ in $(seq 1 60); do [ "$(sinfo -h -n localhost -o %t 2>/dev/null)" = idle ] && break; sleep 1; done
[ "$(sinfo -h -n localhost -o %t 2>/dev/null)" = idle ] || fail "the node did not come up idle within 60 s"
say "$(sinfo -V), one node of $cpus CPUs on localhost: $(sinfo -h -o '%P %t %c')"
end_phase "cluster start" "munged, slurmctld, slurmd until the node is idle"

# --- the tool, an archive and the single-machine reference ---
export PATH="$repo:$PATH"   # the repository's launcher: `orderunfold` in the tasks, as a user installs it
start_phase
orderunfold --version >/dev/null   # builds the command line (Release) if needed: once, before the tasks start
orderunfold simulate-archive --out "$work/archive" --items "$items" >/dev/null
end_phase build "Release build of the command line, archive of $items simulated items"
start_phase
orderunfold batch "$work/archive/manifest.csv" --out "$work/reference" --jobs "$cpus" --quiet >/dev/null || [ $? -eq 1 ]
end_phase "single-machine run" "batch of the archive with $cpus jobs: the reference"

# submit OUT [sbatch options...]: the shipped script as a job array writing into OUT; prints the array's job id
submit() {
  local out="$1"; shift
  sbatch --parsable "$@" --cpus-per-task=1 --mem-per-cpu=600M --output="$work/tasks/%A_%a.log" \
    --export="ALL,MANIFEST=$work/archive/manifest.csv,OUT=$out${SHARDS_EXPORT:-}" "$script"
}
# wait_for JOB SECONDS: until no task of JOB is queued or running
wait_for() {
  local t0=$SECONDS
  while [ -n "$(squeue -h -j "$1" -o %i 2>/dev/null)" ]; do
    (( SECONDS - t0 < $2 )) || fail "job $1 still queued or running after $2 s: $(squeue -h -j "$1")"
    sleep 0.5
  done
}
# task_states JOB: one line per array task, "task state exit:signal"
task_states() {
  scontrol -o show job "$1" | sed -E 's/.* ArrayTaskId=([0-9]+) .* JobState=([A-Z_]+) .* ExitCode=([0-9]+:[0-9]+).*/\1 \2 \3/' | sort -n
}
expect_completed() {   # JOB TASK...: each task completed with exit code 0
  local job="$1" states; shift
  states=$(task_states "$job")
  for t in "$@"; do
    grep -qx "$t COMPLETED 0:0" <<< "$states" || fail "array task ${job}_$t did not complete with exit 0: $(grep "^$t " <<< "$states")"
  done
}
merge() {   # DIR: exit 1 means that some items failed (the archive holds damaged items on purpose)
  orderunfold merge "$1" >/dev/null || [ $? -eq 1 ] || fail "merge $1 failed"
}
compare_to_reference() {   # DIR LABEL
  compared=$(scripts/compare-batch.sh "$work/reference" "$1") || { echo "$compared"; fail "$2: the merged output differs from the single-machine batch"; }
  say "ok: $2: merged output equals the single-machine batch ($compared; summary, item files and records byte for byte apart from timing)"
}

# --- 1. the array: four tasks, one shard each ---
start_phase
array1=$(submit "$work/sharded" --array=0-$((shards - 1)))
scontrol write batch_script "$array1" "$work/submitted.sh" >/dev/null
cmp -s "$work/submitted.sh" "$script" || fail "the script Slurm holds for job $array1 is not docs/cluster/slurm-array.sh"
say "array job $array1: the script Slurm runs is docs/cluster/slurm-array.sh byte for byte ($(sha256sum < "$script" | cut -c1-16)…)"
wait_for "$array1" 300
end_phase "array run" "$shards tasks on $cpus CPUs, from sbatch to the last task's end"
expect_completed "$array1" 0 1 2 3
for k in $(seq 0 $((shards - 1))); do
  grep -q '"complete": true' "$work/sharded/shards/shard-$k-of-$shards.json" || fail "shard $k did not finish"
done
start_phase
merge "$work/sharded"
end_phase merge
compare_to_reference "$work/sharded" "array of $shards tasks"

# --- 2. resume: three tasks stopped mid-way in the three ways a task stops, then submitted again ---
#   kill:    SIGKILL to every process of the task (node failure, OOM killer): nothing more is written
#   cancel:  scancel: Slurm sends SIGTERM to every process of the task: the batch writes its summary, exits 143
#   warning: SIGUSR1 to the task's shell alone, as --signal=B:USR1@120 sends before the time limit: the shell passes
#            it on to the batch as SIGTERM, which writes its summary and exits 143
start_phase
for k in $(seq 0 $((shards - 1))); do   # which items belong to shard k (from the first run)
  tail -n +2 "$work/sharded/shards/shard-$k-of-$shards.csv" | cut -d, -f1 | sed "s/^'//" > "$work/ids-$k.txt"
done
published() { ls "$2/items" 2>/dev/null | grep -cFxf "$work/ids-$1.txt" || true; }   # SHARD DIR
batch_shell() {   # JOB: the pid of the task's batch script (Slurm runs it from its spool folder as slurm_script)
  local pid
  for pid in $(scontrol listpids "$1" 2>/dev/null | awk 'NR > 1 {print $1}'); do
    tr '\0' ' ' < "/proc/$pid/cmdline" 2>/dev/null | grep -q slurm_script && { echo "$pid"; return; }
  done
}
resumed="$work/resumed"
array2=$(submit "$resumed" --array=0-$((shards - 1)))
stops=(kill cancel warning)
declare -A stop_of=()   # task → how it was stopped
t0=$SECONDS
while [ "${#stop_of[@]}" -lt "${#stops[@]}" ]; do
  (( SECONDS - t0 < 300 )) || fail "only ${#stop_of[@]} running tasks were caught mid-way within 300 s"
  for k in $(seq 0 $((shards - 1))); do
    [ -z "${stop_of[$k]:-}" ] && [ "${#stop_of[@]}" -lt "${#stops[@]}" ] || continue
    n=$(published "$k" "$resumed") total=$(wc -l < "$work/ids-$k.txt")
    [ "$n" -ge $(( total / 4 > 1 ? total / 4 : 1 )) ] && [ "$n" -lt "$total" ] || continue   # a quarter done, or more
    job=$(squeue -h -t running -j "${array2}_$k" -o %A 2>/dev/null) && [ -n "$job" ] || continue
    stop=${stops[${#stop_of[@]}]}
    case "$stop" in
      kill) pids=$(scontrol listpids "$job" | awk 'NR > 1 {print $1}'); [ -n "$pids" ] || continue
            kill -KILL $pids ;;
      cancel) scancel "${array2}_$k" ;;
      warning) shell=$(batch_shell "$job"); [ -n "$shell" ] || continue
               kill -USR1 "$shell" ;;
    esac
    stop_of[$k]=$stop
    say "task ${array2}_$k: $stop with $n of its $total items published"
  done
  sleep 0.2
done
wait_for "$array2" 300
states=$(task_states "$array2")
declare -A done_before=()
for k in "${!stop_of[@]}"; do   # each really stopped mid-way: some of its items are published, not all
  done_before[$k]=$(published "$k" "$resumed") total=$(wc -l < "$work/ids-$k.txt")
  [ "${done_before[$k]}" -ge 1 ] && [ "${done_before[$k]}" -lt "$total" ] ||
    fail "task $k (${stop_of[$k]}) was not stopped mid-way: ${done_before[$k]} of $total items published"
  status="$resumed/shards/shard-$k-of-$shards.json"
  if [ "${stop_of[$k]}" = kill ]; then
    [ ! -e "$status" ] || fail "the killed shard $k wrote a status (it was not killed hard)"
  else   # stopped by SIGTERM: the batch wrote its summary as interrupted and exited 143
    grep -q '"complete": false' "$status" || fail "shard $k (${stop_of[$k]}) did not write its summary as interrupted"
    grep -q ' 143:0$' <<< "$(grep "^$k " <<< "$states")" || fail "task $k (${stop_of[$k]}) did not exit with 143"
  fi
  say "task ${array2}_$k (${stop_of[$k]}) ended $(grep "^$k " <<< "$states" | cut -d' ' -f2-): ${done_before[$k]} of its $total items published"
done
code=0; orderunfold merge "$resumed" >/dev/null 2>&1 || code=$?
[ "$code" -eq 2 ] || fail "merge of an unfinished array exited with $code, not 2"
say "ok: merge refuses the unfinished array (exit 2)"
# submitting one task again without SHARDS would make it shard 0 of 1: the script refuses that, writing nothing
refused=$(submit "$resumed" --array=$((shards - 1)))
wait_for "$refused" 60
grep -qx "$((shards - 1)) FAILED 2:0" <<< "$(task_states "$refused")" || fail "task $((shards - 1)) alone without SHARDS was not refused"
grep -q 'is not 0 to N-1' "$work/tasks/${refused}_$((shards - 1)).log" || fail "the refusal does not say why"
[ -z "$(ls "$resumed/shards" | grep -v -- "-of-$shards\.")" ] || fail "a refused task wrote a shard of another split"
say "ok: task $((shards - 1)) submitted alone without SHARDS is refused (exit 2) and writes nothing"
# the stopped tasks again, with the number of shards
again=$(echo "${!stop_of[@]}" | tr ' ' '\n' | sort -n | paste -sd,)
array3=$(SHARDS_EXPORT=",SHARDS=$shards" submit "$resumed" --array="$again")
wait_for "$array3" 300
expect_completed "$array3" ${again//,/ }
for k in "${!stop_of[@]}"; do   # the items finished before the stop were skipped, not run again
  skipped=$(grep -oE '[0-9]+ already done' "$work/tasks/${array3}_$k.log" | cut -d' ' -f1)
  [ "$skipped" = "${done_before[$k]}" ] || fail "resubmitted task $k skipped ${skipped:-?} items, not the ${done_before[$k]} finished before"
done
say "ok: the resubmitted tasks $again skipped exactly the items they had finished before"
merge "$resumed"
compare_to_reference "$resumed" "array with tasks $again stopped and submitted again"
end_phase resume "second array, three stops, refusal, resubmission, merge"

say "ok: all checks passed"
say "times: cluster start $(seconds "${took[cluster start]}"), build $(seconds "${took[build]}"), single-machine run $(seconds "${took[single-machine run]}")," \
  "array run $(seconds "${took[array run]}"), merge $(seconds "${took[merge]}"), resume $(seconds "${took[resume]}")"
