/* timecourse.c - FIR time courses of the fROIs and their tables (numerics in core/fir). */
#include "timecourse.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/fir.h"
#include "../core/mem.h"
#include "../io/csvout.h"
#include "../io/table.h"
#include "subtables.h"
#include "tabledict.h"
#include "tablekeys.h"

const char *const timecourse_columns[] = {
	"subject", "localizer", "parcel", "split", "split_kind", "part", "measure_task", "condition",
	"time", "value",
};
const size_t timecourse_ncolumns = sizeof timecourse_columns / sizeof timecourse_columns[0];

void timecourse_table_add(timecourse_table *tb, const char *localizer, const char *parcel, const char *split,
		  const char *task, const char *condition, double time, double value)
{
	timecourse_row *w;

	XGROW(tb->rows, tb->n, tb->cap);
	w = &tb->rows[tb->n++];
	w->localizer = xstrdup(localizer);
	w->parcel = xstrdup(parcel);
	w->split = xstrdup(split);
	w->task = xstrdup(task);
	w->condition = xstrdup(condition);
	w->time = time;
	w->value = value;
}

void timecourse_table_release(timecourse_table *tb)
{
	size_t i;

	if (!tb)
		return;
	for (i = 0; i < tb->n; i++) {
		free(tb->rows[i].localizer);
		free(tb->rows[i].parcel);
		free(tb->rows[i].split);
		free(tb->rows[i].task);
		free(tb->rows[i].condition);
	}
	free(tb->rows);
	memset(tb, 0, sizeof *tb);
}

sr_status timecourse_table_write(const char *path, const char *subject, const timecourse_table *tb, sr_err *e)
{
	csvout c;
	size_t i;
	char pid[512];
	sr_status rc = csvout_open(&c, path, timecourse_columns, timecourse_ncolumns, e);

	if (rc)
		return rc;
	snprintf(pid, sizeof pid, "sub-%s", subject);   /* participant_id, as in responses.csv */
	for (i = 0; i < tb->n; i++) {
		const timecourse_row *w = &tb->rows[i];

		csvout_str(&c, pid);
		tablekeys_put(&c, w->localizer, w->parcel, w->split);
		csvout_str(&c, w->task);
		csvout_str(&c, w->condition);
		csvout_num(&c, w->time);
		csvout_num(&c, w->value);
		csvout_endrow(&c);
	}
	rc = csvout_commit(&c, e);
	return rc ? rc : tabledict_write(path, timecourse_columns, timecourse_ncolumns, NULL, 0, e);
}

/*
 * The mean scaled series of the nf fROIs in run r: y (nf x T, fROI-major);
 * y[f * T] is NaN for a fROI with no voxel analyzable in the run. The runs'
 * kept series are read a volume at a time (they may be in a temporary file);
 * each y[f][k] adds its voxels in their order, as a voxel-by-voxel loop would.
 */
static sr_status froi_series(const runfit_result *r, const size_t *vox, const size_t *start,
			     const size_t *count, int nf, const int32_t *pos, double *y, sr_err *e)
{
	size_t T = (size_t)r->d.T, k, i, nuse = 0, nall = 0;
	size_t *at, *first = xcalloc((size_t)nf + 1, sizeof *first);
	double *m, *row = xmalloc_array(r->nkeep ? r->nkeep : 1, sizeof *row);
	void *scratch = xmalloc_array(r->nkeep ? r->nkeep : 1, sizeof(double));
	sr_status st = SR_OK;
	int f;

	for (f = 0; f < nf; f++)
		nall += count[f];
	at = xmalloc_array(nall ? nall : 1, sizeof *at);
	m = xmalloc_array(nall ? nall : 1, sizeof *m);

	/* each fROI's voxels analyzable in this run: their place in the kept series, their mean */
	for (f = 0; f < nf; f++) {
		first[f] = nuse;
		for (i = 0; i < count[f]; i++) {
			size_t v = vox[start[f] + i];
			ptrdiff_t o = runfit_at(r, v, pos);
			double mv;

			if (pos[v] < 0 || o < 0)
				continue;
			mv = r->out.mean[o];
			if (!r->out.ok[o] || !(mv > 0) || !isfinite(mv))
				continue;
			at[nuse] = (size_t)pos[v];
			m[nuse] = mv;
			nuse++;
		}
	}
	first[nf] = nuse;
	for (k = 0; k < T && st == SR_OK; k++) {
		st = runfit_series_row(r, k, row, scratch, e);
		for (f = 0; st == SR_OK && f < nf; f++) {
			double sum = 0;

			for (i = first[f]; i < first[f + 1]; i++)
				sum += 100.0 * row[at[i]] / m[i];
			y[(size_t)f * T + k] = sum / (double)(first[f + 1] - first[f] ? first[f + 1] - first[f] : 1);
		}
	}
	for (f = 0; f < nf; f++)
		if (first[f + 1] == first[f])
			y[(size_t)f * T] = NAN;   /* no voxel here: fir_fit_many skips it */
	free(at);
	free(m);
	free(first);
	free(row);
	free(scratch);
	return st;
}

sr_status timecourse_frois(const runfit_result *const *run, const double *tr, int nruns, const size_t *vox,
		   const size_t *start, const size_t *count, int nf, const int32_t *pos, int ncond,
		   int nbins, double volume_time, double *out, sr_err *e)
{
	size_t per = (size_t)ncond * (size_t)nbins, nb = per * (size_t)(nf > 0 ? nf : 1), j;
	double *sum = xcalloc(nb, sizeof *sum), *beta = xmalloc_array(nb, sizeof *beta);
	int *cnt = xcalloc(nb, sizeof *cnt), i;
	sr_status st = SR_OK;

	for (i = 0; i < nruns && st == SR_OK; i++) {
		const runfit_result *r = run[i];
		size_t T = (size_t)r->d.T;
		double *y;
		sr_err fe;

		if (!runfit_has_series(r) || !r->d.X || nf <= 0)
			continue;
		y = xmalloc_array(T * (size_t)nf, sizeof *y);
		st = froi_series(r, vox, start, count, nf, pos, y, e);
		sr_err_init(&fe, NULL, NULL);
		if (st != SR_OK) {
			/* the error is in e */
		} else if (fir_fit_many(r->d.T, tr[i], volume_time, r->ev, r->nev, ncond, nbins,
					r->d.X + T * (size_t)r->d.ncond, r->d.p - r->d.ncond, y, nf, beta, &fe) != SR_OK) {
			sr_warnf(e, "time course: %s; the run is left out", fe.msg);
		} else {
			for (j = 0; j < nb; j++)
				if (isfinite(beta[j])) {
					sum[j] += beta[j];
					cnt[j]++;
				}
		}
		free(y);
	}
	for (j = 0; j < nb; j++)
		out[j] = cnt[j] ? sum[j] / cnt[j] : NAN;
	free(sum);
	free(beta);
	free(cnt);
	return st;
}

/* ---- the group table ---- */

typedef struct tkey {
	char *localizer, *parcel, *split, *task, *condition, *time;
	double *v;
	size_t n, cap;
} tkey;

typedef struct tkeys {
	tkey *k;
	size_t n, cap;
	/* open addressing over the keys' joined text */
	size_t *slot, nslot;
} tkeys;

static uint64_t hash_of(const char *const *f, int n)
{
	uint64_t h = 1469598103934665603ULL;
	int i;

	for (i = 0; i < n; i++) {
		const char *s;

		for (s = f[i]; *s; s++)
			h = (h ^ (unsigned char)*s) * 1099511628211ULL;
		h = (h ^ 0x1f) * 1099511628211ULL;
	}
	return h;
}

static int key_is(const tkey *k, const char *const *f)
{
	return !strcmp(k->localizer, f[0]) && !strcmp(k->parcel, f[1]) && !strcmp(k->split, f[2]) &&
	       !strcmp(k->task, f[3]) && !strcmp(k->condition, f[4]) && !strcmp(k->time, f[5]);
}

static void rehash(tkeys *ks)
{
	size_t i;

	free(ks->slot);
	ks->nslot = ks->nslot ? 2 * ks->nslot : 1024;
	ks->slot = xmalloc_array(ks->nslot, sizeof *ks->slot);
	for (i = 0; i < ks->nslot; i++)
		ks->slot[i] = (size_t)-1;
	for (i = 0; i < ks->n; i++) {
		const char *f[6] = { ks->k[i].localizer, ks->k[i].parcel, ks->k[i].split, ks->k[i].task,
				     ks->k[i].condition, ks->k[i].time };
		size_t h = (size_t)(hash_of(f, 6) % ks->nslot);

		while (ks->slot[h] != (size_t)-1)
			h = (h + 1) % ks->nslot;
		ks->slot[h] = i;
	}
}

static tkey *key_get(tkeys *ks, const char *const *f)
{
	size_t h;
	tkey *k;

	if (2 * (ks->n + 1) > ks->nslot)
		rehash(ks);
	h = (size_t)(hash_of(f, 6) % ks->nslot);
	while (ks->slot[h] != (size_t)-1) {
		if (key_is(&ks->k[ks->slot[h]], f))
			return &ks->k[ks->slot[h]];
		h = (h + 1) % ks->nslot;
	}
	XGROW(ks->k, ks->n, ks->cap);
	ks->slot[h] = ks->n;
	k = &ks->k[ks->n++];
	memset(k, 0, sizeof *k);
	k->localizer = xstrdup(f[0]);
	k->parcel = xstrdup(f[1]);
	k->split = xstrdup(f[2]);
	k->task = xstrdup(f[3]);
	k->condition = xstrdup(f[4]);
	k->time = xstrdup(f[5]);
	return k;
}

static int summary_split(const char *s)
{
	size_t len = strlen(s);

	return strcmp(s, "all") == 0 || (len >= 5 && strcmp(s + len - 5, ":mean") == 0);
}

static sr_status read_subject(const char *path, tkeys *ks, sr_err *e)
{
	static const char *const names[] = { "localizer", "parcel", "split", "measure_task", "condition",
					     "time", "value" };
	table t;
	int col[7], m;
	size_t r;
	sr_status rc = table_read(path, ',', &t, e);

	if (rc)
		return rc;
	for (m = 0; m < 7; m++)
		if ((col[m] = table_col(&t, names[m])) < 0) {
			rc = sr_fail(e, SR_EFORMAT, "%s: no column '%s'", path, names[m]);
			table_release(&t);
			return rc;
		}
	for (r = 0; r < t.nrows && !rc; r++) {
		const char *f[6];
		double x;
		int na;
		tkey *k;

		for (m = 0; m < 6; m++)
			f[m] = table_cell(&t, r, (size_t)col[m]);
		if (!summary_split(f[2]))
			continue;
		rc = table_number(&t, r, (size_t)col[6], &x, &na, 1, e);
		if (rc || !isfinite(x))
			continue;
		k = key_get(ks, f);
		XGROW(k->v, k->n, k->cap);
		k->v[k->n++] = x;
	}
	table_release(&t);
	return rc;
}

static sr_status write_group(const char *path, const tkeys *ks, sr_err *e)
{
	static const char *const head[] = { "localizer", "parcel", "split", "split_kind", "part",
					    "measure_task", "condition", "time", "n", "mean", "sem" };
	csvout c;
	size_t i, j;
	sr_status rc = csvout_open(&c, path, head, sizeof head / sizeof head[0], e);

	if (rc)
		return rc;
	for (i = 0; i < ks->n; i++) {
		const tkey *k = &ks->k[i];
		double mean = 0, ss = 0;

		for (j = 0; j < k->n; j++)
			mean += k->v[j];
		mean = k->n ? mean / (double)k->n : NAN;
		for (j = 0; j < k->n; j++)
			ss += (k->v[j] - mean) * (k->v[j] - mean);
		tablekeys_put(&c, k->localizer, k->parcel, k->split);
		csvout_str(&c, k->task);
		csvout_str(&c, k->condition);
		csvout_str(&c, k->time);
		csvout_int(&c, (long long)k->n);
		csvout_num(&c, mean);
		csvout_num(&c, k->n > 1 ? sqrt(ss / (double)(k->n - 1)) / sqrt((double)k->n) : NAN);
		csvout_endrow(&c);
	}
	rc = csvout_commit(&c, e);
	return rc ? rc : tabledict_write(path, head, sizeof head / sizeof head[0], NULL, 0, e);
}

static sr_status read_one(const char *path, void *ctx, sr_err *e)
{
	return read_subject(path, ctx, e);
}

sr_status timecourse_group_write(const char *out, char *const *labels, size_t n, sr_err *e)
{
	tkeys ks;
	size_t i;
	char path[4096 + 64];
	sr_status rc;
	int none;

	memset(&ks, 0, sizeof ks);
	rc = subtables_each(out, labels, n, "timecourses.csv", "timecourses_group", "", read_one, &ks,
			    &none, e);
	if (none)
		return SR_OK;
	if (!rc) {
		snprintf(path, sizeof path, "%s/timecourses_group.csv", out);
		rc = write_group(path, &ks, e);
	}
	for (i = 0; i < ks.n; i++) {
		free(ks.k[i].localizer);
		free(ks.k[i].parcel);
		free(ks.k[i].split);
		free(ks.k[i].task);
		free(ks.k[i].condition);
		free(ks.k[i].time);
		free(ks.k[i].v);
	}
	free(ks.k);
	free(ks.slot);
	return rc;
}
