#!/usr/bin/env bash
# Bring up a one-node SLURM cluster on this machine (root, no systemd) for the cluster test.
# Usage: .ci/slurm/up.sh DIR   -> writes DIR/slurm.conf, starts munged, slurmctld, slurmd,
# records their PIDs in DIR/pids (for down.sh) and waits until the node is idle.
# Clients need SLURM_CONF=DIR/slurm.conf in their environment; /etc/slurm/slurm.conf is linked to it
# (for job steps) when no other configuration is there.
set -euo pipefail
DIR=$(realpath -m "${1:?usage: up.sh DIR}")
mkdir -p "$DIR"/{state,spool,log,run}
: > "$DIR/pids"

if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq
    apt-get install -y -qq --no-install-recommends slurmctld slurmd slurm-client munge >/dev/null
fi

HOST=$(hostname -s)
CPUS=$(nproc)
MEM=$(slurmd -C | sed -n 's/.*RealMemory=\([0-9]*\).*/\1/p')
MEM=$(( MEM * 85 / 100 ))
cat > "$DIR/slurm.conf" <<CONF
ClusterName=holoscan-ci
SlurmctldHost=${HOST}(127.0.0.1)
AuthType=auth/munge
SlurmUser=root
SlurmdUser=root
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
AccountingStorageType=accounting_storage/none
JobAcctGatherType=jobacct_gather/none
MailProg=/bin/true
MinJobAge=300
ReturnToService=2
StateSaveLocation=$DIR/state
SlurmdSpoolDir=$DIR/spool
SlurmctldLogFile=$DIR/log/slurmctld.log
SlurmdLogFile=$DIR/log/slurmd.log
SlurmctldPidFile=$DIR/run/slurmctld.pid
SlurmdPidFile=$DIR/run/slurmd.pid
NodeName=${HOST} NodeAddr=127.0.0.1 CPUs=${CPUS} RealMemory=${MEM} State=UNKNOWN
PartitionName=ci Nodes=${HOST} Default=YES MaxTime=INFINITE State=UP
CONF

# Job steps (srun inside a job) look for the configuration at the default path: point it at ours,
# unless a real configuration is already there.
mkdir -p /etc/slurm
if [ ! -e /etc/slurm/slurm.conf ] || [ -L /etc/slurm/slurm.conf ]; then
    ln -sfn "$DIR/slurm.conf" /etc/slurm/slurm.conf
    echo "$DIR/slurm.conf" > "$DIR/etc-link"
fi

# munge: key (created by the package) and runtime folder
install -d -o munge -g munge -m 755 /run/munge
if ! munge -n 2>/dev/null | unmunge >/dev/null 2>&1; then
    runuser -u munge -- /usr/sbin/munged
    for _ in $(seq 50); do munge -n 2>/dev/null | unmunge >/dev/null 2>&1 && break; sleep 0.1; done
    echo "munged $(cat /run/munge/munged.pid)" >> "$DIR/pids"
fi
munge -n | unmunge >/dev/null

export SLURM_CONF="$DIR/slurm.conf"
slurmctld -c -f "$SLURM_CONF"
for _ in $(seq 50); do [ -s "$DIR/run/slurmctld.pid" ] && break; sleep 0.1; done
echo "slurmctld $(cat "$DIR/run/slurmctld.pid")" >> "$DIR/pids"
slurmd -f "$SLURM_CONF"
for _ in $(seq 50); do [ -s "$DIR/run/slurmd.pid" ] && break; sleep 0.1; done
echo "slurmd $(cat "$DIR/run/slurmd.pid")" >> "$DIR/pids"

for _ in $(seq 100); do
    state=$(sinfo -h -o %t 2>/dev/null || true)
    [ "$state" = "idle" ] && break
    sleep 0.2
done
echo "one-node SLURM cluster up: node ${HOST}, ${CPUS} CPUs, ${MEM} MB, state '$(sinfo -h -o %t)'"
[ "$(sinfo -h -o %t)" = "idle" ]
