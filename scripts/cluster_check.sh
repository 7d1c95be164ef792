#!/usr/bin/env bash
# make cluster-check: the README's "Slurm with dask-jobqueue" recipe, run for real.
#
# As root on a Debian machine: installs a single-node Slurm from the system packages (slurm-wlm,
# munge), writes a minimal slurm.conf for this host (2 CPUs, its memory) into a private work
# directory, starts munged (unless one already answers), slurmctld and slurmd, runs the README's
# driver script (only the site values replaced: partition, account, per-job size, interface,
# port, venv), samples a tiny sweep with `planner sweep --cluster tcp://<printed address>`,
# checks the totals with sinter.read_stats_from_csv_files against `planner status --json`, and
# stops everything it started (trap on EXIT). Not part of `make test`. Takes a few minutes.
#
# Environment: KEEP_WORK=1 keeps the work directory (logs, slurm.conf, samples) on success.
set -euo pipefail
cd "$(dirname "$0")/.."
REPO=$PWD
PY=$REPO/.venv/bin/python
PLANNER=$REPO/.venv/bin/planner

running() { local n; for n in "$@"; do pgrep -x "$n" || true; done; }  # pids of processes so named
say() { printf 'cluster-check: %s\n' "$*"; }
die() { printf 'cluster-check: FAILED: %s\n' "$*" >&2; REPORTED=1; exit 1; }
REPORTED=""

[[ $(id -u) == 0 ]] || die "run as root (it installs packages and starts the Slurm daemons)"
[[ -f /etc/debian_version ]] || die "needs a Debian machine (apt-get, slurm-wlm, munge)"
[[ -x $PLANNER ]] || die "no $PLANNER: run 'make install' first"

WORK=$(mktemp -d /tmp/planner-cluster-check.XXXXXX)
chmod 755 "$WORK"
PIDS=()          # daemons this script started, stopped in reverse order
DRIVER_PID=""
POLICY_MADE=""
STATUS=1

cleanup() {
    local rc=$?
    set +e
    [[ $STATUS == 0 || -n $REPORTED ]] || printf 'cluster-check: FAILED (exit %s; see above)\n' "$rc" >&2
    if [[ -n $DRIVER_PID ]] && kill -0 "$DRIVER_PID" 2>/dev/null; then
        echo 2>/dev/null >&3  # the recipe's "press Enter to stop the cluster"
        for _ in $(seq 30); do kill -0 "$DRIVER_PID" 2>/dev/null || break; sleep 1; done
        kill "$DRIVER_PID" 2>/dev/null
    fi
    exec 3>&- 2>/dev/null
    if [[ ${#PIDS[@]} -gt 0 ]]; then
        # our own slurmctld: every job in it is this check's
        SLURM_CONF=$WORK/slurm.conf scancel --full --quiet --partition=cpu 2>/dev/null
        sleep 2
        for (( i=${#PIDS[@]}-1; i>=0; i-- )); do
            kill "${PIDS[i]}" 2>/dev/null
            for _ in $(seq 20); do kill -0 "${PIDS[i]}" 2>/dev/null || break; sleep 0.5; done
            kill -9 "${PIDS[i]}" 2>/dev/null
            wait "${PIDS[i]}" 2>/dev/null
        done
    fi
    [[ -n $POLICY_MADE ]] && rm -f /usr/sbin/policy-rc.d
    if [[ $STATUS == 0 && -z ${KEEP_WORK:-} ]]; then
        rm -rf "$WORK"
    else
        say "work directory kept: $WORK (slurm.conf, daemon logs, driver output, job logs, samples)"
    fi
    left=$(running slurmctld slurmd slurmstepd | paste -sd ' ' -)
    [[ -z $left || -n ${OTHER_SLURM:-} ]] || say "warning: Slurm processes still running: $left"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

# ---------------------------------------------------------------- install (system packages)
if [[ -n $(running slurmctld slurmd) ]]; then
    OTHER_SLURM=1
    die "a slurmctld or slurmd is already running on this machine; this check starts its own"
fi
say "apt-get update; apt-get install slurm-wlm munge"
if [[ ! -e /usr/sbin/policy-rc.d ]]; then
    # do not let the packages start their services: this script starts (and stops) its own
    printf '#!/bin/sh\nexit 101\n' > /usr/sbin/policy-rc.d && chmod 755 /usr/sbin/policy-rc.d
    POLICY_MADE=1
fi
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq >"$WORK/apt.log" 2>&1 || { tail "$WORK/apt.log" >&2; die "apt-get update"; }
apt-get install -y -qq slurm-wlm munge >>"$WORK/apt.log" 2>&1 \
    || { tail "$WORK/apt.log" >&2; die "apt-get install slurm-wlm munge"; }
say "installed: $(dpkg-query -W -f='slurm-wlm ${Version}, ' slurm-wlm)$(dpkg-query -W -f='munge ${Version}' munge)"

# ---------------------------------------------------------------- munge
if munge -n 2>/dev/null | unmunge >/dev/null 2>&1; then
    say "munged: one is already running; using it"
else
    [[ -s /etc/munge/munge.key ]] || runuser -u munge -- mungekey --create
    install -d -o munge -g munge -m 0755 /run/munge
    setpriv --reuid=munge --regid=munge --init-groups /usr/sbin/munged --foreground \
        >"$WORK/munged.out" 2>&1 &
    PIDS+=($!)
    for _ in $(seq 30); do munge -n 2>/dev/null | unmunge >/dev/null 2>&1 && break; sleep 0.5; done
    munge -n | unmunge >/dev/null || die "munged did not start (see $WORK/munged.out)"
    say "munged started (pid ${PIDS[-1]})"
fi

# ---------------------------------------------------------------- slurm.conf for this host
HOST=$(hostname -s)
MEM_MB=$(awk '/^MemTotal:/ {print int($2 / 1024 * 0.9)}' /proc/meminfo)
JOB_MEM_MB=$(( MEM_MB / 2 < 2048 ? MEM_MB / 2 : 2048 ))  # two jobs of one core each
mkdir -p "$WORK/state" "$WORK/spool"
cat >"$WORK/slurm.conf" <<EOF
# single-node Slurm for planner's cluster-check (written by scripts/cluster_check.sh)
ClusterName=plannercheck
SlurmctldHost=$HOST(127.0.0.1)
SlurmUser=root
AuthType=auth/munge
CredType=cred/munge
MpiDefault=none
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
ReturnToService=2
StateSaveLocation=$WORK/state
SlurmdSpoolDir=$WORK/spool
SlurmctldPidFile=$WORK/slurmctld.pid
SlurmdPidFile=$WORK/slurmd.pid
SlurmctldLogFile=$WORK/slurmctld.log
SlurmdLogFile=$WORK/slurmd.log
NodeName=$HOST NodeAddr=127.0.0.1 CPUs=2 RealMemory=$MEM_MB State=UNKNOWN
PartitionName=cpu Nodes=$HOST Default=YES MaxTime=INFINITE State=UP
EOF
export SLURM_CONF=$WORK/slurm.conf
say "slurm.conf: node $HOST, CPUs=2, RealMemory=${MEM_MB}M, partition cpu ($SLURM_CONF)"

# ---------------------------------------------------------------- the README's driver script (before
# anything starts: a recipe this check cannot adapt fails here)
IFACE=$(ip -o -4 route show default 2>/dev/null | awk '{print $5; exit}')
IFACE=${IFACE:-lo}
PORT=$("$PY" -c 'import socket; s = socket.socket(); s.bind(("", 0)); print(s.getsockname()[1])')
"$PY" scripts/cluster_check_recipe.py driver README.md "$WORK/slurm_cluster.py" \
    --interface "$IFACE" --port "$PORT" --venv "$REPO/.venv" --partition cpu \
    --account planner-check --memory "${JOB_MEM_MB}MiB" --jobs 2 >/dev/null \
    || die "could not take the driver script from README.md (message above)"
say "driver: README's recipe with interface=$IFACE, port $PORT, 2 jobs x 1 core, ${JOB_MEM_MB}MiB per job"

# ---------------------------------------------------------------- start slurmctld, slurmd
/usr/sbin/slurmctld -D -f "$SLURM_CONF" >"$WORK/slurmctld.out" 2>&1 &
PIDS+=($!)
/usr/sbin/slurmd -D -f "$SLURM_CONF" >"$WORK/slurmd.out" 2>&1 &
PIDS+=($!)
for _ in $(seq 60); do
    state=$(sinfo -h -N -o '%T' 2>/dev/null | head -1 || true)
    [[ $state == idle ]] && break
    sleep 1
done
[[ $state == idle ]] || die "the node did not become idle (state '${state:-none}'; see $WORK/slurm*.log)"
say "slurmctld (pid ${PIDS[-2]}) and slurmd (pid ${PIDS[-1]}) up: $(sinfo -h -o '%P %a %D %T %c CPUs %m MB')"

# ---------------------------------------------------------------- run the driver
mkfifo "$WORK/enter"
(cd "$WORK" && exec "$PY" slurm_cluster.py <"$WORK/enter" >"$WORK/driver.out" 2>"$WORK/driver.err") &
DRIVER_PID=$!
exec 3>"$WORK/enter"  # held open: the driver's input() waits until we send Enter
ADDR=""
for _ in $(seq 60); do
    ADDR=$(grep -m1 -o '^tcp://[^ ]*' "$WORK/driver.out" 2>/dev/null || true)
    [[ -n $ADDR ]] && break
    kill -0 "$DRIVER_PID" 2>/dev/null || { cat "$WORK/driver.err" >&2; die "the driver script exited"; }
    sleep 1
done
[[ -n $ADDR ]] || die "the driver printed no scheduler address (see $WORK/driver.err)"
say "driver printed the scheduler address $ADDR"

# ---------------------------------------------------------------- a tiny sweep on it
cat >"$WORK/tiny.toml" <<'EOF'
# tiny: 2 distances x 1 basis x 1 scale point = 2 tasks; noisy, so the quick budget's 1000
# logical errors per task come within seconds
[device]
name = "cluster-check"
[device.errors]
gate_1q = 0.001
gate_2q = 0.008
readout = 0.01
reset = 0.002
[device.coherence]
t1_us = 50.0
t2_us = 40.0
[device.durations]
gate_1q_ns = 25
gate_2q_ns = 40
measure_ns = 500
reset_ns = 200
[goal]
logical_error_per_cycle = 1e-6
max_qubits = 1000
[sweep]
distances = [3, 5]
bases = ["z"]
EOF
say "planner sweep tiny.toml --cluster $ADDR --budget quick"
T0=$(date +%s)
timeout 900 "$PLANNER" sweep "$WORK/tiny.toml" --cluster "$ADDR" --out "$WORK/out" --budget quick \
    2>"$WORK/sweep.err" || { tail -20 "$WORK/sweep.err" >&2; die "planner sweep on the Slurm cluster"; }
say "sweep done in $(( $(date +%s) - T0 )) s (waiting for the jobs' workers included); it said:"
sed 's/^/    /' "$WORK/sweep.err"
say "jobs in Slurm while the cluster runs: $(squeue -h -o '%i %j %T %C CPUs %m' | paste -sd ';' -)"

# the workers ran inside the Slurm jobs: their logs (slurm-<jobid>.out) say they joined
registered=$(grep -lE "Registered to:[[:space:]]*$ADDR" "$WORK"/slurm-*.out 2>/dev/null | wc -l)
[[ $registered -ge 1 ]] || die "no Slurm job log shows a dask worker registered to $ADDR"
say "$registered Slurm job(s) ran a dask worker registered to $ADDR"

# ---------------------------------------------------------------- totals
"$PLANNER" status "$WORK/out" --json >"$WORK/status.json"
"$PY" scripts/cluster_check_recipe.py totals "$WORK/out" "$WORK/status.json"

# ---------------------------------------------------------------- stop the driver cleanly
echo >&3
for _ in $(seq 60); do kill -0 "$DRIVER_PID" 2>/dev/null || break; sleep 1; done
if kill -0 "$DRIVER_PID" 2>/dev/null; then die "the driver did not stop after Enter"; fi
wait "$DRIVER_PID" || die "the driver exited with an error (see $WORK/driver.err)"
DRIVER_PID=""
for _ in $(seq 30); do [[ -z $(squeue -h) ]] && break; sleep 1; done
[[ -z $(squeue -h) ]] || die "jobs left in the queue after the driver stopped: $(squeue -h)"
say "driver stopped on Enter; its Slurm jobs ended"
STATUS=0
say "PASSED"
