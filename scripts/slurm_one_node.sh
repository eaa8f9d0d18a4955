#!/usr/bin/env bash
# Runs a small pipit sweep as a Slurm job array on a one-node Slurm started
# on this machine (controller and node daemon, loopback only, own ports,
# own munge socket, everything under a temporary directory), and checks
# that the merged report equals, byte for byte, that of a local
# "pipit sweep run --parallel 2" of the same plan.
#
# Needs root (it installs Debian's slurm-wlm and munge when missing and
# runs the daemons). Usage: scripts/slurm_one_node.sh [WORKDIR]
# Prints the two reports' SHA-256 and "slurm and local reports agree".
set -euo pipefail
cd "$(dirname "$0")/.."
export PATH="/usr/local/go/bin:$PATH"
repo=$(pwd)

if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null || ! command -v sbatch >/dev/null; then
  apt-get update -q && DEBIAN_FRONTEND=noninteractive apt-get install -y -q slurm-wlm munge
fi

w=${1:-$(mktemp -d /tmp/pipit-slurm.XXXXXX)}
mkdir -p "$w"/{state,spool,log}
w=$(cd "$w" && pwd)
pids=()
cleanup() {
  # Stop the daemons this script started, by their process ids.
  for p in "${pids[@]}"; do kill "$p" 2>/dev/null || true; done
  for f in "$w"/slurmctld.pid "$w"/slurmd.pid "$w"/munged.pid; do
    [ -s "$f" ] && kill "$(cat "$f")" 2>/dev/null || true
  done
}
trap cleanup EXIT

echo "== munge (socket $w/munge.socket)"
dd if=/dev/urandom of="$w/munge.key" bs=1024 count=1 status=none
chmod 400 "$w/munge.key"
/usr/sbin/munged --force --key-file="$w/munge.key" --socket="$w/munge.socket" \
  --pid-file="$w/munged.pid" --log-file="$w/log/munged.log" --seed-file="$w/munge.seed"
for _ in $(seq 50); do [ -S "$w/munge.socket" ] && break; sleep 0.1; done

node=pipitnode
cpus=$(nproc)
cat >"$w/slurm.conf" <<CONF
# one-node Slurm for pipit's sweep check; loopback only
ClusterName=pipitcheck
SlurmctldHost=$(hostname)(127.0.0.1)
SlurmctldPort=16817
SlurmdPort=16818
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$w/munge.socket
CredType=cred/munge
StateSaveLocation=$w/state
SlurmdSpoolDir=$w/spool
SlurmctldPidFile=$w/slurmctld.pid
SlurmdPidFile=$w/slurmd.pid
SlurmctldLogFile=$w/log/slurmctld.log
SlurmdLogFile=$w/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
MpiDefault=none
ReturnToService=2
NodeName=$node NodeHostname=$(hostname) NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=1024 State=UNKNOWN
PartitionName=sweep Nodes=$node Default=YES MaxTime=INFINITE State=UP
CONF
export SLURM_CONF="$w/slurm.conf"

echo "== slurmctld, slurmd"
/usr/sbin/slurmctld -f "$SLURM_CONF" -i
/usr/sbin/slurmd -f "$SLURM_CONF" -N "$node"
for _ in $(seq 100); do
  state=$(sinfo -h -N -o '%t' 2>/dev/null || true)
  [ "$state" = idle ] && break
  sleep 0.2
done
sinfo -N
[ "$(sinfo -h -N -o '%t')" = idle ] || { echo "node did not come up:"; tail -20 "$w"/log/*.log; exit 1; }

echo "== corpus, plan"
go build -o "$w/pipit" ./cmd/pipit
"$w/pipit" synth --out "$w/corpus" --clips-per-class 6 --folds 3 >/dev/null
cat >"$w/grid" <<'GRID'
pipit-grid 1
bands 40 16
hop 256 512
epochs 2
folds 3
GRID
for d in local slurm; do
  "$w/pipit" sweep plan --data "$w/corpus/manifest.csv" --grid "$w/grid" --out "$w/$d" | sed -n 1p
done
n=$(ls "$w"/slurm/jobs/job-*.json | grep -vc result)

echo "== local run, --parallel 2"
t0=$(date +%s)
nice -n 10 "$w/pipit" sweep run "$w/local" --parallel 2 --cache "$w/cache-local" 2>/dev/null
echo "local: $(( $(date +%s) - t0 )) s"

echo "== slurm array 0-$((n-1))"
t0=$(date +%s)
PIPIT="$w/pipit" PIPIT_CACHE="$w/cache-slurm" sbatch --wait --array=0-$((n-1)) --cpus-per-task=1 --mem=256M \
  --chdir="$w" --output="$w/log/task-%A_%a.log" --export=ALL,PIPIT,PIPIT_CACHE \
  "$repo/examples/sweep/slurm-array.sh" "$w/slurm"
echo "slurm: $(( $(date +%s) - t0 )) s"
grep -h "jobs:" "$w"/log/task-*.log | sort | uniq -c

echo "== reports"
"$w/pipit" sweep report "$w/local" --json --png - >"$w/local.json"
"$w/pipit" sweep report "$w/slurm" --json --png - >"$w/slurm.json"
"$w/pipit" sweep report "$w/slurm" --png - | sed -n 1,20p
sha256sum "$w/local.json" "$w/slurm.json"
if cmp -s "$w/local.json" "$w/slurm.json"; then
  echo "slurm and local reports agree"
else
  diff "$w/local.json" "$w/slurm.json" | head -40
  echo "slurm and local reports DIFFER"; exit 1
fi
