/* reliability.c - reliability.csv per subject and its group summary (numerics in core/reliab). */
#include "reliability.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/mem.h"
#include "../core/reliab.h"
#include "../core/stats.h"
#include "../io/csvout.h"
#include "../io/table.h"
#include "subtables.h"
#include "tabledict.h"
#include "tablekeys.h"

const char *const reliability_columns[] = {
	"subject", "localizer", "parcel", "split", "split_kind", "part", "define_runs", "n_voxels",
	"t_threshold", "n_above", "froi_voxels", "t_correlation", "dice", "pairs",
};
const size_t reliability_ncolumns = sizeof reliability_columns / sizeof reliability_columns[0];

static void add(reliability_table *tb, const char *loc, const char *parcel, const char *split,
		const char *def, double nv, double na, double nf, double r, double d, double pairs)
{
	reliability_row *w;

	XGROW(tb->rows, tb->n, tb->cap);
	w = &tb->rows[tb->n++];
	w->localizer = xstrdup(loc);
	w->parcel = xstrdup(parcel);
	w->split = xstrdup(split);
	w->define_runs = xstrdup(def);
	w->n_voxels = nv;
	w->n_above = na;
	w->froi_voxels = nf;
	w->t_correlation = r;
	w->dice = d;
	w->pairs = pairs;
}

static size_t label_count(const int32_t *lab, size_t n, int32_t label)
{
	size_t i, c = 0;

	for (i = 0; i < n; i++)
		c += lab[i] == label;
	return c;
}

void reliability_add_splits(reliability_table *tb, const char *localizer, const char *const *split,
		       const char *const *def, const char *kind, const char *mdef,
		       const double *const *t, const int32_t *const *froi, size_t nsplit,
		       const int32_t *lab, size_t nvox, const int32_t *index, char *const *name, int np,
		       const unsigned char *lost)
{
	size_t s;
	int p;

	for (s = 0; s < nsplit; s++)
		for (p = 0; p < np; p++) {
			size_t nf, na = reliab_count_above(t[s], lab, nvox, index[p], RELIAB_T_ABOVE, &nf);
			int gone = lost && lost[p];

			add(tb, localizer, name[p], split[s], def[s], gone ? NAN : (double)nf,
			    gone ? NAN : (double)na, gone ? NAN : (double)label_count(froi[s], nvox, index[p]),
			    NAN, NAN, NAN);
		}
	if (nsplit < 2)
		return;
	for (p = 0; p < np; p++) {
		reliab_pairs pr;
		double snf = 0, sna = 0, sfr = 0;

		reliab_pairs_of(t, froi, nsplit, lab, nvox, index[p], &pr);
		for (s = 0; s < nsplit; s++) {
			size_t nf;

			sna += (double)reliab_count_above(t[s], lab, nvox, index[p], RELIAB_T_ABOVE, &nf);
			snf += (double)nf;
			sfr += (double)label_count(froi[s], nvox, index[p]);
		}
		if (lost && lost[p])
			add(tb, localizer, name[p], kind, mdef, NAN, NAN, NAN, NAN, NAN, (double)pr.npairs);
		else
			add(tb, localizer, name[p], kind, mdef, snf / (double)nsplit, sna / (double)nsplit,
			    sfr / (double)nsplit, pr.r, pr.dice, (double)pr.npairs);
	}
}

void reliability_table_release(reliability_table *tb)
{
	size_t i;

	if (!tb)
		return;
	for (i = 0; i < tb->n; i++) {
		free(tb->rows[i].localizer);
		free(tb->rows[i].parcel);
		free(tb->rows[i].split);
		free(tb->rows[i].define_runs);
	}
	free(tb->rows);
	memset(tb, 0, sizeof *tb);
}

sr_status reliability_table_write(const char *path, const char *subject, const reliability_table *tb,
			     sr_err *e)
{
	csvout c;
	sr_status rc;
	size_t i;
	char pid[512];

	rc = csvout_open(&c, path, reliability_columns, reliability_ncolumns, e);
	if (rc)
		return rc;
	snprintf(pid, sizeof pid, "sub-%s", subject);   /* participant_id, as in responses.csv */
	for (i = 0; i < tb->n; i++) {
		const reliability_row *w = &tb->rows[i];

		csvout_str(&c, pid);
		tablekeys_put(&c, w->localizer, w->parcel, w->split);
		csvout_str(&c, w->define_runs);
		csvout_num(&c, w->n_voxels);
		csvout_num(&c, RELIAB_T_ABOVE);
		csvout_num(&c, w->n_above);
		csvout_num(&c, w->froi_voxels);
		csvout_num(&c, w->t_correlation);
		csvout_num(&c, w->dice);
		csvout_num(&c, w->pairs);
		csvout_endrow(&c);
	}
	rc = csvout_commit(&c, e);
	return rc ? rc : tabledict_write(path, reliability_columns, reliability_ncolumns, NULL, 0, e);
}

/* ---- the group summary ---- */

static const char *const measures[] = { "t_correlation", "dice", "n_above" };
enum { NMEAS = 3 };

typedef struct rkey {
	char *localizer, *parcel, *split;
	double *v[NMEAS];
	size_t n[NMEAS], cap[NMEAS];
} rkey;

static rkey *key_get(rkey **keys, size_t *nk, size_t *cap, const char *loc, const char *parcel, const char *split)
{
	size_t i;
	rkey *k;

	for (i = 0; i < *nk; i++)
		if (!strcmp((*keys)[i].localizer, loc) && !strcmp((*keys)[i].parcel, parcel) &&
		    !strcmp((*keys)[i].split, split))
			return &(*keys)[i];
	XGROW(*keys, *nk, *cap);
	k = &(*keys)[(*nk)++];
	memset(k, 0, sizeof *k);
	k->localizer = xstrdup(loc);
	k->parcel = xstrdup(parcel);
	k->split = xstrdup(split);
	return k;
}

static void key_push(rkey *k, int m, double x)
{
	if (!isfinite(x))
		return;
	XGROW(k->v[m], k->n[m], k->cap[m]);
	k->v[m][k->n[m]++] = x;
}

/* Adds one subject's ":mean" rows. */
static sr_status read_subject(const char *path, rkey **keys, size_t *nk, size_t *cap, sr_err *e)
{
	table t;
	int col[3 + NMEAS];
	const char *names[3] = { "localizer", "parcel", "split" };
	size_t r;
	int m;
	sr_status rc = table_read(path, ',', &t, e);

	if (rc)
		return rc;
	for (m = 0; m < 3 + NMEAS; m++) {
		col[m] = table_col(&t, m < 3 ? names[m] : measures[m - 3]);
		if (col[m] < 0) {
			rc = sr_fail(e, SR_EFORMAT, "%s: no column '%s'", path, m < 3 ? names[m] : measures[m - 3]);
			table_release(&t);
			return rc;
		}
	}
	for (r = 0; r < t.nrows; r++) {
		const char *split = table_cell(&t, r, (size_t)col[2]);
		size_t len = strlen(split);
		rkey *k;

		if (len < 5 || strcmp(split + len - 5, ":mean") != 0)
			continue;
		k = key_get(keys, nk, cap, table_cell(&t, r, (size_t)col[0]), table_cell(&t, r, (size_t)col[1]), split);
		for (m = 0; m < NMEAS; m++) {
			double x;
			int na;

			rc = table_number(&t, r, (size_t)col[3 + m], &x, &na, 1, e);
			if (rc) {
				table_release(&t);
				return rc;
			}
			key_push(k, m, x);
		}
	}
	table_release(&t);
	return SR_OK;
}

static sr_status write_summary(const char *path, rkey *keys, size_t nk, sr_err *e)
{
	static const char *const head[] = { "localizer", "parcel", "split", "split_kind", "part",
					    "measure", "n", "median", "min", "max" };
	csvout c;
	size_t i;
	int m;
	sr_status rc = csvout_open(&c, path, head, sizeof head / sizeof head[0], e);

	if (rc)
		return rc;
	for (i = 0; i < nk; i++)
		for (m = 0; m < NMEAS; m++) {
			rkey *k = &keys[i];
			size_t n = k->n[m];
			double med = n ? stats_quantile(k->v[m], n, 0.5) : NAN;   /* sorts */

			tablekeys_put(&c, k->localizer, k->parcel, k->split);
			csvout_str(&c, measures[m]);
			csvout_int(&c, (long long)n);
			csvout_num(&c, med);
			csvout_num(&c, n ? k->v[m][0] : NAN);
			csvout_num(&c, n ? k->v[m][n - 1] : NAN);
			csvout_endrow(&c);
		}
	rc = csvout_commit(&c, e);
	return rc ? rc : tabledict_write(path, head, sizeof head / sizeof head[0], NULL, 0, e);
}

typedef struct rkeys {
	rkey *keys;
	size_t nk, cap;
} rkeys;

static sr_status read_one(const char *path, void *ctx, sr_err *e)
{
	rkeys *k = ctx;

	return read_subject(path, &k->keys, &k->nk, &k->cap, e);
}

sr_status reliability_group_write(const char *out, char *const *labels, size_t n, sr_err *e)
{
	rkeys k = { NULL, 0, 0 };
	size_t i;
	char path[4096 + 64];
	sr_status rc;
	int m, none;

	rc = subtables_each(out, labels, n, "reliability.csv", "reliability_group",
			    " (analyze it again to make one)", read_one, &k, &none, e);
	if (none)
		return SR_OK;
	rkey *keys = k.keys;
	size_t nk = k.nk;

	if (!rc) {
		snprintf(path, sizeof path, "%s/reliability_group.csv", out);
		rc = write_summary(path, keys, nk, e);
	}
	for (i = 0; i < nk; i++) {
		free(keys[i].localizer);
		free(keys[i].parcel);
		free(keys[i].split);
		for (m = 0; m < NMEAS; m++)
			free(keys[i].v[m]);
	}
	free(keys);
	return rc;
}
