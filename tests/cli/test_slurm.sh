# test_slurm.sh - `splitroi slurm` and `analyze --collect`: scripts, the scheduler's limits,
# submission, --status, and a real single-node SLURM cluster (SPLITROI_TEST_LEVEL=full, as
# root): 1,200 subjects accepted under SLURM's default MaxArraySize, and with MaxArraySize 5 a
# 12-subject study in three arrays whose tables equal a local `analyze` run byte for byte;
# one subject's data broken, --status names it with its log's last line.
. "$(dirname "$0")/lib.sh"
. "$(dirname "$0")/slurm_lib.sh"
trap 'cluster_stop; rm -rf "$TMP"' EXIT

# ---- without a cluster: usage, the scripts, sbatch stand-ins ----
run "$SPLITROI" slurm
expect_status 2 "slurm without a study is a usage error"
run "$SPLITROI" slurm x.ini --mem 4 GB
expect_status 2 "a stray argument is a usage error"
run "$SPLITROI" slurm x.ini --mem 4GB
expect_status 2 "--mem 4GB is refused (SLURM takes 4G)"
expect_err "--mem '4GB'" "the bad --mem value is named"
run "$SPLITROI" slurm x.ini --time 1::00
expect_status 2 "a malformed --time is refused"
run "$SPLITROI" slurm x.ini --partition 'a b'
expect_status 2 "a partition name with a space is refused"
run "$SPLITROI" slurm "$TMP/none.ini"
expect_status 1 "a missing study file is bad input"

run "$SPLITROI" simulate --out "$TMP/mini" --subjects 2 --volumes 60 --quiet
expect_status 0 "simulate a 2-subject study"
mkdir -p "$TMP/nobin"
run env PATH="$TMP/nobin" "$SPLITROI" slurm "$TMP/mini/study.ini" --out "$TMP/mini/res"
expect_status 0 "scripts are written without sbatch on PATH"
expect_out "sh $TMP/mini/res/slurm/submit.sh" "says how to submit them"
expect_out "sbatch is not on PATH" "says sbatch is missing here"
S=$TMP/mini/res/slurm
if [ "$(cat "$S/subjects.txt" 2>/dev/null)" = "$(printf '01\n02')" ]; then ok "subjects.txt lists the two subjects, one a line"; else notok "subjects.txt: $(cat "$S/subjects.txt" 2>&1)"; fi
if grep -q '^#SBATCH --array=1-2$' "$S/subjects-1.sbatch" && grep -q -- '--no-group --quiet' "$S/subjects-1.sbatch" &&
	grep -q -- '--threads "${SLURM_CPUS_PER_TASK:-1}"' "$S/subjects-1.sbatch" && ! grep 'analyze' "$S/subjects-1.sbatch" | grep -q -- '--force' &&
	[ ! -e "$S/subjects-2.sbatch" ]; then
	ok "one array script: 2 tasks, --threads from SLURM, --no-group, no --force"
else
	notok "the array script: $(cat "$S/subjects-1.sbatch")"
fi
expect_out "assuming SLURM's defaults, MaxArraySize 1001 and MaxJobCount 10000" "without scontrol it says it assumes SLURM's defaults"
if grep -q -- "analyze '$TMP/mini/study.ini' --out '$TMP/mini/res' --collect" "$S/group.sbatch"; then ok "the group script collects"; else notok "group script: $(cat "$S/group.sbatch")"; fi
# suggested memory for the small grid, 6 runs of 13440 voxels, 2 CPUs: the model in slurm.c
# gives 1.5 * (10 MiB + 13440 * (81 * 6 + 350 * 2) bytes) = 38 MiB -> one 256 MiB step
if grep -q '^#SBATCH --mem=256M$' "$S/subjects-1.sbatch"; then ok "memory suggestion rounds up to 256M"; else notok "mem: $(grep mem "$S/subjects-1.sbatch")"; fi
# the time model (3.3e-8 s a voxel-volume, times 4) asks for seconds here: the 30-minute floor holds
if grep -q '^#SBATCH --time=0:30:00$' "$S/subjects-1.sbatch"; then ok "time suggestion keeps its 30-minute floor"; else notok "time: $(grep time "$S/subjects-1.sbatch")"; fi
run env PATH="$TMP/nobin" "$SPLITROI" slurm "$TMP/mini/study.ini" --out "$TMP/mini/res" --submit
expect_status 1 "--submit without sbatch fails"
expect_err "sh $TMP/mini/res/slurm/submit.sh" "and names the script to run on the cluster"

# a stand-in sbatch that records its arguments and answers like --parsable does
mkdir -p "$TMP/fakebin"
# a stand-in scontrol: the limits in $TMP/limits, or fails (as without a cluster) when there are none
printf '#!/bin/sh\ncat "%s/limits" 2>/dev/null\n' "$TMP" >"$TMP/fakebin/scontrol"
chmod +x "$TMP/fakebin/scontrol"
cat >"$TMP/fakebin/sbatch" <<EOF
#!/bin/sh
echo "\$*" >>"$TMP/sbatch.calls"
n=\$(wc -l <"$TMP/sbatch.calls")
echo "\$((700 + n));testcluster"
EOF
chmod +x "$TMP/fakebin/sbatch"
run env PATH="$TMP/fakebin:$PATH" "$SPLITROI" slurm "$TMP/mini/study.ini" --out "$TMP/mini/res" --submit --quiet --cpus 3 --mem 2G --time 45 --partition short --account lab1
expect_status 0 "submission through a stand-in sbatch"
expect_out "^701 702$" "both job ids parsed from --parsable output (cluster name dropped)"
if sed -n 2p "$TMP/sbatch.calls" | grep -q -- "--dependency=afterany:701 .*group.sbatch"; then ok "the group job waits on the array with afterany"; else notok "calls: $(cat "$TMP/sbatch.calls")"; fi
if grep -q '^#SBATCH --cpus-per-task=3$' "$S/subjects-1.sbatch" && grep -q '^#SBATCH --mem=2G$' "$S/subjects-1.sbatch" &&
	grep -q '^#SBATCH --time=45$' "$S/subjects-1.sbatch" && grep -q '^#SBATCH --partition=short$' "$S/group.sbatch" &&
	grep -q '^#SBATCH --account=lab1$' "$S/subjects-1.sbatch"; then
	ok "--cpus, --mem, --time, --partition, --account reach the scripts"
else
	notok "options: $(grep SBATCH "$S/subjects-1.sbatch" "$S/group.sbatch")"
fi
cat >"$TMP/fakebin/sbatch" <<EOF
#!/bin/sh
echo "sbatch: error: invalid partition specified: nope" >&2
exit 1
EOF
run env PATH="$TMP/fakebin:$PATH" "$SPLITROI" slurm "$TMP/mini/study.ini" --out "$TMP/mini/res" --submit
expect_status 1 "a refused submission fails"
expect_err "sbatch failed" "and says so"

# ---- the scheduler's limits (a stand-in scontrol), arrays, packing, throttling, a refused array ----
cat >"$TMP/fakebin/sbatch" <<EOF
#!/bin/sh
echo "\$*" >>"$TMP/sbatch.calls"
n=\$(wc -l <"$TMP/sbatch.calls")
if [ -s "$TMP/sbatch.fail_on" ] && [ "\$n" -eq "\$(cat "$TMP/sbatch.fail_on")" ]; then
	echo "sbatch: error: Batch job submission failed: Invalid job array specification" >&2
	exit 1
fi
echo "\$((700 + n));testcluster"
EOF
printf '#!/bin/sh\necho "$*" >>"%s/scancel.calls"\n' "$TMP" >"$TMP/fakebin/scancel"
chmod +x "$TMP/fakebin/sbatch" "$TMP/fakebin/scancel"
FAKE="env PATH=$TMP/fakebin:$PATH"
study_links "$TMP/mini" 12 "$TMP/s12"
S12=$TMP/s12/res/slurm
printf 'ClusterName             = fake\nMaxArraySize            = 5\nMaxJobCount             = 10000\n' >"$TMP/limits"
rm -f "$TMP/sbatch.calls"
run $FAKE "$SPLITROI" slurm "$TMP/s12/study.ini" --out "$TMP/s12/res" --submit
expect_status 0 "12 subjects submitted under MaxArraySize 5"
expect_out "cluster limits \(scontrol show config\): MaxArraySize 5, MaxJobCount 10000" "the limits are read from scontrol show config"
expect_out "12 task\(s\) of 1 subject\(s\) in 3 array\(s\) of at most 4 tasks" "12 tasks in three arrays of 4 (array indices 1-4 < MaxArraySize)"
if [ "$(grep -h '^#SBATCH --array=' "$S12"/subjects-[123].sbatch | tr '\n' ' ')" = "#SBATCH --array=1-4 #SBATCH --array=1-4 #SBATCH --array=1-4 " ] &&
	grep -q "^1) labels='05' ;;$" "$S12/subjects-2.sbatch" && grep -q "^4) labels='12' ;;$" "$S12/subjects-3.sbatch"; then
	ok "each array script lists its own four subjects"
else
	notok "arrays: $(grep -h -e '--array' -e 'labels=' "$S12"/subjects-*.sbatch | head -20)"
fi
if [ "$(wc -l <"$TMP/sbatch.calls")" -eq 4 ] && sed -n 4p "$TMP/sbatch.calls" | grep -q -- "--dependency=afterany:701:702:703 .*group.sbatch$" &&
	! sed -n 1,3p "$TMP/sbatch.calls" | grep -q -- --dependency; then
	ok "the arrays are submitted side by side, the group job after all three (afterany)"
else
	notok "calls: $(cat "$TMP/sbatch.calls")"
fi
if [ "$(grep -c '^70[123] [1-4] [0-9][0-9]$' "$S12/jobs.txt")" -eq 12 ] && grep -q '^702 1 05$' "$S12/jobs.txt" &&
	grep -q '^704 group$' "$S12/jobs.txt"; then
	ok "jobs.txt records each subject's job and task"
else
	notok "jobs.txt: $(cat "$S12/jobs.txt")"
fi
expect_out "submitted: 3 subject array\(s\), job\(s\) 701 702 703 \(12 tasks\), group step as job 704" "and prints the job ids"

# --per-task K: K subjects a task, memory not scaled (one after another), stale arrays removed
run $FAKE "$SPLITROI" slurm "$TMP/s12/study.ini" --out "$TMP/s12/res" --per-task 5
expect_status 0 "--per-task 5"
if [ "$(cat "$S12/subjects.txt")" = "$(printf '01 02 03 04 05\n06 07 08 09 10\n11 12')" ] &&
	grep -q '^#SBATCH --array=1-3$' "$S12/subjects-1.sbatch" && grep -q "^3) labels='11 12' ;;$" "$S12/subjects-1.sbatch" &&
	[ ! -e "$S12/subjects-2.sbatch" ] && [ ! -e "$S12/subjects-3.sbatch" ]; then
	ok "three tasks of 5, 5 and 2 subjects in one array; the old arrays' scripts are gone"
else
	notok "per-task: $(cat "$S12/subjects.txt"; ls "$S12")"
fi
if grep -q '^#SBATCH --mem=256M$' "$S12/subjects-1.sbatch"; then ok "memory stays the largest subject's (they run one after another)"; else notok "mem: $(grep mem "$S12/subjects-1.sbatch")"; fi

# --max-running N: %N on every array, and each array waits for the one before it
rm -f "$TMP/sbatch.calls"
run $FAKE "$SPLITROI" slurm "$TMP/s12/study.ini" --out "$TMP/s12/res" --max-running 2 --submit --quiet
expect_status 0 "--max-running 2"
if [ "$(grep -ch '^#SBATCH --array=1-4%2$' "$S12"/subjects-[123].sbatch | tr '\n' ' ')" = "1 1 1 " ] &&
	sed -n 2p "$TMP/sbatch.calls" | grep -q -- "--dependency=afterany:701 .*subjects-2.sbatch" &&
	sed -n 3p "$TMP/sbatch.calls" | grep -q -- "--dependency=afterany:702 .*subjects-3.sbatch" &&
	sed -n 4p "$TMP/sbatch.calls" | grep -q -- "--dependency=afterany:701:702:703 "; then
	ok "throttled: %2 on each array, the arrays one after another, the group job after all"
else
	notok "throttle: $(grep -h -e '--array' "$S12"/subjects-*.sbatch; cat "$TMP/sbatch.calls")"
fi

# a refused second array: the first is cancelled, the group job never submitted, nothing recorded
rm -f "$TMP/sbatch.calls" "$TMP/scancel.calls"
echo 2 >"$TMP/sbatch.fail_on"
lines=$(wc -l <"$S12/jobs.txt")
run $FAKE "$SPLITROI" slurm "$TMP/s12/study.ini" --out "$TMP/s12/res" --submit
expect_status 1 "a refused array fails the submission"
expect_err "sbatch failed on .*subjects-2.sbatch" "naming the refused script"
expect_err "cancelled the jobs already submitted: 701; nothing of this study is queued" "and says it cancelled the first array"
if [ "$(cat "$TMP/scancel.calls" 2>/dev/null)" = "701" ] && [ "$(wc -l <"$TMP/sbatch.calls")" -eq 2 ] &&
	[ "$(wc -l <"$S12/jobs.txt")" -eq "$lines" ]; then
	ok "scancel 701 ran; the group job was not submitted; jobs.txt unchanged"
else
	notok "scancel: $(cat "$TMP/scancel.calls" 2>&1); sbatch: $(cat "$TMP/sbatch.calls")"
fi
# the same through submit.sh (for a cluster this command cannot reach)
rm -f "$TMP/sbatch.calls" "$TMP/scancel.calls"
run $FAKE sh "$S12/submit.sh"
expect_status 1 "submit.sh stops at the refused array"
if [ "$(cat "$TMP/scancel.calls" 2>/dev/null)" = "701" ] && [ "$(wc -l <"$TMP/sbatch.calls")" -eq 2 ]; then ok "submit.sh cancels the array it had submitted"; else notok "submit.sh: $(cat "$TMP/err")"; fi
rm -f "$TMP/sbatch.fail_on" "$TMP/sbatch.calls"
run $FAKE sh "$S12/submit.sh"
expect_status 0 "submit.sh submits all when sbatch accepts"
if sed -n 4p "$TMP/sbatch.calls" | grep -q -- "--dependency=afterany:701:702:703 " && grep -q '^703 4 12$' "$S12/jobs.txt" &&
	[ "$(tail -1 "$S12/jobs.txt")" = "704 group" ]; then
	ok "submit.sh: group after all arrays, jobs.txt written as --submit does"
else
	notok "submit.sh: $(cat "$TMP/sbatch.calls"; tail -3 "$S12/jobs.txt")"
fi

# MaxJobCount counts every array task: 12 subjects in at most 4 tasks (+1 group job)
printf 'MaxArraySize            = 1001\nMaxJobCount             = 5\n' >"$TMP/limits"
run $FAKE "$SPLITROI" slurm "$TMP/s12/study.ini" --out "$TMP/s12/res"
expect_status 0 "MaxJobCount 5"
expect_out "12 subjects exceed the 5 jobs the cluster queues at once \(MaxJobCount\): 3 subjects a task" "packs 3 subjects a task by itself"
if [ "$(wc -l <"$S12/subjects.txt")" -eq 4 ]; then ok "four tasks"; else notok "tasks: $(cat "$S12/subjects.txt")"; fi
run $FAKE "$SPLITROI" slurm "$TMP/s12/study.ini" --out "$TMP/s12/res" --per-task 1
expect_status 1 "--per-task 1 cannot fit MaxJobCount 5"
expect_err "12 tasks exceed the 5 jobs the cluster queues at once; give --per-task 3 or more" "and says what would fit"
rm -f "$TMP/limits"

# the time suggestion adds up a task's subjects: runs whose headers claim 64x64x40 voxels and
# 20000 volumes (no data: only headers are read), against the model documented in slurm.c
cp -r "$TMP/mini" "$TMP/long"
rm -rf "$TMP/long/res"
"$PYTHON" - "$TMP/long/data" <<'PY'
import glob, os, sys
import nibabel as nib, numpy as np
for f in glob.glob(sys.argv[1] + "/sub-*/func/*_bold.nii.gz"):
    h = nib.Nifti1Header()
    h.set_data_shape((64, 64, 40, 20000))
    h.set_data_dtype(np.float32)
    h.set_xyzt_units("mm", "sec")
    h["pixdim"][1:5] = [3, 3, 3, 2]
    h["vox_offset"] = 352
    # an uncompressed sparse file of the full size: splitroi bounds what a header may claim by
    # the file's size, so a bare header would be refused as truncated (rightly)
    os.remove(f)
    with open(f[:-3], "wb") as g:
        g.write(h.binaryblock + b"\0" * 4)
        g.truncate(352 + 64 * 64 * 40 * 20000 * 4)
PY
expect_time() { # K: minutes = ceil(4 * 3.3e-8 s * K subjects * 6 runs * 163840 voxels * 20000 volumes / 60)
	"$PYTHON" -c "import math; m = math.ceil(4 * 3.3e-8 * $1 * 6 * 64 * 64 * 40 * 20000 / 60); print('%d:%02d:00' % (m // 60, m % 60))"
}
expect_mem() { # 1.5 * (10 MiB + 163840 * (20 * 6 runs + 303 * min(2 threads, 6 runs, 2^20 / 163840 side by side))) in whole 256 MiB
	"$PYTHON" -c "import math; print('%dM' % (256 * math.ceil(1.5 * (10 * 2**20 + 163840 * (20 * 6 + 303 * min(2, 6, 2**20 // 163840))) / 2**28)))"
}
for k in 1 2; do
	run env PATH="$TMP/nobin" "$SPLITROI" slurm "$TMP/long/study.ini" --out "$TMP/long/res" --per-task $k
	if [ "$rc" -eq 0 ] && grep -q "^#SBATCH --time=$(expect_time $k)$" "$TMP/long/res/slurm/subjects-1.sbatch" &&
		grep -q "^#SBATCH --mem=$(expect_mem)$" "$TMP/long/res/slurm/subjects-1.sbatch"; then
		ok "--per-task $k: --time=$(expect_time $k) (the task's subjects added up), --mem=$(expect_mem) (not scaled)"
	else
		notok "--per-task $k: wanted $(expect_time $k) and $(expect_mem): $(grep -e time= -e mem= "$TMP/long/res/slurm/subjects-1.sbatch"; cat "$TMP/err")"
	fi
done

# --collect on what is there: nothing complete yet, then one subject
run "$SPLITROI" analyze "$TMP/mini/study.ini" --out "$TMP/mini/res" --collect --subjects 01
expect_status 2 "--collect takes no --subjects"
run "$SPLITROI" analyze "$TMP/mini/study.ini" --out "$TMP/mini/res" --subjects 01 --no-group --quiet
expect_status 0 "analyze one subject alone"
run "$SPLITROI" analyze "$TMP/mini/study.ini" --out "$TMP/mini/res" --collect --quiet
expect_status 0 "--collect with one subject missing still succeeds"
expect_err "1 of 2 subjects .* sub-02" "--collect names the incomplete subject"
if [ -s "$TMP/mini/res/group.csv" ] && grep -q '^sub-02,missing' "$TMP/mini/res/group_subjects.csv"; then
	ok "--collect writes group.csv and lists sub-02 as missing"
else
	notok "--collect tables: $(ls "$TMP/mini/res"; cat "$TMP/mini/res/group_subjects.csv" 2>&1)"
fi
run env PATH="$TMP/nobin" "$SPLITROI" slurm "$TMP/mini/study.ini" --out "$TMP/mini/res"
expect_out "^1 of 2 subjects need analysis; 1 complete" "a second slurm run leaves out the complete subject"
if [ "$(cat "$S/subjects.txt")" = "02" ]; then ok "the new array holds only sub-02"; else notok "subjects.txt: $(cat "$S/subjects.txt")"; fi

# ---- --status without a cluster: the task script run by hand, a stand-in squeue ----
cp -r "$TMP/mini" "$TMP/bad"
rm -rf "$TMP/bad/res"
bold=$(ls "$TMP"/bad/data/sub-02/func/*task-tones*_bold.nii* | head -1)
truncate -s 2000 "$bold"
B=$TMP/bad/res/slurm
rm -f "$TMP/sbatch.calls"
run $FAKE "$SPLITROI" slurm "$TMP/bad/study.ini" --out "$TMP/bad/res" --submit --quiet --cpus 1
read -r barr bgrp <"$TMP/out"
printf '#!/bin/sh\n[ -s "%s/queue" ] && cat "%s/queue"\nexit 0\n' "$TMP" "$TMP" >"$TMP/fakebin/squeue"
chmod +x "$TMP/fakebin/squeue"
printf '%s_1 PENDING\n%s_2 RUNNING\n' "$barr" "$barr" >"$TMP/queue"
run $FAKE "$SPLITROI" slurm "$TMP/bad/study.ini" --out "$TMP/bad/res" --status
expect_status 0 "--status while the tasks are queued"
expect_out "^  running +1$" "the running task is counted (from squeue)"
expect_out "^pending: sub-01$" "the pending one is named"
rm -f "$TMP/queue"
run env SLURM_ARRAY_TASK_ID=1 SLURM_ARRAY_JOB_ID="$barr" bash "$B/subjects-1.sbatch"
expect_status 0 "task 1 of the array script, run by hand, analyzes sub-01"
run env SLURM_ARRAY_TASK_ID=2 SLURM_ARRAY_JOB_ID="$barr" bash "$B/subjects-1.sbatch"
expect_status 1 "task 2 fails on sub-02's cut run"
expect_out "^sub-02: status 1 " "and says so in the task's own output"
last=$(tail -2 "$B/logs/sub-02.log" | head -1)
case $last in *sub-02*) ok "sub-02's log ends with analyze's message about it" ;; *) notok "log: $(cat "$B/logs/sub-02.log")" ;; esac
run $FAKE "$SPLITROI" slurm "$TMP/bad/study.ini" --out "$TMP/bad/res" --status
expect_out "^  complete +1$" "--status: one complete"
expect_out "^  failed +1$" "one failed"
if grep -qF "failed: sub-02 (job ${barr}_2, log $B/logs/sub-02.log): $last" "$TMP/out"; then
	ok "the failed subject is named with its job and its log's last line"
else
	notok "status: $(cat "$TMP/out"); wanted the line: $last"
fi
printf '%s_2 PENDING\n' "$barr" >"$TMP/queue"
run $FAKE "$SPLITROI" slurm "$TMP/bad/study.ini" --out "$TMP/bad/res"
expect_out "^0 of 2 subjects need analysis; 1 complete" "a subject whose task is still queued goes into no new array"
expect_out "^1 more are still pending or running in the queue: left out" "and that is said"
rm -f "$TMP/queue"
run env PATH="$TMP/nobin" "$SPLITROI" slurm "$TMP/bad/study.ini" --out "$TMP/bad/res" --status --submit
expect_status 2 "--status with --submit is a usage error"

# ---- a real cluster ----
if [ "${SPLITROI_TEST_LEVEL:-}" != full ]; then
	echo "skip - the SLURM cluster runs only at SPLITROI_TEST_LEVEL=full"
	exit 0
fi
if [ "$(id -u)" -ne 0 ]; then
	echo "skip - the SLURM cluster test needs root (it installs and starts munged, slurmctld, slurmd)"
	exit 0
fi
if ! cluster_install; then
	notok "could not install slurm-wlm and munge"
	exit 1
fi
if ! cluster_start "$TMP/cluster" 2>"$TMP/cluster.err"; then
	notok "the SLURM daemons did not start:"
	sed 's/^/    /' "$TMP/cluster.err"
	exit 1
fi
ok "single-node cluster up (munged, slurmctld, slurmd)"

# Waits for jobs (comma list) to leave the queue; bounded at $2 seconds.
wait_jobs() {
	local t=0
	while [ -n "$(squeue -h -j "$1" 2>/dev/null)" ]; do
		sleep 2
		t=$((t + 2))
		if [ "$t" -ge "$2" ]; then
			squeue >&2
			return 1
		fi
	done
	return 0
}

id=$(sbatch --parsable --mem=64M -o "$TMP/hostname.out" --wrap hostname 2>"$TMP/err")
if [ -n "$id" ] && wait_jobs "$id" 60 && [ "$(cat "$TMP/hostname.out" 2>/dev/null)" = "$(hostname)" ]; then
	ok "a trivial job runs on the node"
else
	notok "trivial job: id '$id', $(cat "$TMP/err" "$TMP/hostname.out" 2>&1)"
	cluster_logs
	exit 1
fi

# ---- 1,200 subjects under SLURM's default limits: accepted, the group job after every array ----
if scontrol show config | grep -Eq '^MaxArraySize += 1001$'; then ok "slurmctld runs with the default MaxArraySize 1001"; else notok "MaxArraySize: $(scontrol show config | grep MaxArraySize)"; fi
study_links "$TMP/mini" 1200 "$TMP/s1200"
run "$SPLITROI" slurm "$TMP/s1200/study.ini" --out "$TMP/s1200/res" --submit --cpus 1 --mem 64M --quiet
expect_status 0 "1,200 subjects submitted to slurmctld"
read -r -a ids <"$TMP/out"
if [ "${#ids[@]}" -eq 3 ]; then
	ok "two arrays (1000 and 200 tasks) and the group job: ${ids[*]}"
	dep=$(scontrol show job "${ids[2]}" | grep -o 'Dependency=[^ ]*')
	case $dep in
	*"afterany:${ids[0]}_*"*"afterany:${ids[1]}_*"*) ok "the group job depends on both arrays ($dep)" ;;
	*) notok "group job dependency: $dep" ;;
	esac
	n=$(squeue -h -r -t all -j "${ids[0]},${ids[1]}" | wc -l)
	if [ "$n" -eq 1200 ]; then ok "the scheduler holds 1,200 array tasks"; else notok "tasks queued: $n"; fi
	run "$SPLITROI" slurm "$TMP/s1200/study.ini" --out "$TMP/s1200/res" --status
	if grep -Eq '^  failed +0$' "$TMP/out" && grep -Eq '^  not started +0$' "$TMP/out"; then
		ok "--status finds every subject queued, running or complete"
	else
		notok "status of the 1,200: $(head -8 "$TMP/out")"
	fi
	scancel "${ids[@]}"
	wait_jobs "${ids[0]},${ids[1]},${ids[2]}" 60 || notok "the 1,200-subject jobs did not leave the queue"
else
	notok "job ids: $(cat "$TMP/out" "$TMP/err")"
fi

# ---- MaxArraySize 5: 12 subjects in three arrays, tables equal to a local run ----
if cluster_set MaxArraySize 5; then ok "slurmctld reconfigured to MaxArraySize 5"; else notok "MaxArraySize not set: $(scontrol show config | grep MaxArraySize)"; fi
run "$SPLITROI" simulate --out "$TMP/demo" --subjects 4 --quiet
expect_status 0 "simulate a 4-subject study"
study_links "$TMP/demo" 12 "$TMP/d12"
run "$SPLITROI" analyze "$TMP/d12/study.ini" --out "$TMP/local" --quiet
expect_status 0 "local analyze of a 12-subject study (its subjects link to the 4)"
run "$SPLITROI" slurm "$TMP/d12/study.ini" --out "$TMP/onslurm" --cpus 1 --time 10:00
expect_out "cluster limits \(scontrol show config\): MaxArraySize 5" "splitroi slurm reads MaxArraySize 5 from the cluster"
expect_out "12 task\(s\) of 1 subject\(s\) in 3 array\(s\)" "and plans three arrays"
run "$SPLITROI" slurm "$TMP/d12/study.ini" --out "$TMP/onslurm" --submit --cpus 1 --time 10:00 --quiet
expect_status 0 "splitroi slurm --submit: every array accepted"
read -r -a ids <"$TMP/out"
if [ "${#ids[@]}" -eq 4 ]; then
	dep=$(scontrol show job "${ids[3]}" | grep -o 'Dependency=[^ ]*')
	case $dep in
	*"afterany:${ids[0]}_*"*"afterany:${ids[1]}_*"*"afterany:${ids[2]}_*"*) ok "three arrays; the group job depends on all three ($dep)" ;;
	*) notok "group job dependency: $dep" ;;
	esac
else
	notok "job ids: $(cat "$TMP/out" "$TMP/err")"
fi
all=$(echo "${ids[*]}" | tr ' ' ',')
if [ "${#ids[@]}" -eq 4 ] && wait_jobs "$all" 600; then
	ok "the arrays and the group job finished within 10 minutes"
else
	notok "jobs '$all' did not finish: $(cat "$TMP/err")"
	cluster_logs
fi
for f in responses.csv group.csv; do
	if cmp -s "$TMP/local/$f" "$TMP/onslurm/$f"; then
		ok "$f from the cluster equals the local run byte for byte"
	else
		notok "$f differs from the local run: $(cmp "$TMP/local/$f" "$TMP/onslurm/$f" 2>&1); logs: $(tail -5 "$TMP"/onslurm/slurm/logs/* 2>&1 | head -c 1500)"
	fi
done
n=$(ls "$TMP"/onslurm/slurm/logs/sub-*.log 2>/dev/null | wc -l)
if [ "$n" -eq 12 ]; then ok "one log per subject"; else notok "subject logs: $n"; fi
if grep -qs "^#SBATCH --array=1-4$" "$TMP/onslurm/slurm/subjects-3.sbatch"; then ok "the third array holds four tasks"; else notok "array 3: $(grep array "$TMP"/onslurm/slurm/subjects-*.sbatch)"; fi

run "$SPLITROI" slurm "$TMP/d12/study.ini" --out "$TMP/onslurm" --submit --cpus 1
expect_status 0 "resubmitting a finished study"
expect_out "^0 of 12 subjects need analysis" "finds every subject complete"
expect_out "submitted: group step as job" "and submits only the group step"
grp=$(sed -n 's/^submitted: group step as job \([0-9]*\).*/\1/p' "$TMP/out")
[ -n "$grp" ] && wait_jobs "$grp" 120

# one subject's run cut short: its task fails, the others and the group step do not
cp -r "$TMP/demo" "$TMP/broken"
bold=$(ls "$TMP"/broken/data/sub-02/func/*task-tones*_bold.nii* | head -1)
truncate -s 2000 "$bold"
run "$SPLITROI" slurm "$TMP/broken/study.ini" --out "$TMP/brokenout" --submit --cpus 1 --time 10:00 --quiet
expect_status 0 "submit the study with a broken subject"
read -r arr grp <"$TMP/out"
if [ -n "${arr:-}" ] && [ -n "${grp:-}" ] && wait_jobs "$arr,$grp" 600; then
	ok "with a failing task the group job still ran (afterany)"
else
	notok "jobs '${arr:-}' '${grp:-}' did not finish: $(cat "$TMP/err")"
	cluster_logs
fi
good=0
for s in 01 03 04; do
	[ -s "$TMP/brokenout/sub-$s/run.json" ] && [ -s "$TMP/brokenout/sub-$s/responses.csv" ] && good=$((good + 1))
done
if [ "$good" -eq 3 ] && [ ! -e "$TMP/brokenout/sub-02/run.json" ]; then ok "the other three subjects completed, sub-02 did not"; else notok "complete subjects: $good of 3; $(ls "$TMP/brokenout" 2>&1)"; fi
L=$TMP/brokenout/slurm/logs/sub-02.log
if grep -qs 'sub-02 failed' "$L"; then ok "sub-02's log says why it failed"; else notok "no failure in sub-02's log: $(cat "$L" 2>&1 | head -c 800)"; fi
if [ -s "$TMP/brokenout/group.csv" ] && grep -q '^sub-02,missing' "$TMP/brokenout/group_subjects.csv" &&
	grep -qs 'sub-02' "$TMP"/brokenout/slurm/logs/group-*.out; then
	ok "group.csv written; sub-02 listed as missing there and in the group log"
else
	notok "group after a failure: $(cat "$TMP/brokenout/group_subjects.csv" "$TMP"/brokenout/slurm/logs/group-*.out 2>&1 | head -c 800)"
fi
if awk -F, 'NR > 1 && $NF !~ /incomplete/ { bad = 1 } END { exit bad }' "$TMP/brokenout/group.csv"; then
	ok "every group row is marked incomplete"
else
	notok "group rows not marked incomplete: $(head -3 "$TMP/brokenout/group.csv")"
fi
# the three good subjects agree with the local run (sub-01, 03, 04 of the 12 link to the same data)
if awk -F, 'NR == 1 || $1 == "sub-01" || $1 == "sub-03" || $1 == "sub-04"' "$TMP/local/responses.csv" | cmp -s - "$TMP/brokenout/responses.csv"; then
	ok "responses.csv holds exactly the local rows of the three good subjects"
else
	notok "responses.csv of the broken study differs from the local rows of sub-01, 03 and 04"
fi
run "$SPLITROI" slurm "$TMP/broken/study.ini" --out "$TMP/brokenout" --status
last=$(tail -2 "$L" | head -1)
if grep -Eq '^  complete +3$' "$TMP/out" && grep -Eq '^  failed +1$' "$TMP/out" &&
	grep -qF "failed: sub-02 (job ${arr}_2, log $L): $last" "$TMP/out"; then
	ok "--status: 3 complete, sub-02 failed with its job and its log's last line"
else
	notok "status: $(cat "$TMP/out" "$TMP/err"); wanted: $last"
fi
