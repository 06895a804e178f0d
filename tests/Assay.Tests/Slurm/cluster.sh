#!/bin/bash
# A single-node Slurm cluster for the tests: Debian 12's slurmctld, slurmd, slurm-client and munge, on loopback
# only, no systemd, no cgroups, every file under BASE. Needs root (the daemons and jobs run as root).
#   cluster.sh start BASE    start munged, slurmctld and slurmd; return once the node is idle
#   cluster.sh stop BASE     stop them
# Jobs need SLURM_CONF=BASE/etc/slurm.conf in their environment.
set -euo pipefail
cmd=$1 base=$2
export SLURM_CONF=$base/etc/slurm.conf
m=$base/munge

stop() {
  set +e
  scontrol shutdown >/dev/null 2>&1
  # The daemons' own pid files, and the pids of what was started (setsid may fork, so both are tried).
  for f in "$base/state/slurmctld.pid" "$base/spool/slurmd.pid" "$m/munged.pid" "$base"/pids/*; do
    [ -f "$f" ] || continue
    p=$(cat "$f")
    for _ in $(seq 50); do kill -0 "$p" 2>/dev/null || break; sleep 0.1; done
    kill "$p" 2>/dev/null
  done
  rm -f "$base"/pids/*
}

if [ "$cmd" = stop ]; then stop; exit 0; fi
[ "$cmd" = start ] || { echo "cluster.sh: start or stop" >&2; exit 64; }
for c in munged mungekey slurmctld slurmd sbatch scontrol sinfo; do
  command -v "$c" >/dev/null || { echo "cluster.sh: $c not found; apt-get install slurmctld slurmd slurm-client munge" >&2; exit 2; }
done
[ "$(id -u)" = 0 ] || { echo "cluster.sh: the single-node cluster runs its daemons as root" >&2; exit 2; }

rm -rf "$base"/{etc,state,spool,log,munge,pids}
mkdir -p "$base"/{etc,state,spool,log,munge,pids}
chmod 755 "$m"    # munged wants its socket folder searchable by others

mungekey --create --keyfile="$m/munge.key" --force
chmod 600 "$m/munge.key"
setsid munged -F --socket="$m/munge.sock" --key-file="$m/munge.key" --log-file="$m/munged.log" \
  --pid-file="$m/munged.pid" --seed-file="$m/munged.seed" >"$m/munged.out" 2>&1 < /dev/null &
echo $! > "$base/pids/munged"
for _ in $(seq 100); do
  munge -S "$m/munge.sock" -n </dev/null 2>/dev/null | unmunge -S "$m/munge.sock" >/dev/null 2>&1 && break
  sleep 0.1
done

mem=$(awk '/MemTotal/ { print int($2 / 1024 * 0.9) }' /proc/meminfo)
cat > "$SLURM_CONF" <<CONF
ClusterName=assay-tests
SlurmctldHost=localhost
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$m/munge.sock
CredType=cred/munge
StateSaveLocation=$base/state
SlurmdSpoolDir=$base/spool
SlurmctldPidFile=$base/state/slurmctld.pid
SlurmdPidFile=$base/spool/slurmd.pid
SlurmctldLogFile=$base/log/slurmctld.log
SlurmdLogFile=$base/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SwitchType=switch/none
MpiDefault=none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
ReturnToService=2
MailProg=/bin/true
SchedulerParameters=batch_sched_delay=0
NodeName=localhost NodeAddr=127.0.0.1 CPUs=$(nproc) RealMemory=$mem State=UNKNOWN
PartitionName=tests Nodes=localhost Default=YES MaxTime=INFINITE State=UP
CONF
setsid slurmctld -D >"$base/log/slurmctld.out" 2>&1 < /dev/null &
echo $! > "$base/pids/slurmctld"
setsid slurmd -D -N localhost >"$base/log/slurmd.out" 2>&1 < /dev/null &
echo $! > "$base/pids/slurmd"

state=""
for _ in $(seq 60); do
  state=$(sinfo -h -n localhost -o %T 2>/dev/null || true)
  [ "$state" = idle ] && exit 0
  case "$state" in down*|drain*) scontrol update nodename=localhost state=resume >/dev/null 2>&1 || true ;; esac
  sleep 1
done
echo "cluster.sh: the node is not idle after 60 s (state '$state')" >&2
cat "$base"/log/*.log >&2
stop
exit 1
