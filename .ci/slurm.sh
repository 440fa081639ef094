#!/usr/bin/env bash
# A real single-node Slurm cluster on this machine runs examples/slurm:
# installs Debian's slurm-wlm and munge if they are missing, starts munged,
# slurmctld and slurmd as root on localhost with a configuration of its own
# (in a temporary folder; nothing under /etc is changed), submits
# examples/slurm/generate-array.sh with `sbatch --array`, then
# examples/slurm/merge.sh with `--dependency=afterok:` on the array, waits for
# both, checks every task COMPLETED with exit code 0, and compares the merged
# folder byte for byte with one `trueset generate` run of the same preset,
# count and seed. The daemons are stopped and the folder removed on any exit.
#
# Every wait is bounded: apt by `timeout`, the daemons' start by a polling
# limit, the jobs by SLURM_CHECK_TIMEOUT seconds (default 300) after which
# the script fails, printing the queue and the daemons' logs.
#
#   bash .ci/slurm.sh            # as root, on Debian (bookworm: Slurm 22.05)
#   COUNT=800 TASKS=4 bash .ci/slurm.sh
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
repo="$(pwd)"

PRESET=${PRESET:-bin-labels}
COUNT=${COUNT:-400}
SEED=${SEED:-7}
TASKS=${TASKS:-8}
WAIT=${SLURM_CHECK_TIMEOUT:-300}
# Ports of our own, so a Slurm already running on the machine is not touched.
CTLD_PORT=${CTLD_PORT:-16817}
SLURMD_PORT=${SLURMD_PORT:-16818}

if [ "$(id -u)" -ne 0 ]; then
	echo "slurm.sh starts slurmctld and slurmd as root; run it as root" >&2
	exit 1
fi

echo "== slurm-wlm and munge"
if ! command -v slurmctld >/dev/null || ! command -v slurmd >/dev/null || ! command -v sbatch >/dev/null || ! command -v munged >/dev/null; then
	timeout 300 apt-get update
	DEBIAN_FRONTEND=noninteractive timeout 600 apt-get install -y --no-install-recommends slurm-wlm munge
fi
slurmctld -V

# munged checks that every folder above its socket is searchable by all.
work="$(mktemp -d /tmp/trueset-slurm.XXXXXX)"
chmod 755 "$work"
pids=()
jobs_submitted=""

dump_logs() {
	for f in "$work"/log/*.log "$work"/run/*.log; do
		[ -f "$f" ] || continue
		echo "--- $f (last 30 lines)"
		tail -n 30 "$f"
	done
}

cleanup() {
	set +e
	if [ -n "$jobs_submitted" ] && [ -f "$work/slurm.conf" ]; then
		SLURM_CONF="$work/slurm.conf" timeout 10 scancel $jobs_submitted >/dev/null 2>&1
	fi
	# Stop the daemons in reverse order of start (slurmd, slurmctld, munged),
	# each by its own process id, waiting at most 10 s before SIGKILL.
	for ((i = ${#pids[@]} - 1; i >= 0; i--)); do
		pid=${pids[$i]}
		kill "$pid" 2>/dev/null || continue
		for _ in $(seq 100); do
			kill -0 "$pid" 2>/dev/null || break
			sleep 0.1
		done
		kill -9 "$pid" 2>/dev/null
		wait "$pid" 2>/dev/null
	done
	rm -rf "$work"
}
trap cleanup EXIT

fail() {
	echo "slurm.sh: $*" >&2
	if [ -f "$work/slurm.conf" ]; then
		SLURM_CONF="$work/slurm.conf" timeout 10 squeue -a 2>&1 || true
	fi
	dump_logs >&2
	exit 1
}

# wait_for SECONDS WHAT COMMAND...: poll COMMAND every 0.5 s until it succeeds.
wait_for() {
	local limit=$1 what=$2
	shift 2
	local n=$((limit * 2))
	while ! "$@" >/dev/null 2>&1; do
		n=$((n - 1))
		[ "$n" -gt 0 ] || fail "$what: not after ${limit}s"
		sleep 0.5
	done
}

mkdir -p "$work/bin" "$work/munge" "$work/log" "$work/spool/ctld" "$work/spool/d" "$work/run"
chmod 755 "$work/munge"

echo "== go build ./cmd/trueset"
go build -o "$work/bin/trueset" ./cmd/trueset

echo "== munged (own key and socket under $work/munge)"
dd if=/dev/urandom of="$work/munge/munge.key" bs=1024 count=1 status=none
chmod 400 "$work/munge/munge.key"
sock="$work/munge/munge.sock"
munged --foreground --socket="$sock" --key-file="$work/munge/munge.key" \
	--pid-file="$work/munge/munged.pid" --log-file="$work/log/munged.log" \
	--seed-file="$work/munge/seed" >>"$work/log/munged.out.log" 2>&1 &
pids+=($!)
wait_for 20 "munged socket" test -S "$sock"
munge -S "$sock" -n | unmunge -S "$sock" | grep -m1 STATUS

# One node (this machine under its short host name) in one partition.
# linuxproc tracks job processes through /proc and task/none binds nothing:
# neither needs cgroups or systemd, which a container may not offer.
# Jobs run as the submitting user (root here); no accounting database.
host="$(hostname -s)"
cpus="$(nproc)"
mem_mb=$(($(awk '/^MemTotal:/ { print $2 }' /proc/meminfo) / 1024 / 2))
cat >"$work/slurm.conf" <<EOF
ClusterName=trueset-ci
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=$CTLD_PORT
SlurmdPort=$SLURMD_PORT
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$sock
StateSaveLocation=$work/spool/ctld
SlurmdSpoolDir=$work/spool/d
SlurmctldPidFile=$work/slurmctld.pid
SlurmdPidFile=$work/slurmd.pid
SlurmctldLogFile=$work/log/slurmctld.log
SlurmdLogFile=$work/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
MpiDefault=none
ReturnToService=2
SchedulerType=sched/backfill
MinJobAge=600
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem_mb State=UNKNOWN
PartitionName=ci Nodes=$host Default=YES MaxTime=INFINITE State=UP
EOF
export SLURM_CONF="$work/slurm.conf"

echo "== slurmctld and slurmd (root, localhost, ports $CTLD_PORT/$SLURMD_PORT)"
# -i: ignore state from an earlier run; -D: stay in the foreground, so the
# process id is ours to stop.
slurmctld -D -i -f "$SLURM_CONF" >>"$work/log/slurmctld.out.log" 2>&1 &
pids+=($!)
wait_for 30 "slurmctld answering" scontrol ping
slurmd -D -f "$SLURM_CONF" >>"$work/log/slurmd.out.log" 2>&1 &
pids+=($!)
node_idle() { [ "$(sinfo -h -n "$host" -o %T)" = idle ]; }
wait_for 60 "node $host idle" node_idle
sinfo

# The job scripts call `trueset` by name and read PRESET, COUNT, SEED, OUT
# (and DATASET for the merge) from the environment sbatch passes on.
env_list="ALL,PATH=$work/bin:$PATH,PRESET=$PRESET,COUNT=$COUNT,SEED=$SEED,OUT=$work/run/shards,DATASET=$work/run/dataset"
echo "== sbatch --array=0-$((TASKS - 1)) examples/slurm/generate-array.sh ($PRESET, $COUNT samples, seed $SEED)"
# --cpus-per-task=1 lets the 2-CPU CI machine run two tasks at once; the
# script asks for 2 (a real cluster's node has more).
array_id=$(timeout 30 sbatch --parsable --array=0-$((TASKS - 1)) --cpus-per-task=1 --chdir="$work/run" \
	--export="$env_list" "$repo/examples/slurm/generate-array.sh")
array_id=${array_id%%;*}
jobs_submitted="$array_id"
echo "array job $array_id"
echo "== sbatch --dependency=afterok:$array_id examples/slurm/merge.sh"
merge_id=$(timeout 30 sbatch --parsable --dependency=afterok:"$array_id" --cpus-per-task=1 --chdir="$work/run" \
	--export="$env_list" "$repo/examples/slurm/merge.sh")
merge_id=${merge_id%%;*}
jobs_submitted="$array_id $merge_id"
echo "merge job $merge_id"

echo "== waiting for the jobs (at most ${WAIT}s)"
start=$SECONDS
while [ -n "$(timeout 10 squeue -h -j "$array_id,$merge_id" -o %i 2>/dev/null)" ]; do
	[ $((SECONDS - start)) -lt "$WAIT" ] || fail "jobs not finished after ${WAIT}s"
	sleep 1
done
echo "jobs left the queue after $((SECONDS - start))s"

# Every array task and the merge job: COMPLETED with exit code 0:0 (the
# controller keeps finished jobs for MinJobAge seconds).
states="$(timeout 10 scontrol -o show job "$array_id" | sed -E 's/.*JobId=([0-9]+) .*ArrayTaskId=([0-9]+) .*JobState=([A-Z_]+) .*ExitCode=([0-9:]+) .*/array task \2 (job \1): \3 exit \4/')
$(timeout 10 scontrol -o show job "$merge_id" | sed -E 's/.*JobId=([0-9]+) .*JobState=([A-Z_]+) .*ExitCode=([0-9:]+) .*/merge (job \1): \2 exit \3/')"
echo "$states"
[ "$(grep -c 'array task' <<<"$states")" -eq "$TASKS" ] || fail "expected $TASKS array tasks"
if grep -v -q 'COMPLETED exit 0:0$' <<<"$states"; then
	fail "a job did not complete with exit code 0"
fi
echo "== merge job's log"
cat "$work/run"/trueset-merge-*.log

echo "== one trueset generate run of the same preset, count and seed"
"$work/bin/trueset" generate --preset "$PRESET" --count "$COUNT" --seed "$SEED" --out "$work/single" --quiet
echo "== merged folder vs single run, byte for byte"
(cd "$work/single" && find . -type f | LC_ALL=C sort) >"$work/single.files"
(cd "$work/run/dataset" && find . -type f | LC_ALL=C sort) >"$work/merged.files"
diff "$work/single.files" "$work/merged.files" || fail "the two folders hold different files"
while IFS= read -r f; do
	cmp "$work/single/$f" "$work/run/dataset/$f" || fail "$f differs"
done <"$work/single.files"
echo "identical: $(wc -l <"$work/single.files") files; manifest.jsonl sha256 $(sha256sum "$work/single/manifest.jsonl" | cut -c1-16)…"
echo "slurm.sh: ok ($TASKS array tasks on a real slurmctld/slurmd, merged, byte-identical to one run)"
