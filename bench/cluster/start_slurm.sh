#!/usr/bin/env bash
# Starts a single-node Slurm cluster on this machine (Debian's slurm-wlm and
# munge; run as root), for trying the array-job recipe of docs/scaling.md.
# Not part of the test suite. Stop it with: pkill slurmd; pkill slurmctld; pkill munged
set -euo pipefail
host=$(hostname -s)
cpus=$(nproc)
mem=$(awk '/MemTotal/ { print int($2 / 1024) - 1024 }' /proc/meminfo)
[ -s /etc/munge/munge.key ] || mungekey --create
chown munge:munge /etc/munge/munge.key 2>/dev/null || true
mkdir -p /run/munge /var/log/munge /var/lib/munge /var/spool/slurmctld /var/spool/slurmd /var/log/slurm
chown munge:munge /run/munge /var/log/munge /var/lib/munge 2>/dev/null || true
pgrep -x munged >/dev/null || runuser -u munge -- munged
mkdir -p /etc/slurm
cat > /etc/slurm/slurm.conf <<CONF
ClusterName=heft-bench
SlurmctldHost=$host
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
StateSaveLocation=/var/spool/slurmctld
SlurmdSpoolDir=/var/spool/slurmd
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
ReturnToService=2
MpiDefault=none
NodeName=$host CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=main Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
pgrep -x slurmctld >/dev/null || slurmctld
pgrep -x slurmd >/dev/null || slurmd
for _ in $(seq 30); do
  sinfo -h -o %T 2>/dev/null | grep -q -E '^(idle|mixed|allocated)' && { sinfo; exit 0; }
  sleep 1
done
echo "slurm did not come up; see /var/log/slurm/" >&2
exit 1
