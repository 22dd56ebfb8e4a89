/* slurm.c - `splitroi slurm`: a study as SLURM jobs, one array task per subject, then the group step. */
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "../core/mem.h"
#include "../io/afile.h"
#include "../io/bids.h"
#include "../io/nii.h"
#include "../io/study.h"
#include "analyze.h"
#include "cmd.h"
#include "cmdline.h"

static const cmdline_opt opts[] = {
	{ "out", "DIR", "results folder (default: the study's 'out'), as for analyze" },
	{ "partition", "NAME", "SLURM partition for every job (default: the cluster's default)" },
	{ "account", "NAME", "SLURM account to charge" },
	{ "time", "LIMIT", "time limit per subject, SLURM syntax, e.g. 30:00 or 2:00:00 (default: suggested)" },
	{ "mem", "SIZE", "memory per subject task, e.g. 800M or 4G (default: suggested from the run sizes)" },
	{ "cpus", "N", "CPUs per subject task, used as analyze --threads (default 2)" },
	{ "out-scripts", "DIR", "where the scripts and logs go (default OUT/slurm)" },
	{ "submit", NULL, "submit both jobs with sbatch (the group job waits for every subject task)" },
	{ "splitroi", "PATH", "the splitroi binary the jobs run (default: this one)" },
	{ "quiet", NULL, "print only the job ids (with --submit) and errors" },
	{ NULL, NULL, NULL },
};
enum { O_OUT, O_PARTITION, O_ACCOUNT, O_TIME, O_MEM, O_CPUS, O_SCRIPTS, O_SUBMIT, O_BIN, O_QUIET,
       O_N };

static const cmdline_spec spec = {
	"slurm", "STUDY.ini [options]",
	"Writes SLURM batch scripts for a study: a job array with one task per subject\n"
	"whose outputs are missing or out of date (each runs 'splitroi analyze STUDY\n"
	"--subjects LABEL --no-group'), and a group job that waits for the whole array\n"
	"(afterany: a failed subject does not hold it back) and runs 'splitroi analyze\n"
	"STUDY --collect', which rebuilds OUT/responses.csv and the group tables from\n"
	"the complete subjects and names the missing ones. Memory per task is suggested\n"
	"from the largest subject's runs. Run the command again after a failure: only\n"
	"subjects without complete outputs are submitted again.",
	opts,
};

/*
 * Memory and time per subject task, measured with GNU time (`/usr/bin/time -f %M`)
 * on `splitroi analyze STUDY --subjects 01 --threads T --no-group --quiet` for
 * studies from `splitroi simulate` (float32 .nii.gz, 120 volumes a run; runs =
 * localizer plus measured task), on a 2-core x86-64 virtual machine (24 GiB,
 * Debian 12), 2026-12-01:
 *
 *   grid                       voxels   runs  threads  peak RSS    wall
 *   small    24x28x20           13440     6      1      21.1 MiB   0.27 s
 *   small    24x28x20           13440     6      2      27.5 MiB   0.41 s
 *   standard 91x109x91         902629     4      1     591.0 MiB  11.4 s
 *   standard 91x109x91         902629     4      2     893.5 MiB  15.9 s
 *   standard 91x109x91         902629     6      1     730.4 MiB  21.8 s
 *   standard 91x109x91         902629     6      2    1038.7 MiB  33.1 s
 *
 * Each run kept adds ~81 bytes a voxel ((730.4 - 591.0) MiB / 2 runs / 902629),
 * each run being fitted at once (one per thread) ~350 bytes a voxel (the 2- vs
 * 1-thread rows: +303 and +308 MiB), on ~10 MiB of program, so
 *   bytes = 10 MiB + voxels * (81 * runs + 350 * min(threads, runs))
 * which gives 25.5, 593, 1031 MiB for the rows above (within 2 MiB but for the
 * small 2-thread row, 2 MiB under). The suggestion adds 50% headroom and rounds up
 * to a whole 256 MiB. Time: ~3.3e-8 s a voxel-volume of wall time at one thread
 * (21.8 s / (902629 * 6 * 120)); a second thread did not help on this machine, so
 * the suggestion does not divide by the CPUs, takes 4x headroom (shared nodes and
 * file systems are slower) and never asks for less than 30 minutes.
 */
#define MEM_BASE (10.0 * 1024 * 1024)
#define MEM_PER_VOXEL_RUN 81.0
#define MEM_PER_VOXEL_THREAD 350.0
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
		sr_status rc = bids_runs(st->bids, label, task, &runs, &nr, e);

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
	double inflight = (double)cpus < z->runs ? (double)cpus : z->runs;
	double bytes = (MEM_BASE + z->voxels * (MEM_PER_VOXEL_RUN * z->runs +
						MEM_PER_VOXEL_THREAD * inflight)) * 1.5;
	double mib = ceil(bytes / (256.0 * 1024 * 1024)) * 256.0;

	return (long)mib;
}

/* The time model above with 4x headroom, at least 30 minutes; in minutes. */
static long suggest_time_min(const sizes *z)
{
	long min = (long)ceil(4.0 * TIME_PER_VOXEL_VOLUME_S * z->volumes / 60.0);

	return min < 30 ? 30 : min;
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

/* A growing string. */
typedef struct sbuf {
	char *s;
	size_t n, cap;
} sbuf;

static void sb_printf(sbuf *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void sb_printf(sbuf *b, const char *fmt, ...)
{
	va_list ap;
	int need;

	va_start(ap, fmt);
	need = vsnprintf(NULL, 0, fmt, ap);
	va_end(ap);
	if (need < 0)
		return;
	if (b->n + (size_t)need + 1 > b->cap) {
		b->cap = (b->n + (size_t)need + 1) * 2;
		b->s = xrealloc(b->s, b->cap);
	}
	va_start(ap, fmt);
	vsnprintf(b->s + b->n, b->cap - b->n, fmt, ap);
	va_end(ap);
	b->n += (size_t)need;
}

/* The #SBATCH lines both jobs share. */
static void sbatch_common(sbuf *b, const char *const *val, const char *name, const char *logs,
			  const char *log_pattern)
{
	sb_printf(b, "#SBATCH --job-name=%s\n", name);
	if (val[O_PARTITION])
		sb_printf(b, "#SBATCH --partition=%s\n", val[O_PARTITION]);
	if (val[O_ACCOUNT])
		sb_printf(b, "#SBATCH --account=%s\n", val[O_ACCOUNT]);
	/* #SBATCH lines are not shell: no quoting, so the log folder must be free of spaces (checked) */
	sb_printf(b, "#SBATCH --output=%s/%s\n", logs, log_pattern);
}

/*
 * Runs `sbatch --parsable [dep] script`, reads the job id ("123" or "123;cluster")
 * into id. Returns 0 ok; prints sbatch's own message otherwise.
 */
static int submit(const char *dep, const char *script, char *id, size_t idlen)
{
	char *q = shq(script), *cmd;
	FILE *p;
	char line[256] = "";
	int st;
	size_t k;

	cmd = xmalloc(strlen(q) + (dep ? strlen(dep) : 0) + 64);
	sprintf(cmd, "sbatch --parsable %s%s%s", dep ? "--dependency=" : "", dep ? dep : "",
		dep ? " " : "");
	strcat(cmd, q);
	free(q);
	fflush(stdout);
	p = popen(cmd, "r");
	free(cmd);
	if (!p) {
		fprintf(stderr, "splitroi slurm: cannot run sbatch: %s\n", strerror(errno));
		return 1;
	}
	if (!fgets(line, sizeof line, p))
		line[0] = 0;
	while (fgetc(p) != EOF)
		;
	st = pclose(p);
	if (st == -1 || !WIFEXITED(st) || WEXITSTATUS(st) != 0) {
		fprintf(stderr, "splitroi slurm: sbatch failed on %s (exit %d)\n", script,
			st != -1 && WIFEXITED(st) ? WEXITSTATUS(st) : -1);
		return 1;
	}
	k = strspn(line, "0123456789");
	if (k == 0 || k >= idlen) {
		fprintf(stderr, "splitroi slurm: sbatch printed no job id for %s (got '%.60s')\n", script,
			line);
		return 1;
	}
	memcpy(id, line, k);
	id[k] = 0;
	return 0;
}

int cmd_slurm(int argc, char **argv)
{
	const char *val[O_N], **pos = xcalloc((size_t)argc + 1, sizeof *pos);
	int npos, rc, quiet;
	long cpus = 2, mem_mib = 0, time_min = 0;
	study st;
	study_problems probs = { 0 };
	char **subs = NULL, **todo = NULL;
	size_t nsub = 0, ntodo = 0, i;
	char *study_abs = NULL, *dir = NULL, *logs = NULL, *bin = NULL, *name = NULL;
	char path[4096], memtxt[32], timetxt[32];
	char *q_bin = NULL, *q_study = NULL, *q_out = NULL, *q_list = NULL;
	char *subject_script = NULL, *group_script = NULL, *submit_script = NULL;
	sbuf b = { 0 };
	sizes worst = { 0 };
	const char *largest = NULL;
	sr_err e;

	rc = cmdline_parse(&spec, argc, argv, val, pos, &npos);
	if (rc) {
		free(pos);
		return rc == 1 ? 0 : 2;
	}
	if (npos != 1) {
		cmdline_error("slurm", npos ? "give one study file" : "which study? usage: splitroi slurm STUDY.ini");
		free(pos);
		return 2;
	}
	rc = 2;
	if (val[O_CPUS] && cmdline_int("slurm", "cpus", val[O_CPUS], 1, 256, &cpus))
		goto out_pos;
	if (val[O_MEM] && !valid_mem(val[O_MEM])) {
		cmdline_error("slurm", "--mem '%s': give whole units, e.g. 800M or 4G", val[O_MEM]);
		goto out_pos;
	}
	if (val[O_TIME] && !valid_time(val[O_TIME])) {
		cmdline_error("slurm", "--time '%s': give minutes, MM:SS, HH:MM:SS or D-HH:MM:SS", val[O_TIME]);
		goto out_pos;
	}
	if ((val[O_PARTITION] && !valid_name(val[O_PARTITION])) ||
	    (val[O_ACCOUNT] && !valid_name(val[O_ACCOUNT]))) {
		cmdline_error("slurm", "--%s '%s': use letters, digits, '.', '_' and '-' only",
			      val[O_PARTITION] && !valid_name(val[O_PARTITION]) ? "partition" : "account",
			      val[O_PARTITION] && !valid_name(val[O_PARTITION]) ? val[O_PARTITION] : val[O_ACCOUNT]);
		goto out_pos;
	}
	quiet = val[O_QUIET] != NULL;
	rc = 1;
	if (study_load(pos[0], &st, &probs) != SR_OK) {
		for (i = 0; i < probs.n; i++)
			fprintf(stderr, "splitroi slurm: %s\n", probs.msg[i]);
		study_problems_release(&probs);
		goto out_pos;
	}
	study_problems_release(&probs);
	if (val[O_OUT]) {
		free(st.out);
		st.out = absolute(val[O_OUT]);
	} else if (st.out[0] != '/') {
		char *a = absolute(st.out);

		free(st.out);
		st.out = a;
	}
	study_abs = absolute(pos[0]);
	sr_err_init(&e, NULL, NULL);
	if (analyze_study_subjects(&st, &subs, &nsub, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		goto out_study;
	}
	if (nsub == 0) {
		fprintf(stderr, "splitroi slurm: %s: no subjects (sub-*) found\n", st.bids);
		goto out_study;
	}
	/* the array holds only subjects without complete, up-to-date outputs (analyze's skip rule) */
	todo = xcalloc(nsub, sizeof *todo);
	for (i = 0; i < nsub; i++) {
		sizes z;

		if (analyze_subject_complete(&st, subs[i]))
			continue;
		if (subject_sizes(&st, subs[i], &z, &e)) {
			/* one bad subject must not hold back the others: its task reports the error */
			fprintf(stderr, "splitroi slurm: warning: sub-%s: %s (left in the array; not used for --mem)\n",
				subs[i], e.msg);
			todo[ntodo++] = subs[i];
			continue;
		}
		if (z.voxels * z.runs > worst.voxels * worst.runs) {
			worst = z;
			largest = subs[i];
		}
		if (z.volumes > worst.volumes)
			worst.volumes = z.volumes;
		todo[ntodo++] = subs[i];
	}
	dir = val[O_SCRIPTS] ? absolute(val[O_SCRIPTS]) : NULL;
	if (!dir) {
		dir = xmalloc(strlen(st.out) + 8);
		sprintf(dir, "%s/slurm", st.out);
	}
	logs = xmalloc(strlen(dir) + 8);
	sprintf(logs, "%s/logs", dir);
	if (strpbrk(logs, " \t\n\"'\\%")) {
		fprintf(stderr, "splitroi slurm: %s: #SBATCH lines cannot quote, so the scripts folder may not hold spaces, quotes, '\\' or '%%' (see --out-scripts)\n",
			logs);
		goto out_study;
	}
	if (afile_mkdirs(logs, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		goto out_study;
	}
	bin = val[O_BIN] ? absolute(val[O_BIN]) : self_path(argv[0]);
	if (access(bin, X_OK) != 0)
		fprintf(stderr, "splitroi slurm: warning: %s is not an executable here; the jobs will run it on the nodes\n",
			bin);
	name = job_name(study_abs);
	q_bin = shq(bin);
	q_study = shq(study_abs);
	q_out = shq(st.out);

	if (val[O_MEM])
		snprintf(memtxt, sizeof memtxt, "%s", val[O_MEM]);
	else {
		mem_mib = suggest_mem_mib(&worst, cpus);
		snprintf(memtxt, sizeof memtxt, "%ldM", mem_mib);
	}
	if (val[O_TIME])
		snprintf(timetxt, sizeof timetxt, "%s", val[O_TIME]);
	else {
		time_min = suggest_time_min(&worst);
		snprintf(timetxt, sizeof timetxt, "%ld:%02ld:00", time_min / 60, time_min % 60);
	}

	/* the subjects list: line k is array task k */
	snprintf(path, sizeof path, "%s/subjects.txt", dir);
	b.n = 0;
	sb_printf(&b, "%s", "");
	for (i = 0; i < ntodo; i++)
		sb_printf(&b, "%s\n", todo[i]);
	if (write_file(path, b.s, 0, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		goto out_study;
	}
	q_list = shq(path);

	/* the per-subject array */
	subject_script = xmalloc(strlen(dir) + 32);
	sprintf(subject_script, "%s/subjects.sbatch", dir);
	b.n = 0;
	sb_printf(&b, "#!/bin/bash\n# written by splitroi slurm for %s: one array task per subject\n", study_abs);
	sbatch_common(&b, val, name, logs, "sub-%A_%a.out");
	sb_printf(&b, "#SBATCH --array=1-%zu\n#SBATCH --ntasks=1\n#SBATCH --cpus-per-task=%ld\n", ntodo ? ntodo : 1, cpus);
	sb_printf(&b, "#SBATCH --mem=%s\n#SBATCH --time=%s\n", memtxt, timetxt);
	if (!val[O_MEM])
		sb_printf(&b, "# --mem suggested for sub-%s (%.0f voxels x %.0f runs): peak measured model plus 50%%\n",
			  largest ? largest : "?", worst.voxels, worst.runs);
	if (!ntodo)
		sb_printf(&b, "# every subject was complete and up to date when this was written: submit.sh skips this array\n");
	sb_printf(&b,
		  "set -u\n"
		  "label=$(sed -n \"${SLURM_ARRAY_TASK_ID}p\" %s)\n"
		  "if [ -z \"$label\" ]; then\n"
		  "\techo \"splitroi slurm: no subject on line $SLURM_ARRAY_TASK_ID of \"%s >&2\n"
		  "\texit 1\n"
		  "fi\n"
		  "echo \"sub-$label on $(hostname) with ${SLURM_CPUS_PER_TASK:-1} CPUs\"\n"
		  "# no --force: a subject already complete and up to date is skipped\n"
		  "exec %s analyze %s --out %s --subjects \"$label\" --threads \"${SLURM_CPUS_PER_TASK:-1}\" --no-group --quiet\n",
		  q_list, q_list, q_bin, q_study, q_out);
	if (write_file(subject_script, b.s, 0, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		goto out_study;
	}

	/* the group step */
	group_script = xmalloc(strlen(dir) + 32);
	sprintf(group_script, "%s/group.sbatch", dir);
	b.n = 0;
	sb_printf(&b, "#!/bin/bash\n# written by splitroi slurm for %s: the combined and group tables\n", study_abs);
	sbatch_common(&b, val, name, logs, "group-%j.out");
	sb_printf(&b, "#SBATCH --ntasks=1\n#SBATCH --cpus-per-task=1\n#SBATCH --mem=1G\n#SBATCH --time=30:00\n");
	sb_printf(&b, "set -u\nexec %s analyze %s --out %s --collect\n", q_bin, q_study, q_out);
	if (write_file(group_script, b.s, 0, &e)) {
		fprintf(stderr, "splitroi slurm: %s\n", e.msg);
		goto out_study;
	}

	/* a script that submits both, for a cluster this command cannot reach */
	{
		char *q_sub = shq(subject_script), *q_grp = shq(group_script);

		submit_script = xmalloc(strlen(dir) + 32);
		sprintf(submit_script, "%s/submit.sh", dir);
		b.n = 0;
		sb_printf(&b, "#!/bin/sh\n# written by splitroi slurm: submits the subject array, then the group step after it\nset -e\n");
		if (ntodo)
			sb_printf(&b,
				  "array=$(sbatch --parsable %s)\n"
				  "array=${array%%%%;*}\n"
				  "group=$(sbatch --parsable --dependency=afterany:$array %s)\n"
				  "echo \"subjects: job $array (%zu tasks); group step: job ${group%%%%;*}\"\n",
				  q_sub, q_grp, ntodo);
		else
			sb_printf(&b, "group=$(sbatch --parsable %s)\necho \"group step: job ${group%%%%;*}\"\n", q_grp);
		free(q_sub);
		free(q_grp);
		if (write_file(submit_script, b.s, 1, &e)) {
			fprintf(stderr, "splitroi slurm: %s\n", e.msg);
			goto out_study;
		}
	}

	if (!quiet) {
		printf("%zu of %zu subjects need analysis; %zu complete and up to date\n", ntodo, nsub, nsub - ntodo);
		if (ntodo)
			printf("per subject: %s CPUs, --mem=%s%s, --time=%s%s\n", val[O_CPUS] ? val[O_CPUS] : "2",
			       memtxt, val[O_MEM] ? "" : " (suggested)", timetxt, val[O_TIME] ? "" : " (suggested)");
		printf("wrote %s/subjects.txt, %s, %s, %s\n", dir, subject_script, group_script, submit_script);
	}
	rc = 0;
	if (val[O_SUBMIT]) {
		char arr[64] = "", grp[64] = "", dep[96];

		if (!on_path("sbatch")) {
			fprintf(stderr, "splitroi slurm: sbatch is not on PATH: the scripts are written; on a machine of the cluster run\n"
				"  sh %s\n", submit_script);
			rc = 1;
			goto out_study;
		}
		if (ntodo && submit(NULL, subject_script, arr, sizeof arr)) {
			rc = 1;
			goto out_study;
		}
		snprintf(dep, sizeof dep, "afterany:%s", arr);
		if (submit(ntodo ? dep : NULL, group_script, grp, sizeof grp)) {
			if (ntodo)
				fprintf(stderr, "splitroi slurm: the subject array (job %s) is submitted; submit the group step with\n"
					"  sbatch --dependency=%s %s\n", arr, dep, group_script);
			rc = 1;
			goto out_study;
		}
		if (quiet)
			printf("%s %s\n", ntodo ? arr : "-", grp);
		else if (ntodo)
			printf("submitted: subjects as job array %s (%zu tasks), group step as job %s (after the array)\n"
			       "logs: %s\nwatch: squeue -j %s,%s\n", arr, ntodo, grp, logs, arr, grp);
		else
			printf("submitted: group step as job %s\n", grp);
	} else if (!quiet) {
		printf("submit with:  sh %s\n", submit_script);
		printf("(or: sbatch --parsable %s, then sbatch --dependency=afterany:<that job id> %s)\n",
		       subject_script, group_script);
		if (!on_path("sbatch"))
			printf("sbatch is not on PATH here: run that on a login node of the cluster\n");
	}
out_study:
	free(b.s);
	free(q_bin);
	free(q_study);
	free(q_out);
	free(q_list);
	free(subject_script);
	free(group_script);
	free(submit_script);
	free(name);
	free(bin);
	free(logs);
	free(dir);
	free(study_abs);
	free(todo);
	bids_strings_free(subs, nsub);
	study_release(&st);
out_pos:
	free(pos);
	return rc;
}
