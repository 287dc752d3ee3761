#!/usr/bin/env bash
# Real cluster test of sweep sharding: a one-node Slurm cluster on this machine, started by hand
# (no systemd), runs the job-array example of docs/sweeps.md with `sbatch --array`; the shards
# are merged and compared with an unsharded run of the same sweep, byte for byte.
#
# Needs root and Debian's slurm-wlm and munge packages (installed with apt-get when missing).
# Where they cannot be had, prints "SKIPPED: <reason>" and exits 0. Stops every daemon it
# started, by its PID. Usage: bash tests/cluster/slurm_test.sh   (from anywhere)
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
skip() { echo "slurm cluster test SKIPPED: $*"; exit 0; }

[ "$(id -u)" = 0 ] || skip "not root (a hand-started Slurm runs its daemons as root)"

need_install=0
for cmd in munged slurmctld slurmd sbatch sinfo squeue; do
    command -v "$cmd" >/dev/null 2>&1 || need_install=1
done
if [ "$need_install" = 1 ]; then
    command -v apt-get >/dev/null 2>&1 || skip "slurm is not installed and there is no apt-get"
    echo "installing slurm-wlm and munge with apt-get"
    if ! { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
            --no-install-recommends slurm-wlm munge; } >/tmp/copyloop-slurm-apt.log 2>&1; then
        tail -n 5 /tmp/copyloop-slurm-apt.log
        skip "apt-get could not install slurm-wlm and munge (log: /tmp/copyloop-slurm-apt.log)"
    fi
    for cmd in munged slurmctld slurmd sbatch sinfo; do
        command -v "$cmd" >/dev/null 2>&1 || skip "$cmd is missing after the install"
    done
fi

COPYLOOP="${COPYLOOP:-$ROOT/target/release/copyloop}"
if [ ! -x "$COPYLOOP" ]; then
    echo "building copyloop (release)"
    (cd "$ROOT" && cargo build --release --quiet)
fi
BIN_DIR="$(cd "$(dirname "$COPYLOOP")" && pwd)"

WORK="$(mktemp -d /tmp/copyloop-slurm.XXXXXX)"
chmod 755 "$WORK"
HOST="$(hostname -s)"
PIDS=()
cleanup() {
    local rc=$?
    if [ -n "${JOB_ID:-}" ]; then scancel "$JOB_ID" >/dev/null 2>&1 || true; fi
    # Newest first: slurmd, slurmctld, munged.
    for ((i = ${#PIDS[@]} - 1; i >= 0; i--)); do
        kill "${PIDS[i]}" 2>/dev/null || true
    done
    for pid in "${PIDS[@]}"; do
        for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
        kill -9 "$pid" 2>/dev/null || true
    done
    if [ "$rc" != 0 ]; then
        echo "--- logs in $WORK ---"
        for f in "$WORK"/*.log "$WORK"/run/*.log; do
            [ -f "$f" ] && { echo "== $f"; tail -n 20 "$f"; }
        done
    else
        rm -rf "$WORK"
    fi
    exit "$rc"
}
trap cleanup EXIT

# --- munge: our own key, socket and files, so nothing of a system munge is touched ---
mkdir -p "$WORK/munge"
chmod 755 "$WORK/munge"
dd if=/dev/urandom of="$WORK/munge/munge.key" bs=1024 count=1 status=none
chmod 400 "$WORK/munge/munge.key"
SOCKET="$WORK/munge/munge.socket"
munged --foreground --force \
    --key-file="$WORK/munge/munge.key" --socket="$SOCKET" \
    --pid-file="$WORK/munge/munged.pid" --seed-file="$WORK/munge/munged.seed" \
    --log-file="$WORK/munged.log" >"$WORK/munged.out" 2>&1 &
PIDS+=($!)
for _ in $(seq 50); do [ -S "$SOCKET" ] && break; sleep 0.1; done
[ -S "$SOCKET" ] || { echo "munged did not start"; exit 1; }

# --- slurm: one node, this host, on ports of our own ---
mkdir -p "$WORK/state" "$WORK/spool" "$WORK/run"
CPUS="$(nproc)"
export SLURM_CONF="$WORK/slurm.conf"
cat >"$SLURM_CONF" <<EOF
ClusterName=copyloop-test
SlurmctldHost=$HOST(127.0.0.1)
SlurmUser=root
SlurmdUser=root
SlurmctldPort=16817
SlurmdPort=16818
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$SOCKET
StateSaveLocation=$WORK/state
SlurmdSpoolDir=$WORK/spool
SlurmctldPidFile=$WORK/slurmctld.pid
SlurmdPidFile=$WORK/slurmd.pid
SlurmctldLogFile=$WORK/slurmctld.log
SlurmdLogFile=$WORK/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SchedulerType=sched/backfill
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
ReturnToService=2
SlurmctldTimeout=30
SlurmdTimeout=30
KillWait=5
MinJobAge=600
NodeName=$HOST NodeAddr=127.0.0.1 CPUs=$CPUS State=UNKNOWN
PartitionName=test Nodes=$HOST Default=YES MaxTime=INFINITE State=UP
EOF
slurmctld -D -i -f "$SLURM_CONF" >"$WORK/slurmctld.out" 2>&1 &
PIDS+=($!)
slurmd -D -f "$SLURM_CONF" >"$WORK/slurmd.out" 2>&1 &
PIDS+=($!)
state=""
for _ in $(seq 100); do
    state="$(sinfo -h -n "$HOST" -o %t 2>/dev/null || true)"
    [ "$state" = idle ] && break
    sleep 0.2
done
[ "$state" = idle ] || { echo "the node is not idle (sinfo says '${state}')"; sinfo || true; exit 1; }
echo "slurm is up: node $HOST idle ($(sinfo --version))"

# --- the job-array example of docs/sweeps.md, as written ---
awk '/<!-- slurm-job-array/ {found = 1; next}
     found && /^```bash/ {inside = 1; next}
     inside && /^```/ {exit}
     inside {print}' "$ROOT/docs/sweeps.md" >"$WORK/run/job.sh"
grep -q '^#SBATCH --array' "$WORK/run/job.sh" || { echo "no job-array example in docs/sweeps.md"; exit 1; }
cp -r "$ROOT/reactions" "$WORK/run/"
export PATH="$BIN_DIR:$PATH"
cd "$WORK/run"
# A task whose library has not landed yet is run as `initial`, which compiles each point and
# needs no options: the sharding, merging and comparing are the same.
if ! copyloop sweep reactions/enzyme_clearance.crn --vary kon=list:1e7 --task simulate \
        --t-end 1 --out probe.jsonl >/dev/null 2>&1; then
    echo "the simulate task is not in this build: the example runs with --task initial"
    sed -i 's/--task simulate .*\\$/--task initial \\/' job.sh
fi
rm -f probe.jsonl

SHARDS=4
JOB_ID="$(sbatch --parsable --array=1-$SHARDS job.sh)"
echo "submitted job array $JOB_ID (sbatch --array=1-$SHARDS)"
# Wait until no task of the array is pending or running (at most 120 s).
for _ in $(seq 600); do
    [ -z "$(squeue -h -j "$JOB_ID" -o %i 2>/dev/null)" ] && break
    sleep 0.2
done
if [ -n "$(squeue -h -j "$JOB_ID" -o %i 2>/dev/null)" ]; then
    echo "the job array did not finish within 120 s"; squeue || true; exit 1
fi
STATES="$(scontrol -o show job "$JOB_ID" | grep -o 'JobState=[A-Z_]*' | sort | uniq -c)"
if [ "$(scontrol -o show job "$JOB_ID" | grep -vc 'JobState=COMPLETED')" != 0 ]; then
    echo "a task of the job array did not complete: $STATES"; cat kon-kcat.*.log || true; exit 1
fi
JOB_ID=""
for i in $(seq $SHARDS); do
    [ -s "kon-kcat.$i.jsonl" ] || { echo "shard $i wrote nothing"; cat "kon-kcat.$i.log" || true; exit 1; }
done
echo "job array done: $(for i in $(seq $SHARDS); do printf '%s ' "$(($(wc -l <kon-kcat.$i.jsonl) - 1))"; done)points per shard"

copyloop merge kon-kcat.*.jsonl --out merged.jsonl
# The same sweep unsharded, on this machine: the script without its --shard line.
sed '/--shard/d' job.sh >whole.sh
SLURM_ARRAY_TASK_ID=whole bash whole.sh >/dev/null
copyloop merge kon-kcat.whole.jsonl --out whole.jsonl >/dev/null # ordered by point
# Point for point the same, except the wall-clock timings a result carries.
same_results() {
    python3 - "$1" "$2" <<'PY'
import json, sys
TIMING = {"wall_seconds", "events_per_second"}
def strip(v):
    if isinstance(v, dict):
        return {k: strip(x) for k, x in v.items() if k not in TIMING}
    if isinstance(v, list):
        return [strip(x) for x in v]
    return v
a, b = ([strip(json.loads(l)) for l in open(p)] for p in sys.argv[1:3])
sys.exit(0 if a == b and len(a) > 1 else 1)
PY
}
if same_results merged.jsonl whole.jsonl; then
    echo "slurm cluster test passed: $SHARDS shards merged == the unsharded run ($(($(wc -l <merged.jsonl) - 1)) points)"
else
    echo "slurm cluster test FAILED: the merged shards differ from the unsharded run"
    diff <(head -c 2000 merged.jsonl) <(head -c 2000 whole.jsonl) || true
    exit 1
fi
