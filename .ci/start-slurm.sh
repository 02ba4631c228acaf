#!/usr/bin/env bash
# Installs Slurm from Debian's packages and starts a one-node cluster on this machine
# (no systemd, no cgroups), for the dispatch integration test. Run as root.
set -euo pipefail
export DEBIAN_FRONTEND=noninteractive
if ! command -v sbatch >/dev/null; then
  apt-get update -qq
  apt-get install -y -qq slurm-wlm >/dev/null
fi
host=$(hostname -s)
cat > /etc/slurm/slurm.conf <<CONF
ClusterName=ci
MailProg=/bin/true
SlurmctldHost=$host
SlurmUser=slurm
SlurmdUser=root
AuthType=auth/munge
MpiDefault=none
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
ReturnToService=2
StateSaveLocation=/tmp/slurm/state
SlurmdSpoolDir=/tmp/slurm/spool
SlurmctldPidFile=/tmp/slurm/slurmctld.pid
SlurmdPidFile=/tmp/slurm/slurmd.pid
SlurmctldLogFile=/tmp/slurm/log/slurmctld.log
SlurmdLogFile=/tmp/slurm/log/slurmd.log
NodeName=$host CPUs=$(nproc) State=UNKNOWN
PartitionName=debug Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF
mkdir -p /run/munge && chown munge:munge /run/munge && chmod 755 /run/munge
pgrep -x munged >/dev/null || runuser -u munge -- /usr/sbin/munged
munge -n | unmunge | grep -q Success
mkdir -p /tmp/slurm/state /tmp/slurm/spool /tmp/slurm/log
chown slurm:slurm /tmp/slurm /tmp/slurm/state /tmp/slurm/log
pgrep -x slurmctld >/dev/null || slurmctld
pgrep -x slurmd >/dev/null || slurmd
for _ in $(seq 1 120); do
  sinfo -h -o %T 2>/dev/null | grep -q idle && exit 0
  sleep 0.5
done
echo "Slurm did not come up" >&2
exit 1
