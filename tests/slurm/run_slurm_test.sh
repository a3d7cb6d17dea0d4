#!/usr/bin/env bash
# tests/slurm/run_slurm_test.sh: `framelaw sweep --slurm` against a real Slurm. Starts a single-node
# Slurm on this machine from Debian's packages (installed when missing: slurmctld, slurmd,
# slurm-client, munge), with a config of our own in a temporary folder; submits a four-member sweep
# of tiny runs as one job array; waits for it; checks that all four members finished and that the
# summary lists four rows; stops the daemons it started. Needs root. Run by `make check-slurm`.
#
#   FRAMELAW=path/to/framelaw bash tests/slurm/run_slurm_test.sh
#   KEEP=1 ...   keeps the temporary folder (config, daemon logs, the sweep)
set -euo pipefail

ROOT=$(cd "$(dirname "$0")/../.." && pwd)
FRAMELAW=${FRAMELAW:-$ROOT/framelaw}
WAIT_JOB=${WAIT_JOB:-300}   # seconds the job array may take
say() { echo "check-slurm: $*"; }
die() { say "FAILED: $*"; exit 1; }

[ "$(id -u)" = 0 ] || die "needs root (installs Debian packages, starts munged, slurmctld and slurmd)"
[ -x "$FRAMELAW" ] || die "$FRAMELAW: no framelaw binary (make first, or set FRAMELAW)"
FRAMELAW=$(readlink -f "$FRAMELAW")
t0=$(date +%s)

# ---- packages ------------------------------------------------------------------------------------
missing=""
for p in slurmctld slurmd slurm-client munge; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing="$missing $p"
done
if [ -n "$missing" ]; then
    say "installing$missing"
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq || true
    apt-get install -y -qq --no-install-recommends $missing >/dev/null || die "apt-get install$missing failed"
fi

# ---- our own Slurm in a temporary folder ---------------------------------------------------------
WORK=$(mktemp -d /tmp/framelaw-slurm-XXXXXX)
chmod 755 "$WORK"
STARTED_MUNGED=0
stop_pid_file() {   # stop the daemon whose pid file we named, and wait for it
    local f=$1 pid
    [ -s "$f" ] || return 0
    pid=$(cat "$f")
    kill "$pid" 2>/dev/null || return 0
    for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || return 0; sleep 0.2; done
    kill -9 "$pid" 2>/dev/null || true
}
cleanup() {
    local rc=$?
    set +e
    if [ $rc != 0 ] && [ -d "$WORK" ]; then
        for f in slurmctld.log slurmd.log; do
            [ -f "$WORK/$f" ] && { echo "---- $f (last lines)"; tail -n 20 "$WORK/$f"; }
        done
        for f in "$WORK"/sweep/out/slurm/*.out; do
            [ -f "$f" ] && { echo "---- $f (last lines)"; tail -n 10 "$f"; }
        done
    fi
    stop_pid_file "$WORK/slurmd.pid"
    stop_pid_file "$WORK/slurmctld.pid"
    [ $STARTED_MUNGED = 1 ] && stop_pid_file /run/munge/munged.pid
    if [ "${KEEP:-0}" = 1 ]; then say "kept $WORK"; else rm -rf "$WORK"; fi
    exit $rc
}
trap cleanup EXIT
trap 'exit 130' INT TERM

# munge: a key, its run folder owned by munge, munged as the munge user
if [ ! -s /etc/munge/munge.key ]; then
    mkdir -p /etc/munge
    mungekey --create --force >/dev/null 2>&1 || dd if=/dev/urandom of=/etc/munge/munge.key bs=1024 count=1 status=none
fi
chown munge:munge /etc/munge /etc/munge/munge.key
chmod 700 /etc/munge
chmod 400 /etc/munge/munge.key
mkdir -p /run/munge /var/lib/munge /var/log/munge
chown munge:munge /run/munge /var/lib/munge /var/log/munge
chmod 755 /run/munge
if ! munge -n </dev/null 2>/dev/null | unmunge >/dev/null 2>&1; then
    runuser -u munge -- /usr/sbin/munged || die "munged did not start"
    STARTED_MUNGED=1
    for _ in $(seq 50); do munge -n </dev/null 2>/dev/null | unmunge >/dev/null 2>&1 && break; sleep 0.1; done
    munge -n </dev/null | unmunge >/dev/null || die "munge does not work"
fi

HOST=$(hostname -s)
mem_total=$(free -m | awk '/^Mem:/ {print $2}')
REALMEM=$(( mem_total / 2 > 4000 ? 4000 : mem_total / 2 ))
NCPU=$(nproc)
CPUS=$(( NCPU < 2 ? NCPU : 2 ))
mkdir -p "$WORK/state" "$WORK/spool"
export SLURM_CONF="$WORK/slurm.conf"
cat > "$SLURM_CONF" <<EOF
ClusterName=framelawtest
SlurmctldHost=$HOST
SlurmUser=root
SlurmdUser=root
SlurmctldPort=16817
SlurmdPort=16818
AuthType=auth/munge
CredType=cred/munge
StateSaveLocation=$WORK/state
SlurmdSpoolDir=$WORK/spool
SlurmctldPidFile=$WORK/slurmctld.pid
SlurmdPidFile=$WORK/slurmd.pid
SlurmctldLogFile=$WORK/slurmctld.log
SlurmdLogFile=$WORK/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
SchedulerType=sched/backfill
MpiDefault=none
ReturnToService=2
SlurmdTimeout=60
InactiveLimit=0
KillWait=10
NodeName=$HOST CPUs=$CPUS RealMemory=$REALMEM State=UNKNOWN
PartitionName=debug Nodes=$HOST Default=YES MaxTime=INFINITE State=UP
EOF
slurmctld -f "$SLURM_CONF" || die "slurmctld did not start"
slurmd -f "$SLURM_CONF" || die "slurmd did not start"
state=""
for _ in $(seq 120); do
    state=$(sinfo -h -N -n "$HOST" -o %t 2>/dev/null | head -n 1 || true)
    [ "$state" = idle ] && break
    sleep 0.5
done
[ "$state" = idle ] || die "node $HOST is '${state:-unknown}', not idle, after 60 s"
t_ready=$(date +%s)
say "Slurm is up on $HOST ($CPUS CPUs, ${REALMEM} MB) after $((t_ready - t0)) s"

# ---- a four-member sweep of tiny runs ------------------------------------------------------------
mkdir -p "$WORK/sweep/data"
cd "$WORK/sweep"
for k in 0 1 2 3; do   # a linear oscillator seen through 16 fixed channels
    awk -v k=$k 'BEGIN { srand(5); for (c = 0; c < 16; c++) { p[c] = rand() - 0.5; q[c] = rand() - 0.5 }
        a = 0.5 + 0.1 * k
        for (i = 0; i < 120; i++) { t = i / 30; z0 = a * sin(2 * t + k); z1 = a * cos(2 * t + k); line = ""
            for (c = 0; c < 16; c++) line = line (c ? "," : "") sprintf("%.9g", p[c] * z0 + q[c] * z1)
            print line } }' > "data/rec$k.csv"
done
cat > sweep.json <<'EOF'
{
  "description": "four tiny runs for the Slurm test",
  "base": {
    "data": {"frames": "data", "fps": 30},
    "model": {"latent": 2, "order": 1, "encoder": [8], "activation": "tanh"},
    "library": {"degree": 1},
    "train": {"batch": 64, "epochs": 30, "validate_every": 5},
    "threshold": {"value": 0.05, "every": 10, "refine_epochs": 10},
    "checkpoint": {"every": 10, "keep": 2}
  },
  "vary": {"loss.dx": [0.1, 0.01]},
  "restarts": 2,
  "output": "out",
  "slurm": {"partition": "debug", "time": "00:05:00", "cpus_per_task": 1, "memory": 200}
}
EOF
"$FRAMELAW" sweep sweep.json --slurm | tee slurm-write.txt
script=$(awk '/^  sbatch / {print $2}' slurm-write.txt)
[ -f "$script" ] || die "framelaw sweep --slurm printed no script path"
grep -q '^#SBATCH --array=0-3$' "$script" || die "$script: no #SBATCH --array=0-3"
job=$(sbatch --parsable "$script") || die "sbatch $script failed"
job=${job%%;*}
say "submitted job array $job"
t_sub=$(date +%s)
while squeue -h -j "$job" 2>/dev/null | grep -q .; do
    [ $(( $(date +%s) - t_sub )) -lt "$WAIT_JOB" ] || die "job $job still queued or running after $WAIT_JOB s"
    sleep 1
done
say "job array $job done after $(( $(date +%s) - t_sub )) s"

# ---- checks --------------------------------------------------------------------------------------
n_logs=$(ls out/slurm/*.out 2>/dev/null | wc -l)
[ "$n_logs" = 4 ] || die "expected 4 task logs in out/slurm, found $n_logs"
"$FRAMELAW" sweep sweep.json --list > members.txt
[ "$(grep -c ' finished ' members.txt)" = 4 ] || { cat members.txt; die "not every member finished"; }
"$FRAMELAW" sweep sweep.json --summary > summary.txt || die "framelaw sweep --summary failed"
rows=$(tail -n +2 out/summary.csv | grep -c ',finished,' || true)
[ "$rows" = 4 ] || { cat out/summary.csv; die "summary.csv lists $rows finished members, expected 4"; }
[ "$(tail -n +2 out/summary.csv | wc -l)" = 4 ] || die "summary.csv does not have 4 rows"
grep -q '</table>' out/summary.html || die "summary.html has no table"
for f in out/slurm/*.out; do grep -q "framelaw: sweep: member" "$f" || die "$f: no member line"; done
cat summary.txt
say "passed: 4 array tasks finished and summarised; $(( $(date +%s) - t0 )) s in all ($((t_ready - t0)) s to install and start Slurm)"
