/* slurm.c - `splitroi slurm`: a study as SLURM job arrays within the cluster's limits, then the group step; --status. */
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "../core/mem.h"
#include "../core/sbuf.h"
#include "../core/strv.h"
#include "../io/afile.h"
#include "../io/bids.h"
#include "../io/nii.h"
#include "../io/readall.h"
#include "../io/study.h"
#include "../pipeline/runfit.h"
#include "../pipeline/studyset.h"
#include "cmd.h"
#include "cmdline.h"

enum { O_OUT, O_PARTITION, O_ACCOUNT, O_TIME, O_MEM, O_CPUS, O_PER_TASK, O_MAX_RUNNING, O_ARRAY_SIZE,
       O_SCRIPTS, O_SUBMIT, O_STATUS, O_BIN, O_QUIET, O_N };

static const cmdline_opt opts[O_N + 1] = {
	[O_OUT] = { "out", "DIR", "results folder (default: the study's 'out'), as for analyze" },
	[O_PARTITION] = { "partition", "NAME", "SLURM partition for every job (default: the cluster's default)" },
	[O_ACCOUNT] = { "account", "NAME", "SLURM account to charge" },
	[O_TIME] = { "time", "LIMIT", "time limit per array task, SLURM syntax, e.g. 30:00 or 2:00:00 (default: suggested)" },
	[O_MEM] = { "mem", "SIZE", "memory per array task, e.g. 800M or 4G (default: suggested from the run sizes)" },
	[O_CPUS] = { "cpus", "N", "CPUs per array task, used as analyze --threads (default 2)" },
	[O_PER_TASK] = { "per-task", "K", "subjects one after another in each array task (default 1, more when the queue limits need it)" },
	[O_MAX_RUNNING] = { "max-running", "N", "at most N tasks of the study run at once (SLURM's %N; several arrays then run one after another)" },
	[O_ARRAY_SIZE] = { "array-size", "N", "most tasks in one array (default: the cluster's MaxArraySize - 1, else SLURM's default 1000)" },
	[O_SCRIPTS] = { "out-scripts", "DIR", "where the scripts and logs go (default OUT/slurm)" },
	[O_SUBMIT] = { "submit", NULL, "submit the arrays and the group job with sbatch (the group job waits for every array)" },
	[O_STATUS] = { "status", NULL, "print where the study stands: complete, failed (with the log's last line), running, pending, not started" },
	[O_BIN] = { "splitroi", "PATH", "the splitroi binary the jobs run (default: this one)" },
	[O_QUIET] = { "quiet", NULL, "print only the job ids (with --submit) and errors" },
	[O_N] = { NULL, NULL, NULL },
};

static const cmdline_spec spec = {
	"slurm", "STUDY.ini [options]",
	"Writes SLURM batch scripts for a study: job arrays whose tasks each analyze one\n"
	"subject (or --per-task K, one after another) whose outputs are missing or out of\n"
	"date ('splitroi analyze STUDY --subjects LABEL --no-group'), split so that every\n"
	"array fits the cluster's MaxArraySize and the whole study its MaxJobCount (read\n"
	"with 'scontrol show config'; SLURM's defaults when that cannot be run), and a\n"
	"group job that waits for every array (afterany: a failed subject does not hold it\n"
	"back) and runs 'splitroi analyze STUDY --collect', which rebuilds\n"
	"OUT/responses.csv and the group tables from the complete subjects. Memory per\n"
	"task is suggested from the largest subject's runs, time from the task's subjects.\n"
	"Each subject's output goes to OUT/slurm/logs/sub-LABEL.log. --status reports\n"
	"where the study stands. Run the command again after a failure: only subjects\n"
	"without complete outputs are submitted again.",
	opts,
};

/* SLURM's defaults (slurm.conf(5)): MaxArraySize 1001 (indices 0-1000), MaxJobCount 10000. */
#define SLURM_DEFAULT_MAX_ARRAY_SIZE 1001
#define SLURM_DEFAULT_MAX_JOB_COUNT 10000
/*
 * sbatch refuses batch scripts over 4 MB by default (SchedulerParameters=max_script_size);
 * each array script lists its tasks' labels, so an array closes before 1 MB of them.
 */
#define ARRAY_LABEL_BYTES (1024 * 1024)

/*
 * Memory and time per subject task, measured with GNU time (`/usr/bin/time -f %M`)
 * on `splitroi analyze STUDY --subjects 01 --threads T --no-group --quiet` for
 * studies from `splitroi simulate` (float32 .nii.gz; runs = localizer plus
 * measured task), on a 2-core x86-64 virtual machine (24 GiB, Debian 12).
 * Memory, 2026-12-03 (200 volumes a run; the kept series wait in a temporary
 * file, so the volumes do not count):
 *
 *   grid                       voxels   runs  threads  peak RSS
 *   small    24x28x20           13440     6      1      13.7 MiB
 *   small    24x28x20           13440     6      2      17.6 MiB
 *   standard 91x109x91         902629     4     1, 2   339.6 MiB
 *   standard 91x109x91         902629     6     1, 2   357.5 MiB
 *
 * Each run kept adds ~20 bytes a voxel (a localizer run keeps its selection
 * contrast on the whole grid, 16 bytes, and the rest at the parcel voxels; a
 * measured run ~10), each run being fitted at once ~303 bytes a voxel (its
 * sums, 2 rank doubles a voxel, and running sums), on ~10 MiB of program.
 * Runs are fitted side by side only while together they hold at most 2^20
 * voxels (RUNFIT_SIDE_VOXELS), so
 *   bytes = 10 MiB + voxels * (20 * runs + 303 * min(threads, runs, 2^20 / voxels))
 * which gives 15.4, 19.3, 339.6, 374.0 MiB for the rows above (at or above each).
 * The suggestion adds 50% headroom and rounds up to a whole 256 MiB.
 * Time, 2026-12-01 (120 volumes a run): ~3.3e-8 s a voxel-volume of wall time
 * at one thread (21.8 s / (902629 * 6 * 120)); a second thread did not help on
 * this machine, so the suggestion does not divide by the CPUs, takes 4x
 * headroom (shared nodes and file systems are slower) and never asks for less
 * than 30 minutes.
 */
#define MEM_BASE (10.0 * 1024 * 1024)
#define MEM_PER_VOXEL_RUN 20.0
#define MEM_PER_VOXEL_THREAD 303.0
#define TIME_PER_VOXEL_VOLUME_S 3.3e-8

/* What one subject's runs weigh: the inputs of the suggestion. */
typedef struct sizes {
	double voxels;       /* largest run's voxel count */
	double runs;         /* every task's runs */
	double volumes;      /* voxels times volumes, summed over runs */
} sizes;

/* Shell single quotes: safe for any path in a generated script. Caller frees. */
static char *shq(const char *s)
{
	size_t n = 3, i, k = 0;
	char *q;

	for (i = 0; s[i]; i++)
		n += s[i] == '\'' ? 4 : 1;
	q = xmalloc(n);
	q[k++] = '\'';
	for (i = 0; s[i]; i++) {
		if (s[i] == '\'') {
			memcpy(q + k, "'\\''", 4);
			k += 4;
		} else {
			q[k++] = s[i];
		}
	}
	q[k++] = '\'';
	q[k] = 0;
	return q;
}

/* An absolute path for dir (which may not exist yet). Caller frees. */
static char *absolute(const char *p)
{
	char cwd[4096], *r;

	if (p[0] == '/' || !getcwd(cwd, sizeof cwd))
		return xstrdup(p);
	r = xmalloc(strlen(cwd) + strlen(p) + 2);
	sprintf(r, "%s/%s", cwd, p);
	return r;
}

/* The running binary (/proc/self/exe), so the jobs run the same version. Caller frees. */
static char *self_path(const char *argv0)
{
	char buf[4096];
	ssize_t n = readlink("/proc/self/exe", buf, sizeof buf - 1);

	if (n > 0) {
		buf[n] = 0;
		return xstrdup(buf);
	}
	return absolute(argv0);
}

/* 1 when an executable called name is on PATH. */
static int on_path(const char *name)
{
	const char *path = getenv("PATH"), *p;
	char buf[4096];

	if (!path)
		return 0;
	for (p = path; *p;) {
		size_t len = strcspn(p, ":");

		snprintf(buf, sizeof buf, "%.*s/%s", (int)len, len ? p : ".", name);
		if (access(buf, X_OK) == 0)
			return 1;
		p += len;
		if (*p == ':')
			p++;
	}
	return 0;
}

/* Sums one subject's runs over the localizer and measured tasks from the NIfTI headers. */
static sr_status subject_sizes(const study *st, const char *label, sizes *z, sr_err *e)
{
	size_t t, ntasks = 1 + st->nmeasures;

	memset(z, 0, sizeof *z);
	for (t = 0; t < ntasks; t++) {
		const char *task = t ? st->measures[t - 1].task : st->loc_task;
		bids_run *runs;
		size_t nr, r;
		sr_status rc = study_runs(st, label, task, &runs, &nr, e);

		if (rc)
			return rc;
		for (r = 0; r < nr; r++) {
			nii_info info;
			double nv;

			rc = nii_read_info(runs[r].bold, &info, e);
			if (rc) {
				bids_runs_release(runs, nr);
				return rc;
			}
			nv = (double)nii_nvox(&info.grid);
			if (nv > z->voxels)
				z->voxels = nv;
			z->runs += 1;
			z->volumes += nv * (double)info.nt;
		}
		bids_runs_release(runs, nr);
	}
	return SR_OK;
}

/* The memory model above, 50% headroom, in whole 256 MiB steps; returned in MiB. */
static long suggest_mem_mib(const sizes *z, long cpus)
{
	double side = floor((double)RUNFIT_SIDE_VOXELS / (z->voxels > 1 ? z->voxels : 1));
	double inflight = (double)cpus < z->runs ? (double)cpus : z->runs;

	if (side < 1)
		side = 1;
	if (inflight > side)
		inflight = side;
	double bytes = (MEM_BASE + z->voxels * (MEM_PER_VOXEL_RUN * z->runs +
						MEM_PER_VOXEL_THREAD * inflight)) * 1.5;
	double mib = ceil(bytes / (256.0 * 1024 * 1024)) * 256.0;

	return (long)mib;
}

/* SLURM's memory syntax: digits with an optional K, M, G or T. */
static int valid_mem(const char *s)
{
	size_t i = 0;

	while (s[i] >= '0' && s[i] <= '9')
		i++;
	if (i == 0 || i > 12)
		return 0;
	if (!s[i])
		return 1;
	return strchr("KMGTkmgt", s[i]) && !s[i + 1];
}

/* SLURM's time syntax: digits, ':' and one '-' (days-hours:minutes:seconds and shorter forms). */
static int valid_time(const char *s)
{
	size_t i, dashes = 0, colons = 0;

	if (!*s || strlen(s) > 20)
		return 0;
	for (i = 0; s[i]; i++) {
		if (s[i] == '-')
			dashes++;
		else if (s[i] == ':')
			colons++;
		else if (s[i] < '0' || s[i] > '9')
			return 0;
		if ((s[i] == '-' || s[i] == ':') && (i == 0 || !s[i + 1] || s[i - 1] == ':' || s[i - 1] == '-'))
			return 0;
	}
	return dashes <= 1 && colons <= 2;
}

/* Names in #SBATCH lines: keep letters, digits, '.', '_' and '-'. */
static int valid_name(const char *s)
{
	size_t i;

	if (!*s)
		return 0;
	for (i = 0; s[i]; i++)
		if (!(s[i] == '.' || s[i] == '_' || s[i] == '-' || (s[i] >= '0' && s[i] <= '9') ||
		      (s[i] >= 'a' && s[i] <= 'z') || (s[i] >= 'A' && s[i] <= 'Z')))
			return 0;
	return 1;
}

/* The study file's base name without .ini, fit for a job name. Caller frees. */
static char *job_name(const char *study_path)
{
	const char *b = strrchr(study_path, '/');
	char *n, *dot;
	size_t i;

	n = xmalloc(strlen(b ? b + 1 : study_path) + 10);
	sprintf(n, "splitroi-%s", b ? b + 1 : study_path);
	dot = strrchr(n, '.');
	if (dot && strcmp(dot, ".ini") == 0)
		*dot = 0;
	for (i = 0; n[i]; i++)
		if (!valid_name((char[]){ n[i], 0 }))
			n[i] = '_';
	return n;
}

/* Writes text to path atomically; mode 0755 when exec is set. */
static sr_status write_file(const char *path, const char *text, int exec, sr_err *e)
{
	afile a;
	sr_status rc = afile_open(&a, path, e);

	if (rc)
		return rc;
	fputs(text, a.f);
	rc = afile_commit(&a, e);
	if (!rc && chmod(path, exec ? 0755 : 0644) != 0)
		return sr_fail(e, SR_EIO, "%s: cannot set permissions: %s", path, strerror(errno));
	return rc;
}

/* Runs cmd through the shell, its standard output into out (reset first). Returns its exit status, -1 if it did not run. */
static int run_capture(const char *cmd, sbuf *out)
{
	char buf[4096];
	size_t k;
	FILE *p;
	int st;

	out->n = 0;
	sbuf_printf(out, "%s", "");
	fflush(stdout);
	p = popen(cmd, "r");
	if (!p)
		return -1;
	while ((k = fread(buf, 1, sizeof buf - 1, p)) > 0) {
		buf[k] = 0;
		sbuf_printf(out, "%s", buf);
	}
	st = pclose(p);
	if (st == -1 || !WIFEXITED(st))
		return -1;
	return WEXITSTATUS(st);
}

/* The cluster's limits on what may be queued. */
typedef struct limits {
	long max_array_size;   /* MaxArraySize: array indices 0 .. this - 1 */
	long max_job_count;    /* MaxJobCount: every array task counts as a job */
	long max_submit;       /* MaxSubmitJobs of the user's associations; 0 = none known */
	int from_cluster;      /* 1 when read from `scontrol show config` */
} limits;

/* The number after "key = " on a line of `scontrol show config`; -1 when absent or not a number. */
static long config_value(const char *text, const char *key)
{
	size_t klen = strlen(key);
	const char *p;

	for (p = text; p && *p; p = strchr(p, '\n'), p = p ? p + 1 : NULL) {
		const char *v = p + klen;

		if (strncmp(p, key, klen) != 0 || (*v != ' ' && *v != '='))
			continue;
		v += strspn(v, " =");
		if (*v < '0' || *v > '9')
			return -1;
		return strtol(v, NULL, 10);
	}
	return -1;
}

/*
 * Reads MaxArraySize and MaxJobCount from `scontrol show config`, and, when accounting
 * goes through slurmdbd, the smallest MaxSubmitJobs of the user's associations.
 * Without scontrol (or when it fails) SLURM's defaults stand.
 */
static void read_limits(limits *L)
{
	sbuf out = { 0 };
	long v;

	L->max_array_size = SLURM_DEFAULT_MAX_ARRAY_SIZE;
	L->max_job_count = SLURM_DEFAULT_MAX_JOB_COUNT;
	L->max_submit = 0;
	L->from_cluster = 0;
	if (!on_path("scontrol") || run_capture("scontrol show config 2>/dev/null", &out) != 0) {
		free(out.p);
		return;
	}
	v = config_value(out.p, "MaxArraySize");
	if (v >= 0) {
		L->max_array_size = v;
		L->from_cluster = 1;
	}
	v = config_value(out.p, "MaxJobCount");
	if (v > 0)
		L->max_job_count = v;
	v = config_value(out.p, "MaxSubmitJobs");
	if (v > 0)
		L->max_submit = v;
	if (strstr(out.p, "accounting_storage/slurmdbd") && on_path("sacctmgr") &&
	    run_capture("timeout 20 sacctmgr -n -P show assoc where user=\"$(id -un)\" format=MaxSubmit 2>/dev/null",
			&out) == 0) {
		const char *p;

		for (p = out.p; *p; p += strcspn(p, "\n"), p += *p == '\n') {
			v = (*p >= '0' && *p <= '9') ? strtol(p, NULL, 10) : 0;
			if (v > 0 && (L->max_submit == 0 || v < L->max_submit))
				L->max_submit = v;
		}
	}
	free(out.p);
}

/* One array task: todo[first .. first + n), run one after another. */
typedef struct task {
	size_t first, n;
} task;

/* One job array: tasks[first .. first + n), its task k (1-based) being tasks[first + k - 1]. */
typedef struct array {
	size_t first, n;
} array;

/* Everything one run of the command decides and writes. */
typedef struct plan {
	const char *val[O_N];
	int quiet;
	long cpus, per_task, max_running, array_size;
	study st;
	int study_loaded;
	char **subs, **todo;
	size_t nsub, ntodo;
	size_t nqueued;      /* incomplete, but their task is still pending or running */
	sizes *z;            /* per todo subject */
	int *z_ok;           /* its headers could be read */
	sizes worst;
	const char *largest;
	limits lim;
	task *tasks;
	size_t ntasks;
	array *arrays;
	size_t narrays;
	char *study_abs, *dir, *logs, *bin, *name, *q_bin, *q_study, *q_out;
	char memtxt[32], timetxt[32];
	double task_seconds; /* the longest task's suggested time */
} plan;

static void plan_release(plan *P)
{
	free(P->z);
	free(P->z_ok);
	free(P->tasks);
	free(P->arrays);
	free(P->study_abs);
	free(P->dir);
	free(P->logs);
	free(P->bin);
	free(P->name);
	free(P->q_bin);
	free(P->q_study);
	free(P->q_out);
	free(P->todo);
	strv_free_array(P->subs, P->nsub);
	if (P->study_loaded)
		study_release(&P->st);
}

/* Checks the option values; 0 ok, 2 usage error (printed). */
static int check_options(plan *P)
{
	const char *const *val = P->val;

	P->cpus = 2;
	P->per_task = 0;
	P->max_running = 0;
	P->array_size = 0;
	if (val[O_CPUS] && cmdline_int("slurm", "cpus", val[O_CPUS], 1, 256, &P->cpus))
		return 2;
	if (val[O_PER_TASK] && cmdline_int("slurm", "per-task", val[O_PER_TASK], 1, 1000000, &P->per_task))
		return 2;
	if (val[O_MAX_RUNNING] && cmdline_int("slurm", "max-running", val[O_MAX_RUNNING], 1, 100000000, &P->max_running))
		return 2;
	if (val[O_ARRAY_SIZE] && cmdline_int("slurm", "array-size", val[O_ARRAY_SIZE], 1, 100000000, &P->array_size))
		return 2;
	if (val[O_MEM] && !valid_mem(val[O_MEM])) {
		cmdline_error("slurm", "--mem '%s': give whole units, e.g. 800M or 4G", val[O_MEM]);
		return 2;
	}
	if (val[O_TIME] && !valid_time(val[O_TIME])) {
		cmdline_error("slurm", "--time '%s': give minutes, MM:SS, HH:MM:SS or D-HH:MM:SS", val[O_TIME]);
		return 2;
	}
	if ((val[O_PARTITION] && !valid_name(val[O_PARTITION])) ||
	    (val[O_ACCOUNT] && !valid_name(val[O_ACCOUNT]))) {
		int part = val[O_PARTITION] && !valid_name(val[O_PARTITION]);

		cmdline_error("slurm", "--%s '%s': use letters, digits, '.', '_' and '-' only",
			      part ? "partition" : "account", part ? val[O_PARTITION] : val[O_ACCOUNT]);
		return 2;
	}
	if (val[O_STATUS] && val[O_SUBMIT]) {
		cmdline_error("slurm", "--status only reads; give it without --submit");
		return 2;
	}
	P->quiet = val[O_QUIET] != NULL;
	return 0;
}

/* Loads the study, its subjects and the folders; 0 ok, 1 bad input (printed). */
static int load_study(plan *P, const char *path)
{
	study_problems probs = { 0 };
	sr_err e;
	size_t i;

	if (study_load(path, &P->st, &probs) != SR_OK) {
		for (i = 0; i < probs.n; i++)
			fprintf(stderr, "splitroi slurm: %s\n", probs.msg[i]);
		study_problems_release(&probs);
		return 1;
	}
	study_problems_release(&probs);
	P->study_loaded = 1;
	if (P->val[O_OUT] || P->st.out[0] != '/') {
		char *a = absolute(P->val[O_OUT] ? P->val[O_OUT] : P->st.out);

		free(P->st.out);
		P->st.out = a;
	}
	P->study_abs = absolute(path);
	sr_err_init(&e, NULL, NULL);
	if (studyset_subjects(&P->st, &P->subs, &P->nsub, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		return 1;
	}
	if (P->nsub == 0) {
		fprintf(stderr, "splitroi slurm: %s: no subjects (sub-*) found\n", P->st.bids);
		return 1;
	}
	P->dir = P->val[O_SCRIPTS] ? absolute(P->val[O_SCRIPTS]) : NULL;
	if (!P->dir) {
		P->dir = xmalloc(strlen(P->st.out) + 8);
		sprintf(P->dir, "%s/slurm", P->st.out);
	}
	P->logs = xmalloc(strlen(P->dir) + 8);
	sprintf(P->logs, "%s/logs", P->dir);
	P->name = job_name(P->study_abs);
	return 0;
}

/* ---- --status ---- */

enum { ST_COMPLETE, ST_FAILED, ST_RUNNING, ST_PENDING, ST_STALE, ST_NOT_STARTED, ST_N };
static const char *const state_names[ST_N] = { "complete", "failed", "running", "pending",
					       "out of date", "not started" };

/* One subject's last submission (from jobs.txt) and where it stands. */
typedef struct substate {
	long job, task;      /* 0 when never submitted */
	int state;
	char line[512];      /* failed: the last line of its log (or why) */
} substate;

/* A job array task the scheduler reported: "JOB_TASK STATE". */
typedef struct qentry {
	long job, task;
	char state[24];
} qentry;

static int cmp_qentry(const void *a, const void *b)
{
	const qentry *x = a, *y = b;

	if (x->job != y->job)
		return x->job < y->job ? -1 : 1;
	return (x->task > y->task) - (x->task < y->task);
}

static int cmp_label(const void *key, const void *elem)
{
	return strcmp(key, *(char *const *)elem);
}

/* Parses "JOB_TASK<sep>STATE" lines (squeue -o '%i %T', sacct -P) into a sorted list; others are skipped. */
static qentry *parse_queue(const char *text, size_t *n)
{
	qentry *q = NULL;
	size_t cap = 0;
	const char *p;

	*n = 0;
	for (p = text; *p; p += strcspn(p, "\n"), p += *p == '\n') {
		qentry x;
		char *end;

		x.job = strtol(p, &end, 10);
		if (end == p || *end != '_')
			continue;
		x.task = strtol(end + 1, &end, 10);
		if (*end != ' ' && *end != '|')
			continue;
		snprintf(x.state, sizeof x.state, "%.*s", (int)strcspn(end + 1, " |+\n"), end + 1);
		XGROW(q, *n, cap);
		q[(*n)++] = x;
	}
	if (*n)
		qsort(q, *n, sizeof *q, cmp_qentry);
	return q;
}

static const qentry *find_queue(const qentry *q, size_t n, long job, long tid)
{
	qentry key;

	key.job = job;
	key.task = tid;
	return n ? bsearch(&key, q, n, sizeof *q, cmp_qentry) : NULL;
}

/* Reads jobs.txt: each subject's latest submitted job and tid. */
static void read_record(const plan *P, substate *ss)
{
	char path[4096], line[65536];
	FILE *f;

	snprintf(path, sizeof path, "%s/jobs.txt", P->dir);
	f = fopen(path, "r");
	if (!f)
		return;
	while (fgets(line, sizeof line, f)) {
		char *save = NULL, *tok, *end;
		long job = strtol(line, &end, 10), tid;

		if (end == line || *end != ' ')
			continue;
		tid = strtol(end + 1, &end, 10);
		if (*end != ' ')
			continue;   /* the group job's line */
		for (tok = strtok_r(end, " \n", &save); tok; tok = strtok_r(NULL, " \n", &save)) {
			char **hit = bsearch(tok, P->subs, P->nsub, sizeof *P->subs, cmp_label);

			if (hit) {
				ss[hit - P->subs].job = job;
				ss[hit - P->subs].task = tid;
			}
		}
	}
	fclose(f);
}

/* The scheduler's view of this study's jobs (squeue by job name); NULL when squeue is not on PATH or fails. */
static qentry *read_queue(const plan *P, size_t *n)
{
	char *q_name = shq(P->name), *cmd = xmalloc(strlen(q_name) + 64);
	sbuf out = { 0 };
	qentry *q = NULL;

	*n = 0;
	sprintf(cmd, "squeue -h -r -o '%%i %%T' --name=%s 2>/dev/null", q_name);
	if (on_path("squeue") && run_capture(cmd, &out) == 0)
		q = parse_queue(out.p, n);
	free(cmd);
	free(q_name);
	free(out.p);
	return q;
}

/* 1 when the scheduler still has the task as pending or running (not ended). */
static int is_live(const qentry *x, int *pending)
{
	static const char *const running[] = { "RUNNING", "CONFIGURING", "COMPLETING", "SUSPENDED", NULL };
	size_t i;

	*pending = x && strcmp(x->state, "PENDING") == 0;
	if (!x || *pending)
		return *pending;
	for (i = 0; running[i]; i++)
		if (strcmp(x->state, running[i]) == 0)
			return 1;
	return 0;
}

/*
 * The subjects without complete, up-to-date outputs (analyze's skip rule) and their
 * sizes from the run headers (each read once). 0 ok, 1 bad input (printed).
 */
static int find_todo(plan *P)
{
	size_t i, nq = 0;
	substate *ss = xcalloc(P->nsub, sizeof *ss);
	qentry *q;
	sr_err e;

	/* subjects whose task is still pending or running are not submitted twice */
	read_record(P, ss);
	q = read_queue(P, &nq);
	sr_err_init(&e, NULL, NULL);
	P->todo = xcalloc(P->nsub, sizeof *P->todo);
	P->z = xcalloc(P->nsub, sizeof *P->z);
	P->z_ok = xcalloc(P->nsub, sizeof *P->z_ok);
	for (i = 0; i < P->nsub; i++) {
		size_t k = P->ntodo;
		int pending;

		if (studyset_complete(&P->st, P->subs[i]))
			continue;
		if (ss[i].job && is_live(find_queue(q, nq, ss[i].job, ss[i].task), &pending)) {
			P->nqueued++;
			continue;
		}
		if (!valid_name(P->subs[i])) {
			fprintf(stderr, "splitroi slurm: %s/sub-%s: a subject label must be letters and digits (BIDS) to go into a job script\n",
				P->st.bids, P->subs[i]);
			free(ss);
			free(q);
			return 1;
		}
		P->todo[P->ntodo++] = P->subs[i];
		if (subject_sizes(&P->st, P->subs[i], &P->z[k], &e)) {
			/* one bad subject must not hold back the others: its task reports the error */
			fprintf(stderr, "splitroi slurm: warning: sub-%s: %s (left in the array; not used for --mem)\n",
				P->subs[i], e.msg);
			continue;
		}
		P->z_ok[k] = 1;
		if (P->z[k].voxels * P->z[k].runs > P->worst.voxels * P->worst.runs) {
			P->worst.voxels = P->z[k].voxels;
			P->worst.runs = P->z[k].runs;
			P->largest = P->subs[i];
		}
		if (P->z[k].volumes > P->worst.volumes)
			P->worst.volumes = P->z[k].volumes;
	}
	free(ss);
	free(q);
	return 0;
}

/*
 * Packs the subjects into tasks (K a task) and the tasks into arrays that fit the
 * cluster's limits. 0 ok, 1 when the study cannot fit as asked (printed).
 */
static int pack(plan *P)
{
	const limits *L = &P->lim;
	long budget = L->max_job_count;
	size_t i, k, bytes = 0;

	if (L->max_submit > 0 && L->max_submit < budget)
		budget = L->max_submit;
	budget -= 1;   /* the group job */
	if (!P->array_size)
		P->array_size = L->max_array_size - 1;
	if (P->array_size < 1) {
		fprintf(stderr, "splitroi slurm: the cluster takes no job arrays (MaxArraySize = %ld); ask its administrators, or give --array-size\n",
			L->max_array_size);
		return 1;
	}
	if (budget < 1) {
		fprintf(stderr, "splitroi slurm: the cluster queues at most %ld job(s) for you: no room for the subjects and the group job\n",
			budget + 1);
		return 1;
	}
	if (!P->per_task) {
		P->per_task = 1;
		if (P->ntodo > (size_t)budget) {
			P->per_task = (long)((P->ntodo + (size_t)budget - 1) / (size_t)budget);
			if (!P->quiet)
				printf("%zu subjects exceed the %ld jobs the cluster queues at once (%s): %ld subjects a task\n",
				       P->ntodo, budget + 1, L->max_submit > 0 && L->max_submit <= L->max_job_count ? "MaxSubmitJobs" : "MaxJobCount",
				       P->per_task);
		}
	}
	P->ntasks = (P->ntodo + (size_t)P->per_task - 1) / (size_t)P->per_task;
	if (P->ntasks > (size_t)budget) {
		fprintf(stderr, "splitroi slurm: %zu tasks exceed the %ld jobs the cluster queues at once; give --per-task %zu or more\n",
			P->ntasks, budget + 1, (P->ntodo + (size_t)budget - 1) / (size_t)budget);
		return 1;
	}
	P->tasks = xcalloc(P->ntasks ? P->ntasks : 1, sizeof *P->tasks);
	P->arrays = xcalloc(P->ntasks ? P->ntasks : 1, sizeof *P->arrays);
	for (i = 0; i < P->ntasks; i++) {
		size_t tb = 0;

		P->tasks[i].first = i * (size_t)P->per_task;
		P->tasks[i].n = P->ntodo - P->tasks[i].first < (size_t)P->per_task ? P->ntodo - P->tasks[i].first : (size_t)P->per_task;
		for (k = 0; k < P->tasks[i].n; k++)
			tb += strlen(P->todo[P->tasks[i].first + k]) + 1;
		if (P->narrays == 0 || P->arrays[P->narrays - 1].n == (size_t)P->array_size ||
		    bytes + tb > ARRAY_LABEL_BYTES) {
			P->arrays[P->narrays].first = i;
			P->narrays++;
			bytes = 0;
		}
		P->arrays[P->narrays - 1].n++;
		bytes += tb;
	}
	return 0;
}

/*
 * Memory: the largest subject's by the model (subjects of a task run one after another,
 * so K of them need no more); time: the longest task's subjects added up, 4x headroom,
 * at least 30 minutes.
 */
static void suggest(plan *P)
{
	size_t i, k;

	if (P->val[O_MEM])
		snprintf(P->memtxt, sizeof P->memtxt, "%s", P->val[O_MEM]);
	else
		snprintf(P->memtxt, sizeof P->memtxt, "%ldM", suggest_mem_mib(&P->worst, P->cpus));
	P->task_seconds = 0;
	for (i = 0; i < P->ntasks; i++) {
		double s = 0;

		for (k = P->tasks[i].first; k < P->tasks[i].first + P->tasks[i].n; k++)
			s += 4.0 * TIME_PER_VOXEL_VOLUME_S * (P->z_ok[k] ? P->z[k].volumes : P->worst.volumes);
		if (s > P->task_seconds)
			P->task_seconds = s;
	}
	if (P->val[O_TIME]) {
		snprintf(P->timetxt, sizeof P->timetxt, "%s", P->val[O_TIME]);
	} else {
		long min = (long)ceil(P->task_seconds / 60.0);

		if (min < 30)
			min = 30;
		snprintf(P->timetxt, sizeof P->timetxt, "%ld:%02ld:00", min / 60, min % 60);
	}
}
/* The #SBATCH lines every job shares. */
static void sbatch_common(sbuf *b, const plan *P, const char *log_pattern)
{
	sbuf_printf(b, "#SBATCH --job-name=%s\n", P->name);
	if (P->val[O_PARTITION])
		sbuf_printf(b, "#SBATCH --partition=%s\n", P->val[O_PARTITION]);
	if (P->val[O_ACCOUNT])
		sbuf_printf(b, "#SBATCH --account=%s\n", P->val[O_ACCOUNT]);
	/* #SBATCH lines are not shell: no quoting, so the log folder must be free of spaces (checked) */
	sbuf_printf(b, "#SBATCH --output=%s/%s\n", P->logs, log_pattern);
}

/* The path of array a's script (1-based in the name). Caller frees. */
static char *array_script(const plan *P, size_t a)
{
	char *p = xmalloc(strlen(P->dir) + 48);

	sprintf(p, "%s/subjects-%zu.sbatch", P->dir, a + 1);
	return p;
}

/* Array a's script: its tasks' labels in a case list (sbatch keeps its own copy, so a rewrite cannot move a queued task). */
static sr_status write_array(const plan *P, size_t a, sbuf *b, sr_err *e)
{
	const array *A = &P->arrays[a];
	const task *t0 = &P->tasks[A->first], *tl = &P->tasks[A->first + A->n - 1];
	char *path = array_script(P, a), *q_logs = shq(P->logs);
	size_t t, k;
	sr_status rc;

	b->n = 0;
	sbuf_printf(b, "#!/bin/bash\n# written by splitroi slurm for %s\n", P->study_abs);
	sbuf_printf(b, "# array %zu of %zu: tasks %zu-%zu of %zu, sub-%s to sub-%s, %ld subject(s) a task\n", a + 1,
		  P->narrays, A->first + 1, A->first + A->n, P->ntasks, P->todo[t0->first],
		  P->todo[tl->first + tl->n - 1], P->per_task);
	sbatch_common(b, P, "task-%A_%a.out");
	sbuf_printf(b, "#SBATCH --array=1-%zu", A->n);
	if (P->max_running)
		sbuf_printf(b, "%%%ld", P->max_running);
	sbuf_printf(b, "\n#SBATCH --ntasks=1\n#SBATCH --cpus-per-task=%ld\n", P->cpus);
	sbuf_printf(b, "#SBATCH --mem=%s\n#SBATCH --time=%s\n", P->memtxt, P->timetxt);
	if (!P->val[O_MEM])
		sbuf_printf(b, "# --mem suggested for sub-%s (%.0f voxels x %.0f runs): peak measured model plus 50%%\n",
			  P->largest ? P->largest : "?", P->worst.voxels, P->worst.runs);
	if (P->max_running && P->narrays > 1)
		sbuf_printf(b, "# --max-running %ld: this array waits for the one before it, so no more run at once\n",
			  P->max_running);
	sbuf_printf(b, "set -u\ncase ${SLURM_ARRAY_TASK_ID:-} in\n");
	for (t = 0; t < A->n; t++) {
		const task *T = &P->tasks[A->first + t];

		sbuf_printf(b, "%zu) labels='", t + 1);
		for (k = 0; k < T->n; k++)
			sbuf_printf(b, "%s%s", k ? " " : "", P->todo[T->first + k]);
		sbuf_printf(b, "' ;;\n");
	}
	sbuf_printf(b,
		  "*) echo \"splitroi slurm: this array has no task '${SLURM_ARRAY_TASK_ID:-}'\" >&2; exit 1 ;;\n"
		  "esac\n"
		  "logs=%s\n"
		  "failed=0\n"
		  "for label in $labels; do\n"
		  "\tlog=$logs/sub-$label.log\n"
		  "\techo \"sub-$label: job ${SLURM_ARRAY_JOB_ID:-?}_$SLURM_ARRAY_TASK_ID on $(hostname) with ${SLURM_CPUS_PER_TASK:-1} CPUs, $(date -u '+%%Y-%%m-%%d %%H:%%M:%%S') UTC\" >\"$log\"\n"
		  "\t# no --force: a subject already complete and up to date is skipped\n"
		  "\t%s analyze %s --out %s --subjects \"$label\" --threads \"${SLURM_CPUS_PER_TASK:-1}\" --no-group --quiet >>\"$log\" 2>&1\n"
		  "\tstatus=$?\n"
		  "\techo \"splitroi slurm: sub-$label ended with status $status\" >>\"$log\"\n"
		  "\techo \"sub-$label: status $status (log: $log)\"\n"
		  "\t[ \"$status\" -eq 0 ] || failed=$((failed + 1))\n"
		  "done\n"
		  "[ \"$failed\" -eq 0 ]\n",
		  q_logs, P->q_bin, P->q_study, P->q_out);
	rc = write_file(path, b->p, 0, e);
	free(path);
	free(q_logs);
	return rc;
}

/* subjects.txt (line k: the labels of task k over all arrays) and every array's script; stale scripts removed. */
static sr_status write_arrays(const plan *P, sbuf *b, sr_err *e)
{
	char path[4096];
	size_t i, k;
	sr_status rc;

	snprintf(path, sizeof path, "%s/subjects.txt", P->dir);
	b->n = 0;
	sbuf_printf(b, "%s", "");
	for (i = 0; i < P->ntasks; i++)
		for (k = 0; k < P->tasks[i].n; k++)
			sbuf_printf(b, "%s%s", P->todo[P->tasks[i].first + k], k + 1 < P->tasks[i].n ? " " : "\n");
	rc = write_file(path, b->p, 0, e);
	for (i = 0; !rc && i < P->narrays; i++)
		rc = write_array(P, i, b, e);
	if (rc)
		return rc;
	/* arrays of an earlier, larger plan (and the single script of earlier versions) */
	for (i = P->narrays;; i++) {
		char *p = array_script(P, i);
		int gone = unlink(p) != 0;

		free(p);
		if (gone)
			break;
	}
	snprintf(path, sizeof path, "%s/subjects.sbatch", P->dir);
	unlink(path);
	return SR_OK;
}

static sr_status write_group(const plan *P, sbuf *b, sr_err *e)
{
	char path[4096];

	snprintf(path, sizeof path, "%s/group.sbatch", P->dir);
	b->n = 0;
	sbuf_printf(b, "#!/bin/bash\n# written by splitroi slurm for %s: the combined and group tables\n", P->study_abs);
	sbatch_common(b, P, "group-%j.out");
	sbuf_printf(b, "#SBATCH --ntasks=1\n#SBATCH --cpus-per-task=1\n#SBATCH --mem=1G\n#SBATCH --time=30:00\n");
	sbuf_printf(b, "set -u\nexec %s analyze %s --out %s --collect\n", P->q_bin, P->q_study, P->q_out);
	return write_file(path, b->p, 0, e);
}

/*
 * submit.sh: submits every array, then the group job after all of them, and records
 * the job ids in jobs.txt as --submit does; a refused array cancels those before it.
 */
static sr_status write_submit_sh(const plan *P, sbuf *b, sr_err *e)
{
	char path[4096], *q_rec, *q;
	size_t a;

	snprintf(path, sizeof path, "%s/jobs.txt", P->dir);
	q_rec = shq(path);
	snprintf(path, sizeof path, "%s/submit.sh", P->dir);
	b->n = 0;
	sbuf_printf(b, "#!/bin/sh\n# written by splitroi slurm: submits the %zu subject array(s), then the group step after all of them\n"
		  "set -u\nrecord=%s\nsubmitted=''\n"
		  "fail() {\n"
		  "\tif [ -n \"$submitted\" ]; then scancel $submitted && echo \"submit.sh: cancelled jobs$submitted\" >&2; fi\n"
		  "\techo \"submit.sh: sbatch refused $1; nothing of this study is left queued by this script\" >&2\n"
		  "\texit 1\n}\n",
		  P->narrays, q_rec);
	for (a = 0; a < P->narrays; a++) {
		char *s = array_script(P, a);

		q = shq(s);
		sbuf_printf(b, "a%zu=$(sbatch --parsable ", a + 1);
		if (P->max_running && a > 0)
			sbuf_printf(b, "--dependency=afterany:$a%zu ", a);
		sbuf_printf(b, "%s) || fail %s\na%zu=${a%zu%%%%;*}\nsubmitted=\"$submitted $a%zu\"\n", q, q, a + 1, a + 1, a + 1);
		free(q);
		free(s);
	}
	snprintf(path, sizeof path, "%s/group.sbatch", P->dir);
	q = shq(path);
	sbuf_printf(b, "group=$(sbatch --parsable ");
	if (P->narrays) {
		sbuf_printf(b, "--dependency=afterany");
		for (a = 0; a < P->narrays; a++)
			sbuf_printf(b, ":$a%zu", a + 1);
		sbuf_printf(b, " ");
	}
	sbuf_printf(b, "%s) || fail %s\ngroup=${group%%%%;*}\n", q, q);
	free(q);
	for (a = 0; a < P->narrays; a++) {
		char *s = array_script(P, a);

		q = shq(s);
		sbuf_printf(b, "sed -n \"s/^\\([0-9]*\\)) labels='\\(.*\\)' ;;\\$/$a%zu \\1 \\2/p\" %s >>\"$record\"\n", a + 1, q);
		free(q);
		free(s);
	}
	sbuf_printf(b, "echo \"$group group\" >>\"$record\"\n");
	sbuf_printf(b, "echo \"subjects: job(s)$submitted (%zu tasks); group step: job $group\"\n", P->ntasks);
	snprintf(path, sizeof path, "%s/submit.sh", P->dir);
	free(q_rec);
	return write_file(path, b->p, 1, e);
}
/*
 * Runs `sbatch --parsable [dep] script`, reads the job id ("123" or "123;cluster")
 * into id. Returns 0 ok; prints sbatch's own message otherwise.
 */
static int submit(const char *dep, const char *script, char *id, size_t idlen)
{
	char *q = shq(script), *cmd;
	sbuf out = { 0 };
	int st;
	size_t k;

	cmd = xmalloc(strlen(q) + (dep ? strlen(dep) : 0) + 64);
	sprintf(cmd, "sbatch --parsable %s%s%s%s", dep ? "--dependency=" : "", dep ? dep : "", dep ? " " : "", q);
	free(q);
	st = run_capture(cmd, &out);
	free(cmd);
	if (st != 0) {
		fprintf(stderr, "splitroi slurm: sbatch failed on %s (exit %d)\n", script, st);
		free(out.p);
		return 1;
	}
	k = strspn(out.p, "0123456789");
	if (k == 0 || k >= idlen) {
		fprintf(stderr, "splitroi slurm: sbatch printed no job id for %s (got '%.60s')\n", script, out.p);
		free(out.p);
		return 1;
	}
	memcpy(id, out.p, k);
	id[k] = 0;
	free(out.p);
	return 0;
}

/* Cancels the jobs in ids (space-separated) after a refused submission, and says what is left. */
static void cancel_submitted(const char *ids)
{
	char *cmd;

	if (!*ids) {
		fprintf(stderr, "splitroi slurm: nothing of this study was queued\n");
		return;
	}
	cmd = xmalloc(strlen(ids) + 32);
	sprintf(cmd, "scancel%s", ids);
	fflush(stdout);
	if (on_path("scancel") && system(cmd) == 0)
		fprintf(stderr, "splitroi slurm: cancelled the jobs already submitted:%s; nothing of this study is queued\n", ids);
	else
		fprintf(stderr, "splitroi slurm: could not cancel them: jobs%s are still queued (scancel%s)\n", ids, ids);
	free(cmd);
}

/* Appends what was submitted to jobs.txt: "JOB TASK LABEL..." a task, "JOB group" (the record --status reads). */
static sr_status record_jobs(const plan *P, char (*ids)[32], const char *grp, sbuf *b, sr_err *e)
{
	char path[4096], *old;
	size_t a, t, k, n;

	snprintf(path, sizeof path, "%s/jobs.txt", P->dir);
	b->n = 0;
	sbuf_printf(b, "%s", "");
	/* the lines of earlier submissions, kept in front (none when there is no file yet) */
	if (readall_file(path, 0, &old, &n) == READALL_OK) {
		sbuf_puts(b, old);
		free(old);
	}
	for (a = 0; a < P->narrays; a++)
		for (t = 0; t < P->arrays[a].n; t++) {
			const task *T = &P->tasks[P->arrays[a].first + t];

			sbuf_printf(b, "%s %zu", ids[a], t + 1);
			for (k = 0; k < T->n; k++)
				sbuf_printf(b, " %s", P->todo[T->first + k]);
			sbuf_printf(b, "\n");
		}
	sbuf_printf(b, "%s group\n", grp);
	return write_file(path, b->p, 0, e);
}

/* --submit: every array (in turn when throttled), then the group job after all; 0 ok, 1 failed (printed). */
static int submit_all(const plan *P, sbuf *b)
{
	char (*ids)[32] = xcalloc(P->narrays + 1, sizeof *ids), grp[32], *dep, *done;
	size_t a, cap = 32 * (P->narrays + 2);
	int rc = 1;
	sr_err e;

	dep = xmalloc(cap);
	done = xmalloc(cap);
	done[0] = 0;
	for (a = 0; a < P->narrays; a++) {
		char *s = array_script(P, a);
		int bad;

		if (P->max_running && a > 0)
			snprintf(dep, cap, "afterany:%s", ids[a - 1]);
		bad = submit(P->max_running && a > 0 ? dep : NULL, s, ids[a], sizeof ids[a]);
		free(s);
		if (bad) {
			cancel_submitted(done);
			goto out;
		}
		strcat(done, " ");
		strcat(done, ids[a]);
	}
	snprintf(dep, cap, "afterany");
	for (a = 0; a < P->narrays; a++)
		strcat(strcat(dep, ":"), ids[a]);
	{
		char path[4096];

		snprintf(path, sizeof path, "%s/group.sbatch", P->dir);
		if (submit(P->narrays ? dep : NULL, path, grp, sizeof grp)) {
			cancel_submitted(done);
			goto out;
		}
	}
	sr_err_init(&e, NULL, NULL);
	if (record_jobs(P, ids, grp, b, &e))
		fprintf(stderr, "splitroi slurm: warning: %s (--status cannot tell queued subjects)\n", e.msg);
	if (P->quiet) {
		printf("%s %s\n", P->narrays ? done + 1 : "-", grp);
	} else if (P->narrays) {
		char *commas = xstrdup(done + 1), *c;

		for (c = commas; *c; c++)
			if (*c == ' ')
				*c = ',';
		printf("submitted: %zu subject array(s), job(s)%s (%zu tasks), group step as job %s (after all of them)\n"
		       "logs: %s\nwatch: squeue -j %s,%s\nstatus: splitroi slurm %s --status\n",
		       P->narrays, done, P->ntasks, grp, P->logs, commas, grp, P->study_abs);
		free(commas);
	} else {
		printf("submitted: group step as job %s\n", grp);
	}
	rc = 0;
out:
	free(ids);
	free(dep);
	free(done);
	return rc;
}
/*
 * The end of a subject's log: *ended = 1 with *status when the task's trailer line is
 * there, last = the last line before it. 0 when there is no log.
 */
static int read_log_tail(const plan *P, const char *label, int *ended, int *status, char *last, size_t len)
{
	char path[4096], buf[8192], *lines[2] = { NULL, NULL }, *p;
	FILE *f;
	long size;
	size_t n;

	snprintf(path, sizeof path, "%s/sub-%s.log", P->logs, label);
	f = fopen(path, "r");
	if (!f)
		return 0;
	if (fseek(f, 0, SEEK_END) == 0 && (size = ftell(f)) > (long)sizeof buf - 1)
		fseek(f, size - (long)sizeof buf + 1, SEEK_SET);
	else
		rewind(f);
	n = fread(buf, 1, sizeof buf - 1, f);
	fclose(f);
	buf[n] = 0;
	/* the last two non-empty lines */
	for (p = strtok(buf, "\n"); p; p = strtok(NULL, "\n")) {
		lines[0] = lines[1];
		lines[1] = p;
	}
	*ended = 0;
	last[0] = 0;
	if (lines[1] && strncmp(lines[1], "splitroi slurm: sub-", 20) == 0 && strstr(lines[1], " ended with status ")) {
		*ended = 1;
		*status = atoi(strstr(lines[1], " ended with status ") + 19);
		lines[1] = lines[0];
	}
	snprintf(last, len, "%s", lines[1] ? lines[1] : "(empty log)");
	return 1;
}

/* Where one subject stands, from its outputs, the queue, its log and the accounting. */
static void classify(const plan *P, size_t i, substate *s, const qentry *q, size_t nq, const qentry *acct,
		     size_t nacct)
{
	const qentry *live = s->job ? find_queue(q, nq, s->job, s->task) : NULL;
	const qentry *ended = s->job ? find_queue(acct, nacct, s->job, s->task) : NULL;
	int has_log, done = 0, status = 0, pending;
	char last[400];

	if (studyset_complete(&P->st, P->subs[i])) {
		s->state = ST_COMPLETE;
		return;
	}
	if (is_live(live, &pending)) {
		s->state = pending ? ST_PENDING : ST_RUNNING;
		return;
	}
	if (!ended && live)
		ended = live;   /* squeue still shows a job that ended a moment ago */
	has_log = read_log_tail(P, P->subs[i], &done, &status, last, sizeof last);
	if (!has_log) {
		s->state = ST_NOT_STARTED;
		if (ended)
			snprintf(s->line, sizeof s->line, "job %ld_%ld %s before it started", s->job, s->task, ended->state);
		return;
	}
	if (done && status == 0) {
		s->state = ST_STALE;
		return;
	}
	s->state = ST_FAILED;
	if (done)
		snprintf(s->line, sizeof s->line, "%s", last);
	else
		snprintf(s->line, sizeof s->line, "ended without a result (%s); last: %s",
			 ended ? ended->state : "killed or still running outside the record", last);
}

/* The label list of one state, at most 20 labels. */
static void print_labels(const plan *P, const substate *ss, int state, size_t count)
{
	size_t i, shown = 0;

	if (!count || state == ST_FAILED || state == ST_COMPLETE)
		return;
	printf("%s:", state_names[state]);
	for (i = 0; i < P->nsub && shown < 20; i++)
		if (ss[i].state == state) {
			printf(" sub-%s", P->subs[i]);
			shown++;
		}
	if (count > shown)
		printf(" and %zu more", count - shown);
	printf("\n");
}

/* --status: prints where every subject stands; 0 (a report), 1 when the study cannot be read. */
static int show_status(const plan *P)
{
	substate *ss = xcalloc(P->nsub, sizeof *ss);
	size_t i, nq = 0, nacct = 0, count[ST_N] = { 0 };
	qentry *q = NULL, *acct = NULL;
	sbuf out = { 0 }, ids = { 0 };
	int have_squeue = on_path("squeue"), have_sacct = on_path("sacct");
	char *cmd;

	read_record(P, ss);
	q = read_queue(P, &nq);
	/* the accounting, for tasks the queue no longer shows (time limit, memory, cancelled) */
	sbuf_printf(&ids, "%s", "");
	for (i = 0; i < P->nsub; i++) {
		char one[32];

		if (!ss[i].job || find_queue(q, nq, ss[i].job, ss[i].task) || ids.n > 60000)
			continue;
		snprintf(one, sizeof one, ",%ld,", ss[i].job);
		if (!strstr(ids.p, one))
			sbuf_printf(&ids, "%s%ld,", ids.n ? "" : ",", ss[i].job);
	}
	if (have_sacct && ids.n) {
		cmd = xmalloc(ids.n + 64);
		ids.p[ids.n - 1] = 0;
		sprintf(cmd, "sacct -n -X -P -o JobID,State -j %s 2>/dev/null", ids.p + 1);
		if (run_capture(cmd, &out) == 0)
			acct = parse_queue(out.p, &nacct);
		free(cmd);
	}
	for (i = 0; i < P->nsub; i++) {
		classify(P, i, &ss[i], q, nq, acct, nacct);
		count[ss[i].state]++;
	}
	printf("%s: %zu subjects\n", P->study_abs, P->nsub);
	for (i = 0; i < ST_N; i++)
		if (count[i] || i != ST_STALE)
			printf("  %-12s %zu\n", state_names[i], count[i]);
	if (!have_squeue)
		printf("(squeue is not on PATH: queued tasks cannot be seen from here)\n");
	for (i = 0; i < P->nsub; i++) {
		char job[64] = "";

		if (ss[i].state != ST_FAILED)
			continue;
		if (ss[i].job)
			snprintf(job, sizeof job, "job %ld_%ld, ", ss[i].job, ss[i].task);
		printf("failed: sub-%s (%slog %s/sub-%s.log): %s\n", P->subs[i], job, P->logs, P->subs[i], ss[i].line);
	}
	for (i = ST_RUNNING; i < ST_N; i++)
		print_labels(P, ss, (int)i, count[i]);
	if (count[ST_FAILED] + count[ST_STALE] + count[ST_NOT_STARTED])
		printf("%zu subject(s) neither complete nor queued; when the queue is empty, submit every incomplete subject again with: splitroi slurm %s --submit\n",
		       count[ST_FAILED] + count[ST_STALE] + count[ST_NOT_STARTED], P->study_abs);
	free(out.p);
	free(ids.p);
	free(q);
	free(acct);
	free(ss);
	return 0;
}
/* ---- the command ---- */

/* The scripts folder, the binary and the quoted paths; 0 ok, 1 bad input (printed). */
static int prepare_paths(plan *P, const char *argv0)
{
	sr_err e;

	if (strpbrk(P->logs, " \t\n\"'\\%")) {
		fprintf(stderr, "splitroi slurm: %s: #SBATCH lines cannot quote, so the scripts folder may not hold spaces, quotes, '\\' or '%%' (see --out-scripts)\n",
			P->logs);
		return 1;
	}
	sr_err_init(&e, NULL, NULL);
	if (afile_mkdirs(P->logs, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		return 1;
	}
	P->bin = P->val[O_BIN] ? absolute(P->val[O_BIN]) : self_path(argv0);
	if (access(P->bin, X_OK) != 0)
		fprintf(stderr, "splitroi slurm: warning: %s is not an executable here; the jobs will run it on the nodes\n",
			P->bin);
	P->q_bin = shq(P->bin);
	P->q_study = shq(P->study_abs);
	P->q_out = shq(P->st.out);
	return 0;
}

/* What was written and how it fits the cluster. */
static void print_plan(const plan *P)
{
	const limits *L = &P->lim;

	printf("%zu of %zu subjects need analysis; %zu complete and up to date\n", P->ntodo, P->nsub,
	       P->nsub - P->ntodo - P->nqueued);
	if (P->nqueued)
		printf("%zu more are still pending or running in the queue: left out, so that none runs twice (see --status)\n",
		       P->nqueued);
	if (L->from_cluster)
		printf("cluster limits (scontrol show config): MaxArraySize %ld, MaxJobCount %ld", L->max_array_size,
		       L->max_job_count);
	else
		printf("scontrol could not be run here: assuming SLURM's defaults, MaxArraySize %ld and MaxJobCount %ld (--array-size sets the array size)",
		       L->max_array_size, L->max_job_count);
	if (L->max_submit > 0)
		printf(", MaxSubmitJobs %ld", L->max_submit);
	printf("\n");
	if (P->ntodo) {
		printf("%zu task(s) of %ld subject(s) in %zu array(s) of at most %ld tasks", P->ntasks, P->per_task,
		       P->narrays, P->array_size);
		if (P->max_running)
			printf(", at most %ld running at once", P->max_running);
		printf("\nper task: %s CPUs, --mem=%s%s, --time=%s%s\n", P->val[O_CPUS] ? P->val[O_CPUS] : "2",
		       P->memtxt, P->val[O_MEM] ? "" : " (suggested)", P->timetxt,
		       P->val[O_TIME] ? "" : " (suggested)");
	}
	if (P->narrays > 1)
		printf("wrote %s/subjects.txt, subjects-1.sbatch to subjects-%zu.sbatch, group.sbatch, submit.sh there\n",
		       P->dir, P->narrays);
	else if (P->narrays)
		printf("wrote %s/subjects.txt, subjects-1.sbatch, group.sbatch, submit.sh there\n", P->dir);
	else
		printf("wrote %s/group.sbatch and submit.sh\n", P->dir);
}

/* Writes the scripts and submits them when asked; 0 ok, 1 failed (printed). */
static int write_and_submit(plan *P)
{
	sbuf b = { 0 };
	sr_err e;
	int rc = 1;

	sr_err_init(&e, NULL, NULL);
	if (write_arrays(P, &b, &e) || write_group(P, &b, &e) || write_submit_sh(P, &b, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		goto out;
	}
	if (!P->quiet)
		print_plan(P);
	if (P->val[O_SUBMIT]) {
		if (!on_path("sbatch")) {
			fprintf(stderr, "splitroi slurm: sbatch is not on PATH: the scripts are written; on a machine of the cluster run\n"
				"  sh %s/submit.sh\n", P->dir);
			goto out;
		}
		rc = submit_all(P, &b);
		goto out;
	}
	if (!P->quiet) {
		printf("submit with:  sh %s/submit.sh\n", P->dir);
		if (!on_path("sbatch"))
			printf("sbatch is not on PATH here: run that on a login node of the cluster\n");
	}
	rc = 0;
out:
	free(b.p);
	return rc;
}

int cmd_slurm(int argc, char **argv)
{
	const char **pos = xcalloc((size_t)argc + 1, sizeof *pos);
	int npos, rc;
	plan P;

	memset(&P, 0, sizeof P);
	rc = cmdline_parse(&spec, argc, argv, P.val, pos, &npos);
	if (rc) {
		free(pos);
		return rc == 1 ? 0 : 2;
	}
	if (npos != 1) {
		cmdline_error("slurm", npos ? "give one study file" : "which study? usage: splitroi slurm STUDY.ini");
		free(pos);
		return 2;
	}
	rc = check_options(&P);
	if (rc)
		goto out;
	rc = load_study(&P, pos[0]);
	if (rc)
		goto out;
	if (P.val[O_STATUS]) {
		rc = show_status(&P);
		goto out;
	}
	read_limits(&P.lim);
	rc = find_todo(&P);
	if (!rc)
		rc = pack(&P);
	if (!rc)
		rc = prepare_paths(&P, argv[0]);
	if (rc)
		goto out;
	suggest(&P);
	rc = write_and_submit(&P);
out:
	plan_release(&P);
	free(pos);
	return rc;
}
