/* groupstat.c - the group stage: group statistics over the subjects' responses.csv tables
 * (group.csv, group_subjects.csv, the wide tables, --by and the reliability/time-course tables). */
#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/err.h"
#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/stats.h"
#include "../core/text.h"
#include "../io/csvout.h"
#include "../io/jdoc.h"
#include "../io/table.h"
#include "../report/report.h"
#include "groupstat.h"
#include "reliability.h"
#include "tabledict.h"
#include "timecourse.h"
#include "tablekeys.h"

/* Prints "splitroi group: message" on stderr (the group command's and analyze's group step's errors). */
static void errf(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
static void errf(const char *fmt, ...)
{
	va_list ap;

	fprintf(stderr, "splitroi group: ");
	va_start(ap, fmt);
	vfprintf(stderr, fmt, ap);
	va_end(ap);
	fputc('\n', stderr);
}

/* The split kinds tested at the group level; other split rows are per-split details. */
static int tested_split(const char *s)
{
	return strcmp(s, "odd-even:mean") == 0 || strcmp(s, "leave-one-out:mean") == 0 ||
	       strcmp(s, "all") == 0;
}

/* ---- string interning (first-seen order is the index order) ---- */

typedef struct strtab {
	char **s;
	size_t n, cap;
	size_t *slot;      /* index + 1, 0 = empty */
	size_t nslot;      /* power of two */
} strtab;

static uint64_t str_hash(const char *s)
{
	uint64_t h = 1469598103934665603ULL;

	while (*s)
		h = (h ^ (unsigned char)*s++) * 1099511628211ULL;
	return h;
}

static void strtab_release(strtab *t)
{
	size_t i;

	for (i = 0; i < t->n; i++)
		free(t->s[i]);
	free(t->s);
	free(t->slot);
	memset(t, 0, sizeof *t);
}

/* Index of s, or (size_t)-1 when absent. */
static size_t strtab_find(const strtab *t, const char *s)
{
	size_t h;

	if (!t->nslot)
		return (size_t)-1;
	for (h = str_hash(s) & (t->nslot - 1); t->slot[h]; h = (h + 1) & (t->nslot - 1))
		if (strcmp(t->s[t->slot[h] - 1], s) == 0)
			return t->slot[h] - 1;
	return (size_t)-1;
}

static void strtab_grow(strtab *t)
{
	size_t i, n = t->nslot ? 2 * t->nslot : 64;

	free(t->slot);
	t->slot = xcalloc(n, sizeof *t->slot);
	t->nslot = n;
	for (i = 0; i < t->n; i++) {
		size_t h = str_hash(t->s[i]) & (n - 1);

		while (t->slot[h])
			h = (h + 1) & (n - 1);
		t->slot[h] = i + 1;
	}
}

/* Index of s, adding it at the end when new. */
static size_t strtab_add(strtab *t, const char *s)
{
	size_t i = strtab_find(t, s), h;

	if (i != (size_t)-1)
		return i;
	XGROW(t->s, t->n, t->cap);
	t->s[t->n] = xstrdup(s);
	t->n++;
	if (2 * t->n > t->nslot) {
		strtab_grow(t);
	} else {
		for (h = str_hash(s) & (t->nslot - 1); t->slot[h]; h = (h + 1) & (t->nslot - 1))
			;
		t->slot[h] = t->n;
	}
	return t->n - 1;
}

/* ---- the analysis state ---- */

enum subj_status { SUBJ_USED, SUBJ_MISSING, SUBJ_UNREADABLE, SUBJ_EXCLUDED };
static const char *const subj_status_name[] = { "used", "missing", "unreadable", "excluded" };

typedef struct subject {
	char *label;
	enum subj_status status;
	char *reason;      /* NULL or owned text */
} subject;

/* One (localizer, parcel, split, task, effect): a value per subject. */
typedef struct cell {
	size_t loc, parcel, split, task, effect;
	int paired;
	double *v;         /* nsubj values, NaN = none */
	double *nvox;      /* nsubj fROI sizes, NaN = none */
	unsigned char *seen;
} cell;

/* One group.csv row: a cell's statistics. */
typedef struct grow {
	size_t cell;
	stats_one s;
	double q, mean_nvox;
} grow;

typedef struct group_ctx {
	const char *out;
	const char *shown;  /* the folder the "wrote" line names, NULL = out */
	subject *subj;
	size_t nsubj, capsubj, nused, nmissing, nexcluded;
	strtab locs, parcels, splits, tasks, effects, keys;
	cell *cells;
	size_t ncells, capcells;
	grow *rows;
	size_t nrows;
	double alpha;
	int quiet;
	/* participants.tsv: its columns but participant_id, and each subject's row (-1: none) */
	table ptab;
	int have_ptab;
	int *pcol;
	char **pname;
	size_t npcols;
	long *prow;
} group_ctx;

static void warnf(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
static void warnf(const char *fmt, ...)
{
	va_list ap;

	fprintf(stderr, "splitroi group: warning: ");
	va_start(ap, fmt);
	vfprintf(stderr, fmt, ap);
	va_end(ap);
	fputc('\n', stderr);
}

static void warn_sink(void *ctx, const char *msg)
{
	(void)ctx;
	warnf("%s", msg);
}

/* reliability_group.csv and timecourses_group.csv over the subjects used (reliability.c, timecourse.c). */
static int write_reliability(const group_ctx *g, sr_err *e)
{
	char **labels = xmalloc_array(g->nsubj ? g->nsubj : 1, sizeof *labels);
	size_t i, n = 0;
	int rc;

	for (i = 0; i < g->nsubj; i++)
		if (g->subj[i].status == SUBJ_USED)
			labels[n++] = g->subj[i].label;
	e->warn = warn_sink;
	rc = reliability_group_write(g->out, labels, n, e) != SR_OK || timecourse_group_write(g->out, labels, n, e) != SR_OK;
	e->warn = NULL;
	free(labels);
	return rc;
}

static char *path_join(const char *a, const char *b)
{
	size_t la = strlen(a), lb = strlen(b);
	char *p = xmalloc(la + lb + 2);

	memcpy(p, a, la);
	p[la] = '/';
	memcpy(p + la + 1, b, lb + 1);
	if (la && a[la - 1] == '/')
		memmove(p + la, p + la + 1, lb + 1);
	return p;
}

static const char *strip_sub(const char *s)
{
	return strncmp(s, "sub-", 4) == 0 ? s + 4 : s;
}

static size_t find_subject(const group_ctx *g, const char *label)
{
	size_t i;

	for (i = 0; i < g->nsubj; i++)
		if (strcmp(g->subj[i].label, label) == 0)
			return i;
	return (size_t)-1;
}

static void add_subject(group_ctx *g, const char *label)
{
	if (find_subject(g, label) != (size_t)-1)
		return;
	XGROW(g->subj, g->nsubj, g->capsubj);
	g->subj[g->nsubj].label = xstrdup(label);
	g->subj[g->nsubj].status = SUBJ_USED;
	g->subj[g->nsubj].reason = NULL;
	g->nsubj++;
}

static int cmp_subject(const void *a, const void *b)
{
	return strcmp(((const subject *)a)->label, ((const subject *)b)->label);
}

/* Subjects: the sub-<label> folders of OUT (sorted), or the --subjects list in its order. */
static int find_subjects(group_ctx *g, const groupstat_opts *o)
{
	const char *list = o->subject_list;

	/* analyze's labels are taken as they are: never joined into one string */
	if (o->subjects && o->nsubjects) {
		for (size_t i = 0; i < o->nsubjects; i++)
			add_subject(g, o->subjects[i]);
		return 0;
	}
	if (list) {
		char *copy = xstrdup(list), *tok, *save = NULL;

		for (tok = strtok_r(copy, ", \t", &save); tok; tok = strtok_r(NULL, ", \t", &save))
			if (*strip_sub(tok))
				add_subject(g, strip_sub(tok));
		free(copy);
		if (g->nsubj == 0) {
			errf("--subjects names no subject");
			return 2;
		}
		return 0;
	}
	{
		DIR *d = opendir(g->out);
		struct dirent *de;

		if (!d) {
			errf("%s: cannot read the folder: %s", g->out, strerror(errno));
			return 1;
		}
		while ((de = readdir(d)) != NULL) {
			char *p;
			struct stat st;

			if (strncmp(de->d_name, "sub-", 4) != 0 || de->d_name[4] == '\0')
				continue;
			p = path_join(g->out, de->d_name);
			if (stat(p, &st) == 0 && S_ISDIR(st.st_mode))
				add_subject(g, de->d_name + 4);
			free(p);
		}
		closedir(d);
	}
	if (g->nsubj == 0) {
		errf("%s: no sub-<label> folders (is this the study's out folder?)", g->out);
		return 1;
	}
	qsort(g->subj, g->nsubj, sizeof *g->subj, cmp_subject);
	return 0;
}

/* --exclude FILE: marks subjects excluded with their reason. */
static int read_exclusions(group_ctx *g, const char *path)
{
	table t;
	sr_err e;
	size_t len = strlen(path), r;
	char delim = len >= 4 && strcmp(path + len - 4, ".csv") == 0 ? ',' : '\t';
	int cs, cr;

	sr_err_init(&e, NULL, NULL);
	if (table_read(path, delim, &t, &e) != SR_OK) {
		errf("%s", e.msg);
		return 1;
	}
	cs = table_col(&t, "subject");
	cr = table_col(&t, "reason");
	if (cs < 0) {
		errf("%s: no column 'subject' (the exclusion list needs subject and reason)",
		     path);
		table_release(&t);
		return 1;
	}
	for (r = 0; r < t.nrows; r++) {
		const char *lab = strip_sub(table_cell(&t, r, (size_t)cs));
		const char *why = cr >= 0 ? table_cell(&t, r, (size_t)cr) : "";
		size_t i;

		if (!*lab)
			continue;
		i = find_subject(g, lab);
		if (i == (size_t)-1) {
			warnf("%s: line %zu: excluded subject '%s' is not among the subjects", path,
			      t.line[r], lab);
			add_subject(g, lab);
			i = g->nsubj - 1;
		}
		if (g->subj[i].status != SUBJ_EXCLUDED) {
			g->subj[i].status = SUBJ_EXCLUDED;
			g->subj[i].reason = xstrdup(*why ? why : "excluded (no reason given)");
		}
	}
	table_release(&t);
	return 0;
}

static cell *cell_get(group_ctx *g, size_t l, size_t p, size_t s, size_t t, size_t ef, int create)
{
	char key[160];
	size_t i;

	snprintf(key, sizeof key, "%zu,%zu,%zu,%zu,%zu", l, p, s, t, ef);
	if (!create) {
		i = strtab_find(&g->keys, key);
		return i == (size_t)-1 ? NULL : &g->cells[i];
	}
	i = strtab_add(&g->keys, key);
	if (i == g->ncells) {
		cell *c;
		size_t k;

		XGROW(g->cells, g->ncells, g->capcells);
		c = &g->cells[g->ncells++];
		c->loc = l;
		c->parcel = p;
		c->split = s;
		c->task = t;
		c->effect = ef;
		c->paired = 0;
		c->v = xmalloc_array(g->nsubj, sizeof *c->v);
		c->nvox = xmalloc_array(g->nsubj, sizeof *c->nvox);
		c->seen = xcalloc(g->nsubj, 1);
		for (k = 0; k < g->nsubj; k++)
			c->v[k] = c->nvox[k] = NAN;
	}
	return &g->cells[i];
}

/* Reads one subject's table into the cells. Returns 0, or 1 after printing an error. */
static int load_table(group_ctx *g, size_t si, const char *path)
{
	static const char *const need[] = { "subject", "parcel", "split", "measure_task", "effect", "value" };
	int col[6], cvox, cloc;
	table t;
	sr_err e;
	size_t r, k;

	sr_err_init(&e, NULL, NULL);
	if (table_read(path, ',', &t, &e) != SR_OK) {
		if (e.code == SR_EIO) {
			warnf("%s (the subject is left out)", e.msg);
			g->subj[si].status = SUBJ_UNREADABLE;
			g->subj[si].reason = xstrdup(e.msg);
			return 0;
		}
		errf("%s", e.msg);
		return 1;
	}
	for (k = 0; k < 6; k++) {
		col[k] = table_col(&t, need[k]);
		if (col[k] < 0) {
			errf("%s: no column '%s' (a responses.csv has subject, parcel, split, "
			     "measure_task, effect, value)", path, need[k]);
			table_release(&t);
			return 1;
		}
	}
	cvox = table_col(&t, "n_voxels");
	cloc = table_col(&t, "localizer");   /* tables from before several localizers have none */
	if (t.nrows == 0)
		warnf("%s: the table has no rows", path);
	for (r = 0; r < t.nrows; r++) {
		const char *sub = table_cell(&t, r, (size_t)col[0]);
		const char *par = table_cell(&t, r, (size_t)col[1]);
		const char *spl = table_cell(&t, r, (size_t)col[2]);
		const char *tsk = table_cell(&t, r, (size_t)col[3]);
		const char *eff = table_cell(&t, r, (size_t)col[4]);
		double v, nv = NAN;
		int na;
		cell *c;

		if (table_number(&t, r, (size_t)col[5], &v, &na, 1, &e) != SR_OK ||
		    (cvox >= 0 && table_number(&t, r, (size_t)cvox, &nv, &na, 1, &e) != SR_OK)) {
			errf("%s", e.msg);
			table_release(&t);
			return 1;
		}
		if (strcmp(strip_sub(sub), g->subj[si].label) != 0) {
			errf("%s: line %zu, column %d (subject): '%s' in the table of subject '%s'",
			     path, t.line[r], col[0] + 1, sub, g->subj[si].label);
			table_release(&t);
			return 1;
		}
		for (k = 1; k < 5; k++)
			if (!*table_cell(&t, r, (size_t)col[k])) {
				errf("%s: line %zu, column %d (%s): empty", path, t.line[r],
				     col[k] + 1, need[k]);
				table_release(&t);
				return 1;
			}
		if (!tested_split(spl))
			continue;
		c = cell_get(g, strtab_add(&g->locs, cloc >= 0 ? table_cell(&t, r, (size_t)cloc) : ""),
			     strtab_add(&g->parcels, par), strtab_add(&g->splits, spl),
			     strtab_add(&g->tasks, tsk), strtab_add(&g->effects, eff), 1);
		if (c->seen[si]) {
			char lw[600] = "";

			if (cloc >= 0)
				snprintf(lw, sizeof lw, "localizer '%s', ", table_cell(&t, r, (size_t)cloc));
			errf("%s: line %zu: a second row for %sparcel '%s', split '%s', task '%s', "
			     "effect '%s'", path, t.line[r], lw, par, spl, tsk, eff);
			table_release(&t);
			return 1;
		}
		c->seen[si] = 1;
		c->v[si] = v;
		c->nvox[si] = nv;
	}
	table_release(&t);
	return 0;
}

static int load_subjects(group_ctx *g)
{
	size_t i;

	for (i = 0; i < g->nsubj; i++) {
		subject *s = &g->subj[i];
		char dir[4096], *path;
		struct stat st;

		if (s->status == SUBJ_EXCLUDED) {
			g->nexcluded++;
			continue;
		}
		snprintf(dir, sizeof dir, "sub-%s", s->label);
		{
			char *d = path_join(g->out, dir);

			path = path_join(d, "responses.csv");
			free(d);
		}
		if (stat(path, &st) != 0) {
			s->status = SUBJ_MISSING;
			size_t len = strlen(s->label) + 64;

			/* named relative to OUT: analyze runs this step on a snapshot folder */
			s->reason = xmalloc(len);
			snprintf(s->reason, len, "sub-%s/responses.csv: no such file", s->label);
			warnf("%s", s->reason);
		} else if (load_table(g, i, path) != 0) {
			free(path);
			return 1;
		}
		free(path);
		if (s->status == SUBJ_USED)
			g->nused++;
		else
			g->nmissing++;
	}
	if (g->nused == 0) {
		errf("%s: no subject's responses.csv could be read", g->out);
		return 1;
	}
	return 0;
}

/* ---- participants.tsv ---- */

/* The participants.tsv of the dataset OUT/dataset_description.json names (file:// URLs), or NULL. */
static char *participants_from_description(const char *out)
{
	char *dd = path_join(out, "dataset_description.json"), **urls = NULL, *found = NULL;
	size_t n = 0, i;
	sr_err e;
	struct stat st;

	sr_err_init(&e, NULL, NULL);
	if (stat(dd, &st) == 0 && jdoc_read_array_member(dd, "SourceDatasets", "URL", &urls, &n, &e) == SR_OK)
		for (i = 0; i < n && !found; i++)
			if (strncmp(urls[i], "file://", 7) == 0)   /* the raw dataset comes first */
				found = path_join(urls[i] + 7, "participants.tsv");
	strv_free_array(urls, n);
	free(dd);
	return found;
}

/*
 * Reads participants.tsv and finds each subject's row by participant_id. An
 * absent file or subject is a warning (empty cells); a file without a
 * participant_id column, or one that cannot be parsed, is an error.
 */
static int load_participants(group_ctx *g, const char *path)
{
	sr_err e;
	struct stat st;
	int cid, c;
	size_t i, r;

	g->prow = xmalloc_array(g->nsubj ? g->nsubj : 1, sizeof *g->prow);
	for (i = 0; i < g->nsubj; i++)
		g->prow[i] = -1;
	if (!path) {
		warnf("no participants.tsv (OUT/dataset_description.json names no dataset; give --participants FILE): no participant columns");
		return 0;
	}
	if (stat(path, &st) != 0) {
		warnf("%s: no such file: no participant columns", path);
		return 0;
	}
	sr_err_init(&e, NULL, NULL);
	if (table_read(path, '\t', &g->ptab, &e) != SR_OK) {
		errf("%s", e.msg);
		return 1;
	}
	g->have_ptab = 1;
	cid = table_col(&g->ptab, "participant_id");
	if (cid < 0) {
		errf("%s: line %zu: no column 'participant_id'", path, g->ptab.header_line);
		return 1;
	}
	g->pcol = xmalloc_array(g->ptab.ncols ? g->ptab.ncols : 1, sizeof *g->pcol);
	g->pname = xmalloc_array(g->ptab.ncols ? g->ptab.ncols : 1, sizeof *g->pname);
	for (c = 0; c < (int)g->ptab.ncols; c++) {
		const char *h = g->ptab.header[c];

		if (c == cid)
			continue;
		if (strcmp(h, "subject") == 0 || strcmp(h, "status") == 0 || strcmp(h, "reason") == 0) {
			warnf("%s: column '%s' is left out (the tables have a column of that name)", path, h);
			continue;
		}
		g->pcol[g->npcols] = c;
		g->pname[g->npcols++] = g->ptab.header[c];
	}
	for (r = 0; r < g->ptab.nrows; r++) {
		const char *id = table_cell(&g->ptab, r, (size_t)cid);
		size_t k = find_subject(g, strip_sub(id));

		if (strncmp(id, "sub-", 4) != 0)
			warnf("%s: line %zu: participant_id '%s' does not start with sub-", path, g->ptab.line[r], id);
		if (k == (size_t)-1)
			continue;
		if (g->prow[k] >= 0) {
			errf("%s: line %zu: a second row for %s", path, g->ptab.line[r], id);
			return 1;
		}
		g->prow[k] = (long)r;
	}
	for (i = 0; i < g->nsubj; i++)
		if (g->prow[i] < 0)
			warnf("%s: no row for sub-%s: its participant columns are empty", path, g->subj[i].label);
	return 0;
}

/* Subject s's value of participant column k ("" when absent or n/a). */
static const char *pcell(const group_ctx *g, size_t s, size_t k)
{
	const char *v;

	if (!g->have_ptab || g->prow[s] < 0)
		return "";
	v = table_cell(&g->ptab, (size_t)g->prow[s], (size_t)g->pcol[k]);
	return strcmp(v, "n/a") == 0 ? "" : v;
}

/* The participant_id of subject s ("sub-<label>") into buf. */
static const char *pid(const group_ctx *g, size_t s, char *buf, size_t n)
{
	snprintf(buf, n, "sub-%s", g->subj[s].label);
	return buf;
}

/* The header: first (nfirst names), the participant columns, then rest (nrest); xmalloc'ed array. */
static const char **with_participants(const group_ctx *g, const char *const *first, size_t nfirst,
				      const char *const *rest, size_t nrest, size_t *n)
{
	const char **h = xmalloc_array(nfirst + g->npcols + nrest + 1, sizeof *h);
	size_t i;

	*n = 0;
	for (i = 0; i < nfirst; i++)
		h[(*n)++] = first[i];
	for (i = 0; i < g->npcols; i++)
		h[(*n)++] = g->pname[i];
	for (i = 0; i < nrest; i++)
		h[(*n)++] = rest[i];
	return h;
}

/* --paired A:B[,C:D]: adds difference cells "A vs B" where a task has both effects. */
static int parse_pairs(const char *spec, char ***pairs, size_t *npairs)
{
	char *copy = xstrdup(spec), *tok, *save = NULL;
	size_t cap = 0;

	*pairs = NULL;
	*npairs = 0;
	for (tok = strtok_r(copy, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
		char *colon = strchr(tok, ':'), *a, *b;

		while (*tok == ' ')
			tok++;
		if (!colon || colon == tok || !colon[1] || strchr(colon + 1, ':')) {
			errf("--paired wants EFFECT:EFFECT pairs separated by commas, not '%s'",
			     tok);
			free(copy);
			return 2;
		}
		*colon = '\0';
		a = tok;
		b = colon + 1;
		while (*b == ' ')
			b++;
		if (strcmp(a, b) == 0) {
			errf("--paired '%s:%s' pairs an effect with itself", a, b);
			free(copy);
			return 2;
		}
		XGROW(*pairs, *npairs, cap);
		(*pairs)[(*npairs)++] = xstrdup(a);
		XGROW(*pairs, *npairs, cap);
		(*pairs)[(*npairs)++] = xstrdup(b);
	}
	free(copy);
	if (*npairs == 0) {
		errf("--paired names no pair");
		return 2;
	}
	return 0;
}

static void effects_list(const group_ctx *g, char *buf, size_t n)
{
	size_t i, len = 0;

	buf[0] = '\0';
	for (i = 0; i < g->effects.n && len + 1 < n; i++)
		len += (size_t)snprintf(buf + len, n - len, "%s%s", i ? ", " : "", g->effects.s[i]);
}

static int make_pairs(group_ctx *g, char **pairs, size_t npairs)
{
	size_t k, i, base = g->ncells;

	for (k = 0; k < npairs; k += 2) {
		size_t ea = strtab_find(&g->effects, pairs[k]), eb = strtab_find(&g->effects, pairs[k + 1]);
		size_t made = 0, ep;
		char name[1024], known[1024];

		if (ea == (size_t)-1 || eb == (size_t)-1) {
			const char *bad = ea == (size_t)-1 ? pairs[k] : pairs[k + 1];
			const char *near = text_nearest(bad, (const char *const *)g->effects.s, g->effects.n);

			effects_list(g, known, sizeof known);
			if (near)
				errf("--paired: no effect '%s' in the tables; did you mean '%s'?",
				     bad, near);
			else
				errf("--paired: no effect '%s' in the tables (effects: %s)", bad,
				     known);
			return 1;
		}
		snprintf(name, sizeof name, "%s vs %s", pairs[k], pairs[k + 1]);
		ep = strtab_add(&g->effects, name);
		for (i = 0; i < base; i++) {
			cell *b, *d;
			size_t s, bi;

			if (g->cells[i].effect != ea || g->cells[i].paired)
				continue;
			b = cell_get(g, g->cells[i].loc, g->cells[i].parcel, g->cells[i].split, g->cells[i].task, eb, 0);
			if (!b)
				continue;
			bi = (size_t)(b - g->cells);
			/* creating a cell may move the array: index, not pointers, across it */
			d = cell_get(g, g->cells[i].loc, g->cells[i].parcel, g->cells[i].split, g->cells[i].task, ep, 1);
			b = &g->cells[bi];
			d->paired = 1;
			for (s = 0; s < g->nsubj; s++) {
				d->v[s] = g->cells[i].v[s] - b->v[s];
				d->nvox[s] = g->cells[i].nvox[s];
			}
			made++;
		}
		if (made == 0) {
			errf("--paired: no task has both '%s' and '%s'", pairs[k], pairs[k + 1]);
			return 1;
		}
	}
	return 0;
}

/* ---- statistics ---- */

typedef struct sortkey {
	size_t k[5];
	size_t cell;
} sortkey;

static int cmp_key(const void *a, const void *b)
{
	const sortkey *x = a, *y = b;
	int i;

	for (i = 0; i < 5; i++)
		if (x->k[i] != y->k[i])
			return x->k[i] < y->k[i] ? -1 : 1;
	return 0;
}

static void compute(group_ctx *g)
{
	sortkey *keys = xmalloc_array(g->ncells ? g->ncells : 1, sizeof *keys);
	size_t i, r, f, *fam, nfam = 0;
	double *p, *q;

	for (i = 0; i < g->ncells; i++) {
		keys[i].k[0] = g->cells[i].loc;
		keys[i].k[1] = g->cells[i].parcel;
		keys[i].k[2] = g->cells[i].split;
		keys[i].k[3] = g->cells[i].task;
		keys[i].k[4] = g->cells[i].effect;
		keys[i].cell = i;
	}
	qsort(keys, g->ncells, sizeof *keys, cmp_key);
	g->nrows = g->ncells;
	g->rows = xmalloc_array(g->nrows ? g->nrows : 1, sizeof *g->rows);
	fam = xmalloc_array(g->nrows ? g->nrows : 1, sizeof *fam);
	for (r = 0; r < g->nrows; r++) {
		const cell *c = &g->cells[keys[r].cell];
		double sv = 0;
		size_t nv = 0, s;

		g->rows[r].cell = keys[r].cell;
		stats_one_sample(c->v, g->nsubj, &g->rows[r].s);
		g->rows[r].q = NAN;
		for (s = 0; s < g->nsubj; s++)
			if (isfinite(c->v[s]) && isfinite(c->nvox[s])) {
				sv += c->nvox[s];
				nv++;
			}
		g->rows[r].mean_nvox = nv ? sv / (double)nv : NAN;
		fam[r] = (size_t)-1;
	}
	/* Families: (localizer, split kind, task, effect); BH over their parcels (METHODS.md 9, 11). */
	{
		strtab fams = { 0 };

		for (r = 0; r < g->nrows; r++) {
			const cell *c = &g->cells[g->rows[r].cell];
			char key[96];

			snprintf(key, sizeof key, "%zu,%zu,%zu,%zu", c->loc, c->split, c->task, c->effect);
			fam[r] = strtab_add(&fams, key);
		}
		nfam = fams.n;
		strtab_release(&fams);
	}
	p = xmalloc_array(g->nrows ? g->nrows : 1, sizeof *p);
	q = xmalloc_array(g->nrows ? g->nrows : 1, sizeof *q);
	for (f = 0; f < nfam; f++) {
		size_t m = 0;

		for (r = 0; r < g->nrows; r++)
			if (fam[r] == f)
				p[m++] = g->rows[r].s.p;
		stats_bh(p, m, q);
		m = 0;
		for (r = 0; r < g->nrows; r++)
			if (fam[r] == f)
				g->rows[r].q = q[m++];
	}
	free(p);
	free(q);
	free(fam);
	free(keys);
}

/* ---- outputs ---- */

static void row_note(const group_ctx *g, const grow *r, char *buf, size_t n)
{
	size_t len = 0;

	buf[0] = '\0';
#define NOTE(text) (len += (size_t)snprintf(buf + len, len < n ? n - len : 0, "%s%s", len ? "; " : "", (text)))
	if (r->s.n == 0)
		NOTE("no finite value");
	else if (r->s.n == 1)
		NOTE("n < 2");
	else if (r->s.sd == 0.0)
		NOTE("no spread between subjects");
	if (g->nmissing)
		NOTE("incomplete");
#undef NOTE
}

static int write_group(group_ctx *g, sr_err *e)
{
	static const char *const head[] = { "localizer", "parcel", "split", "split_kind", "part", "measure_task",
					    "effect", "test", "n", "mean", "sd", "sem", "t", "df", "p",
					    "cohen_d", "q_fdr", "mean_n_voxels", "note" };
	csvout c;
	char *path = path_join(g->out, "group.csv");
	size_t r;
	sr_status st;

	st = csvout_open(&c, path, head, sizeof head / sizeof head[0], e);
	free(path);
	if (st != SR_OK)
		return 1;
	for (r = 0; r < g->nrows; r++) {
		const grow *w = &g->rows[r];
		const cell *cl = &g->cells[w->cell];
		char note[256];

		tablekeys_put(&c, g->locs.s[cl->loc], g->parcels.s[cl->parcel], g->splits.s[cl->split]);
		csvout_str(&c, g->tasks.s[cl->task]);
		csvout_str(&c, g->effects.s[cl->effect]);
		csvout_str(&c, cl->paired ? "paired" : "one-sample");
		csvout_int(&c, (long long)w->s.n);
		csvout_num(&c, w->s.mean);
		csvout_num(&c, w->s.sd);
		csvout_num(&c, w->s.sem);
		csvout_num(&c, w->s.t);
		csvout_num(&c, w->s.df);
		csvout_num(&c, w->s.p);
		csvout_num(&c, w->s.d);
		csvout_num(&c, w->q);
		csvout_num(&c, w->mean_nvox);
		row_note(g, w, note, sizeof note);
		csvout_str(&c, note);
		csvout_endrow(&c);
	}
	if (csvout_commit(&c, e) != SR_OK)
		return 1;
	path = path_join(g->out, "group.csv");
	st = tabledict_write(path, head, sizeof head / sizeof head[0], NULL, 0, e);
	free(path);
	return st == SR_OK ? 0 : 1;
}

static int write_subjects(group_ctx *g, sr_err *e)
{
	static const char *const first[] = { "subject", "status", "reason" };
	csvout c;
	char *path = path_join(g->out, "group_subjects.csv"), id[512];
	size_t i, k, nh;
	const char **head = with_participants(g, first, 3, NULL, 0, &nh);
	sr_status st;

	st = csvout_open(&c, path, head, nh, e);
	if (st != SR_OK)
		goto out;
	for (i = 0; i < g->nsubj; i++) {
		csvout_str(&c, pid(g, i, id, sizeof id));
		csvout_str(&c, subj_status_name[g->subj[i].status]);
		csvout_str(&c, g->subj[i].reason ? g->subj[i].reason : "");
		for (k = 0; k < g->npcols; k++)
			csvout_str(&c, pcell(g, i, k));
		csvout_endrow(&c);
	}
	st = csvout_commit(&c, e);
	if (st == SR_OK)
		st = tabledict_write(path, head, nh, g->pname, g->npcols, e);
out:
	free(path);
	free(head);
	return st == SR_OK ? 0 : 1;
}

/*
 * One part of a wide column name (DEVELOPERS.md "Tables"): letters, digits and
 * '_' stay; '-' '+' '*' '/' become _minus_ _plus_ _x_ _div_; a '.' between
 * digits becomes 'p'; anything else becomes '_'; runs of '_' shrink to one and
 * '_' at either end goes.
 */
static void wide_part(const char *s, char *buf, size_t n)
{
	size_t len = 0, i;
	char tmp[1024];

	tmp[0] = '\0';
	for (i = 0; s[i] && len + 8 < sizeof tmp; i++) {
		unsigned char ch = (unsigned char)s[i];
		const char *rep = NULL;
		char one[2] = { 0, 0 };

		if ((ch >= 'a' && ch <= 'z') || (ch >= 'A' && ch <= 'Z') || (ch >= '0' && ch <= '9') || ch == '_')
			one[0] = (char)ch, rep = one;
		else if (ch == '-')
			rep = "_minus_";
		else if (ch == '+')
			rep = "_plus_";
		else if (ch == '*')
			rep = "_x_";
		else if (ch == '/')
			rep = "_div_";
		else if (ch == '.' && i > 0 && s[i - 1] >= '0' && s[i - 1] <= '9' && s[i + 1] >= '0' &&
			 s[i + 1] <= '9')
			rep = "p";
		else
			rep = "_";
		len += (size_t)snprintf(tmp + len, sizeof tmp - len, "%s", rep);
	}
	/* squeeze and trim underscores */
	len = 0;
	for (i = 0; tmp[i] && len + 1 < n; i++) {
		if (tmp[i] == '_' && (len == 0 || buf[len - 1] == '_'))
			continue;
		buf[len++] = tmp[i];
	}
	while (len && buf[len - 1] == '_')
		len--;
	buf[len] = '\0';
	if (len == 0)
		snprintf(buf, n, "_");
}

static const char *split_suffix(const char *split)
{
	if (strcmp(split, "odd-even:mean") == 0)
		return "oddeven";
	if (strcmp(split, "leave-one-out:mean") == 0)
		return "loo";
	return "all";
}

/* The wide columns: the non-paired rows' cells in cols, their names after "subject" in names (also in used). */
static size_t wide_columns(const group_ctx *g, size_t *cols, char **names, strtab *used)
{
	size_t r, i, ncol = 0;
	strtab seen = { 0 };

	/* Columns: the non-paired rows, in group.csv order. A (parcel, task, effect) met under
	 * more than one split kind gets the split as a fourth part. */
	for (r = 0; r < g->nrows; r++) {
		const cell *cl = &g->cells[g->rows[r].cell];
		char key[96];

		if (cl->paired)
			continue;
		cols[ncol++] = g->rows[r].cell;
		snprintf(key, sizeof key, "%zu,%zu,%zu,%zu", cl->loc, cl->parcel, cl->task, cl->effect);
		if (strtab_find(&seen, key) != (size_t)-1) {
			snprintf(key + strlen(key), sizeof key - strlen(key), ",dup");
			strtab_add(&seen, key);
		} else {
			strtab_add(&seen, key);
		}
	}
	names[0] = xstrdup("subject");
	strtab_add(used, "subject");
	for (i = 0; i < ncol; i++) {
		const cell *cl = &g->cells[cols[i]];
		char key[96], a[1024], b[1024], cc[1024], full[3200], cand[3300], lp[1100] = "";
		int dup, nth = 1;

		snprintf(key, sizeof key, "%zu,%zu,%zu,%zu,dup", cl->loc, cl->parcel, cl->task, cl->effect);
		dup = strtab_find(&seen, key) != (size_t)-1;
		if (g->locs.n > 1) {
			/* several localizers: their parcels may share names, so the localizer leads */
			wide_part(g->locs.s[cl->loc], a, sizeof a);
			snprintf(lp, sizeof lp, "%s.", a);
		}
		wide_part(g->parcels.s[cl->parcel], a, sizeof a);
		wide_part(g->tasks.s[cl->task], b, sizeof b);
		wide_part(g->effects.s[cl->effect], cc, sizeof cc);
		snprintf(full, sizeof full, "%s%s%s.%s.%s%s%s",
			 ((lp[0] ? lp[0] : a[0]) >= 'a' && (lp[0] ? lp[0] : a[0]) <= 'z') ||
			 ((lp[0] ? lp[0] : a[0]) >= 'A' && (lp[0] ? lp[0] : a[0]) <= 'Z') ? "" : "X", lp, a, b, cc,
			 dup ? "." : "", dup ? split_suffix(g->splits.s[cl->split]) : "");
		snprintf(cand, sizeof cand, "%s", full);
		while (strtab_find(used, cand) != (size_t)-1)
			snprintf(cand, sizeof cand, "%s_%d", full, ++nth);
		strtab_add(used, cand);
		names[i + 1] = xstrdup(cand);
	}

	strtab_release(&seen);
	return ncol;
}

static int write_wide(group_ctx *g, sr_err *e)
{
	static const char *const dhead[] = { "column", "localizer", "parcel", "split", "split_kind", "part",
					     "measure_task", "effect" };
	size_t i, ncol, s, k, nh = 0;
	const char **head = NULL;
	size_t *cols = xmalloc_array(g->nrows ? g->nrows : 1, sizeof *cols);
	char **names = xmalloc_array(g->nrows + 1, sizeof *names);
	strtab used = { 0 };
	csvout c, d;
	char *path;
	int rc = 1;

	ncol = wide_columns(g, cols, names, &used);
	for (k = 0; k < g->npcols; k++)
		if (strtab_find(&used, g->pname[k]) != (size_t)-1) {
			sr_fail(e, SR_EFORMAT, "participants.tsv column '%s' has the name of a responses_wide.csv column", g->pname[k]);
			goto out;
		}
	head = with_participants(g, (const char *const *)names, 1, (const char *const *)names + 1, ncol, &nh);
	path = path_join(g->out, "responses_wide.csv");
	if (csvout_open(&c, path, head, nh, e) != SR_OK) {
		free(path);
		goto out;
	}
	free(path);
	for (s = 0; s < g->nsubj; s++) {
		char id[512];

		if (g->subj[s].status != SUBJ_USED)
			continue;
		csvout_str(&c, pid(g, s, id, sizeof id));
		for (k = 0; k < g->npcols; k++)
			csvout_str(&c, pcell(g, s, k));
		for (i = 0; i < ncol; i++)
			csvout_num(&c, g->cells[cols[i]].v[s]);
		csvout_endrow(&c);
	}
	path = path_join(g->out, "responses_wide_columns.csv");
	if (csvout_open(&d, path, dhead, 8, e) != SR_OK) {
		free(path);
		csvout_abort(&c);
		goto out;
	}
	free(path);
	for (i = 0; i < ncol; i++) {
		const cell *cl = &g->cells[cols[i]];

		csvout_str(&d, names[i + 1]);
		tablekeys_put(&d, g->locs.s[cl->loc], g->parcels.s[cl->parcel], g->splits.s[cl->split]);
		csvout_str(&d, g->tasks.s[cl->task]);
		csvout_str(&d, g->effects.s[cl->effect]);
		csvout_endrow(&d);
	}
	if (csvout_commit(&c, e) != SR_OK) {
		csvout_abort(&d);
		goto out;
	}
	if (csvout_commit(&d, e) != SR_OK)
		goto out;
	path = path_join(g->out, "responses_wide.csv");
	if (tabledict_write(path, head, nh, g->pname, g->npcols, e) != SR_OK) {
		free(path);
		goto out;
	}
	free(path);
	path = path_join(g->out, "responses_wide_columns.csv");
	if (tabledict_write(path, dhead, 8, NULL, 0, e) != SR_OK) {
		free(path);
		goto out;
	}
	free(path);
	rc = 0;
out:
	free(head);
	for (k = 0; k < ncol + 1; k++)
		free(names[k]);
	free(names);
	free(cols);
	strtab_release(&used);
	return rc;
}

/* ---- group --by COLUMN: per level, and Welch between two levels ---- */

/* One group_by row's numbers, from a one-sample or a Welch test. */
typedef struct byrow {
	size_t cell, level;   /* level == nlevels: the Welch row */
	stats_one s;
	stats_two w;
	double q;
} byrow;

static void by_write_row(csvout *c, const group_ctx *g, const byrow *b, const char *col,
			 char **levels, size_t nlev)
{
	const cell *cl = &g->cells[b->cell];
	char lev[1024];
	int welch = b->level == nlev;

	if (welch)
		snprintf(lev, sizeof lev, "%s - %s", levels[0], levels[1]);
	else
		snprintf(lev, sizeof lev, "%s", levels[b->level]);
	tablekeys_put(c, g->locs.s[cl->loc], g->parcels.s[cl->parcel], g->splits.s[cl->split]);
	csvout_str(c, g->tasks.s[cl->task]);
	csvout_str(c, g->effects.s[cl->effect]);
	csvout_str(c, col);
	csvout_str(c, lev);
	csvout_str(c, welch ? "welch" : cl->paired ? "paired" : "one-sample");
	if (welch) {
		csvout_int(c, (long long)(b->w.na + b->w.nb));
		csvout_int(c, (long long)b->w.na);
		csvout_int(c, (long long)b->w.nb);
		csvout_num(c, b->w.diff);
		csvout_empty(c);
		csvout_num(c, b->w.sem);
		csvout_num(c, b->w.t);
		csvout_num(c, b->w.df);
		csvout_num(c, b->w.p);
		csvout_num(c, b->w.d);
	} else {
		csvout_int(c, (long long)b->s.n);
		csvout_empty(c);
		csvout_empty(c);
		csvout_num(c, b->s.mean);
		csvout_num(c, b->s.sd);
		csvout_num(c, b->s.sem);
		csvout_num(c, b->s.t);
		csvout_num(c, b->s.df);
		csvout_num(c, b->s.p);
		csvout_num(c, b->s.d);
	}
	csvout_num(c, b->q);
	csvout_str(c, g->nmissing ? "incomplete" : "");
	csvout_endrow(c);
}

/* BH over the parcels of each (split, task, effect, level) family of the rows. */
static void by_fdr(const group_ctx *g, byrow *rows, size_t n, size_t nlev)
{
	strtab fams = { 0 };
	size_t *fam = xmalloc_array(n ? n : 1, sizeof *fam), r, f;
	double *p = xmalloc_array(n ? n : 1, sizeof *p), *q = xmalloc_array(n ? n : 1, sizeof *q);

	for (r = 0; r < n; r++) {
		const cell *c = &g->cells[rows[r].cell];
		char key[128];

		snprintf(key, sizeof key, "%zu,%zu,%zu,%zu,%zu", c->loc, c->split, c->task, c->effect, rows[r].level);
		fam[r] = strtab_add(&fams, key);
	}
	for (f = 0; f < fams.n; f++) {
		size_t m = 0;

		for (r = 0; r < n; r++)
			if (fam[r] == f)
				p[m++] = rows[r].level == nlev ? rows[r].w.p : rows[r].s.p;
		stats_bh(p, m, q);
		m = 0;
		for (r = 0; r < n; r++)
			if (fam[r] == f)
				rows[r].q = q[m++];
	}
	strtab_release(&fams);
	free(fam);
	free(p);
	free(q);
}

static int write_by(group_ctx *g, const char *col, sr_err *e)
{
	static const char *const head[] = { "localizer", "parcel", "split", "split_kind", "part", "measure_task",
					    "effect", "by", "level", "test", "n", "n_a", "n_b", "mean",
					    "sd", "sem", "t", "df", "p", "cohen_d", "q_fdr", "note" };
	size_t k, s, r, l, nlev = 0, nrow = 0, *lev_of = xmalloc_array(g->nsubj ? g->nsubj : 1, sizeof *lev_of);
	char **levels = xmalloc_array(g->nsubj + 1, sizeof *levels), name[1100], part[1024], *path;
	double *x = xmalloc_array(g->nsubj ? g->nsubj : 1, sizeof *x);
	double *y = xmalloc_array(g->nsubj ? g->nsubj : 1, sizeof *y);
	byrow *rows = NULL;
	csvout c;
	int rc = 1;

	for (k = 0; k < g->npcols && strcmp(g->pname[k], col) != 0; k++)
		;
	if (k == g->npcols) {
		sr_fail(e, SR_EINVAL, "%s: --by %s: participants.tsv has no such column%s", g->out, col,
			g->have_ptab ? "" : " (no participants.tsv was read)");
		goto out;
	}
	for (s = 0; s < g->nsubj; s++) {
		const char *v = pcell(g, s, k);

		lev_of[s] = (size_t)-1;
		if (g->subj[s].status != SUBJ_USED)
			continue;
		if (!*v) {
			warnf("--by %s: sub-%s has no value: left out of group_by_%s.csv", col, g->subj[s].label, col);
			continue;
		}
		for (l = 0; l < nlev && strcmp(levels[l], v) != 0; l++)
			;
		if (l == nlev)
			levels[nlev++] = (char *)v;
	}
	if (nlev == 0) {
		sr_fail(e, SR_EINVAL, "--by %s: no subject used has a value in that column", col);
		goto out;
	}
	qsort(levels, nlev, sizeof *levels, strv_cmp);
	for (s = 0; s < g->nsubj; s++)
		if (g->subj[s].status == SUBJ_USED && *pcell(g, s, k))
			for (l = 0; l < nlev; l++)
				if (strcmp(levels[l], pcell(g, s, k)) == 0)
					lev_of[s] = l;
	rows = xmalloc_array(g->nrows * (nlev + 1) + 1, sizeof *rows);
	for (r = 0; r < g->nrows; r++) {
		const cell *cl = &g->cells[g->rows[r].cell];

		for (l = 0; l < nlev + (nlev == 2); l++) {
			byrow *b = &rows[nrow++];

			memset(b, 0, sizeof *b);
			b->cell = g->rows[r].cell;
			b->level = l;
			if (l < nlev) {
				for (s = 0; s < g->nsubj; s++)
					x[s] = lev_of[s] == l ? cl->v[s] : NAN;
				stats_one_sample(x, g->nsubj, &b->s);
			} else {
				for (s = 0; s < g->nsubj; s++) {
					x[s] = lev_of[s] == 0 ? cl->v[s] : NAN;
					y[s] = lev_of[s] == 1 ? cl->v[s] : NAN;
				}
				stats_welch(x, g->nsubj, y, g->nsubj, &b->w);
			}
		}
	}
	by_fdr(g, rows, nrow, nlev);
	wide_part(col, part, sizeof part);
	snprintf(name, sizeof name, "group_by_%s.csv", part);
	path = path_join(g->out, name);
	if (csvout_open(&c, path, head, sizeof head / sizeof head[0], e) != SR_OK) {
		free(path);
		goto out;
	}
	for (r = 0; r < nrow; r++)
		by_write_row(&c, g, &rows[r], col, levels, nlev);
	if (csvout_commit(&c, e) != SR_OK ||
	    tabledict_write(path, head, sizeof head / sizeof head[0], NULL, 0, e) != SR_OK) {
		free(path);
		goto out;
	}
	if (!g->quiet)
		printf("wrote %s: %zu level%s of %s%s\n", path, nlev, nlev == 1 ? "" : "s", col,
		       nlev == 2 ? ", Welch t test between them" : "");
	free(path);
	rc = 0;
out:
	free(rows);
	free(levels);
	free(lev_of);
	free(x);
	free(y);
	return rc;
}

/* ---- terminal summary ---- */

static void fmt_p(double p, char *buf, size_t n)
{
	if (!isfinite(p))
		snprintf(buf, n, "-");
	else if (p >= 0.001)
		snprintf(buf, n, "%.3f", p);
	else
		snprintf(buf, n, "%.1e", p);
}

enum { SC_PARCEL, SC_SPLIT, SC_TASK, SC_EFFECT, SC_N, SC_MEAN, SC_T, SC_P, SC_Q, SC_NCOL };

static void summary(const group_ctx *g)
{
	static const char *const head[SC_NCOL] = { "parcel", "split", "task", "effect", "n",
						   "mean +/- sem", "t(df)", "p", "q" };
	char (*cellt)[SC_NCOL][64] = xmalloc_array(g->nrows ? g->nrows : 1, sizeof *cellt);
	int width[SC_NCOL], show_split = 0, right[SC_NCOL] = { 0, 0, 0, 0, 1, 1, 1, 1, 1 };
	size_t r, i, k, nsig = 0;
	char marker[32];

	snprintf(marker, sizeof marker, "<- q<%g", g->alpha);
	/* The split column only when one task comes with more than one split kind. */
	{
		size_t *first = xmalloc_array(g->tasks.n ? g->tasks.n : 1, sizeof *first);

		for (i = 0; i < g->tasks.n; i++)
			first[i] = (size_t)-1;
		for (r = 0; r < g->nrows; r++) {
			const cell *a = &g->cells[g->rows[r].cell];

			if (first[a->task] == (size_t)-1)
				first[a->task] = a->split;
			else if (first[a->task] != a->split)
				show_split = 1;
		}
		free(first);
	}
	for (k = 0; k < SC_NCOL; k++)
		width[k] = (int)strlen(head[k]);
	for (r = 0; r < g->nrows; r++) {
		const grow *w = &g->rows[r];
		const cell *cl = &g->cells[w->cell];

		if (g->locs.n > 1)   /* several localizers: which one's fROI */
			snprintf(cellt[r][SC_PARCEL], 64, "%s/%s", g->locs.s[cl->loc], g->parcels.s[cl->parcel]);
		else
			snprintf(cellt[r][SC_PARCEL], 64, "%s", g->parcels.s[cl->parcel]);
		snprintf(cellt[r][SC_SPLIT], 64, "%s", g->splits.s[cl->split]);
		snprintf(cellt[r][SC_TASK], 64, "%s", g->tasks.s[cl->task]);
		snprintf(cellt[r][SC_EFFECT], 64, "%s", g->effects.s[cl->effect]);
		snprintf(cellt[r][SC_N], 64, "%zu", w->s.n);
		if (w->s.n == 0)
			snprintf(cellt[r][SC_MEAN], 64, "-");
		else if (!isfinite(w->s.sem))
			snprintf(cellt[r][SC_MEAN], 64, "%.3f", w->s.mean);
		else
			snprintf(cellt[r][SC_MEAN], 64, "%.3f +/- %.3f", w->s.mean, w->s.sem);
		if (isfinite(w->s.t))
			snprintf(cellt[r][SC_T], 64, "t(%g) = %.2f", w->s.df, w->s.t);
		else
			snprintf(cellt[r][SC_T], 64, "-");
		fmt_p(w->s.p, cellt[r][SC_P], 64);
		fmt_p(w->q, cellt[r][SC_Q], 64);
		for (k = 0; k < SC_NCOL; k++)
			if ((int)strlen(cellt[r][k]) > width[k])
				width[k] = (int)strlen(cellt[r][k]);
	}
	printf("group: %zu subject%s used", g->nused, g->nused == 1 ? "" : "s");
	if (g->nmissing) {
		printf("; INCOMPLETE, %zu missing:", g->nmissing);
		for (i = 0; i < g->nsubj; i++)
			if (g->subj[i].status == SUBJ_MISSING || g->subj[i].status == SUBJ_UNREADABLE)
				printf(" %s", g->subj[i].label);
	}
	if (g->nexcluded) {
		printf("; %zu excluded:", g->nexcluded);
		for (i = 0; i < g->nsubj; i++)
			if (g->subj[i].status == SUBJ_EXCLUDED)
				printf(" %s (%s)", g->subj[i].label, g->subj[i].reason);
	}
	printf("\n\n");
	for (k = 0; k < SC_NCOL; k++) {
		if (k == SC_SPLIT && !show_split)
			continue;
		printf("%s%*s%s", k ? "  " : "", right[k] ? width[k] : -width[k], head[k], "");
	}
	printf("\n");
	for (r = 0; r < g->nrows; r++) {
		int sig = isfinite(g->rows[r].q) && g->rows[r].q < g->alpha;

		for (k = 0; k < SC_NCOL; k++) {
			if (k == SC_SPLIT && !show_split)
				continue;
			printf("%s%*s", k ? "  " : "", right[k] ? width[k] : -width[k], cellt[r][k]);
		}
		if (sig) {
			printf("  %s", marker);
			nsig++;
		}
		printf("\n");
	}
	printf("\n%s: false discovery rate below %g, Benjamini-Hochberg over the parcels of each\n"
	       "split, task and effect (%zu of %zu rows). p: two-sided t test against 0 across\n"
	       "subjects; 'A vs B' rows test the per-subject difference A - B.\n",
	       marker, g->alpha, nsig, g->nrows);
	printf("wrote %s/group.csv, group_subjects.csv, responses_wide.csv, responses_wide_columns.csv, reliability_group.csv, timecourses_group.csv\n",
	       g->shown ? g->shown : g->out);
	free(cellt);
}

static void group_release(group_ctx *g)
{
	size_t i;

	for (i = 0; i < g->nsubj; i++) {
		free(g->subj[i].label);
		free(g->subj[i].reason);
	}
	free(g->subj);
	for (i = 0; i < g->ncells; i++) {
		free(g->cells[i].v);
		free(g->cells[i].nvox);
		free(g->cells[i].seen);
	}
	free(g->cells);
	free(g->rows);
	strtab_release(&g->locs);
	strtab_release(&g->parcels);
	strtab_release(&g->splits);
	strtab_release(&g->tasks);
	strtab_release(&g->effects);
	strtab_release(&g->keys);
	if (g->have_ptab)
		table_release(&g->ptab);
	free(g->pcol);
	free(g->pname);
	free(g->prow);
}

/* The folder checks, the subjects and their tables, participants.tsv and --paired: 0, or the exit code. */
static int gather(group_ctx *g, const groupstat_opts *o, char **pairs, size_t npairs)
{
	struct stat st;
	char *pp;
	int rc;

	if (stat(g->out, &st) != 0) {
		errf("%s: no such folder", g->out);
		return 1;
	}
	if (!S_ISDIR(st.st_mode)) {
		errf("%s: not a folder (give the study's out folder)", g->out);
		return 1;
	}
	if ((rc = find_subjects(g, o)) != 0)
		return rc;
	if (o->exclude && (rc = read_exclusions(g, o->exclude)) != 0)
		return rc;
	if ((rc = load_subjects(g)) != 0)
		return rc;
	pp = o->participants ? xstrdup(o->participants) : participants_from_description(g->out);
	rc = load_participants(g, pp);
	free(pp);
	if (rc)
		return rc;
	if (g->ncells == 0) {
		errf("%s: the tables hold no odd-even:mean, leave-one-out:mean or all rows", g->out);
		return 1;
	}
	if (npairs && (rc = make_pairs(g, pairs, npairs)) != 0)
		return rc;
	return 0;
}

/* The statistics, the tables, the warning, the summary and (outside analyze) a stale report. */
static int finish(group_ctx *g, const groupstat_opts *o)
{
	sr_err e;

	compute(g);
	sr_err_init(&e, NULL, NULL);
	if (write_group(g, &e) || write_subjects(g, &e) || write_wide(g, &e) ||
	    (o->by && write_by(g, o->by, &e)) || write_reliability(g, &e)) {
		errf("%s", e.msg);
		return 1;
	}
	if (g->nmissing)
		warnf("%zu of %zu subjects missing: the group tables are marked incomplete", g->nmissing,
		      g->nsubj - g->nexcluded);
	if (!g->quiet)
		summary(g);
	if (!o->in_analyze) {
		/* a report from before shows the old group table: rewrite it (analyze writes its own) */
		char rp[8192];
		struct stat rs;

		snprintf(rp, sizeof rp, "%s/report.html", g->out);
		if (stat(rp, &rs) == 0 && report_write(g->out, g->quiet))
			return 1;
	}
	return 0;
}

int groupstat_run(const groupstat_opts *o)
{
	group_ctx g;
	char **pairs = NULL;
	size_t npairs = 0, i;
	int rc;

	memset(&g, 0, sizeof g);
	g.out = o->out;
	g.shown = o->shown;
	g.alpha = o->alpha;
	g.quiet = o->quiet;
	rc = o->paired ? parse_pairs(o->paired, &pairs, &npairs) : 0;
	if (rc == 0)
		rc = gather(&g, o, pairs, npairs);
	if (rc == 0)
		rc = finish(&g, o);
	for (i = 0; i < npairs; i++)
		free(pairs[i]);
	free(pairs);
	group_release(&g);
	return rc;
}
