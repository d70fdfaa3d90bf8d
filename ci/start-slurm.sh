#!/usr/bin/env bash
# Starts a one-node Slurm cluster on this machine for the `sweep --slurm`
# tests: installs Slurm and munge through apt when missing (Debian 12, as
# root), writes slurm.conf, starts munged, slurmctld and slurmd, and waits
# until the node is idle. Needs no systemd and no cgroups: processes are
# tracked by their parent links, there is no accounting storage, and finished
# jobs are logged to a text file. Running it again on a live cluster does
# nothing.
set -euo pipefail
export DEBIAN_FRONTEND=noninteractive

say() { echo "start-slurm: $*" >&2; }
fail() { say "$*"; exit 1; }

node_idle() {
  sinfo -h -N -o '%T' 2>/dev/null | grep -Eq '^(idle|mixed|allocated)'
}

# Without a configuration file sinfo retries for a minute; there is no cluster then.
if command -v sinfo >/dev/null && [ -e "${SLURM_CONF:-/etc/slurm/slurm.conf}" ] && node_idle; then
  say "a Slurm node is already up"
  exit 0
fi

[ "$(id -u)" = 0 ] || fail "must run as root (it installs packages and starts the daemons)"

if ! command -v slurmctld >/dev/null || ! command -v slurmd >/dev/null \
  || ! command -v sbatch >/dev/null || ! command -v munged >/dev/null; then
  say "installing slurm-wlm and munge"
  apt-get -o DPkg::Lock::Timeout=300 update -qq
  apt-get -o DPkg::Lock::Timeout=300 install -y -qq slurm-wlm munge >/dev/null
fi

conf_dir=/etc/slurm
spool=/var/spool/slurm-thicket
logs=/var/log/slurm
mkdir -p "$conf_dir" "$spool/ctld" "$spool/d" "$logs"

# munge: a key and its run folder, owned by the munge user the package made.
if [ ! -s /etc/munge/munge.key ]; then
  mkdir -p /etc/munge
  dd if=/dev/urandom of=/etc/munge/munge.key bs=1024 count=1 status=none
fi
mkdir -p /run/munge /var/lib/munge /var/log/munge
if id munge >/dev/null 2>&1; then
  chown munge:munge /etc/munge /etc/munge/munge.key /run/munge /var/lib/munge /var/log/munge
fi
chmod 0700 /etc/munge
chmod 0400 /etc/munge/munge.key
if ! munge -n 2>/dev/null | unmunge >/dev/null 2>&1; then
  if id munge >/dev/null 2>&1; then
    runuser -u munge -- /usr/sbin/munged
  else
    /usr/sbin/munged --force
  fi
fi
for _ in $(seq 50); do
  munge -n 2>/dev/null | unmunge >/dev/null 2>&1 && break
  sleep 0.1
done
munge -n | unmunge >/dev/null || fail "munged does not answer"

host=$(hostname -s)
cpus=$(nproc)
# Memory the node offers, in MB: a little under the machine's, so slurmd never finds less.
mem_mb=$(awk '/^MemTotal:/ { printf "%d", $2 / 1024 * 0.9 }' /proc/meminfo)

cat >"$conf_dir/slurm.conf" <<EOF
# One-node cluster for the thicket tests (written by ci/start-slurm.sh).
ClusterName=thicket-ci
SlurmctldHost=$host(127.0.0.1)
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
AccountingStorageType=accounting_storage/none
JobAcctGatherType=jobacct_gather/none
JobCompType=jobcomp/filetxt
JobCompLoc=$logs/jobcomp.log
SchedulerType=sched/backfill
MpiDefault=none
ReturnToService=2
StateSaveLocation=$spool/ctld
SlurmdSpoolDir=$spool/d
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SlurmctldLogFile=$logs/slurmctld.log
SlurmdLogFile=$logs/slurmd.log
SlurmctldPort=6817
SlurmdPort=6818
KillWait=5
MinJobAge=600
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem_mb State=UNKNOWN
PartitionName=debug Nodes=ALL Default=YES MaxTime=INFINITE State=UP
EOF
# Debian's packages look for the file here too.
[ -e /etc/slurm-llnl ] || ln -s "$conf_dir" /etc/slurm-llnl 2>/dev/null || true

pgrep -x slurmctld >/dev/null || slurmctld -c -f "$conf_dir/slurm.conf"
pgrep -x slurmd >/dev/null || slurmd -N "$host" -f "$conf_dir/slurm.conf"

for _ in $(seq 300); do
  if node_idle; then
    say "node $host is up with $cpus CPUs"
    exit 0
  fi
  # A node left down or drained by an earlier start comes back.
  if sinfo -h -N -o '%T' 2>/dev/null | grep -Eq '^(down|drained|draining)'; then
    scontrol update NodeName="$host" State=RESUME 2>/dev/null || true
  fi
  sleep 0.1
done
fail "the node did not become idle within 30 s; see $logs/slurmctld.log and $logs/slurmd.log"
