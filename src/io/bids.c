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
#include "../core/strv.h"

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

/* 1 when the label is a BIDS label (letters and digits, not empty). */
static int bids_valid_label(const char *s)
{
	if (!s || !*s)
		return 0;
	for (; *s; s++)
		if (!((*s >= 'a' && *s <= 'z') || (*s >= 'A' && *s <= 'Z') || (*s >= '0' && *s <= '9')))
			return 0;
	return 1;
}

/*
 * Folder names under dir that begin with prefix, labels without it, sorted.
 * A missing dir gives zero names. With e: an entry of that prefix that is a
 * link that cannot be followed (a loop, a dangling link) or a folder whose
 * label is not a BIDS label is an error naming it (*st set); without e such
 * entries are skipped.
 */
static char **list_prefixed_dirs(const char *dir, const char *prefix, size_t *n, sr_err *e,
				 sr_status *st)
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
		struct stat sb, lsb;

		if (strncmp(de->d_name, prefix, plen) != 0 || de->d_name[plen] == '\0')
			continue;
		full = str_printf("%s/%s", dir, de->d_name);
		if (stat(full, &sb) != 0) {
			if (e && !*st && lstat(full, &lsb) == 0 && S_ISLNK(lsb.st_mode))
				*st = sr_fail(e, SR_EIO, "cannot access %s: %s", full, strerror(errno));
			free(full);
			continue;
		}
		if (S_ISDIR(sb.st_mode)) {
			if (!bids_valid_label(de->d_name + plen)) {
				if (e && !*st)
					*st = sr_fail(e, SR_EFORMAT,
						      "%s: '%s' is not a BIDS label (letters and digits only); rename the folder",
						      full, de->d_name + plen);
				free(full);
				continue;
			}
			XGROW(out, *n, cap);
			out[(*n)++] = xstrdup(de->d_name + plen);
		}
		free(full);
	}
	closedir(d);
	if (*n)
		qsort(out, *n, sizeof *out, strv_cmp);
	return out;
}

sr_status bids_subjects(const char *root, char ***labels, size_t *n, sr_err *e)
{
	DIR *d = opendir(root);
	sr_status st = SR_OK;

	*labels = NULL;
	*n = 0;
	if (!d)
		return sr_fail(e, SR_EIO, "cannot open the dataset folder %s: %s", root,
			       strerror(errno));
	closedir(d);
	*labels = list_prefixed_dirs(root, "sub-", n, e, &st);
	if (st) {
		strv_free_array(*labels, *n);
		*labels = NULL;
		*n = 0;
	}
	return st;
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

/* Adds v[0..len) to S unless S holds it (S is a set of distinct strings, sorted on demand). */
static void set_add(strv *S, const char *v, size_t len)
{
	for (size_t i = 0; i < S->n; i++)
		if (strlen(S->v[i]) == len && strncmp(S->v[i], v, len) == 0)
			return;
	XGROW(S->v, S->n, S->cap);
	S->v[S->n] = xmalloc(len + 1);
	memcpy(S->v[S->n], v, len);
	S->v[S->n++][len] = '\0';
}

/* "a, b, c" of the set, sorted; caller frees. */
static char *set_join(strv *S)
{
	size_t len = 1;
	char *out;

	strv_sort(S);
	for (size_t i = 0; i < S->n; i++)
		len += strlen(S->v[i]) + 2;
	out = xmalloc(len);
	out[0] = '\0';
	for (size_t i = 0; i < S->n; i++) {
		if (i)
			strcat(out, ", ");
		strcat(out, S->v[i]);
	}
	return out;
}

static void run_free(bids_run *r)
{
	free(r->bold);
	free(r->events);
	free(r->sidecar);
	free(r->subject);
	free(r->session);
	free(r->task);
	free(r->label);
	free(r->raw_bold);
	free(r->deriv_sidecar);
	free(r->confounds);
	free(r->brain_mask);
	free(r->space);
}

/* The entities only a derivative carries; dropped to find the raw run of a derivative. */
static int derivative_entity(const char *part, size_t len)
{
	static const char *const keys[] = { "space-", "res-", "den-", "desc-" };

	for (size_t k = 0; k < sizeof keys / sizeof *keys; k++)
		if (len > strlen(keys[k]) && strncmp(part, keys[k], strlen(keys[k])) == 0)
			return 1;
	return 0;
}

/* stem[0..len) without its derivative entities; xmalloc'ed. */
static char *raw_stem(const char *stem, size_t len)
{
	char *out = xmalloc(len + 1);
	size_t o = 0, i = 0;

	while (i < len) {
		size_t j = i;

		while (j < len && stem[j] != '_')
			j++;
		if (!derivative_entity(stem + i, j - i)) {
			if (o)
				out[o++] = '_';
			memcpy(out + o, stem + i, j - i);
			o += j - i;
		}
		i = j + 1;
	}
	out[o] = '\0';
	return out;
}

/* stem with the desc- value replaced (or appended when absent); xmalloc'ed. */
static char *with_desc(const char *stem, size_t len, const char *desc)
{
	const char *v;
	long n = entity(stem, len, "desc", &v);

	if (n < 0)
		return str_printf("%.*s_desc-%s", (int)len, stem, desc);
	return str_printf("%.*s%s%.*s", (int)(v - stem), stem, desc,
			  (int)(len - (size_t)(v - stem) - (size_t)n), v + n);
}

/*
 * 1 when every key-value part of cand[0..clen) appears in stem[0..slen)
 * with the same value (the BIDS inheritance rule: a file applies to the data
 * files whose entities include its own).
 */
static int entities_subset(const char *cand, size_t clen, const char *stem, size_t slen, int *count)
{
	size_t i = 0;

	*count = 0;
	while (i < clen) {
		size_t j = i, k;
		const char *dash;

		while (j < clen && cand[j] != '_')
			j++;
		dash = memchr(cand + i, '-', j - i);
		if (!dash || dash == cand + i)
			return 0;
		{
			char key[64];
			const char *v;
			long n;

			k = (size_t)(dash - (cand + i));
			if (k >= sizeof key)
				return 0;
			memcpy(key, cand + i, k);
			key[k] = '\0';
			n = entity(stem, slen, key, &v);
			if (n < 0 || (size_t)n != j - i - k - 1 || strncmp(v, dash + 1, (size_t)n) != 0)
				return 0;
		}
		(*count)++;
		i = j + 1;
	}
	return 1;
}

/*
 * The events file of a raw run: its own <stem>_events.tsv, else by the BIDS
 * inheritance rule the closest *_events.tsv (func/, session, subject, dataset
 * folder) whose entities all belong to the run, the one with most entities
 * first (then by name). *path is the own name when none is found.
 */
static void find_events(const char *raw, const char *subject, const char *session,
			const char *stem, char **path, int *exist)
{
	char *dirs[4];
	size_t nd = 0, slen = strlen(stem);

	if (session)
		dirs[nd++] = str_printf("%s/sub-%s/ses-%s/func", raw, subject, session);
	else
		dirs[nd++] = str_printf("%s/sub-%s/func", raw, subject);
	*path = str_printf("%s/%s_events.tsv", dirs[0], stem);
	*exist = is_file(*path);
	if (session)
		dirs[nd++] = str_printf("%s/sub-%s/ses-%s", raw, subject, session);
	dirs[nd++] = str_printf("%s/sub-%s", raw, subject);
	dirs[nd++] = xstrdup(raw);
	for (size_t k = 0; k < nd && !*exist; k++) {
		DIR *d = opendir(dirs[k]);
		struct dirent *de;
		char *best = NULL;
		int bestn = -1;

		if (!d)
			continue;
		while ((de = readdir(d)) != NULL) {
			size_t n = strlen(de->d_name), m = strlen("_events.tsv");
			int count;
			char *full;

			if (!has_suffix(de->d_name, "_events.tsv") || n == m)
				continue;
			if (!entities_subset(de->d_name, n - m, stem, slen, &count))
				continue;
			full = str_printf("%s/%s", dirs[k], de->d_name);
			if (!is_file(full) ||
			    !(count > bestn || (count == bestn && strcmp(full, best) < 0))) {
				free(full);
				continue;
			}
			free(best);
			best = full;
			bestn = count;
		}
		closedir(d);
		if (best) {
			free(*path);
			*path = best;
			*exist = 1;
		}
	}
	for (size_t k = 0; k < nd; k++)
		free(dirs[k]);
}

/* The BOLD file names of one func/ folder, sorted; *n of them (none when it cannot be opened). */
static char **list_bold_names(const char *func, size_t *n)
{
	DIR *d = opendir(func);
	struct dirent *de;
	char **names = NULL;
	size_t nn = 0, cap = 0;

	*n = 0;
	if (!d)
		return NULL;
	while ((de = readdir(d)) != NULL) {
		if (bold_stem(de->d_name) == 0)
			continue;
		XGROW(names, nn, cap);
		names[nn++] = xstrdup(de->d_name);
	}
	closedir(d);
	if (nn)
		qsort(names, nn, sizeof *names, strv_cmp);
	*n = nn;
	return names;
}

/* The run entity as a number in *index (-1 without one); an error when it is not a number. */
static sr_status run_index_of(const char *name, size_t stem, const char *path, int *index,
			      sr_err *e)
{
	const char *rv;
	long rlen = entity(name, stem, "run", &rv), v = 0;

	*index = -1;
	if (rlen < 0)
		return SR_OK;
	if (rlen == 0 || rlen > 9)
		return sr_fail(e, SR_EFORMAT, "%s: the run entity must be a number", path);
	for (long k = 0; k < rlen; k++) {
		if (rv[k] < '0' || rv[k] > '9')
			return sr_fail(e, SR_EFORMAT, "%s: the run entity 'run-%.*s' is not a number",
				       path, (int)rlen, rv);
		v = 10 * v + (rv[k] - '0');
	}
	*index = (int)v;
	return SR_OK;
}

/* Frees *p and sets it to NULL unless it names a file. */
static void keep_if_file(char **p)
{
	if (*p && !is_file(*p)) {
		free(*p);
		*p = NULL;
	}
}

/* A derivative run's other files: the raw names (events, sidecar), confounds, brain mask. */
static void fill_deriv_paths(bids_run *r, const char *name, size_t stem, const char *func,
			     const bids_src *src)
{
	char *rs = raw_stem(name, stem), *rawfunc, *mstem;

	rawfunc = r->session ? str_printf("%s/sub-%s/ses-%s/func", src->raw, r->subject, r->session)
			     : str_printf("%s/sub-%s/func", src->raw, r->subject);
	/* never read: the name the raw BOLD has, from which raw sidecars are inherited */
	r->raw_bold = str_printf("%s/%s_bold.nii.gz", rawfunc, rs);
	r->sidecar = str_printf("%s/%s_bold.json", rawfunc, rs);
	r->deriv_sidecar = str_printf("%s/%.*s_bold.json", func, (int)stem, name);
	r->confounds = str_printf("%s/%s_desc-confounds_timeseries.tsv", func, rs);
	if (!is_file(r->confounds)) {
		char *old = str_printf("%s/%s_desc-confounds_regressors.tsv", func, rs);

		if (is_file(old)) {
			free(r->confounds);
			r->confounds = old;
		} else {
			free(old);
		}
	}
	mstem = with_desc(name, stem, "brain");
	r->brain_mask = str_printf("%s/%s_mask.nii.gz", func, mstem);
	if (!is_file(r->brain_mask)) {
		free(r->brain_mask);
		r->brain_mask = str_printf("%s/%s_mask.nii", func, mstem);
		keep_if_file(&r->brain_mask);
	}
	free(mstem);
	find_events(src->raw, r->subject, r->session, rs, &r->events, &r->events_exist);
	free(rawfunc);
	free(rs);
	keep_if_file(&r->deriv_sidecar);
}

/* Appends a run for the BOLD file path (name in func) and finds its other files. */
static void add_run(run_list *L, char *path, const char *name, size_t stem, int index,
		    const char *func, const char *subject, const char *session, const char *task,
		    const bids_src *src)
{
	const char *sv;
	long slen;
	bids_run *r;

	XGROW(L->r, L->n, L->cap);
	r = &L->r[L->n++];
	memset(r, 0, sizeof *r);
	r->bold = path;
	r->subject = xstrdup(subject);
	r->session = session ? xstrdup(session) : NULL;
	r->task = xstrdup(task);
	r->run_index = index;
	slen = entity(name, stem, "space", &sv);
	if (slen >= 0)
		r->space = str_printf("%.*s", (int)slen, sv);
	if (src->deriv) {
		fill_deriv_paths(r, name, stem, func, src);
	} else {
		char *rs = str_printf("%.*s", (int)stem, name);

		find_events(src->raw, subject, session, rs, &r->events, &r->events_exist);
		r->sidecar = str_printf("%s/%s_bold.json", func, rs);
		free(rs);
	}
	keep_if_file(&r->sidecar);
}

/*
 * Whether the BOLD file names[i] of func is a run to add (*want 1) or to skip (0).
 * A run that cannot be read is an error, never skipped.
 */
static sr_status bold_wanted(char **names, size_t nn, size_t i, const char *path,
			     const char *func, const char *subject, const char *session,
			     const char *task, const bids_src *src, strv *descs, int *want,
			     sr_err *e)
{
	const char *name = names[i];
	size_t stem = bold_stem(name);
	struct stat sb;

	*want = 0;
	if (!entity_is(name, stem, "task", task))
		return SR_OK;
	/* A run that cannot be read (a link to data not fetched, a link loop, a device)
	   must not vanish from the splits: that would change which runs are odd. */
	if (stat(path, &sb) != 0)
		return sr_fail(e, SR_EIO, "cannot access %s: %s", path, strerror(errno));
	if (!S_ISREG(sb.st_mode))
		return sr_fail(e, SR_EIO, "%s is not a regular file (a BOLD run must be a NIfTI file); remove it or fix the link",
			       path);
	if (!entity_is(name, stem, "sub", subject) || !entity_is(name, stem, "ses", session)) {
		sr_warnf(e, "ignoring %s: its sub-/ses- entities do not match its folder", path);
		return SR_OK;
	}
	if (src->deriv) {
		const char *dv;
		long dlen = entity(name, stem, "desc", &dv);

		if (dlen >= 0)
			set_add(descs, dv, (size_t)dlen);
		else
			set_add(descs, "(none)", 6);
		if (!entity_is(name, stem, "desc", src->desc ? src->desc : "preproc") ||
		    (src->res && !entity_is(name, stem, "res", src->res)) ||
		    (src->space && !entity_is(name, stem, "space", src->space)))
			return SR_OK;
	}
	/* Both .nii and .nii.gz of one run: analysing both would count the run twice. */
	if (i + 1 < nn && bold_stem(names[i + 1]) == stem && strncmp(names[i + 1], name, stem) == 0)
		return sr_fail(e, SR_EFORMAT, "%s: both %s and %s exist; keep one", func, name,
			       names[i + 1]);
	*want = 1;
	return SR_OK;
}

/* Adds the matching BOLD files of one func/ folder. */
static sr_status scan_func(const char *func, const char *subject, const char *session,
			   const char *task, const bids_src *src, run_list *L, strv *descs,
			   sr_err *e)
{
	size_t nn;
	char **names = list_bold_names(func, &nn);
	sr_status st = SR_OK;

	for (size_t i = 0; i < nn; i++) {
		char *path = str_printf("%s/%s", func, names[i]);
		size_t stem = bold_stem(names[i]);
		int index = -1, want;

		st = bold_wanted(names, nn, i, path, func, subject, session, task, src, descs, &want,
				 e);
		if (!st && want)
			st = run_index_of(names[i], stem, path, &index, e);
		if (st || !want) {
			free(path);
			if (st)
				break;
			continue;
		}
		add_run(L, path, names[i], stem, index, func, subject, session, task, src);
	}
	strv_free_array(names, nn);
	return st;
}

static const char *base_name(const char *p)
{
	const char *s = strrchr(p, '/');

	return s ? s + 1 : p;
}

/* Session labels: none first; two numbers by value; else byte order. */
static int cmp_session(const char *a, const char *b)
{
	char *ea, *eb;
	unsigned long long x, y;

	if (!a || !b)
		return a ? 1 : (b ? -1 : 0);
	x = strtoull(a, &ea, 10);
	y = strtoull(b, &eb, 10);
	if (*a >= '0' && *a <= '9' && *b >= '0' && *b <= '9' && !*ea && !*eb && x != y)
		return x < y ? -1 : 1;
	return strcmp(a, b);
}

/* Session, then run index (runs without an index last in their session), then file name. */
static int cmp_run(const void *pa, const void *pb)
{
	const bids_run *a = pa, *b = pb;
	int c = cmp_session(a->session, b->session);

	if (c)
		return c;
	if ((a->run_index < 0) != (b->run_index < 0))
		return a->run_index < 0 ? 1 : -1;
	if (a->run_index != b->run_index)
		return a->run_index < b->run_index ? -1 : 1;
	c = strcmp(base_name(a->bold), base_name(b->bold));
	return c ? c : strcmp(a->bold, b->bold);
}

static int same_session(const bids_run *a, const bids_run *b)
{
	return (!a->session && !b->session) ||
	       (a->session && b->session && strcmp(a->session, b->session) == 0);
}

/* Into buf: the first entity whose value differs between the two BOLD names ("desc: preproc vs smooth"). */
static void entity_difference(const char *pa, const char *pb, char *buf, size_t len)
{
	const char *na = base_name(pa), *nb = base_name(pb);
	size_t la = bold_stem(na), lb = bold_stem(nb);

	for (int pass = 0; pass < 2; pass++) {
		const char *s = pass ? nb : na, *o = pass ? na : nb;
		size_t ls = pass ? lb : la, lo = pass ? la : lb, i = 0;

		while (i < ls) {
			size_t j = i, k;
			const char *dash, *v;
			char key[64];
			long n;

			while (j < ls && s[j] != '_')
				j++;
			dash = memchr(s + i, '-', j - i);
			k = dash ? (size_t)(dash - (s + i)) : 0;
			if (dash && k > 0 && k < sizeof key) {
				memcpy(key, s + i, k);
				key[k] = '\0';
				n = entity(o, lo, key, &v);
				if (n < 0 || (size_t)n != j - i - k - 1 || strncmp(v, dash + 1, (size_t)n) != 0) {
					if (pass == 0)
						snprintf(buf, len, "entity %s: %.*s vs %.*s", key, (int)(j - i - k - 1),
							 dash + 1, n < 0 ? 6 : (int)n, n < 0 ? "(none)" : v);
					else
						snprintf(buf, len, "entity %s: (none) vs %.*s", key,
							 (int)(j - i - k - 1), dash + 1);
					return;
				}
			}
			i = j + 1;
		}
	}
	snprintf(buf, len, "their names");
}

sr_status bids_find_runs(const bids_src *src, const char *subject, const char *task,
			 bids_run **runs, size_t *n, sr_err *e)
{
	run_list L = { NULL, 0, 0 };
	strv descs = { 0 };
	const char *root = src->deriv ? src->deriv : src->raw;
	char *subdir = str_printf("%s/sub-%s", root, subject);
	char *func;
	char **ses;
	size_t nses = 0;
	sr_status st = SR_OK;

	*runs = NULL;
	*n = 0;
	if (!is_dir(subdir)) {
		st = sr_fail(e, SR_EIO, "no subject folder %s", subdir);
		free(subdir);
		return st;
	}
	func = str_printf("%s/func", subdir);
	st = scan_func(func, subject, NULL, task, src, &L, &descs, e);
	free(func);
	ses = st ? NULL : list_prefixed_dirs(subdir, "ses-", &nses, e, &st);
	for (size_t s = 0; s < nses && !st; s++) {
		func = str_printf("%s/ses-%s/func", subdir, ses[s]);
		st = scan_func(func, subject, ses[s], task, src, &L, &descs, e);
		free(func);
	}
	strv_free_array(ses, nses);
	if (!st && src->deriv && L.n == 0 && descs.n) {
		size_t nsp;
		char **sp = bids_spaces(src->deriv, subject, task, &nsp);
		strv S = { sp, nsp, nsp };
		char *list = set_join(&S), *dl = set_join(&descs);

		st = sr_fail(e, SR_ESTUDY,
			     "sub-%s task %s: no preprocessed BOLD under %s with%s%s desc-%s%s%s (spaces present: %s; desc values present: %s)",
			     subject, task, subdir, src->space ? " space-" : "", src->space ? src->space : "",
			     src->desc ? src->desc : "preproc", src->res ? " res-" : "", src->res ? src->res : "",
			     nsp ? list : "none", dl);
		free(list);
		free(dl);
		strv_free_array(sp, nsp);
	}
	strv_free(&descs);
	if (!st && src->deriv && !src->space) {
		strv S = { 0 };

		for (size_t i = 0; i < L.n; i++)
			set_add(&S, L.r[i].space ? L.r[i].space : "(none)",
				strlen(L.r[i].space ? L.r[i].space : "(none)"));
		if (S.n > 1) {
			char *list = set_join(&S);

			st = sr_fail(e, SR_ESTUDY,
				     "sub-%s task %s: the runs under %s come in several spaces (%s); choose one with space = in [study]",
				     subject, task, subdir, list);
			free(list);
		}
		strv_free(&S);
	}
	free(subdir);
	if (!st && L.n)
		qsort(L.r, L.n, sizeof *L.r, cmp_run);
	/* a run is its entities: two files for one run would mix two images of it */
	for (size_t i = 1; i < L.n && !st; i++)
		if (same_session(&L.r[i - 1], &L.r[i]) && L.r[i - 1].run_index == L.r[i].run_index) {
			char diff[256];

			entity_difference(L.r[i - 1].bold, L.r[i].bold, diff, sizeof diff);
			st = sr_fail(e, SR_ESTUDY,
				     "sub-%s task %s: two files for one run: %s and %s (they differ in %s); keep one%s",
				     subject, task, L.r[i - 1].bold, L.r[i].bold, diff,
				     src->deriv ? ", or narrow the choice with space =, desc = or res = in [study]" : "");
		}
	for (size_t i = 0; i < L.n && !st; i++) {
		bids_run *r = &L.r[i];

		if (r->run_index >= 0)
			r->label = r->session ? str_printf("%s.%d", r->session, r->run_index)
					      : str_printf("%d", r->run_index);
		else
			r->label = r->session ? xstrdup(r->session) : xstrdup("1");
		for (size_t j = 0; j < i && !st; j++)
			if (strcmp(L.r[j].label, r->label) == 0)
				st = sr_fail(e, SR_ESTUDY,
					     "sub-%s task %s: runs %s and %s would both be run %s in the tables; give each a run- entity",
					     subject, task, L.r[j].bold, r->bold, r->label);
	}
	if (st) {
		bids_runs_release(L.r, L.n);
		return st;
	}
	*runs = L.r;
	*n = L.n;
	return SR_OK;
}

sr_status bids_runs(const char *root, const char *subject, const char *task, bids_run **runs,
		    size_t *n, sr_err *e)
{
	bids_src src = { root, NULL, NULL, NULL, NULL };

	return bids_find_runs(&src, subject, task, runs, n, e);
}

static void spaces_in(const char *func, const char *task, strv *S)
{
	DIR *d = opendir(func);
	struct dirent *de;

	if (!d)
		return;
	while ((de = readdir(d)) != NULL) {
		size_t stem = bold_stem(de->d_name);
		const char *v;
		long n;

		if (!stem || !entity_is(de->d_name, stem, "task", task))
			continue;
		n = entity(de->d_name, stem, "space", &v);
		if (n >= 0)
			set_add(S, v, (size_t)n);
		else
			set_add(S, "(none)", 6);
	}
	closedir(d);
}

char **bids_spaces(const char *deriv, const char *subject, const char *task, size_t *n)
{
	strv S = { 0 };
	char *subdir = str_printf("%s/sub-%s", deriv, subject), *func;
	char **ses;
	size_t nses;

	func = str_printf("%s/func", subdir);
	spaces_in(func, task, &S);
	free(func);
	ses = list_prefixed_dirs(subdir, "ses-", &nses, NULL, NULL);
	for (size_t s = 0; s < nses; s++) {
		func = str_printf("%s/ses-%s/func", subdir, ses[s]);
		spaces_in(func, task, &S);
		free(func);
	}
	strv_free_array(ses, nses);
	free(subdir);
	strv_sort(&S);
	*n = S.n;
	return S.v;
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
	dir = xstrdup(run->raw_bold ? run->raw_bold : run->bold);
	slash = strrchr(dir, '/');
	if (slash)
		dir[slash - dir] = '\0';
	else
		strcpy(dir, ".");
	{
		const char *rb = run->raw_bold ? run->raw_bold : run->bold;

		own = str_printf("%.*s_bold.json", (int)bold_stem(base_name(rb)), base_name(rb));
	}
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
	/* a derivative's own sidecar says what the pipeline wrote; it must agree with the raw one */
	if (!st && run->deriv_sidecar && is_file(run->deriv_sidecar)) {
		double x;
		int found;

		st = sidecar_tr(run->deriv_sidecar, &x, &found, e);
		if (!st && found && have_side && fabs(x - side) > 1e-3)
			st = sr_fail(e, SR_EFORMAT,
				     "repetition time disagrees: RepetitionTime %.9g s in %s but %.9g s in %s",
				     x, run->deriv_sidecar, side, from);
		else if (!st && found) {
			side = x;
			have_side = 1;
			from = run->deriv_sidecar;
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

	if (run->confounds)
		return xstrdup(run->confounds);
	if (stem == 0)
		return str_printf("%s%s", run->bold, suffix);
	return str_printf("%.*s%s", (int)(dirlen + stem), run->bold, suffix);
}

int bids_is_derivative(const char *root)
{
	char *path = str_printf("%s/dataset_description.json", root);
	json_t *j = json_load_file(path, 0, NULL), *v;
	int yes;

	free(path);
	v = j && json_is_object(j) ? json_object_get(j, "DatasetType") : NULL;
	yes = v && json_is_string(v) && strcmp(json_string_value(v), "derivative") == 0;
	json_decref(j);
	return yes;
}
