#!/usr/bin/env bash
# The Slurm path of docs/cohort.md, end to end on one machine: a private
# single-node Slurm (slurmctld + slurmd + munged, all on 127.0.0.1, ports and
# state in a scratch folder) runs the batch script of docs/cohort.md as a
# job array over a 3-night manifest with --part, then cohort-merge; the
# merged cohort.csv must equal a local run's. Exits 77 (skipped) with the
# reason when Slurm cannot be installed or started here.
set -u
bin=${REMTONE_BIN:?}
src=${REMTONE_SOURCE:?}
work="${REMTONE_TMP:-/tmp}/slurm"
skip() { echo "SKIP: $*"; exit 77; }

[ "$(id -u)" = 0 ] || skip "needs root to start slurmd and munged (running as $(id -un))"
need="slurmctld slurmd sbatch sinfo munged"
missing() { for p in $need; do command -v $p >/dev/null 2>&1 || [ -x /usr/sbin/$p ] || return 0; done; return 1; }
if missing; then
  command -v apt-get >/dev/null || skip "Slurm is not installed and apt-get is not available"
  DEBIAN_FRONTEND=noninteractive timeout 600 apt-get install -y --no-install-recommends \
    slurmctld slurmd slurm-client munge >/dev/null 2>&1 || skip "apt-get install slurmctld slurmd slurm-client munge failed"
fi
export PATH="$PATH:/usr/sbin"
missing && skip "Slurm programs still missing after install"

rm -rf "$work" && mkdir -p "$work"/{state,spool,logs,run}
cd "$work"
pids=()
cleanup() { for p in "${pids[@]}"; do kill "$p" 2>/dev/null; done; sleep 0.5; for p in "${pids[@]}"; do kill -9 "$p" 2>/dev/null; done; }
trap cleanup EXIT
fail_reason() { # print daemon logs and skip with the reason
  for f in logs/*.log; do echo "--- $f"; tail -5 "$f"; done
  skip "$*"
}

# ---- munge: a private daemon on its own socket, with a scratch key
dd if=/dev/urandom of=run/munge.key bs=1024 count=1 2>/dev/null && chmod 400 run/munge.key
chmod 700 run
munged --force --socket="$work/run/munge.sock" --key-file="$work/run/munge.key" \
  --pid-file="$work/run/munged.pid" --log-file="$work/logs/munged.log" \
  --seed-file="$work/run/munge.seed" >/dev/null 2>&1 || fail_reason "munged did not start"
for _ in $(seq 50); do [ -s run/munged.pid ] && break; sleep 0.1; done
pids+=("$(cat run/munged.pid 2>/dev/null)")

# ---- slurm.conf for localhost, loopback addresses, unusual ports
port=$((17000 + RANDOM % 2000))
cpus=$(nproc)
cat > slurm.conf <<CONF
ClusterName=remtonetest
SlurmctldHost=localhost(127.0.0.1)
SlurmctldPort=$port
SlurmdPort=$((port + 1))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$work/run/munge.sock
StateSaveLocation=$work/state
SlurmdSpoolDir=$work/spool
SlurmctldPidFile=$work/run/slurmctld.pid
SlurmdPidFile=$work/run/slurmd.pid
SlurmctldLogFile=$work/logs/slurmctld.log
SlurmdLogFile=$work/logs/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/builtin
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
MpiDefault=none
ReturnToService=2
NodeName=localhost NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=2000 State=UNKNOWN
PartitionName=test Nodes=localhost Default=YES MaxTime=INFINITE State=UP
CONF
export SLURM_CONF="$work/slurm.conf"
slurmctld -D -f "$SLURM_CONF" >logs/slurmctld.out 2>&1 &
pids+=($!)
slurmd -D -f "$SLURM_CONF" -N localhost >logs/slurmd.out 2>&1 &
pids+=($!)
up=0
for _ in $(seq 60); do
  state=$(sinfo -h -N -o %t 2>/dev/null | head -1)
  case "$state" in idle*|mix*|alloc*) up=1; break;; esac
  sleep 0.5
done
[ "$up" = 1 ] || { cat logs/*.out >> logs/daemons.log 2>/dev/null; fail_reason "the node did not become idle (sinfo state '${state:-none}')"; }
echo "slurm up: $(sinfo -h -o '%P %a %D %t')"

# ---- a 3-night cohort
mkdir -p data
"$bin" synth --profile rbd --hours 1 --seed 11 --out data/a >/dev/null || exit 1
"$bin" synth --profile typical-older --hours 1 --seed 12 --out data/b >/dev/null || exit 1
"$bin" synth --profile rbd --hours 1 --seed 13 --out data/c >/dev/null || exit 1
printf 'id,recording,stages,events,group\na,a/night.edf,a/stages.csv,,case\nb,b/night.edf,b/stages.csv,,control\nc,c/night.edf,c/stages.csv,,case\n' > data/manifest.csv
"$bin" cohort data/manifest.csv --out local --jobs 2 --quiet || { echo "FAIL local run"; exit 1; }

# ---- the batch script of docs/cohort.md, as published
{ echo '#!/bin/bash'; sed -n '/^# --- remtone-slurm begin/,/^# --- remtone-slurm end/p' "$src/docs/cohort.md"; } > cohort.sbatch
grep -qF '"$REMTONE" cohort' cohort.sbatch || { echo "FAIL: no batch script found in docs/cohort.md"; exit 1; }
MANIFEST="$work/data/manifest.csv" OUT="$work/array" REMTONE="$bin" \
  timeout 300 sbatch --wait --array=1-3 --cpus-per-task=1 --mem=100M --time=10 \
  --output="$work/logs/task-%A_%a.out" --export=ALL cohort.sbatch > logs/sbatch.out 2>&1
rc=$?
cat logs/sbatch.out
if [ "$rc" != 0 ]; then
  for f in logs/task-*.out; do echo "--- $f"; cat "$f"; done
  echo "FAIL: the job array failed (sbatch exit $rc)"; exit 1
fi
fails=0
n=$(ls array/nights | grep -c '\.key$')
[ "$n" = 3 ] && echo "ok   array-scored-3" || { echo "FAIL array scored $n nights"; fails=1; }
for id in a b c; do
  c=$(grep -cx "scored $id" array/cohort.log)
  [ "$c" = 1 ] || { echo "FAIL night $id scored $c times"; fails=1; }
done
"$bin" cohort-merge array --quiet || { echo "FAIL merge"; exit 1; }
if cmp -s array/cohort.csv local/cohort.csv; then echo "ok   array-merge-equals-local"; else echo "FAIL merged table differs"; diff array/cohort.csv local/cohort.csv; fails=1; fi
exit $fails
