# slurm_lib.sh - a throw-away single-node SLURM cluster (munged, slurmctld, slurmd) for tests.
# Sourced (not a test itself). Everything lives under one folder; the daemons talk on
# loopback ports picked free at start; cluster_stop ends only the processes it started,
# by the ids in their pid files. Needs root (slurmd runs jobs as their user).
#
#   cluster_install          installs slurm-wlm and munge from Debian when missing
#   cluster_start DIR        starts the cluster; exports SLURM_CONF; 0 ok, 1 failed (logs printed)
#   cluster_stop             stops what cluster_start started (safe to call twice)
#   cluster_logs             prints the daemons' logs on stderr
#   cluster_set KEY VALUE    sets one slurm.conf parameter (MaxArraySize, ...) and has slurmctld
#                            read it again; 0 ok, 1 when scontrol does not show the new value

CLUSTER_DIR=""

cluster_install() {
	local missing="" p
	for p in slurm-wlm munge; do
		dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing="$missing $p"
	done
	[ -z "$missing" ] && return 0
	export DEBIAN_FRONTEND=noninteractive
	apt-get update -q >/dev/null 2>&1 || apt-get update
	# shellcheck disable=SC2086
	apt-get install -y -q --no-install-recommends $missing >/dev/null
}

# A TCP port nobody listens on now (the kernel picks it), so two clusters on one machine
# (say, two worktrees testing at once) do not collide on SLURM's default ports.
cluster_free_port() {
	/usr/bin/python3 -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])'
}

cluster_logs() {
	local f
	for f in "$CLUSTER_DIR"/munged.log "$CLUSTER_DIR"/slurmctld.log "$CLUSTER_DIR"/slurmd.log \
		"$CLUSTER_DIR"/*.start.log; do
		[ -s "$f" ] || continue
		echo "---- $f (last 40 lines)" >&2
		tail -40 "$f" >&2
	done
}

# Stops one daemon by the pid in its pid file, waiting up to 10 s for it to go.
cluster_kill_pidfile() {
	local pidfile=$1 pid i
	[ -s "$pidfile" ] || return 0
	pid=$(cat "$pidfile")
	case $pid in '' | *[!0-9]*) return 0 ;; esac
	kill "$pid" 2>/dev/null || { rm -f "$pidfile"; return 0; }
	for i in $(seq 50); do
		kill -0 "$pid" 2>/dev/null || break
		sleep 0.2
	done
	kill -0 "$pid" 2>/dev/null && kill -9 "$pid" 2>/dev/null
	rm -f "$pidfile"
}

cluster_stop() {
	[ -n "$CLUSTER_DIR" ] || return 0
	cluster_kill_pidfile "$CLUSTER_DIR/slurmd.pid"
	cluster_kill_pidfile "$CLUSTER_DIR/slurmctld.pid"
	cluster_kill_pidfile "$CLUSTER_DIR/munged.pid"
}

# Waits (up to $2 seconds) for the pid file $1 to name a live process.
cluster_wait_pidfile() {
	local i
	for i in $(seq $(($2 * 5))); do
		if [ -s "$1" ] && kill -0 "$(cat "$1")" 2>/dev/null; then
			return 0
		fi
		sleep 0.2
	done
	return 1
}

cluster_start() {
	local dir=$1 host cpus mem key port_ctl port_d i state
	CLUSTER_DIR=$dir
	mkdir -p "$dir/state" "$dir/spool"
	chmod 700 "$dir"
	host=$(hostname -s)
	cpus=$(nproc)
	# leave 1 GiB (or a quarter, on a small machine) to the rest of the system
	mem=$(free -m | awk '/^Mem:/ { m = $2 - 1024; if (m < $2 * 3 / 4) m = int($2 * 3 / 4); print m }')

	# munge: its own key, socket, pid and log here, so a system munged (if any) is not touched
	key=$dir/munge.key
	if [ ! -s "$key" ]; then
		if [ -s /etc/munge/munge.key ]; then
			cp /etc/munge/munge.key "$key"
		else
			dd if=/dev/urandom of="$key" bs=1 count=1024 2>/dev/null
		fi
	fi
	chmod 600 "$key"
	munged --force --key-file="$key" --socket="$dir/munge.socket" --pid-file="$dir/munged.pid" \
		--log-file="$dir/munged.log" --seed-file="$dir/munged.seed" >"$dir/munged.start.log" 2>&1
	if ! cluster_wait_pidfile "$dir/munged.pid" 10; then
		echo "munged did not start" >&2
		cluster_logs
		return 1
	fi
	if ! munge -S "$dir/munge.socket" -n | unmunge -S "$dir/munge.socket" >/dev/null 2>&1; then
		echo "munge credentials do not round-trip through $dir/munge.socket" >&2
		cluster_logs
		return 1
	fi

	port_ctl=$(cluster_free_port) && port_d=$(cluster_free_port) || {
		echo "could not pick free ports" >&2
		return 1
	}
	[ "$port_ctl" != "$port_d" ] || port_d=$(cluster_free_port)
	cat >"$dir/slurm.conf" <<EOF
# single-node test cluster written by tests/cli/slurm_lib.sh
ClusterName=splitroitest
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=$port_ctl
SlurmdPort=$port_d
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$dir/munge.socket
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU_Memory
SchedulerType=sched/backfill
ReturnToService=2
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/slurmctld.log
SlurmdLogFile=$dir/slurmd.log
SlurmctldDebug=info
SlurmdDebug=info
SlurmctldTimeout=30
SlurmdTimeout=30
InactiveLimit=0
MinJobAge=300
KillWait=5
Waittime=0
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=test Nodes=ALL Default=YES MaxTime=INFINITE State=UP
EOF
	export SLURM_CONF=$dir/slurm.conf
	slurmctld -f "$SLURM_CONF" -c >"$dir/slurmctld.start.log" 2>&1
	if ! cluster_wait_pidfile "$dir/slurmctld.pid" 20; then
		echo "slurmctld did not start" >&2
		cluster_logs
		return 1
	fi
	slurmd -f "$SLURM_CONF" -N "$host" >"$dir/slurmd.start.log" 2>&1
	if ! cluster_wait_pidfile "$dir/slurmd.pid" 20; then
		echo "slurmd did not start" >&2
		cluster_logs
		return 1
	fi
	# the node registers within a few seconds; wait for it to take jobs
	for i in $(seq 60); do
		state=$(sinfo -h -N -o '%T' 2>/dev/null | head -1)
		case $state in idle | mixed | allocated) return 0 ;; esac
		sleep 1
	done
	echo "the node never became idle (state '$state')" >&2
	sinfo -N -l >&2 2>&1
	cluster_logs
	return 1
}

cluster_set() {
	local key=$1 value=$2 i
	sed -i "/^$key=/d" "$SLURM_CONF"
	echo "$key=$value" >>"$SLURM_CONF"
	scontrol reconfigure >/dev/null 2>&1 || return 1
	for i in $(seq 20); do
		scontrol show config 2>/dev/null | grep -Eq "^$key +=  *$value\$" && return 0
		sleep 0.5
	done
	return 1
}

# study_links SRC N DEST: a study of N subjects (labels 0-padded to the width of N) at DEST
# whose BIDS files are symbolic links to SRC's subjects, taken in turn; the study file and
# parcels are copied. Many subjects in a second, for the tests and tools/bench_slurm.sh.
study_links() {
	/usr/bin/python3 - "$1" "$2" "$3" <<'PY'
import os, shutil, sys
src, n, dst = os.path.abspath(sys.argv[1]), int(sys.argv[2]), sys.argv[3]
data = os.path.join(src, "data")
subs = sorted(d for d in os.listdir(data) if d.startswith("sub-"))
os.makedirs(os.path.join(dst, "data"), exist_ok=True)
for f in os.listdir(src):
    if os.path.isfile(os.path.join(src, f)):
        shutil.copy(os.path.join(src, f), dst)
for f in os.listdir(data):
    if os.path.isfile(os.path.join(data, f)):
        shutil.copy(os.path.join(data, f), os.path.join(dst, "data"))
w = len(str(n))
for i in range(n):
    s = subs[i % len(subs)]
    new = "sub-%0*d" % (w, i + 1)
    func = os.path.join(dst, "data", new, "func")
    os.makedirs(func)
    for f in os.listdir(os.path.join(data, s, "func")):
        os.symlink(os.path.join(data, s, "func", f), os.path.join(func, new + f[len(s):]))
PY
}
