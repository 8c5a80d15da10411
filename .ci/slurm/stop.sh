#!/usr/bin/env bash
# Stop the test cluster that start.sh started, and only the daemons it started.
#
# slurmctld and slurmd are asked to shut down with `scontrol shutdown`, then waited
# for by their pid files; munged is ended by its pid file if start.sh started it.
# The /etc/slurm/slurm.conf link is removed if start.sh made it.
# Safe to run when nothing is running (it then does nothing).  Always exits 0 so it
# can sit in an EXIT trap without hiding the test result.
set -uo pipefail

state_dir=${QCORR_CI_SLURM_DIR:-/tmp/qcorr-ci-slurm}

wait_for_pid_file() {  # $1 pid file: wait up to 30 s for that process to end, then kill it
    local pid_file=$1 pid
    [ -s "$pid_file" ] || return 0
    pid=$(cat "$pid_file")
    for _ in $(seq 30); do
        kill -0 "$pid" 2>/dev/null || return 0
        sleep 1
    done
    echo "stop.sh: process $pid ($pid_file) still running after 30 s; sending SIGKILL" >&2
    kill -9 "$pid" 2>/dev/null || true
}

if [ -e "$state_dir/started_slurmctld" ] || [ -e "$state_dir/started_slurmd" ]; then
    timeout -k 5 30 scontrol shutdown >/dev/null 2>&1 || true
    wait_for_pid_file "$state_dir/slurmctld.pid"
    wait_for_pid_file "$state_dir/slurmd.pid"
    rm -f "$state_dir/started_slurmctld" "$state_dir/started_slurmd"
    echo "stop.sh: slurmctld and slurmd stopped"
fi

if [ -e "$state_dir/started_munged" ]; then
    if [ -s /run/munge/munged.pid ]; then
        munged_pid=$(cat /run/munge/munged.pid)
        kill "$munged_pid" 2>/dev/null || true
        for _ in $(seq 10); do
            kill -0 "$munged_pid" 2>/dev/null || break
            sleep 1
        done
    fi
    rm -f "$state_dir/started_munged"
    echo "stop.sh: munged stopped"
fi
if [ -e "$state_dir/started_conf_link" ]; then
    rm -f /etc/slurm/slurm.conf
    rm -f "$state_dir/started_conf_link"
fi
exit 0
