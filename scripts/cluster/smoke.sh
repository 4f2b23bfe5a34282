#!/usr/bin/env bash
# Cluster smoke test: coxa batch as a 2-task Slurm array job on a one-node cluster on this
# machine, over a 4-case manifest of synthetic demo phantoms (invented data, not patients).
#
#   bash scripts/cluster/smoke.sh            (as root, or with sudo available; Debian bookworm)
#
# Steps: install Debian's slurm-wlm and munge (apt-get); start a private munged (own key,
# socket and pid file) and a private slurmctld + slurmd (own slurm.conf via SLURM_CONF, node =
# this host, CPUs=2), all in a temporary folder — nothing under /etc is changed; write four
# demo phantoms and a manifest; submit scripts/cluster/array-job.sh with --array=1-2; wait
# (timeout COXA_SMOKE_TIMEOUT seconds, default 1200); run `coxa batch --summarize`; check that
# every case is done exactly once (cohort.csv rows, done-markers, the two tasks' run records).
# Everything this script started is stopped again on exit, also on failure (trap). Set
# COXA_SMOKE_KEEP=1 to keep the temporary folder for inspection.
set -euo pipefail

repo=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
timeout_s=${COXA_SMOKE_TIMEOUT:-1200}
SUDO=""
if [ "$(id -u)" -ne 0 ]; then
  if command -v sudo >/dev/null 2>&1; then SUDO="sudo"; else
    echo "smoke.sh: needs root (or sudo) to install and run slurm and munge" >&2
    exit 2
  fi
fi

say() { printf '[cluster smoke] %s\n' "$*"; }

say "installing slurm-wlm and munge (Debian packages)"
export DEBIAN_FRONTEND=noninteractive
if ! command -v slurmctld >/dev/null 2>&1 || ! command -v munged >/dev/null 2>&1; then
  $SUDO apt-get update -qq
  $SUDO apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null
fi

if [ ! -f "$repo/dist/cli/main.js" ]; then
  say "building coxa"
  (cd "$repo" && npm run build >/dev/null)
fi

work=$(mktemp -d /tmp/coxa-slurm-smoke.XXXXXX)
chmod 0755 "$work"
mkdir -p "$work/munge" "$work/slurm/state" "$work/slurm/spool" "$work/site" "$work/out" "$work/logs"
chmod 0700 "$work/munge"
munged_pid=""
slurmctld_pid=""
slurmd_pid=""
job_id=""

# Processes of this private cluster that are not direct children: slurmstepd and the job's own
# processes carry our SLURM_CONF in their environment (nothing else on the machine can).
private_pids() {
  local conf="$work/slurm/slurm.conf" env_file pid
  for env_file in /proc/[0-9]*/environ; do
    pid=${env_file#/proc/}
    pid=${pid%/environ}
    [ "$pid" = "$$" ] && continue
    $SUDO grep -qzx "SLURM_CONF=$conf" "$env_file" 2>/dev/null && echo "$pid"
  done
}

stop_pid() { # stop_pid PID: TERM, wait up to 10 s, then KILL
  local pid=$1
  [ -n "$pid" ] && kill -0 "$pid" 2>/dev/null || return 0
  $SUDO kill "$pid" 2>/dev/null
  for _ in $(seq 1 50); do kill -0 "$pid" 2>/dev/null || return 0; sleep 0.2; done
  $SUDO kill -9 "$pid" 2>/dev/null
  return 0
}

cleanup() {
  local rc=$?
  set +e
  local conf="$work/slurm/slurm.conf"
  unset SLURM_CONF # so that the helper processes below do not look like cluster processes
  if [ -n "$job_id" ] && [ -n "$slurmctld_pid" ]; then
    SLURM_CONF="$conf" scancel "$job_id" >/dev/null 2>&1
    for _ in $(seq 1 60); do
      [ -z "$(SLURM_CONF="$conf" squeue -h -j "$job_id" 2>/dev/null)" ] && break
      sleep 0.5
    done
  fi
  stop_pid "$slurmd_pid"
  stop_pid "$slurmctld_pid"
  if [ -n "$slurmd_pid" ]; then
    for pid in $(private_pids); do stop_pid "$pid"; done
  fi
  stop_pid "$munged_pid"
  if [ "$rc" -ne 0 ]; then
    say "FAILED (exit $rc); logs:"
    for f in "$work"/logs/*.log "$work"/out/task-*.out; do
      [ -f "$f" ] && { echo "--- $f"; tail -n 40 "$f"; }
    done
  fi
  if [ "${COXA_SMOKE_KEEP:-0}" = "1" ]; then say "kept $work"; else $SUDO rm -rf "$work"; fi
  exit "$rc"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

# --- munge: a private daemon with its own key and socket --------------------------------------
say "starting munged"
dd if=/dev/urandom of="$work/munge/munge.key" bs=1024 count=1 status=none
chmod 0400 "$work/munge/munge.key"
socket="$work/munge/munge.socket"
$SUDO munged --force \
  --key-file="$work/munge/munge.key" \
  --socket="$socket" \
  --pid-file="$work/munge/munged.pid" \
  --log-file="$work/logs/munged.log" \
  --seed-file="$work/munge/munged.seed"
for _ in $(seq 1 50); do [ -s "$work/munge/munged.pid" ] && break; sleep 0.1; done
munged_pid=$(cat "$work/munge/munged.pid")
munge --socket="$socket" -n | unmunge --socket="$socket" >/dev/null

# --- slurm: one node, this host, private configuration ---------------------------------------
host=$(hostname -s)
port_base=$((20000 + RANDOM % 20000))
cat >"$work/slurm/slurm.conf" <<EOF
ClusterName=coxasmoke
SlurmctldHost=${host}(127.0.0.1)
SlurmctldPort=${port_base}
SlurmdPort=$((port_base + 1))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=${socket}
StateSaveLocation=$work/slurm/state
SlurmdSpoolDir=$work/slurm/spool
SlurmctldPidFile=$work/slurm/slurmctld.pid
SlurmdPidFile=$work/slurm/slurmd.pid
SlurmctldLogFile=$work/logs/slurmctld.log
SlurmdLogFile=$work/logs/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
MpiDefault=none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
ReturnToService=2
SlurmctldTimeout=30
SlurmdTimeout=60
MinJobAge=3600
NodeName=${host} NodeAddr=127.0.0.1 CPUs=2 State=UNKNOWN
PartitionName=smoke Nodes=${host} Default=YES MaxTime=INFINITE State=UP
EOF
export SLURM_CONF="$work/slurm/slurm.conf"

say "starting slurmctld and slurmd (node ${host}, 2 CPUs)"
$SUDO env SLURM_CONF="$SLURM_CONF" slurmctld -D -i >"$work/logs/slurmctld.stdout.log" 2>&1 &
slurmctld_pid=$!
for _ in $(seq 1 100); do scontrol ping >/dev/null 2>&1 && break; sleep 0.2; done
scontrol ping | grep -q UP || { echo "slurmctld did not come up" >&2; exit 1; }
$SUDO env SLURM_CONF="$SLURM_CONF" slurmd -D -N "$host" >"$work/logs/slurmd.stdout.log" 2>&1 &
slurmd_pid=$!
state=""
for _ in $(seq 1 150); do
  state=$(sinfo -h -n "$host" -o %t 2>/dev/null | head -n1)
  case "$state" in idle*|mix*|alloc*) break ;; esac
  sleep 0.2
done
case "$state" in idle*|mix*|alloc*) ;; *) echo "node ${host} is not ready (state '${state}')" >&2; exit 1 ;; esac

# --- data: four synthetic demo phantoms and their manifest ------------------------------------
say "writing 4 demo phantoms"
coxa=(node "$repo/dist/cli/main.js")
printf 'case,fixed,moving,fixed_landmarks,moving_landmarks\n' >"$work/site/manifest.csv"
for seed in 1 2 3 4; do
  "${coxa[@]}" phantom --out "$work/site/case$seed" --seed "$seed" --size demo --quiet >/dev/null
  printf 'case%s,case%s/ct.nii.gz,case%s/mr.nii.gz,case%s/landmarks-ct.csv,case%s/landmarks-mr.csv\n' \
    "$seed" "$seed" "$seed" "$seed" "$seed" >>"$work/site/manifest.csv"
done

# --- the array job ----------------------------------------------------------------------------
say "submitting scripts/cluster/array-job.sh as a 2-task array"
job_id=$(COXA="node $repo/dist/cli/main.js" sbatch --parsable --array=1-2 --cpus-per-task=1 \
  --chdir="$work" --output="$work/out/task-%a.out" \
  "$repo/scripts/cluster/array-job.sh" "$work/site/manifest.csv" "$work/out/cohort")
job_id=${job_id%%;*}
say "job ${job_id}; waiting (timeout ${timeout_s} s)"
start=$(date +%s)
while [ -n "$(squeue -h -j "$job_id" 2>/dev/null)" ]; do
  if [ $(( $(date +%s) - start )) -gt "$timeout_s" ]; then
    echo "array job ${job_id} did not finish within ${timeout_s} s" >&2
    squeue -j "$job_id" >&2 || true
    exit 1
  fi
  sleep 2
done
say "array job finished after $(( $(date +%s) - start )) s"
for task in 1 2; do
  [ -f "$work/out/task-$task.out" ] || { echo "task $task wrote no output file" >&2; exit 1; }
  grep -q "coxa array task $task" "$work/out/task-$task.out" || { echo "task $task did not start coxa" >&2; exit 1; }
done

# --- merge and check: every case done exactly once --------------------------------------------
set +e
"${coxa[@]}" batch "$work/site/manifest.csv" --summarize "$work/out/cohort"
summarize_rc=$?
set -e
if [ "$summarize_rc" -ne 0 ] && [ "$summarize_rc" -ne 3 ]; then
  echo "coxa batch --summarize failed with exit code $summarize_rc" >&2
  exit 1
fi
node --input-type=module - "$work/out/cohort" <<'EOF'
import { existsSync, readdirSync, readFileSync } from "node:fs";
import { join } from "node:path";
const out = process.argv[2];
const cases = ["case1", "case2", "case3", "case4"];
const fail = (m) => { console.error(`check failed: ${m}`); process.exit(1); };
const lines = readFileSync(join(out, "cohort.csv"), "utf8").trim().split("\n");
const head = lines[0].split(",");
const rows = lines.slice(1).map((l) => Object.fromEntries(l.split(",").map((v, i) => [head[i], v])));
if (rows.length !== 4) fail(`cohort.csv has ${rows.length} rows, expected 4`);
if (rows.map((r) => r.case).join() !== cases.join()) fail(`cohort.csv cases ${rows.map((r) => r.case)}`);
for (const r of rows) if (r.status !== "done") fail(`${r.case} status ${r.status}`);
for (const c of cases) if (!existsSync(join(out, c, "done.json"))) fail(`${c} has no done.json`);
const records = readdirSync(join(out, "batch-runs")).map((f) => JSON.parse(readFileSync(join(out, "batch-runs", f), "utf8")));
const shards = records.map((r) => r.run.shard).sort();
if (shards.join() !== "1/2,2/2") fail(`run records of shards ${shards}`);
const ran = records.flatMap((r) => r.cases.filter((c) => c.action === "ran").map((c) => c.case)).sort();
if (ran.join() !== cases.join()) fail(`cases run ${ran} (each must run exactly once)`);
for (const c of cases) {
  const m = JSON.parse(readFileSync(join(out, c, "done.json"), "utf8"));
  const owner = records.find((r) => r.run.run_id === m.run.run_id);
  if (!owner) fail(`${c} was completed by an unknown run ${m.run.run_id}`);
}
console.log(`[cluster smoke] every case done exactly once: ${rows.map((r) => `${r.case}=${r.verdict}`).join(" ")}`);
EOF
say "passed"
