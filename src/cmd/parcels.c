/* parcels.c - the parcels command: group-constrained parcels from localizer maps, spheres, or chosen labels. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/region.h"
#include "../core/smooth.h"
#include "../core/stats.h"
#include "../core/watershed.h"
#include "../io/afile.h"
#include "../io/bids.h"
#include "../io/nii.h"
#include "../io/parcels.h"
#include "../io/study.h"
#include "../io/table.h"
#include "cmd.h"
#include "cmdline.h"
#include "../pipeline/studyset.h"
#include "../pipeline/subject.h"

/* Slots of the values array; the table below is indexed by them, so the two cannot drift. */
enum {
	OPT_OUT, OPT_P, OPT_T, OPT_FWHM, OPT_MINSIZE, OPT_MINSHARE, OPT_CONN, OPT_FLOOR, OPT_LOO,
	OPT_THREADS, OPT_SPHERES, OPT_GRID, OPT_RADIUS, OPT_FROM, OPT_KEEP, OPT_NAMES, OPT_QUIET,
	NOPT
};

static const cmdline_opt parcels_opts[NOPT + 1] = {
	[OPT_OUT] = { "out", "DIR", "folder for parcels.nii.gz and parcels.tsv (required; created if missing)" },
	[OPT_P] = { "p", "P", "one-sided p threshold of each subject's localizer t map (default 0.001)" },
	[OPT_T] = { "t", "T", "threshold t directly instead of --p" },
	[OPT_FWHM] = { "fwhm", "MM", "FWHM of the Gaussian smoothing the overlap map (default 6)" },
	[OPT_MINSIZE] = { "min-size", "VOXELS", "drop regions with fewer voxels (default 10)" },
	[OPT_MINSHARE] = { "min-share", "S", "keep regions where at least this share of subjects has a suprathreshold voxel (default 0.6)" },
	[OPT_CONN] = { "connectivity", "N", "26 (default) or 6: which voxels touch" },
	[OPT_FLOOR] = { "floor", "F", "smoothed overlap below F is background (default 1/number of subjects)" },
	[OPT_LOO] = { "leave-one-out", NULL, "also make DIR/without-sub-<label>/ parcels from all other subjects" },
	[OPT_THREADS] = { "threads", "N", "threads for fitting one subject's runs (default 1)" },
	[OPT_SPHERES] = { "spheres", "COORDS.tsv", "spheres around centres (columns name, x, y, z in world mm)" },
	[OPT_GRID] = { "grid", "IMAGE", "the image whose grid the spheres are drawn on" },
	[OPT_RADIUS] = { "radius", "MM", "sphere radius in mm" },
	[OPT_FROM] = { "from", "LABELS.nii.gz", "an existing label image to restrict" },
	[OPT_KEEP] = { "keep", "L1,L2,...", "labels of --from to keep" },
	[OPT_NAMES] = { "names", "NAMES.tsv", "names of the --from labels (columns index, name)" },
	[OPT_QUIET] = { "quiet", NULL, "print nothing but errors" },
	[NOPT] = { NULL, NULL, NULL },   /* the parser stops at the NULL name */
};

static const cmdline_spec parcels_spec = {
	"parcels",
	"STUDY.ini --out DIR [options]\n"
	"       splitroi parcels --spheres COORDS.tsv --grid IMAGE --radius MM --out DIR\n"
	"       splitroi parcels --from LABELS.nii.gz --keep 3,7,9 [--names NAMES.tsv] --out DIR",
	"Makes parcels for studies that have none. From a study: fits every subject's "
	"localizer runs, thresholds each subject's localizer t map (fixed effects over "
	"all runs), counts at each voxel the share of subjects above threshold, smooths "
	"that overlap map with a Gaussian, splits it into regions by a watershed from its "
	"local maxima and keeps the regions big enough and present in enough subjects. "
	"Writes parcels.nii.gz, parcels.tsv, overlap.nii.gz and overlap_smoothed.nii.gz. "
	"With --leave-one-out, DIR/without-sub-<label>/ holds parcels made without that "
	"subject, labelled like the matching parcels of the whole group; point the study "
	"at them with image = DIR/without-sub-{subject}/parcels.nii.gz so that no "
	"subject's fROI comes from parcels its own data shaped. "
	"The study's subjects must share one grid. The study file's [parcels] image may "
	"be left out or not exist yet: this command is how it is made.",
	parcels_opts,
};

static void warn_cb(void *ctx, const char *msg)
{
	(void)ctx;
	fprintf(stderr, "splitroi parcels: warning: %s\n", msg);
}

/* What the group-constrained procedure needs besides the maps. */
typedef struct gparams {
	double fwhm, floor_value, min_share;
	long min_size;
	int connectivity, have_floor;
} gparams;

/* One set of parcels with what parcels.tsv says about each. */
typedef struct pset {
	int32_t *labels;          /* nvox */
	int32_t n;                /* rows */
	int32_t *index;           /* label of each row */
	char **name;
	size_t *size;
	double *com;              /* 3 per row */
	double *peak, *share;     /* NaN when not from overlap */
	float *overlap, *smoothed;/* nvox, or NULL */
} pset;

static void pset_release(pset *p)
{
	int32_t i;

	free(p->labels);
	for (i = 0; i < p->n; i++)
		free(p->name[i]);
	free(p->name);
	free(p->index);
	free(p->size);
	free(p->com);
	free(p->peak);
	free(p->share);
	free(p->overlap);
	free(p->smoothed);
	memset(p, 0, sizeof *p);
}

static void pset_alloc_rows(pset *p, int32_t n)
{
	size_t m = (size_t)(n > 0 ? n : 1);

	p->n = n;
	p->index = xcalloc(m, sizeof *p->index);
	p->name = xcalloc(m, sizeof *p->name);
	p->size = xcalloc(m, sizeof *p->size);
	p->com = xcalloc(3 * m, sizeof *p->com);
	p->peak = xcalloc(m, sizeof *p->peak);
	p->share = xcalloc(m, sizeof *p->share);
}

static void put_num(FILE *f, double x)
{
	if (isfinite(x))
		fprintf(f, "\t%.10g", x);
	else
		fprintf(f, "\tn/a");
}

static double voxel_volume(const nii_grid *g)
{
	const double (*A)[4] = g->affine;

	return fabs(A[0][0] * (A[1][1] * A[2][2] - A[1][2] * A[2][1]) -
		    A[0][1] * (A[1][0] * A[2][2] - A[1][2] * A[2][0]) +
		    A[0][2] * (A[1][0] * A[2][1] - A[1][1] * A[2][0]));
}

/* Writes DIR/parcels.nii.gz, DIR/parcels.tsv and the overlap maps when present. */
static sr_status pset_write(const pset *p, const nii_grid *g, const char *dir, const char *what,
			    sr_err *e)
{
	char path[4096];
	afile a;
	int32_t r;
	sr_status rc;
	double vv = voxel_volume(g);

	if (strlen(dir) > sizeof path - 32)
		return sr_fail(e, SR_EINVAL, "%s: the output folder name is too long", dir);
	rc = afile_mkdirs(dir, e);
	if (rc)
		return rc;
	snprintf(path, sizeof path, "%s/parcels.tsv", dir);
	rc = afile_open(&a, path, e);
	if (rc)
		return rc;
	fprintf(a.f, "index\tname\tsize_voxels\tsize_mm3\tpeak_overlap\tsubject_share\tcom_x\tcom_y\tcom_z\n");
	for (r = 0; r < p->n; r++) {
		fprintf(a.f, "%d\t%s\t%zu", (int)p->index[r], p->name[r], p->size[r]);
		put_num(a.f, (double)p->size[r] * vv);
		put_num(a.f, p->peak[r]);
		put_num(a.f, p->share[r]);
		put_num(a.f, p->com[3 * r]);
		put_num(a.f, p->com[3 * r + 1]);
		put_num(a.f, p->com[3 * r + 2]);
		fputc('\n', a.f);
	}
	rc = afile_commit(&a, e);
	if (rc)
		return rc;
	snprintf(path, sizeof path, "%s/parcels.nii.gz", dir);
	rc = nii_write_labels(path, g, p->labels, what, e);
	if (rc)
		return rc;
	if (p->overlap) {
		snprintf(path, sizeof path, "%s/overlap.nii.gz", dir);
		rc = nii_write_float(path, g, p->overlap, 1, 0, "share of subjects above threshold", e);
		if (rc)
			return rc;
		snprintf(path, sizeof path, "%s/overlap_smoothed.nii.gz", dir);
		rc = nii_write_float(path, g, p->smoothed, 1, 0, "smoothed share of subjects", e);
	}
	return rc;
}

/* Fills size and centre of mass of every row from the label image. */
static void pset_stats(pset *p, const nii_grid *g)
{
	int32_t maxl = 0, r;
	size_t v, nvox = nii_nvox(g);
	size_t *size;
	double *com;

	for (v = 0; v < nvox; v++)
		if (p->labels[v] > maxl)
			maxl = p->labels[v];
	size = xcalloc((size_t)maxl + 1, sizeof *size);
	com = xcalloc(3 * ((size_t)maxl + 1), sizeof *com);
	region_stats(p->labels, g->nx, g->ny, g->nz, g->affine, maxl, size, com);
	for (r = 0; r < p->n; r++) {
		int32_t l = p->index[r];

		p->size[r] = l >= 1 && l <= maxl ? size[l - 1] : 0;
		memcpy(p->com + 3 * r, l >= 1 && l <= maxl ? com + 3 * (l - 1) : (double[3]){ NAN, NAN, NAN },
		       3 * sizeof *com);
	}
	free(size);
	free(com);
}

/*
 * The group-constrained procedure over the subjects whose sig map is given
 * (sig[s] == NULL: left out): overlap, smoothing, watershed, size and share
 * filters (Fedorenko et al. 2010, J Neurophysiol 104:1177-1194; Julian et al.
 * 2012, NeuroImage 60:2357-2364). Rows come in watershed order (highest
 * smoothed peak first) and are numbered 1..n.
 */
static sr_status group_parcels(unsigned char *const *sig, size_t nsub, const nii_grid *g,
			       const gparams *gp, pset *p, sr_err *e)
{
	size_t nvox = nii_nvox(g), v, s, nused = 0;
	double *ov = xcalloc(nvox, sizeof *ov), *sm = xmalloc_array(nvox, sizeof *sm);
	double sigma[3];
	int32_t *lab = xmalloc_array(nvox, sizeof *lab), nlab = 0, l, *map = NULL, nkeep = 0;
	unsigned char *hit = NULL;
	size_t *size = NULL, *nhave = NULL;
	double *com = NULL, *peak = NULL;
	sr_status rc;

	memset(p, 0, sizeof *p);
	for (s = 0; s < nsub; s++) {
		if (!sig[s])
			continue;
		nused++;
		for (v = 0; v < nvox; v++)
			ov[v] += sig[s][v];
	}
	for (v = 0; v < nvox; v++)
		ov[v] /= (double)nused;
	memcpy(sm, ov, nvox * sizeof *sm);
	sigma[0] = smooth_fwhm_sigma(gp->fwhm, g->dx);
	sigma[1] = smooth_fwhm_sigma(gp->fwhm, g->dy);
	sigma[2] = smooth_fwhm_sigma(gp->fwhm, g->dz);
	rc = smooth_gauss3(sm, g->nx, g->ny, g->nz, sigma, e);
	if (rc)
		goto out;
	rc = watershed_label(sm, g->nx, g->ny, g->nz, gp->have_floor ? gp->floor_value : 1.0 / (double)nused,
			     gp->connectivity, lab, &nlab, e);
	if (rc)
		goto out;
	size = xcalloc((size_t)nlab + 1, sizeof *size);
	com = xcalloc(3 * ((size_t)nlab + 1), sizeof *com);
	peak = xcalloc((size_t)nlab + 1, sizeof *peak);
	hit = xcalloc((size_t)nlab + 1, 1);
	map = xcalloc((size_t)nlab + 1, sizeof *map);
	region_stats(lab, g->nx, g->ny, g->nz, g->affine, nlab, size, com);
	for (v = 0; v < nvox; v++)
		if (lab[v] && ov[v] > peak[lab[v] - 1])
			peak[lab[v] - 1] = ov[v];
	/* per region, the subjects with at least one suprathreshold voxel in it */
	nhave = xcalloc((size_t)nlab + 1, sizeof *nhave);
	for (s = 0; s < nsub; s++) {
		if (!sig[s])
			continue;
		memset(hit, 0, (size_t)nlab + 1);
		for (v = 0; v < nvox; v++)
			if (lab[v] && sig[s][v])
				hit[lab[v] - 1] = 1;
		for (l = 0; l < nlab; l++)
			nhave[l] += hit[l];
	}
	pset_alloc_rows(p, nlab);
	for (l = 0; l < nlab; l++) {
		size_t have = nhave[l];

		if ((long)size[l] < gp->min_size)
			continue;
		if ((double)have / (double)nused < gp->min_share - 1e-12)
			continue;
		map[l] = ++nkeep;
		p->index[nkeep - 1] = nkeep;
		p->size[nkeep - 1] = size[l];
		memcpy(p->com + 3 * (nkeep - 1), com + 3 * l, 3 * sizeof *com);
		p->peak[nkeep - 1] = peak[l];
		p->share[nkeep - 1] = (double)have / (double)nused;
	}
	p->n = nkeep;
	for (l = 0; l < nkeep; l++) {
		char buf[32];

		snprintf(buf, sizeof buf, "region_%02d", (int)(l + 1));
		p->name[l] = xstrdup(buf);
	}
	region_relabel(lab, nvox, nlab, map);
	p->labels = lab;
	lab = NULL;
	p->overlap = xmalloc_array(nvox, sizeof *p->overlap);
	p->smoothed = xmalloc_array(nvox, sizeof *p->smoothed);
	for (v = 0; v < nvox; v++) {
		p->overlap[v] = (float)ov[v];
		p->smoothed[v] = (float)sm[v];
	}
out:
	free(ov);
	free(sm);
	free(lab);
	free(size);
	free(com);
	free(peak);
	free(hit);
	free(nhave);
	free(map);
	if (rc)
		pset_release(p);
	return rc;
}

/*
 * Gives the regions of a leave-one-out set the index and name of the
 * whole-group parcel they overlap most, so that tables over subjects compare
 * the same region: pairs (region, parcel) in decreasing order of shared
 * voxels (ties: lower parcel, then lower region) are matched greedily, each
 * used once. Unmatched regions get indices after the whole group's largest,
 * named region_<index>.
 */
static void match_to(pset *p, const pset *full, size_t nvox)
{
	int32_t nf = full->n, np = p->n, i, j, next = 0, *newidx;
	size_t *count = xcalloc((size_t)(nf > 0 ? nf : 1) * (size_t)(np > 0 ? np : 1), sizeof *count);
	unsigned char *fused = xcalloc((size_t)nf + 1, 1);
	size_t v;

	newidx = xcalloc((size_t)np + 1, sizeof *newidx);
	for (i = 0; i < nf; i++)
		if (full->index[i] > next)
			next = full->index[i];
	/* rows are numbered 1..n in both sets before matching */
	for (v = 0; v < nvox; v++)
		if (p->labels[v] && full->labels[v])
			count[(size_t)(p->labels[v] - 1) * (size_t)nf + (size_t)(full->labels[v] - 1)]++;
	for (;;) {
		size_t best = 0;
		int32_t bi = -1, bj = -1;

		for (j = 0; j < nf; j++) {
			if (fused[j])
				continue;
			for (i = 0; i < np; i++)
				if (!newidx[i] && count[(size_t)i * (size_t)nf + (size_t)j] > best) {
					best = count[(size_t)i * (size_t)nf + (size_t)j];
					bi = i;
					bj = j;
				}
		}
		if (bi < 0)
			break;
		newidx[bi] = full->index[bj];
		fused[bj] = 1;
		free(p->name[bi]);
		p->name[bi] = xstrdup(full->name[bj]);
	}
	for (i = 0; i < np; i++)
		if (!newidx[i]) {
			char buf[32];

			newidx[i] = ++next;
			snprintf(buf, sizeof buf, "region_%02d", (int)next);
			free(p->name[i]);
			p->name[i] = xstrdup(buf);
		}
	region_relabel(p->labels, nvox, np, newidx);
	for (i = 0; i < np; i++)
		p->index[i] = newidx[i];
	/* rows in index order, as a names table reads best */
	for (i = 1; i < np; i++)
		for (j = i; j > 0 && p->index[j - 1] > p->index[j]; j--) {
			int32_t ti = p->index[j];
			char *tn = p->name[j];
			size_t ts = p->size[j];
			double tc[3], tp = p->peak[j], tsh = p->share[j];

			memcpy(tc, p->com + 3 * j, sizeof tc);
			p->index[j] = p->index[j - 1];
			p->name[j] = p->name[j - 1];
			p->size[j] = p->size[j - 1];
			p->peak[j] = p->peak[j - 1];
			p->share[j] = p->share[j - 1];
			memcpy(p->com + 3 * j, p->com + 3 * (j - 1), sizeof tc);
			p->index[j - 1] = ti;
			p->name[j - 1] = tn;
			p->size[j - 1] = ts;
			p->peak[j - 1] = tp;
			p->share[j - 1] = tsh;
			memcpy(p->com + 3 * (j - 1), tc, sizeof tc);
		}
	free(count);
	free(fused);
	free(newidx);
}

/* The study's brain mask on its own grid, or NULL when the study has none. */
static sr_status read_mask(const study *st, unsigned char **mask, nii_grid *g, sr_err *e)
{
	nii_info info;
	sr_status rc;

	*mask = NULL;
	if (!st->mask || study_mask_per_subject(st))
		return SR_OK;   /* a subject's own mask is read with its runs */
	rc = nii_read_mask(st->mask, &info, mask, NULL, e);
	if (rc)
		return rc;
	*g = info.grid;
	return SR_OK;
}

/* The study mode's thresholds and filters from the options; 2 (said) on a bad value. */
static int study_options(const char *const *val, gparams *gp, double *p, double *tfix, long *threads)
{
	long conn = 26;

	if (val[OPT_P] && val[OPT_T]) {
		cmdline_error("parcels", "give --p or --t, not both");
		return 2;
	}
	if ((val[OPT_P] && (cmdline_double("parcels", "p", val[OPT_P], 0, 1, p) || *p <= 0 || *p >= 1)) ||
	    (val[OPT_T] && cmdline_double("parcels", "t", val[OPT_T], -1e6, 1e6, tfix)) ||
	    (val[OPT_FWHM] && cmdline_double("parcels", "fwhm", val[OPT_FWHM], 0, 1000, &gp->fwhm)) ||
	    (val[OPT_MINSIZE] && cmdline_int("parcels", "min-size", val[OPT_MINSIZE], 1, 1000000000, &gp->min_size)) ||
	    (val[OPT_MINSHARE] && cmdline_double("parcels", "min-share", val[OPT_MINSHARE], 0, 1, &gp->min_share)) ||
	    (val[OPT_CONN] && cmdline_int("parcels", "connectivity", val[OPT_CONN], 6, 26, &conn)) ||
	    (val[OPT_FLOOR] && cmdline_double("parcels", "floor", val[OPT_FLOOR], 0, 1, &gp->floor_value)) ||
	    (val[OPT_THREADS] && cmdline_int("parcels", "threads", val[OPT_THREADS], 1, 1024, threads))) {
		if (val[OPT_P] && (*p <= 0 || *p >= 1))
			cmdline_error("parcels", "--p must lie strictly between 0 and 1");
		return 2;
	}
	if (conn != 6 && conn != 26) {
		cmdline_error("parcels", "--connectivity must be 6 or 26, not %ld", conn);
		return 2;
	}
	gp->connectivity = (int)conn;
	gp->have_floor = val[OPT_FLOOR] != NULL;
	return 0;
}

/* The study's thresholds and the shared grid while the subjects are thresholded. */
typedef struct sigwork {
	const study *st;
	const unsigned char *mask;
	const nii_grid *mgrid;
	double p, tfix;           /* tfix NaN: threshold by p */
	int threads, quiet;
	double *qcache;           /* t quantile of 1 - p per df, NaN not yet computed */
	size_t nq;
	nii_grid grid;            /* the first subject's */
	size_t nvox;
} sigwork;

/* The t threshold of a voxel with df degrees of freedom: one-sided p to t, cached per df. */
static double df_threshold(sigwork *w, int df)
{
	if (!isnan(w->tfix))
		return w->tfix;
	if ((size_t)df >= w->nq) {
		size_t k, nn = (size_t)df + 1;

		w->qcache = xrealloc(w->qcache, nn * sizeof *w->qcache);
		for (k = w->nq; k < nn; k++)
			w->qcache[k] = NAN;
		w->nq = nn;
	}
	if (df > 0 && isnan(w->qcache[df]))
		w->qcache[df] = stats_t_quantile(1.0 - w->p, (double)df);
	return df > 0 ? w->qcache[df] : INFINITY;
}

/* Subject s's suprathreshold voxels (*sig, nvox) on the grid every subject must share. */
static sr_status subject_sig(sigwork *w, char *const *subs, size_t s, unsigned char **sig, sr_err *e)
{
	double *t;
	int *df, nruns;
	nii_grid g;
	size_t nsig = 0, v;
	char buf[512];

	if (subject_localizer_t(w->st, subs[s], w->mask, w->mask ? w->mgrid : NULL, w->threads, &g, &t, &df, &nruns,
				e) != SR_OK)
		return e->code;
	if (s == 0) {
		w->grid = g;
		w->nvox = nii_nvox(&g);
		if (w->mask && !nii_same_grid(&g, w->mgrid, 1e-3, buf, sizeof buf)) {
			free(t);
			free(df);
			return sr_fail(e, SR_EDIM, "%s: the mask is not on the data grid: %s", w->st->mask, buf);
		}
	} else if (!nii_same_grid(&w->grid, &g, 1e-3, buf, sizeof buf)) {
		free(t);
		free(df);
		return sr_fail(e, SR_EDIM, "subject %s is not on the grid of subject %s (%s); parcels need one grid",
			       subs[s], subs[0], buf);
	}
	*sig = xmalloc(w->nvox);
	for (v = 0; v < w->nvox; v++) {
		(*sig)[v] = isfinite(t[v]) && t[v] > df_threshold(w, df[v]);
		nsig += (*sig)[v];
	}
	free(t);
	free(df);
	if (!w->quiet)
		fprintf(stderr, "sub-%s: %d localizer runs, %zu voxels above threshold\n", subs[s], nruns, nsig);
	return SR_OK;
}

/* DIR/without-sub-<label>/ for every subject: parcels of the others, matched to the whole group's. */
static sr_status write_leave_one_out(unsigned char **sig, char *const *subs, size_t nsub, const nii_grid *grid,
				     const gparams *gp, const pset *full, const char *out, int quiet, sr_err *e)
{
	char dir[4096];
	size_t s;

	for (s = 0; s < nsub; s++) {
		unsigned char *keep = sig[s];
		pset one;
		sr_status rc;

		sig[s] = NULL;
		rc = group_parcels(sig, nsub, grid, gp, &one, e);
		sig[s] = keep;
		if (rc)
			return rc;
		match_to(&one, full, nii_nvox(grid));
		if (strlen(out) + strlen(subs[s]) + 16 > sizeof dir) {
			pset_release(&one);
			return sr_fail(e, SR_EINVAL, "%s: the output folder name is too long", out);
		}
		snprintf(dir, sizeof dir, "%s/without-sub-%s", out, subs[s]);
		rc = pset_write(&one, grid, dir, "parcels without one subject", e);
		if (!rc && !quiet)
			printf("%s: %d parcels from %zu subjects\n", dir, (int)one.n, nsub - 1);
		pset_release(&one);
		if (rc)
			return rc;
	}
	return SR_OK;
}

static int from_study(const char *path, const char *const *val, sr_err *e)
{
	study st;
	study_problems probs = { 0 };
	char **subs = NULL;
	size_t nsub = 0, s, i;
	unsigned char **sig = NULL, *mask = NULL;
	nii_grid mgrid;
	gparams gp = { 6.0, 0, 0.6, 10, 26, 0 };
	sigwork w = { 0 };
	long threads = 1;
	int quiet = val[OPT_QUIET] != NULL, rc = 1, loo = val[OPT_LOO] != NULL;
	pset full;

	memset(&full, 0, sizeof full);
	w.p = 0.001;
	w.tfix = NAN;
	if (study_options(val, &gp, &w.p, &w.tfix, &threads))
		return 2;
	if (study_load_flags(path, &st, &probs, STUDY_PARCELS_OPTIONAL) != SR_OK) {
		for (i = 0; i < probs.n; i++)
			fprintf(stderr, "splitroi parcels: %s\n", probs.msg[i]);
		study_problems_release(&probs);
		return 1;
	}
	study_problems_release(&probs);
	if (st.nlocs > 1) {
		/* which localizer's maps would be ambiguous: say so rather than pick one */
		sr_fail(e, SR_ESTUDY, "%s: the study has %zu localizers; make each one's parcels from a study file with that localizer alone",
			path, st.nlocs);
		goto fail;
	}
	if (studyset_subjects(&st, &subs, &nsub, e) != SR_OK)
		goto fail;
	if (nsub == 0 || (loo && nsub < 2)) {
		sr_fail(e, SR_ESTUDY, "%s: %s", st.bids,
			nsub ? "leave-one-out parcels need at least 2 subjects" : "no subjects");
		goto fail;
	}
	if (read_mask(&st, &mask, &mgrid, e) != SR_OK)
		goto fail;
	w.st = &st;
	w.mask = mask;
	w.mgrid = &mgrid;
	w.threads = (int)threads;
	w.quiet = quiet;
	sig = xcalloc(nsub, sizeof *sig);
	for (s = 0; s < nsub; s++)
		if (subject_sig(&w, subs, s, &sig[s], e) != SR_OK)
			goto fail;
	if (group_parcels(sig, nsub, &w.grid, &gp, &full, e) != SR_OK)
		goto fail;
	if (pset_write(&full, &w.grid, val[OPT_OUT], "group-constrained parcels", e) != SR_OK)
		goto fail;
	if (!quiet)
		printf("%s: %d parcels from %zu subjects\n", val[OPT_OUT], (int)full.n, nsub);
	if (full.n == 0)
		sr_warnf(e, "no region passed the filters (--min-size %ld, --min-share %g); try a looser threshold",
			 gp.min_size, gp.min_share);
	if (loo && write_leave_one_out(sig, subs, nsub, &w.grid, &gp, &full, val[OPT_OUT], quiet, e) != SR_OK)
		goto fail;
	rc = 0;
	goto out;
fail:
	fprintf(stderr, "splitroi parcels: %s\n", e->msg);
	rc = 1;
out:
	if (sig)
		for (s = 0; s < nsub; s++)
			free(sig[s]);
	free(sig);
	free(mask);
	free(w.qcache);
	pset_release(&full);
	if (subs)
		strv_free_array(subs, nsub);
	study_release(&st);
	return rc;
}

static int from_spheres(const char *const *val, sr_err *e)
{
	table tb;
	nii_info info;
	double radius, *xyz = NULL;
	int ci[4], k, rc = 1;
	size_t r, nvox;
	pset p;
	static const char *const cols[4] = { "name", "x", "y", "z" };

	memset(&p, 0, sizeof p);
	if (!val[OPT_GRID] || !val[OPT_RADIUS]) {
		cmdline_error("parcels", "--spheres needs --grid IMAGE and --radius MM");
		return 2;
	}
	if (cmdline_double("parcels", "radius", val[OPT_RADIUS], 0, 1e4, &radius))
		return 2;
	if (table_read(val[OPT_SPHERES], 0, &tb, e) != SR_OK)
		goto fail0;
	for (k = 0; k < 4; k++)
		if ((ci[k] = table_col(&tb, cols[k])) < 0) {
			sr_fail(e, SR_EFORMAT, "%s: line 1: the coordinates table needs a column '%s' (columns: name, x, y, z)",
				val[OPT_SPHERES], cols[k]);
			goto fail;
		}
	if (tb.nrows == 0 || tb.nrows > 100000) {
		sr_fail(e, SR_EFORMAT, "%s: %s", val[OPT_SPHERES],
			tb.nrows ? "too many rows" : "no coordinates below the header");
		goto fail;
	}
	xyz = xmalloc_array(3 * tb.nrows, sizeof *xyz);
	for (r = 0; r < tb.nrows; r++) {
		if (!table_cell(&tb, r, (size_t)ci[0])[0] || strchr(table_cell(&tb, r, (size_t)ci[0]), '\t')) {
			sr_fail(e, SR_EFORMAT, "%s: line %zu, column %d (name): a sphere needs a name",
				val[OPT_SPHERES], tb.line[r], ci[0] + 1);
			goto fail;
		}
		for (k = 1; k < 4; k++) {
			int na;

			if (table_number(&tb, r, (size_t)ci[k], &xyz[3 * r + (size_t)k - 1], &na, 0, e) != SR_OK)
				goto fail;
			if (na) {
				sr_fail(e, SR_EFORMAT, "%s: line %zu, column %d (%s): a coordinate is needed, not n/a",
					val[OPT_SPHERES], tb.line[r], ci[k] + 1, cols[k]);
				goto fail;
			}
		}
	}
	if (nii_read_info(val[OPT_GRID], &info, e) != SR_OK)
		goto fail;
	nvox = nii_nvox(&info.grid);
	p.labels = xmalloc_array(nvox, sizeof *p.labels);
	if (region_spheres(info.grid.affine, info.grid.nx, info.grid.ny, info.grid.nz, xyz,
			   (int)tb.nrows, radius, p.labels, e) != SR_OK)
		goto fail;
	pset_alloc_rows(&p, (int32_t)tb.nrows);
	for (r = 0; r < tb.nrows; r++) {
		p.index[r] = (int32_t)r + 1;
		p.name[r] = xstrdup(table_cell(&tb, r, (size_t)ci[0]));
		p.peak[r] = p.share[r] = NAN;
	}
	pset_stats(&p, &info.grid);
	for (r = 0; r < tb.nrows; r++)
		if (p.size[r] == 0) {
			sr_fail(e, SR_EINVAL, "%s: line %zu: sphere '%s' holds no voxel of %s (outside the grid, or every voxel nearer another centre)",
				val[OPT_SPHERES], tb.line[r], p.name[r], val[OPT_GRID]);
			goto fail;
		}
	if (pset_write(&p, &info.grid, val[OPT_OUT], "spheres", e) != SR_OK)
		goto fail;
	if (!val[OPT_QUIET])
		printf("%s: %d spheres of radius %g mm\n", val[OPT_OUT], (int)p.n, radius);
	rc = 0;
	goto out;
fail:
	fprintf(stderr, "splitroi parcels: %s\n", e->msg);
out:
	table_release(&tb);
	free(xyz);
	pset_release(&p);
	return rc;
fail0:
	fprintf(stderr, "splitroi parcels: %s\n", e->msg);
	return 1;
}

/* The sorted distinct labels of a --keep list; 2 (said) when it is not one. */
static int parse_keep(const char *list, int32_t **keep, size_t *nkeep)
{
	const char *s = list;
	size_t k;

	*nkeep = 0;
	*keep = xmalloc_array(strlen(s) + 1, sizeof **keep);
	while (*s) {
		char *end;
		long x = strtol(s, &end, 10);

		if (end == s || x < 1 || x > 2147483647L || (*end && *end != ',')) {
			cmdline_error("parcels", "--keep: '%s' is not a list of labels >= 1 separated by commas", list);
			free(*keep);
			return 2;
		}
		for (k = 0; k < *nkeep; k++)
			if ((*keep)[k] == (int32_t)x)
				break;
		if (k == *nkeep)
			(*keep)[(*nkeep)++] = (int32_t)x;
		s = *end ? end + 1 : end;
	}
	if (*nkeep == 0) {
		cmdline_error("parcels", "--keep: no labels given");
		free(*keep);
		return 2;
	}
	qsort(*keep, *nkeep, sizeof **keep, strv_cmp_i32);
	return 0;
}

static int from_labels(const char *const *val, sr_err *e)
{
	int32_t *keep = NULL;
	size_t nkeep = 0, v, k;
	int rc = 1;
	parcels_set in;
	sr_err quiet;
	pset p;

	memset(&p, 0, sizeof p);
	memset(&in, 0, sizeof in);
	if (!val[OPT_KEEP]) {
		cmdline_error("parcels", "--from needs --keep L1,L2,... (the labels to keep)");
		return 2;
	}
	if (parse_keep(val[OPT_KEEP], &keep, &nkeep))
		return 2;
	/* the labels not kept need no names: no warnings about them */
	sr_err_init(&quiet, NULL, NULL);
	if (parcels_load(val[OPT_FROM], val[OPT_NAMES], &in, &quiet) != SR_OK) {
		sr_fail(e, quiet.code, "%s", quiet.msg);
		goto fail;
	}
	p.labels = xcalloc(in.nvox ? in.nvox : 1, sizeof *p.labels);
	for (v = 0; v < in.nvox; v++)
		if (bsearch(&in.labels[v], keep, nkeep, sizeof *keep, strv_cmp_i32))
			p.labels[v] = in.labels[v];
	pset_alloc_rows(&p, (int32_t)nkeep);
	for (k = 0; k < nkeep; k++) {
		char buf[32];
		const char *nm = parcels_name(&in, keep[k]);

		p.index[k] = keep[k];
		p.peak[k] = p.share[k] = NAN;
		if (in.have_names && !nm) {
			sr_fail(e, SR_EFORMAT, "%s: no name for label %d", val[OPT_NAMES], (int)keep[k]);
			goto fail;
		}
		snprintf(buf, sizeof buf, "label_%d", (int)keep[k]);
		p.name[k] = xstrdup(nm ? nm : buf);
	}
	pset_stats(&p, &in.grid);
	for (k = 0; k < nkeep; k++)
		if (p.size[k] == 0) {
			sr_fail(e, SR_EINVAL, "%s: label %d is not in the image", val[OPT_FROM], (int)keep[k]);
			goto fail;
		}
	if (pset_write(&p, &in.grid, val[OPT_OUT], "chosen labels", e) != SR_OK)
		goto fail;
	if (!val[OPT_QUIET])
		printf("%s: %d parcels kept from %s\n", val[OPT_OUT], (int)p.n, val[OPT_FROM]);
	rc = 0;
	goto out;
fail:
	fprintf(stderr, "splitroi parcels: %s\n", e->msg);
out:
	parcels_release(&in);
	free(keep);
	pset_release(&p);
	return rc;
}

int cmd_parcels(int argc, char **argv)
{
	const char *val[NOPT], **pos = xmalloc_array((size_t)argc + 1, sizeof *pos);
	int npos, rc, nmode;
	sr_err e;

	sr_err_init(&e, warn_cb, NULL);
	rc = cmdline_parse(&parcels_spec, argc, argv, val, pos, &npos);
	if (rc) {
		free(pos);
		return rc == 1 ? 0 : 2;
	}
	nmode = (npos > 0) + (val[OPT_SPHERES] != NULL) + (val[OPT_FROM] != NULL);
	if (nmode != 1 || npos > 1) {
		cmdline_error("parcels", "%s (see 'splitroi help parcels')",
			      nmode == 0 ? "give a study file, --spheres COORDS.tsv or --from LABELS.nii.gz" :
			      npos > 1 ? "wants one study file" :
			      "give only one of: a study file, --spheres, --from");
		free(pos);
		return 2;
	}
	if (!val[OPT_OUT]) {
		cmdline_error("parcels", "--out DIR is required");
		free(pos);
		return 2;
	}
	{
		/* options of one mode given to another are mistakes, not no-ops */
		static const int study_only[] = { OPT_P, OPT_T, OPT_FWHM, OPT_MINSIZE, OPT_MINSHARE,
						  OPT_CONN, OPT_FLOOR, OPT_LOO, OPT_THREADS };
		static const int sphere_only[] = { OPT_GRID, OPT_RADIUS };
		static const int from_only[] = { OPT_KEEP, OPT_NAMES };
		size_t i;
		const char *bad = NULL;

		for (i = 0; i < sizeof study_only / sizeof *study_only; i++)
			if (npos == 0 && val[study_only[i]])
				bad = parcels_opts[study_only[i]].name;
		for (i = 0; i < sizeof sphere_only / sizeof *sphere_only; i++)
			if (!val[OPT_SPHERES] && val[sphere_only[i]])
				bad = parcels_opts[sphere_only[i]].name;
		for (i = 0; i < sizeof from_only / sizeof *from_only; i++)
			if (!val[OPT_FROM] && val[from_only[i]])
				bad = parcels_opts[from_only[i]].name;
		if (bad) {
			cmdline_error("parcels", "--%s does not apply here (see 'splitroi help parcels')", bad);
			free(pos);
			return 2;
		}
	}
	if (npos == 1)
		rc = from_study(pos[0], val, &e);
	else if (val[OPT_SPHERES])
		rc = from_spheres(val, &e);
	else
		rc = from_labels(val, &e);
	free(pos);
	return rc;
}
