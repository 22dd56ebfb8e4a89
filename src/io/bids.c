/* bids.c - finding subjects, runs, events and sidecars in a BIDS dataset; the TR inheritance rule. */
#include "bids.h"

#include <dirent.h>
#include <stdarg.h>
#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/mem.h"

static char *str_printf(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

static char *str_printf(const char *fmt, ...)
{
	va_list ap;
	int n;
	char *s;

	va_start(ap, fmt);
	n = vsnprintf(NULL, 0, fmt, ap);
	va_end(ap);
	s = xmalloc((size_t)n + 1);
	va_start(ap, fmt);
	vsnprintf(s, (size_t)n + 1, fmt, ap);
	va_end(ap);
	return s;
}

static int is_dir(const char *path)
{
	struct stat sb;

	return stat(path, &sb) == 0 && S_ISDIR(sb.st_mode);
}

static int is_file(const char *path)
{
	struct stat sb;

	return stat(path, &sb) == 0 && S_ISREG(sb.st_mode);
}

static int cmp_str(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

static int has_suffix(const char *s, const char *suf)
{
	size_t n = strlen(s), m = strlen(suf);

	return n >= m && strcmp(s + n - m, suf) == 0;
}

/* Length of the part before "_bold.nii" / "_bold.nii.gz", or 0 when name is neither. */
static size_t bold_stem(const char *name)
{
	size_t n = strlen(name);

	if (has_suffix(name, "_bold.nii.gz"))
		return n - strlen("_bold.nii.gz");
	if (has_suffix(name, "_bold.nii"))
		return n - strlen("_bold.nii");
	return 0;
}

/*
 * Folder names under dir that begin with prefix, labels without it, sorted.
 * A missing dir gives zero names.
 */
static char **list_prefixed_dirs(const char *dir, const char *prefix, size_t *n)
{
	DIR *d = opendir(dir);
	struct dirent *de;
	char **out = NULL;
	size_t cap = 0, plen = strlen(prefix);

	*n = 0;
	if (!d)
		return NULL;
	while ((de = readdir(d)) != NULL) {
		char *full;

		if (strncmp(de->d_name, prefix, plen) != 0 || de->d_name[plen] == '\0')
			continue;
		full = str_printf("%s/%s", dir, de->d_name);
		if (is_dir(full)) {
			if (*n == cap) {
				cap = cap ? 2 * cap : 16;
				out = xrealloc(out, cap * sizeof *out);
			}
			out[(*n)++] = xstrdup(de->d_name + plen);
		}
		free(full);
	}
	closedir(d);
	if (*n)
		qsort(out, *n, sizeof *out, cmp_str);
	return out;
}

sr_status bids_subjects(const char *root, char ***labels, size_t *n, sr_err *e)
{
	DIR *d = opendir(root);

	*labels = NULL;
	*n = 0;
	if (!d)
		return sr_fail(e, SR_EIO, "cannot open the dataset folder %s: %s", root,
			       strerror(errno));
	closedir(d);
	*labels = list_prefixed_dirs(root, "sub-", n);
	return SR_OK;
}

void bids_strings_free(char **s, size_t n)
{
	if (!s)
		return;
	for (size_t i = 0; i < n; i++)
		free(s[i]);
	free(s);
}

/*
 * Looks up entity key (e.g. "task") among the '_'-separated key-value pairs
 * of stem[0..len). Returns the value's length and sets *val, or -1 when absent.
 */
static long entity(const char *stem, size_t len, const char *key, const char **val)
{
	size_t klen = strlen(key), i = 0;

	while (i < len) {
		size_t j = i;

		while (j < len && stem[j] != '_')
			j++;
		if (j - i > klen && strncmp(stem + i, key, klen) == 0 && stem[i + klen] == '-') {
			*val = stem + i + klen + 1;
			return (long)(j - i - klen - 1);
		}
		i = j + 1;
	}
	return -1;
}

static int entity_is(const char *stem, size_t len, const char *key, const char *want)
{
	const char *v;
	long n = entity(stem, len, key, &v);

	if (want == NULL)
		return n < 0;
	return n >= 0 && (size_t)n == strlen(want) && strncmp(v, want, (size_t)n) == 0;
}

typedef struct run_list {
	bids_run *r;
	size_t n, cap;
} run_list;

static void run_free(bids_run *r)
{
	free(r->bold);
	free(r->events);
	free(r->sidecar);
	free(r->subject);
	free(r->session);
	free(r->task);
	free(r->label);
}

/* Adds the matching BOLD files of one func/ folder. */
static sr_status scan_func(const char *func, const char *subject, const char *session,
			   const char *task, run_list *L, sr_err *e)
{
	DIR *d = opendir(func);
	struct dirent *de;
	char **names = NULL;
	size_t nn = 0, cap = 0;
	sr_status st = SR_OK;

	if (!d)
		return SR_OK;
	while ((de = readdir(d)) != NULL) {
		if (bold_stem(de->d_name) == 0)
			continue;
		if (nn == cap) {
			cap = cap ? 2 * cap : 16;
			names = xrealloc(names, cap * sizeof *names);
		}
		names[nn++] = xstrdup(de->d_name);
	}
	closedir(d);
	if (nn)
		qsort(names, nn, sizeof *names, cmp_str);
	for (size_t i = 0; i < nn && !st; i++) {
		const char *name = names[i], *rv;
		size_t stem = bold_stem(name);
		long rlen;
		int index = -1;
		struct stat sb;
		char *path = str_printf("%s/%s", func, name);
		bids_run *r;

		if (!entity_is(name, stem, "task", task)) {
			free(path);
			continue;
		}
		/* A run that cannot be read (say, a link to data not fetched) must not vanish from the splits. */
		if (stat(path, &sb) != 0) {
			st = sr_fail(e, SR_EIO, "cannot access %s: %s", path, strerror(errno));
			free(path);
			break;
		}
		if (!S_ISREG(sb.st_mode)) {
			sr_warnf(e, "ignoring %s: not a regular file", path);
			free(path);
			continue;
		}
		if (!entity_is(name, stem, "sub", subject) || !entity_is(name, stem, "ses", session)) {
			sr_warnf(e, "ignoring %s: its sub-/ses- entities do not match its folder", path);
			free(path);
			continue;
		}
		/* Both .nii and .nii.gz of one run: analysing both would count the run twice. */
		if (i + 1 < nn && bold_stem(names[i + 1]) == stem &&
		    strncmp(names[i + 1], name, stem) == 0) {
			st = sr_fail(e, SR_EFORMAT, "%s: both %s and %s exist; keep one", func, name,
				     names[i + 1]);
			free(path);
			break;
		}
		rlen = entity(name, stem, "run", &rv);
		if (rlen >= 0) {
			long v = 0;

			if (rlen == 0 || rlen > 9) {
				st = sr_fail(e, SR_EFORMAT, "%s: the run entity must be a number", path);
				free(path);
				break;
			}
			for (long k = 0; k < rlen; k++) {
				if (rv[k] < '0' || rv[k] > '9') {
					st = sr_fail(e, SR_EFORMAT,
						     "%s: the run entity 'run-%.*s' is not a number",
						     path, (int)rlen, rv);
					break;
				}
				v = 10 * v + (rv[k] - '0');
			}
			if (st) {
				free(path);
				break;
			}
			index = (int)v;
		}
		if (L->n == L->cap) {
			L->cap = L->cap ? 2 * L->cap : 16;
			L->r = xrealloc(L->r, L->cap * sizeof *L->r);
		}
		r = &L->r[L->n++];
		memset(r, 0, sizeof *r);
		r->bold = path;
		r->events = str_printf("%s/%.*s_events.tsv", func, (int)stem, name);
		r->events_exist = is_file(r->events);
		r->sidecar = str_printf("%s/%.*s_bold.json", func, (int)stem, name);
		if (!is_file(r->sidecar)) {
			free(r->sidecar);
			r->sidecar = NULL;
		}
		r->subject = xstrdup(subject);
		r->session = session ? xstrdup(session) : NULL;
		r->task = xstrdup(task);
		r->run_index = index;
	}
	bids_strings_free(names, nn);
	return st;
}

static const char *base_name(const char *p)
{
	const char *s = strrchr(p, '/');

	return s ? s + 1 : p;
}

/* METHODS.md section 6: by run index, then file name; runs without an index last. */
static int cmp_run(const void *pa, const void *pb)
{
	const bids_run *a = pa, *b = pb;
	int c;

	if ((a->run_index < 0) != (b->run_index < 0))
		return a->run_index < 0 ? 1 : -1;
	if (a->run_index != b->run_index)
		return a->run_index < b->run_index ? -1 : 1;
	c = strcmp(base_name(a->bold), base_name(b->bold));
	return c ? c : strcmp(a->bold, b->bold);
}

sr_status bids_runs(const char *root, const char *subject, const char *task, bids_run **runs,
		    size_t *n, sr_err *e)
{
	run_list L = { NULL, 0, 0 };
	char *subdir = str_printf("%s/sub-%s", root, subject);
	char *func;
	char **ses;
	size_t nses = 0;
	sr_status st;
	int clash = 0;

	*runs = NULL;
	*n = 0;
	if (!is_dir(subdir)) {
		st = sr_fail(e, SR_EIO, "no subject folder %s", subdir);
		free(subdir);
		return st;
	}
	func = str_printf("%s/func", subdir);
	st = scan_func(func, subject, NULL, task, &L, e);
	free(func);
	ses = list_prefixed_dirs(subdir, "ses-", &nses);
	for (size_t s = 0; s < nses && !st; s++) {
		func = str_printf("%s/ses-%s/func", subdir, ses[s]);
		st = scan_func(func, subject, ses[s], task, &L, e);
		free(func);
	}
	bids_strings_free(ses, nses);
	free(subdir);
	if (st) {
		bids_runs_release(L.r, L.n);
		return st;
	}
	if (L.n)
		qsort(L.r, L.n, sizeof *L.r, cmp_run);
	for (size_t i = 0; i < L.n; i++) {
		if (L.r[i].run_index >= 0)
			L.r[i].label = str_printf("%d", L.r[i].run_index);
		else
			L.r[i].label = str_printf("%zu", i + 1);
	}
	for (size_t i = 0; i < L.n && !clash; i++)
		for (size_t j = 0; j < i; j++)
			if (strcmp(L.r[i].label, L.r[j].label) == 0) {
				clash = 1;
				sr_warnf(e,
					 "sub-%s task %s: runs %s and %s would share the label %s; labelling all runs by position",
					 subject, task, L.r[j].bold, L.r[i].bold, L.r[i].label);
				break;
			}
	if (clash)
		for (size_t i = 0; i < L.n; i++) {
			free(L.r[i].label);
			L.r[i].label = str_printf("%zu", i + 1);
		}
	*runs = L.r;
	*n = L.n;
	return SR_OK;
}

void bids_runs_release(bids_run *runs, size_t n)
{
	if (!runs)
		return;
	for (size_t i = 0; i < n; i++)
		run_free(&runs[i]);
	free(runs);
}

/*
 * The longest repetition time taken as real (common practice: fMRI TRs, sparse
 * designs included, are well under a minute). A sidecar value past it is most
 * likely milliseconds, and an absurd one (1e308) would overflow the design's
 * time grid far from the file that caused it.
 */
#define BIDS_TR_MAX 100.0

/*
 * Reads RepetitionTime from one sidecar. *found = 0 when the key is absent.
 * Malformed JSON and a RepetitionTime that is not a positive number are errors.
 */
static sr_status sidecar_tr(const char *path, double *tr, int *found, sr_err *e)
{
	json_error_t jerr;
	json_t *root = json_load_file(path, 0, &jerr), *v;
	sr_status st = SR_OK;

	*found = 0;
	if (!root) {
		if (jerr.line < 0)
			return sr_fail(e, SR_EIO, "cannot read %s: %s", path, jerr.text);
		return sr_fail(e, SR_EFORMAT, "%s: line %d, column %d: %s", path, jerr.line,
			       jerr.column, jerr.text);
	}
	if (!json_is_object(root)) {
		json_decref(root);
		return sr_fail(e, SR_EFORMAT, "%s: a sidecar must hold a JSON object", path);
	}
	v = json_object_get(root, "RepetitionTime");
	if (v) {
		double x = json_is_number(v) ? json_number_value(v) : NAN;

		if (!(isfinite(x) && x > 0))
			st = sr_fail(e, SR_EFORMAT,
				     "%s: RepetitionTime must be a positive number of seconds", path);
		else if (x > BIDS_TR_MAX)
			st = sr_fail(e, SR_EFORMAT,
				     "%s: RepetitionTime %g s is not a plausible repetition time (over %g s; "
				     "BIDS gives it in seconds, not milliseconds)", path, x, BIDS_TR_MAX);
		else {
			*tr = x;
			*found = 1;
		}
	}
	json_decref(root);
	return st;
}

sr_status bids_run_tr(const char *root, const bids_run *run, double header_tr, double *tr,
		      sr_err *e)
{
	char *cand[5];
	size_t nc = 0;
	char *dir, *from = NULL, *own;
	const char *slash;
	double side = 0;
	sr_status st = SR_OK;
	int have_side = 0;

	*tr = NAN;
	/* Least to most specific: a closer sidecar overrides the key. */
	dir = xstrdup(run->bold);
	slash = strrchr(dir, '/');
	if (slash)
		dir[slash - dir] = '\0';
	else
		strcpy(dir, ".");
	own = str_printf("%.*s_bold.json", (int)bold_stem(base_name(run->bold)),
			 base_name(run->bold));
	cand[nc++] = str_printf("%s/task-%s_bold.json", root, run->task);
	cand[nc++] = str_printf("%s/sub-%s/sub-%s_task-%s_bold.json", root, run->subject,
				run->subject, run->task);
	if (run->session) {
		cand[nc++] = str_printf("%s/sub-%s/ses-%s/sub-%s_ses-%s_task-%s_bold.json", root,
					run->subject, run->session, run->subject, run->session,
					run->task);
		cand[nc] = str_printf("%s/sub-%s_ses-%s_task-%s_bold.json", dir, run->subject,
				      run->session, run->task);
	} else {
		cand[nc] = str_printf("%s/sub-%s_task-%s_bold.json", dir, run->subject, run->task);
	}
	/* The func/ folder's task-level file, unless it is the run's own sidecar. */
	if (strcmp(base_name(cand[nc]), own) != 0)
		nc++;
	else
		free(cand[nc]);
	cand[nc++] = run->sidecar ? xstrdup(run->sidecar) : str_printf("%s/%s", dir, own);
	for (size_t i = 0; i < nc && !st; i++) {
		double x;
		int found;

		if (!is_file(cand[i]))
			continue;
		st = sidecar_tr(cand[i], &x, &found, e);
		if (!st && found) {
			side = x;
			have_side = 1;
			from = cand[i];
		}
	}
	if (!st) {
		int have_header = isfinite(header_tr) && header_tr > 0;

		if (have_side && have_header && fabs(side - header_tr) > 1e-3)
			st = sr_fail(e, SR_EFORMAT,
				     "repetition time disagrees: RepetitionTime %.9g s in %s but %.9g s in the header of %s",
				     side, from, header_tr, run->bold);
		else if (have_side)
			*tr = side;
		else if (have_header && header_tr > BIDS_TR_MAX)
			st = sr_fail(e, SR_EFORMAT,
				     "%s: pixdim[4] gives a repetition time of %g s, which is not plausible "
				     "(over %g s)", run->bold, header_tr, BIDS_TR_MAX);
		else if (have_header)
			*tr = header_tr;
		else
			st = sr_fail(e, SR_EFORMAT,
				     "%s: no repetition time: no RepetitionTime in its JSON sidecars and pixdim[4] of its header is not positive",
				     run->bold);
	}
	for (size_t i = 0; i < nc; i++)
		free(cand[i]);
	free(own);
	free(dir);
	return st;
}

char *bids_confounds_path(const bids_run *run, const char *suffix)
{
	size_t stem = bold_stem(base_name(run->bold));
	size_t dirlen = (size_t)(base_name(run->bold) - run->bold);

	if (stem == 0)
		return str_printf("%s%s", run->bold, suffix);
	return str_printf("%.*s%s", (int)(dirlen + stem), run->bold, suffix);
}
