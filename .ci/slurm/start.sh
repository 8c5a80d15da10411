#!/usr/bin/env bash
# Start a single-node SLURM cluster on this machine for the tests (CI only).
#
# Installs Debian's slurmctld, slurmd, slurm-client and munge when they are missing,
# writes slurm.conf into a state directory and links it to /etc/slurm/slurm.conf (only
# if no slurm.conf is installed there: an existing one is never replaced), starts munged,
# slurmctld and slurmd directly (no systemd needed), and waits until the node is idle.
# Needs root.  Every daemon this script starts is recorded in the state directory so
# that stop.sh ends exactly those and nothing else.
#
# Usage:  .ci/slurm/start.sh            (state directory: $QCORR_CI_SLURM_DIR,
#                                         default /tmp/qcorr-ci-slurm)
#
# The configuration must sit at the default path: the Snakemake SLURM job step removes
# SLURM_* variables (SLURM_CONF included) from its environment before calling srun.
# Design notes (recorded in ../shared notes as verified on Debian 12, Slurm 22.05):
#  * no slurmdbd: accounting_storage/none, so job status must be read with squeue,
#    and MinJobAge=600 keeps finished jobs visible to squeue for 10 minutes;
#  * no cgroups: proctrack/linuxproc and task/none;
#  * cons_tres with CR_Core_Memory, so threads and mem_mb requests are enforced.
set -euo pipefail

state_dir=${QCORR_CI_SLURM_DIR:-/tmp/qcorr-ci-slurm}

if [ "$(id -u)" -ne 0 ]; then
    echo "start.sh: error: must run as root (it installs packages and starts daemons)" >&2
    exit 1
fi

export DEBIAN_FRONTEND=noninteractive
if ! command -v slurmctld >/dev/null || ! command -v slurmd >/dev/null \
   || ! command -v sinfo >/dev/null || ! command -v munged >/dev/null; then
    echo "start.sh: installing slurmctld slurmd slurm-client munge with apt-get"
    apt-get update -qq
    apt-get install -y -qq --no-install-recommends slurmctld slurmd slurm-client munge >/dev/null
fi

if [ -e "$state_dir/started_slurmctld" ] && [ -s "$state_dir/slurmctld.pid" ] \
   && kill -0 "$(cat "$state_dir/slurmctld.pid")" 2>/dev/null; then
    echo "start.sh: the test cluster is already running (started earlier by this script)"
    exit 0
fi

mkdir -p "$state_dir"/{spool_ctld,spool_d,log} /run/munge /etc/slurm
conf="$state_dir/slurm.conf"
default_conf=/etc/slurm/slurm.conf
if [ -e "$default_conf" ] && [ "$(readlink "$default_conf")" != "$conf" ]; then
    echo "start.sh: error: $default_conf already exists and is not this script's; not replacing it" >&2
    exit 1
fi

host=$(hostname -s)
cpus=$(nproc)
mem_mb=$(( $(awk '/^MemTotal:/{print int($2/1024)}' /proc/meminfo) - 1024 ))

cat > "$conf" <<CONF
# Written by qcorr's .ci/slurm/start.sh for a throwaway single-node test cluster.
ClusterName=qcorrci
SlurmctldHost=${host}(127.0.0.1)
SlurmUser=root
AuthType=auth/munge
MpiDefault=none
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
SchedulerType=sched/backfill
ReturnToService=2
MinJobAge=600
StateSaveLocation=${state_dir}/spool_ctld
SlurmdSpoolDir=${state_dir}/spool_d
SlurmctldPidFile=${state_dir}/slurmctld.pid
SlurmdPidFile=${state_dir}/slurmd.pid
SlurmctldLogFile=${state_dir}/log/slurmctld.log
SlurmdLogFile=${state_dir}/log/slurmd.log
NodeName=${host} NodeAddr=127.0.0.1 CPUs=${cpus} RealMemory=${mem_mb} State=UNKNOWN
PartitionName=debug Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF
if [ ! -e "$default_conf" ]; then
    ln -s "$conf" "$default_conf"
    touch "$state_dir/started_conf_link"
fi

# munge: the Debian package normally creates the key in its postinst.
if [ ! -s /etc/munge/munge.key ]; then
    mungekey --create 2>/dev/null \
        || dd if=/dev/urandom of=/etc/munge/munge.key bs=1 count=1024 status=none
    chown munge:munge /etc/munge/munge.key
    chmod 400 /etc/munge/munge.key
fi
chown munge:munge /run/munge
if ! pgrep -x munged >/dev/null; then
    runuser -u munge -- /usr/sbin/munged
    touch "$state_dir/started_munged"
fi

if pgrep -x slurmctld >/dev/null || pgrep -x slurmd >/dev/null; then
    echo "start.sh: error: a slurmctld or slurmd is already running; stop it first" >&2
    exit 1
fi
/usr/sbin/slurmctld -c   # -c: start from an empty job state
touch "$state_dir/started_slurmctld"
/usr/sbin/slurmd
touch "$state_dir/started_slurmd"

for _ in $(seq 60); do
    if sinfo -h -o %T 2>/dev/null | grep -qx idle; then
        break
    fi
    sleep 1
done
if ! sinfo -h -o %T | grep -qx idle; then
    echo "start.sh: error: node did not become idle within 60 s; logs in $state_dir/log" >&2
    sinfo >&2 || true
    exit 1
fi
timeout -k 5 60 srun -N1 true
echo "start.sh: SLURM cluster up ($default_conf -> $conf, ${cpus} CPUs, ${mem_mb} MB)"
