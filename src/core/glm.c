/* glm.c - one-pass OLS and AR(1) Prais-Winsten fits per voxel from streamed sums (METHODS.md 3-5).
 *
 * The method, in the orthonormal basis of the column space of X:
 *   X D = U S V' (thin SVD of X with unit-norm columns, D = column scaling),
 *   rank r = #{s_j > 1e-10 s_max}, U_r (T x r) orthonormal, Xq = U_r.
 * Every estimable contrast c'beta equals cq'delta with cq = S_r^-1 V_r' D c and
 * delta the coefficients of the fit on U_r, so the per-voxel problem is a
 * full-rank fit on an orthonormal design:
 *   OLS: delta = U_r' z, RSS = z'z - delta'delta, Cov(delta) = sigma^2 I.
 *   lag-one residual product: sum_k>=1 e_k e_k-1 = zlag - delta'l + delta'Lq delta,
 *     l = sum_k z_k (u_k-1 + u_k+1), Lq = sum_k>=1 u_k u_k-1' (u_k = row k of U_r).
 *   Prais-Winsten (Prais & Winsten 1954) whitening W gives, without forming W X:
 *     G = Xw'Xw = (1+rho^2) I - rho (Lq + Lq') - rho^2 (u_0 u_0' + u_T-1 u_T-1')
 *     h = Xw'zw = (1+rho^2) delta - rho l - rho^2 (u_0 z_0 + u_T-1 z_T-1)
 *     zw'zw = (1+rho^2) z'z - 2 rho zlag - rho^2 (z_0^2 + z_T-1^2)
 *   then delta_w = G^-1 h (Cholesky), RSS_w = zw'zw - h'G^-1 h,
 *   var(c'beta) = sigma_w^2 cq' G^-1 cq.
 * G is within a factor ((1+|rho|)/(1-|rho|))^2 of I, so the Cholesky is
 * accurate whatever the conditioning of X itself.
 * Streaming: z_k = y_k - y_0 when the constant is in col(X) (precision; the
 * fit of y is the fit of z plus y_0 pinv(X) 1). U_r'z and l are accumulated
 * for batches of volumes, each voxel's sums read and written once per batch
 * (batchsum.h fixes the order of the arithmetic).
 */
#include "glm.h"

#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <stdint.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include "batchsum.h"
#include "mem.h"
#include "pool.h"
#include "pwlanes.h"
#include "stats.h"

#define GLM_RANK_TOL 1e-10
#define GLM_ESTIM_TOL 1e-8
#define GLM_RHO_MAX 0.99
/* volumes per batch, a multiple of BATCHSUM_GROUP: each batch reads and writes
 * the accumulators once; more volumes mean less memory traffic but a larger
 * buffer (batch x nvox doubles) */
#define GLM_BATCH 4
/*
 * The batch when the pending volumes are held as float32 (glm_acc_float32):
 * GLM_BATCH, in half the bytes, while the sums are no larger than a common
 * last-level cache, GLM_CACHE_SUMS (reading and writing them once per batch
 * is then cheap); GLM_BATCH_F32_BIG when they are larger, so that they go
 * through memory half as often for 16 more bytes a voxel (the standard
 * grid's 88 MB of sums: about 3% of a subject's CPU). A fixed size, not the
 * machine's: virtual machines report caches they do not have, and the
 * batch must not depend on where the run is fitted (it changes no bit, but
 * the memory would differ). Any multiple of BATCHSUM_GROUP gives the same bits.
 */
#define GLM_BATCH_F32 GLM_BATCH
#define GLM_BATCH_F32_BIG (2 * GLM_BATCH)
#define GLM_CACHE_SUMS ((size_t)32 << 20)
/*
 * Voxels per chunk of a volume. A chunk that has held only +0 so far (a zero
 * background) is skipped: adding A * 0 would leave every sum as it is (the
 * sums start at +0 and never become -0), so the results do not change, and
 * the skipped accumulators' pages are never touched.
 */
#define ACC_CHUNK 256
/* glm_acc_defer_dim: a first value below this fraction of the first volume's
   98th percentile defers the voxel (half the floor's fraction of R) */
#define GLM_DEFER_FRACTION 0.05
/* deferral_held's margin, in units of sum |z| + |y0|: a bound on how far two
   ways of summing a mean can differ, with room to spare (the roundoff is near
   sqrt(rank) * 1.1e-16 of it) */
#define GLM_DEFER_TOL 1e-8
/* grid of the adjusted-rho table: -0.99, -0.98, ..., 0.99 */
#define GLM_NRHO 199
#define GLM_RHO_STEP 0.01

struct glm_model {
	int T, p, r;
	int has_const;  /* the all-ones series lies in col(X): the y_0 shift is exact */
	double *D;      /* p: column scaling (1 / column norm, 1 for zero columns) */
	double *sv;     /* r singular values of X D */
	double *V;      /* p x r, column-major */
	double *U;      /* T x r, column-major */
	double *A;      /* 2r x T, column-major: rows U_r' then the lag sums u_k-1 + u_k+1 */
	double *Lq;     /* r x r: sum_k>=1 u_k u_k-1' (column-major) */
	double *u0, *ul;/* r: first and last rows of U_r */
	double *g1;     /* r: U_r' 1 (coefficients of the constant series) */
	double *ftab;   /* GLM_NRHO: expected residual lag-one ratio for rho on the grid (adjusted AR(1)) */
	int ftab_ok;    /* ftab strictly increasing, so it can be inverted */
};

static double *dup_zero(size_t n)
{
	return xcalloc(n ? n : 1, sizeof(double));
}

/*
 * The residual lag-one ratio expected under AR(1) noise with coefficient rho,
 * E[e'D1 e] / E[e'e] = tr(R D1 R V) / tr(R V), R = I - U_r U_r', V the AR(1)
 * correlation matrix, on the rho grid. Inverting it removes the bias of the
 * residual-based estimate (the fit, drifts above all, absorbs part of the
 * autocorrelation); the same idea as the bias reduction of Worsley et al.
 * 2002, NeuroImage 15:1-15, carried to all lags of AR(1). V U is applied in
 * O(T r) by two first-order recursions, so the table costs O(199 T r).
 */
static void make_ftab(glm_model *m)
{
	int T = m->T, r = m->r, i, k, a, b;
	double *W = dup_zero((size_t)T * r), *f = dup_zero((size_t)T), *B = dup_zero((size_t)r * r);

	m->ftab = dup_zero(GLM_NRHO);
	m->ftab_ok = 1;
	for (i = 0; i < GLM_NRHO; i++) {
		double rho = -GLM_RHO_MAX + GLM_RHO_STEP * i, trRV, trD1RVR, t1, t2, t3;

		/* W = V U: (Vx)_k = fwd_k + bwd_k - x_k */
		for (a = 0; a < r; a++) {
			const double *u = m->U + (size_t)a * T;
			double *w = W + (size_t)a * T, acc = 0.0;

			for (k = 0; k < T; k++)
				f[k] = acc = u[k] + rho * acc;
			acc = 0.0;
			for (k = T - 1; k >= 0; k--) {
				acc = u[k] + rho * acc;
				w[k] = f[k] + acc - u[k];
			}
		}
		trRV = T;
		t1 = t2 = 0.0;
		for (a = 0; a < r; a++) {
			const double *u = m->U + (size_t)a * T, *w = W + (size_t)a * T;

			for (k = 0; k < T; k++)
				trRV -= u[k] * w[k];
			for (k = 0; k + 1 < T; k++) {
				t1 += u[k + 1] * w[k];   /* tr(D1 H V) */
				t2 += w[k + 1] * u[k];   /* tr(D1 V H) */
			}
		}
		/* B = U'W; tr(D1 H V H) = tr(A B), A = U'D1U = Lq' */
		cblas_dgemm(CblasColMajor, CblasTrans, CblasNoTrans, r, r, T, 1.0, m->U, T, W, T, 0.0, B, r);
		t3 = 0.0;
		for (a = 0; a < r; a++)
			for (b = 0; b < r; b++)
				t3 += m->Lq[(size_t)a * r + b] * B[(size_t)a * r + b];
		trD1RVR = (T - 1) * rho - t1 - t2 + t3;
		m->ftab[i] = trD1RVR / trRV;
		if (!(trRV > 0.0) || (i > 0 && !(m->ftab[i] > m->ftab[i - 1])))
			m->ftab_ok = 0;
	}
	free(W);
	free(f);
	free(B);
}

/* rho whose expected residual ratio is q (linear between grid points), clipped to the grid. */
static double adjusted_rho(const glm_model *m, double q)
{
	const double *f = m->ftab;
	int lo = 0, hi = GLM_NRHO - 1;

	if (!(q > f[0]))
		return -GLM_RHO_MAX;
	if (!(q < f[hi]))
		return GLM_RHO_MAX;
	while (hi - lo > 1) {
		int mid = (lo + hi) / 2;

		if (f[mid] <= q)
			lo = mid;
		else
			hi = mid;
	}
	return -GLM_RHO_MAX + GLM_RHO_STEP * (lo + (q - f[lo]) / (f[hi] - f[lo]));
}

sr_status glm_model_make(const double *X, int T, int p, glm_model **out, sr_err *e)
{
	glm_model *m;
	double *Xs, *S, *Uf, *Vt, *superb, smax;
	size_t i, n;
	int j, k, r, info;

	*out = NULL;
	if (T <= 0 || p <= 0)
		return sr_fail(e, SR_EDIM, "design has %d rows and %d columns", T, p);
	if (T <= p)
		return sr_fail(e, SR_EDIM, "design has %d volumes for %d columns: no residual degrees of freedom", T, p);
	if (sr_mul_size((size_t)T, (size_t)p, &n) != 0)
		return sr_fail(e, SR_EDIM, "design too large");
	for (i = 0; i < n; i++)
		if (!isfinite(X[i]))
			return sr_fail(e, SR_EINVAL, "design has a non-finite value in row %d, column %d",
				       (int)(i % (size_t)T) + 1, (int)(i / (size_t)T) + 1);

	m = xcalloc(1, sizeof *m);
	m->T = T;
	m->p = p;
	m->D = dup_zero((size_t)p);
	Xs = xmalloc_array(n, sizeof(double));
	/* Unit-norm columns: the SVD's accuracy then depends on the conditioning of
	 * the scaled design only (as for Householder QR), which matters for badly
	 * scaled regressors such as Longley's. */
	for (j = 0; j < p; j++) {
		double nrm = 0.0;

		for (k = 0; k < T; k++)
			nrm = hypot(nrm, X[(size_t)j * T + k]);
		m->D[j] = nrm > 0.0 ? 1.0 / nrm : 1.0;
		for (k = 0; k < T; k++)
			Xs[(size_t)j * T + k] = X[(size_t)j * T + k] * m->D[j];
	}
	S = dup_zero((size_t)p);
	Uf = xmalloc_array(n, sizeof(double));
	Vt = xmalloc_array((size_t)p * p, sizeof(double));
	superb = dup_zero((size_t)p);
	info = LAPACKE_dgesvd(LAPACK_COL_MAJOR, 'S', 'S', T, p, Xs, T, S, Uf, T, Vt, p, superb);
	free(Xs);
	free(superb);
	if (info != 0) {
		free(S);
		free(Uf);
		free(Vt);
		glm_model_free(m);
		return sr_fail(e, SR_ESINGULAR, "singular value decomposition of the design failed (%d)", info);
	}
	smax = S[0];
	for (r = 0; r < p && S[r] > GLM_RANK_TOL * smax; r++)
		;
	m->r = r;
	if (r == 0) {
		free(S);
		free(Uf);
		free(Vt);
		glm_model_free(m);
		return sr_fail(e, SR_ESINGULAR, "design is all zero");
	}
	m->sv = dup_zero((size_t)r);
	m->V = dup_zero((size_t)p * r);
	m->U = dup_zero((size_t)T * r);
	for (j = 0; j < r; j++) {
		m->sv[j] = S[j];
		for (k = 0; k < p; k++)
			m->V[(size_t)j * p + k] = Vt[(size_t)k * p + j];
		memcpy(m->U + (size_t)j * T, Uf + (size_t)j * T, (size_t)T * sizeof(double));
	}
	free(S);
	free(Uf);
	free(Vt);

	m->A = dup_zero((size_t)2 * r * T);
	m->Lq = dup_zero((size_t)r * r);
	m->u0 = dup_zero((size_t)r);
	m->ul = dup_zero((size_t)r);
	m->g1 = dup_zero((size_t)r);
	for (k = 0; k < T; k++) {
		double *a = m->A + (size_t)2 * r * k;

		for (j = 0; j < r; j++) {
			const double *u = m->U + (size_t)j * T;

			a[j] = u[k];
			a[r + j] = (k > 0 ? u[k - 1] : 0.0) + (k + 1 < T ? u[k + 1] : 0.0);
		}
	}
	for (j = 0; j < r; j++) {
		const double *uj = m->U + (size_t)j * T;
		double s1 = 0.0;

		m->u0[j] = uj[0];
		m->ul[j] = uj[T - 1];
		for (k = 0; k < T; k++)
			s1 += uj[k];
		m->g1[j] = s1;
	}
	/* Lq[a][b] = sum_k>=1 U[k][a] U[k-1][b] */
	cblas_dgemm(CblasColMajor, CblasTrans, CblasNoTrans, r, r, T - 1, 1.0, m->U + 1, T, m->U, T,
		    0.0, m->Lq, r);
	{
		/* 1 - U_r U_r' 1, relative to ||1|| = sqrt(T) */
		double res = 0.0;

		for (k = 0; k < T; k++) {
			double f = 0.0;

			for (j = 0; j < r; j++)
				f += m->U[(size_t)j * T + k] * m->g1[j];
			res += (1.0 - f) * (1.0 - f);
		}
		m->has_const = sqrt(res) <= GLM_ESTIM_TOL * sqrt((double)T);
	}
	make_ftab(m);
	*out = m;
	return SR_OK;
}

void glm_model_free(glm_model *m)
{
	if (!m)
		return;
	free(m->D);
	free(m->sv);
	free(m->V);
	free(m->U);
	free(m->A);
	free(m->Lq);
	free(m->u0);
	free(m->ul);
	free(m->g1);
	free(m->ftab);
	free(m);
}

int glm_model_rank(const glm_model *m) { return m->r; }
int glm_model_df(const glm_model *m) { return m->T - m->r; }

/*
 * cq = S_r^-1 V_r' D c, the contrast in the orthonormal basis. Returns 1 when
 * c lies in the row space of X: the row space is D^-1 span(V_r), so the test
 * is ||Dc - V_r V_r' Dc|| <= 1e-8 ||Dc|| (METHODS.md section 11).
 */
static int contrast_q(const glm_model *m, const double *c, double *cq)
{
	double *dc = dup_zero((size_t)m->p);
	double nrm = 0.0, res = 0.0;
	int j, k, ok;

	for (k = 0; k < m->p; k++) {
		dc[k] = m->D[k] * c[k];
		nrm += dc[k] * dc[k];
	}
	for (j = 0; j < m->r; j++) {
		const double *v = m->V + (size_t)j * m->p;
		double s = 0.0;

		for (k = 0; k < m->p; k++)
			s += v[k] * dc[k];
		if (cq)
			cq[j] = s / m->sv[j];
		for (k = 0; k < m->p; k++)
			dc[k] -= s * v[k];
	}
	for (k = 0; k < m->p; k++)
		res += dc[k] * dc[k];
	free(dc);
	ok = isfinite(res) && sqrt(res) <= GLM_ESTIM_TOL * sqrt(nrm);
	return nrm == 0.0 ? 1 : ok;
}

int glm_estimable(const glm_model *m, const double *c)
{
	return contrast_q(m, c, NULL);
}

void glm_ols_solve(const glm_model *m, const double *y, double *beta)
{
	int p = m->p, r = m->r, T = m->T, j, k;
	double *d = dup_zero((size_t)r), *ej = dup_zero((size_t)p);

	/* delta = S^-1 U_r' y; beta = D V_r delta */
	cblas_dgemv(CblasColMajor, CblasTrans, T, r, 1.0, m->U, T, y, 1, 0.0, d, 1);
	for (j = 0; j < r; j++)
		d[j] /= m->sv[j];
	cblas_dgemv(CblasColMajor, CblasNoTrans, p, r, 1.0, m->V, p, d, 1, 0.0, beta, 1);
	for (k = 0; k < p; k++) {
		memset(ej, 0, (size_t)p * sizeof(double));
		ej[k] = 1.0;
		beta[k] = contrast_q(m, ej, NULL) ? beta[k] * m->D[k] : NAN;
	}
	free(d);
	free(ej);
}

/* ------------------------------------------------------------------ streaming */

/* ACC_SEEN: a voxel without sums against the basis has held a value other than +0 (step_now) */
enum { ACC_BAD = 1, ACC_VARIES = 2, ACC_SEEN = 4 };

struct glm_acc {
	const glm_model *m;
	size_t nvox;
	int k;          /* volumes added */
	int nb;         /* volumes in the pending batch */
	double *acc;    /* 2r x nvox: U_r' z and l per voxel, the FIT_SUMS voxels' one after another */
	size_t acc_bytes;
	int finished;   /* the sums are consumed by the finish */
	int acc_mapped; /* acc comes from mmap: finished voxels' pages can be handed back early */
	int batch;      /* volumes per batch: GLM_BATCH; with f32 GLM_BATCH_F32 or GLM_BATCH_F32_BIG (batch_size) */
	int f32;        /* ybuf holds float32 (glm_acc_float32) */
	void *ybuf;     /* batch x ylen: the pending volumes' values, double or float32 */
	size_t ylen;    /* a row of ybuf: the FIT_SUMS voxels' values, in the order of their sums */
	double *y0, *zz;
	double *zlag, *zprev; /* the FIT_SUMS voxels' only, one after another as their sums (acc_row) */
	double *zsum;   /* without a constant column (else 1'z = g1'U_r'z), and for the
			   voxels glm_acc_fit_only leaves unfitted */
	unsigned char *flag;
	unsigned char *live; /* per ACC_CHUNK voxels: a value other than +0 has been added */
	unsigned char *seen; /* per ACC_CHUNK voxels: step_now has seen one at a voxel without sums */
	unsigned char *fitv; /* per voxel FIT_NONE, FIT_SUMS or FIT_DEFERRED; NULL = every voxel FIT_SUMS */
	size_t *cbase;  /* with fitv, from the first volume: per ACC_CHUNK voxels, the FIT_SUMS voxels
			   before it (its first row of acc), then their total; NULL: row v for voxel v */
	int defer;      /* DEFER_DIM or DEFER_ZERO: decide at the first volume */
	size_t ndefer;  /* voxels FIT_DEFERRED */
	int threads;    /* for glm_acc_add (glm_acc_threads) */
};

/*
 * What a voxel gets. FIT_NONE: its mean and the rules (glm_acc_fit_only
 * left it out). FIT_SUMS: the fit's sums. FIT_DEFERRED: dim in the first
 * volume (glm_acc_defer_dim), so its mean and running sums but not the sums
 * against the basis, which the finish must find it never needed.
 */
enum { FIT_NONE = 0, FIT_SUMS = 1, FIT_DEFERRED = 2 };

glm_acc *glm_acc_alloc(const glm_model *m, size_t nvox)
{
	glm_acc *a = xcalloc(1, sizeof *a);
	size_t n = nvox ? nvox : 1;

	a->m = m;
	a->nvox = nvox;
	if (sr_mul_size(n, (size_t)2 * m->r * sizeof(double), &a->acc_bytes) != 0)
		a->acc_bytes = SIZE_MAX;
	/* mapped zero pages cost nothing until touched, and can be released part by part */
	a->acc = a->acc_bytes == SIZE_MAX ? MAP_FAILED :
		mmap(NULL, a->acc_bytes, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
	if (a->acc == MAP_FAILED) {
		a->acc = xcalloc(n, (size_t)2 * m->r * sizeof(double));
	} else {
		a->acc_mapped = 1;
	}
	/* zeroed: the rows of chunks that are not live are never written */
	a->batch = GLM_BATCH;
	a->ybuf = xcalloc(n, GLM_BATCH * sizeof(double));
	a->ylen = nvox;
	a->y0 = xcalloc(n, sizeof(double));
	a->zz = xcalloc(n, sizeof(double));
	a->zlag = xcalloc(n, sizeof(double));
	a->zsum = m->has_const ? NULL : xcalloc(n, sizeof(double));
	a->zprev = xcalloc(n, sizeof(double));
	a->flag = xcalloc(n, 1);
	a->live = xcalloc(n / ACC_CHUNK + 1, 1);
	a->seen = xcalloc(n / ACC_CHUNK + 1, 1);
	a->threads = 1;
	return a;
}

void glm_acc_free(glm_acc *a)
{
	if (!a)
		return;
	if (a->acc_mapped)
		munmap(a->acc, a->acc_bytes);
	else
		free(a->acc);
	free(a->ybuf);
	free(a->y0);
	free(a->zz);
	free(a->zlag);
	free(a->zsum);
	free(a->zprev);
	free(a->flag);
	free(a->live);
	free(a->seen);
	free(a->fitv);
	free(a->cbase);
	free(a);
}

void glm_acc_fit_only(glm_acc *a, const size_t *vox, size_t n)
{
	size_t i;

	if (a->k > 0 || a->fitv)
		return;
	a->fitv = xcalloc(a->nvox ? a->nvox : 1, 1);
	for (i = 0; i < n; i++)
		if (vox[i] < a->nvox)
			a->fitv[vox[i]] = 1;
	if (!a->zsum)
		a->zsum = xcalloc(a->nvox ? a->nvox : 1, sizeof(double));
}

void glm_acc_float32(glm_acc *a)
{
	size_t n = a->nvox ? a->nvox : 1;

	if (a->k > 0 || a->f32)
		return;
	free(a->ybuf);
	a->f32 = 1;
	a->batch = GLM_BATCH_F32;
	a->ybuf = xcalloc(n, GLM_BATCH_F32 * sizeof(float));
}

/* a->defer: glm_acc_defer_dim's voxels, or only those at +0 (glm_acc_defer_zero) */
enum { DEFER_DIM = 1, DEFER_ZERO = 2 };

void glm_acc_defer_dim(glm_acc *a)
{
	if (a->k == 0)
		a->defer = DEFER_DIM;
}

void glm_acc_defer_zero(glm_acc *a)
{
	if (a->k == 0)
		a->defer = DEFER_ZERO;
}

size_t glm_acc_deferred(const glm_acc *a)
{
	return a->ndefer;
}

/* FIT_NONE, FIT_SUMS or FIT_DEFERRED: what voxel v gets. */
static int fit_kind(const glm_acc *a, size_t v)
{
	return a->fitv ? a->fitv[v] : FIT_SUMS;
}

/* 1 when voxel v gets the sums of the fit. */
static int fitted(const glm_acc *a, size_t v)
{
	return fit_kind(a, v) == FIT_SUMS;
}

/*
 * The FIT_SUMS voxels' sums are stored one after another, so the others'
 * never take memory: the row of acc of the first such voxel from v on, for v
 * at the start of a chunk or v = nvox.
 */
static size_t acc_row(const glm_acc *a, size_t v)
{
	if (!a->cbase)
		return v;
	return v >= a->nvox ? a->cbase[(a->nvox + ACC_CHUNK - 1) / ACC_CHUNK] : a->cbase[v / ACC_CHUNK];
}

/*
 * a->cbase from the final fitv, before the first volume is added, and the
 * pending batch for the voxels that get the sums only.
 */
static void chunk_bases(glm_acc *a)
{
	size_t nchunk = (a->nvox + ACC_CHUNK - 1) / ACC_CHUNK, c, v, n = 0;

	if (!a->fitv)
		return;
	a->cbase = xmalloc_array(nchunk + 1, sizeof *a->cbase);
	for (c = 0; c < nchunk; c++) {
		a->cbase[c] = n;
		for (v = c * ACC_CHUNK; v < a->nvox && v < (c + 1) * ACC_CHUNK; v++)
			n += a->fitv[v] == FIT_SUMS;
	}
	a->cbase[nchunk] = n;
	free(a->ybuf);
	a->ylen = n;
	a->ybuf = xcalloc(n ? n : 1, (size_t)a->batch * (a->f32 ? sizeof(float) : sizeof(double)));
}

/*
 * glm_acc_defer_dim's choice, from the run's first volume: a voxel whose
 * first value is finite and below GLM_DEFER_FRACTION of the 98th percentile
 * of the volume's positive finite values is FIT_DEFERRED (DEFER_ZERO: whose
 * first value is +0); a voxel whose first value is not finite is never
 * analyzable and needs no sums (FIT_NONE).
 */
static void defer_dim(glm_acc *a, const double *vol, const float *volf)
{
	size_t v, k = 0, n = a->nvox;
	double lim = 0.0;

	if (a->defer == DEFER_DIM) {
		double *pos = xmalloc_array(n ? n : 1, sizeof *pos);

		for (v = 0; v < n; v++) {
			double y = volf ? (double)volf[v] : vol[v];

			if (fit_kind(a, v) == FIT_SUMS && isfinite(y) && y > 0.0)
				pos[k++] = y;
		}
		lim = k ? GLM_DEFER_FRACTION * stats_quantile_select(pos, k, GLM_FLOOR_QUANTILE) : NAN;
		free(pos);
		if (!(lim > 0.0))
			return;
	}
	if (!a->fitv)
		a->fitv = memset(xmalloc(n ? n : 1), FIT_SUMS, n ? n : 1);
	for (v = 0; v < n; v++) {
		double y = volf ? (double)volf[v] : vol[v];
		int kind = a->fitv[v];

		if (kind == FIT_SUMS && !isfinite(y))
			kind = FIT_NONE;
		else if (kind == FIT_SUMS && (a->defer == DEFER_ZERO ? y == 0.0 && !signbit(y) : y < lim))
			kind = FIT_DEFERRED;
		a->ndefer += kind == FIT_DEFERRED;
		a->fitv[v] = (unsigned char)kind;
	}
	if (!a->zsum)
		a->zsum = xcalloc(n ? n : 1, sizeof(double));
}

/* 1 when voxels v0..v1-1 of vol (or volf) are all +0 (a -0 is not: it would reach a mean's sign). */
static int vol_zero(const double *vol, const float *volf, size_t v0, size_t v1)
{
	size_t v;

	/* +0 is the one value whose bits are all 0: an OR over the bits, without a branch per value */
	if (volf) {
		uint32_t o = 0, b;

		for (v = v0; v < v1; v++) {
			memcpy(&b, volf + v, sizeof b);
			o |= b;
		}
		return o == 0;
	} else {
		uint64_t o = 0, b;

		for (v = v0; v < v1; v++) {
			memcpy(&b, vol + v, sizeof b);
			o |= b;
		}
		return o == 0;
	}
}

/*
 * The running sums of the batch's nb volumes k0.. for voxels v0..v1-1 (Y at
 * voxel v0, volume k0 + b at Y + ldy b), each value replaced by its shifted
 * value z (z = y - y0 with a constant in col(X); 0 where not finite). kind
 * (fit_kind of the voxels): FIT_SUMS voxels get z'z, the lag-one sum and the
 * previous z too (the latter two from place row on), FIT_DEFERRED voxels z'z
 * (their lag-one sums go to a scratch); zsum only where a mean is read from
 * it (no constant, or no sums against the basis). The
 * run's first volume sets y0; the others go through batchsum_shift, the same
 * steps in volume order per voxel.
 */
static void shift_batch(glm_acc *a, double *Y, size_t ldy, int k0, int nb, size_t v0, size_t v1, int kind,
			size_t row)
{
	double lag_scratch[ACC_CHUNK], prev_scratch[ACC_CHUNK];
	batchsum_run r;
	size_t v;
	int sums = kind != FIT_NONE;

	r.y0 = a->y0 + v0;
	r.zz = sums ? a->zz + v0 : NULL;
	r.zlag = !sums ? NULL : kind == FIT_SUMS ? a->zlag + row : lag_scratch;
	r.zprev = !sums ? NULL : kind == FIT_SUMS ? a->zprev + row : prev_scratch;
	r.zsum = a->zsum && !(kind == FIT_SUMS && a->m->has_const) ? a->zsum + v0 : NULL;
	r.flag = a->flag + v0;
	r.bad = ACC_BAD;
	r.varies = ACC_VARIES;
	r.shift = a->m->has_const;
	if (k0 == 0) {
		for (v = v0; v < v1; v++) {
			double y = Y[v - v0], z = r.shift ? 0.0 : y;

			a->y0[v] = y;
			if (!isfinite(y)) {
				a->flag[v] |= ACC_BAD;
				z = 0.0;
			}
			if (r.zsum)
				r.zsum[v - v0] = z;
			if (sums) {
				a->zz[v] = z * z;
				r.zprev[v - v0] = z;
			}
			Y[v - v0] = z;
		}
		Y += ldy;
		nb--;
	}
	if (nb > 0)
		batchsum_shift(&r, Y, ldy, nb, v1 - v0);
}

/* Volume k's values of voxels v0..v1-1 (vol, or volf with f32) into row b of the pending batch, from place row on. */
static void put_row(glm_acc *a, int b, const double *vol, const float *volf, size_t v0, size_t v1, size_t row)
{
	size_t v, at = (size_t)b * a->ylen + row;

	if (volf) {
		memcpy((float *)a->ybuf + at, volf + v0, (v1 - v0) * sizeof(float));
		return;
	}
	if (!a->f32) {
		memcpy((double *)a->ybuf + at, vol + v0, (v1 - v0) * sizeof(double));
		return;
	}
	for (v = v0; v < v1; v++)
		((float *)a->ybuf)[at + v - v0] = (float)vol[v];
}

/* The batch's nb rows of n voxels from place row on, as doubles into Z (row b at Z + ACC_CHUNK b). */
static void get_rows(const glm_acc *a, int nb, size_t row, size_t n, double *Z)
{
	size_t v, len = a->ylen;
	int b;

	for (b = 0; b < nb; b++) {
		double *zr = Z + (size_t)ACC_CHUNK * b;

		if (!a->f32) {
			memcpy(zr, (const double *)a->ybuf + len * b + row, n * sizeof(double));
			continue;
		}
		for (v = 0; v < n; v++)
			zr[v] = (double)((const float *)a->ybuf)[len * b + row + v];
	}
}

/*
 * The running sums of one volume (the run's a->k-th) at voxels v0..v1-1
 * that get no sums against the basis: the steps of batchsum_shift for one
 * volume (zsum, and z'z for the deferred ones, whose finish bounds a mean's
 * roundoff with it), without a batch to hold the values and without the
 * lag-one sums no one reads. A voxel that has held only +0 (a zero
 * background beside the data in a chunk) is passed over while it does: its
 * y0, sums and flags are all +0, what the steps would leave there.
 */
static void step_now(glm_acc *a, const double *vol, const float *volf, size_t v0, size_t v1, int kind)
{
	double *zsum = a->zsum, *zz = kind == FIT_DEFERRED ? a->zz : NULL;
	const double *y0 = a->y0;
	unsigned char *flag = a->flag;
	int shift = a->m->has_const;
	unsigned char *seen = &a->seen[v0 / ACC_CHUNK];
	size_t v;

	/* no voxel of the chunk without sums has held anything but +0, nor does this volume
	   here: their state is the +0 it was made with, what the steps would leave there */
	if (!*seen && vol_zero(vol, volf, v0, v1))
		return;
	*seen = 1;
	if (a->k == 0) {
		double Y[ACC_CHUNK];

		for (v = v0; v < v1; v++)
			Y[v - v0] = volf ? (double)volf[v] : a->f32 ? (double)(float)vol[v] : vol[v];
		for (v = v0; v < v1; v++)
			if (Y[v - v0] != 0.0 || signbit(Y[v - v0]))
				flag[v] |= ACC_SEEN;
		shift_batch(a, Y, ACC_CHUNK, 0, 1, v0, v1, kind, 0);
		return;
	}
	for (v = v0; v < v1; v++) {
		double y = volf ? (double)volf[v] : a->f32 ? (double)(float)vol[v] : vol[v];
		double z;
		unsigned char f = 0;

		if (!(flag[v] & ACC_SEEN)) {
			if (y == 0.0 && !signbit(y))
				continue;
			flag[v] |= ACC_SEEN;
		}
		z = shift ? y - y0[v] : y;
		if (!isfinite(z)) {
			f = ACC_BAD;
			z = 0.0;
		}
		if (y != y0[v])
			f |= ACC_VARIES;
		flag[v] |= f;
		if (zz)
			zz[v] += z * z;
		if (zsum)
			zsum[v] += z;
	}
}

/* The end of the run of voxels from v (before v1) with v's fit_kind. */
static size_t kind_end(const glm_acc *a, size_t v, size_t v1)
{
	size_t end;
	uint64_t same, w;

	if (!a->fitv)
		return v1;
	/* eight at a time while all eight are v's kind, then one at a time */
	same = 0x0101010101010101ULL * a->fitv[v];
	for (end = v + 1; end + 8 <= v1; end += 8) {
		memcpy(&w, a->fitv + end, sizeof w);
		if (w != same)
			break;
	}
	for (; end < v1 && a->fitv[end] == a->fitv[v]; end++)
		;
	return end;
}

/* Before the first volume: the larger float32 batch when the sums would not stay in the cache. */
static void batch_size(glm_acc *a)
{
	size_t sums = acc_row(a, a->nvox) * (size_t)2 * a->m->r * sizeof(double);

	if (!a->f32 || sums <= GLM_CACHE_SUMS || a->batch == GLM_BATCH_F32_BIG)
		return;
	free(a->ybuf);
	a->batch = GLM_BATCH_F32_BIG;
	a->ybuf = xcalloc(a->ylen ? a->ylen : 1, (size_t)a->batch * sizeof(float));
}

/*
 * Adds a volume chunk by chunk: the values of the voxels of v0..v1-1 that
 * get the sums go into the pending batch; with flush, the chunk takes the
 * whole batch: the shifted values (in a scratch of its own), the running
 * sums and acc += A[:, k0..k] Z' for each run of such voxels. The others
 * take their volume at once: the means and flags (glm_acc_fit_only), and
 * the running sums too for the deferred ones (glm_acc_defer_dim), the same
 * steps per voxel as in a batch. A chunk that has held only +0
 * in every volume so far is left alone while its values stay +0: its sums,
 * its y0 and its pending rows are all +0, exactly what the updates would
 * have left there (0 - 0, 0 * 0 and 0 + 0 are +0), and adding a chunk of
 * zeros to the sums leaves them as they are (they start at +0 and never
 * become -0). Chunks are independent, so they can be added by any thread in
 * any order with the same bits.
 */
static void add_chunk(glm_acc *a, const double *vol, const float *volf, size_t v0, size_t v1, int flush)
{
	unsigned char *live = &a->live[v0 / ACC_CHUNK];
	int r2 = 2 * a->m->r, nb = a->nb + 1, k0 = a->k + 1 - nb;
	double Z[GLM_BATCH_F32_BIG * ACC_CHUNK];
	size_t v, end, row;

	if (!*live) {
		if (vol_zero(vol, volf, v0, v1))
			return;
		*live = 1;
		/* written before the first product reads them: a read would map the shared
		   zero page, and the write after it a copy plus a TLB flush on every core;
		   only the voxels that get the sums, so the others' pages stay unmapped */
		for (v = v0, row = acc_row(a, v0); v < v1; v = end) {
			end = kind_end(a, v, v1);
			if (fitted(a, v)) {
				memset(a->acc + (size_t)r2 * row, 0, (size_t)r2 * (end - v) * sizeof(double));
				row += end - v;
			}
		}
	}
	for (v = v0, row = acc_row(a, v0); v < v1; v = end) {
		end = kind_end(a, v, v1);
		if (!fitted(a, v)) {
			step_now(a, vol, volf, v, end, fit_kind(a, v));
			continue;
		}
		put_row(a, a->nb, vol, volf, v, end, row);
		row += end - v;
	}
	if (!flush)
		return;
	for (v = v0, row = acc_row(a, v0); v < v1; v = end) {
		end = kind_end(a, v, v1);
		if (!fitted(a, v))
			continue;
		get_rows(a, nb, row, end - v, Z);
		shift_batch(a, Z, ACC_CHUNK, k0, nb, v, end, FIT_SUMS, row);
		batchsum_add(a->acc + (size_t)r2 * row, r2, a->m->A + (size_t)r2 * k0, r2, Z, ACC_CHUNK, nb,
			     end - v);
		row += end - v;
	}
}

/* Chunks per pool job of glm_acc_add: enough work to outweigh taking a job. */
#define ADD_JOB_CHUNKS 16

typedef struct add_job {
	glm_acc *a;
	const double *vol;
	const float *volf;  /* instead of vol (glm_acc_add_f32) */
	int flush;
} add_job;

static void add_job_run(size_t i, int worker, void *arg)
{
	const add_job *j = arg;
	size_t nvox = j->a->nvox, v0 = i * ADD_JOB_CHUNKS * ACC_CHUNK, end;

	(void)worker;
	end = nvox - v0 < (size_t)ADD_JOB_CHUNKS * ACC_CHUNK ? nvox : v0 + (size_t)ADD_JOB_CHUNKS * ACC_CHUNK;
	for (; v0 < end; v0 += ACC_CHUNK)
		add_chunk(j->a, j->vol, j->volf, v0, end - v0 < ACC_CHUNK ? end : v0 + ACC_CHUNK, j->flush);
}

void glm_acc_threads(glm_acc *a, int nthreads)
{
	a->threads = nthreads < 1 ? 1 : nthreads;
}

/* glm_acc_add and glm_acc_add_f32: one of vol and volf. */
static sr_status add_volume(glm_acc *a, const double *vol, const float *volf, sr_err *e)
{
	size_t nvox = a->nvox, per = (size_t)ADD_JOB_CHUNKS * ACC_CHUNK;
	add_job j;

	if (a->k >= a->m->T)
		return sr_fail(e, SR_EDIM, "more volumes than the design's %d rows", a->m->T);
	if (nvox > INT32_MAX)
		return sr_fail(e, SR_EDIM, "too many voxels for one fit");
	if (a->k == 0 && a->defer)
		defer_dim(a, vol, volf);
	if (a->k == 0) {
		chunk_bases(a);
		batch_size(a);
	}
	j.a = a;
	j.vol = vol;
	j.volf = volf;
	/* the batch is full after this volume: each chunk adds its part of the product at once */
	j.flush = a->nb + 1 == a->batch || a->k + 1 == a->m->T;
	pool_run((nvox + per - 1) / per, a->threads, add_job_run, &j);
	a->k++;
	a->nb++;
	if (j.flush)
		a->nb = 0;
	return SR_OK;
}

sr_status glm_acc_add(glm_acc *a, const double *vol, sr_err *e)
{
	return add_volume(a, vol, NULL, e);
}

sr_status glm_acc_add_f32(glm_acc *a, const float *vol, sr_err *e)
{
	if (!a->f32)
		return sr_fail(e, SR_EINVAL, "float32 volumes added to a fit not made for them (glm_acc_float32)");
	return add_volume(a, NULL, vol, e);
}

/* ------------------------------------------------------------------ finishing */

const char *const glm_out_rule_names[GLM_OUT_NRULES] = {
	"mask", "nonfinite", "nonpositive_mean", "constant", "intensity_floor"
};

/* Per-worker scratch of the finish (pwlanes_solve' and its ncon x PWLANES_N outputs), allocated once per worker. */
typedef struct finish_ws {
	double *pw, *ef, *vv;
} finish_ws;

/* What every voxel of the finish shares; one per glm_acc_finish. */
typedef struct finish_job {
	const glm_acc *a;
	int ar1, ncon;
	const double *cq;          /* ncon x r */
	const double *gc;          /* ncon: cq' g1 */
	const double *cnorm2;      /* ncon: ||cq||^2 */
	pwlanes_model pw;               /* r, Lq + Lq', u_0 u_0' + u_T-1 u_T-1', u_0, u_T-1 */
	const unsigned char *est;
	const unsigned char *mask;
	glm_out *out;
	finish_ws *ws;             /* one per pool worker */
} finish_job;

/*
 * Hands back the accumulator pages that lie wholly inside voxels [v0, v1),
 * already finished: the output maps grow while the sums shrink, so the
 * finish does not raise the peak memory of the fit.
 */
static void acc_release(const glm_acc *a, size_t v0, size_t v1)
{
	size_t pg = (size_t)sysconf(_SC_PAGESIZE), per = (size_t)2 * a->m->r * sizeof(double);
	uintptr_t base = (uintptr_t)a->acc, lo = base + acc_row(a, v0) * per, hi = base + acc_row(a, v1) * per;

	if (!a->acc_mapped || pg == 0 || (size_t)-1 == pg)
		return;
	lo = (lo + pg - 1) / pg * pg;
	hi = hi / pg * pg;
	if (hi > lo)
		madvise((void *)lo, hi - lo, MADV_DONTNEED);
}

/* Lq + Lq' and u_0 u_0' + u_T-1 u_T-1', shared by every voxel. */
static void lag_grams(const glm_model *m, double *Ls, double *Q0)
{
	int r = m->r, q, s;

	for (q = 0; q < r; q++)
		for (s = 0; s < r; s++) {
			Ls[(size_t)s * r + q] = m->Lq[(size_t)s * r + q] + m->Lq[(size_t)q * r + s];
			Q0[(size_t)s * r + q] = m->u0[q] * m->u0[s] + m->ul[q] * m->ul[s];
		}
}

/*
 * 1 when no voxel glm_acc_defer_dim deferred can change the fit: each one's
 * mean (y0 + zsum / T, which may differ in the last bits from the mean
 * through the basis that the voxel would have had with its sums) is, by more
 * than a bound on that difference, below the floor and below the lower of the
 * two order statistics that give R, and on the same side of 0. Then every rule,
 * the count of positive means and both order statistics are what the fit
 * without deferral gives, and so are R and every output but those voxels'
 * means. With DEFER_ZERO: each one held only +0, so that its mean is +0
 * either way, and every output is the same. pos: the k positive means after
 * stats_quantile_select.
 */
static int deferral_held(const glm_acc *a, const unsigned char *mask, const glm_out *o, const double *pos,
			 size_t k)
{
	double lim = INFINITY;
	size_t v;

	if (!a->ndefer)
		return 1;
	if (a->defer == DEFER_ZERO) {
		for (v = 0; v < a->nvox; v++)
			if (a->fitv[v] == FIT_DEFERRED && (a->flag[v] & ACC_SEEN))
				return 0;
		return 1;
	}
	if (k) {
		size_t lo = (size_t)floor(GLM_FLOOR_QUANTILE * (double)(k - 1));

		lim = fmin(o->floor, pos[lo]);
	}
	for (v = 0; v < a->nvox; v++) {
		double mean = o->mean[v], tol;

		if (a->fitv[v] != FIT_DEFERRED || (mask && !mask[v]) || (a->flag[v] & ACC_BAD))
			continue;
		/* both means are within a few sqrt(rank) units of roundoff of sum |z| <= sqrt(T z'z), plus |y0|'s */
		tol = GLM_DEFER_TOL * (sqrt((double)a->m->T * a->zz[v]) + fabs(a->y0[v]));
		if (tol == 0.0)
			continue;   /* every z is 0: both means are y0 exactly */
		if (!(fabs(mean) > tol) || !(mean + tol < lim))
			return 0;
	}
	return 1;
}

/*
 * Every voxel's temporal mean, the run's reference intensity R and floor,
 * and the count of voxels each rule of METHODS.md section 3 leaves out: a
 * pass before the per-voxel fit, since the floor depends on all the means.
 * 0 when a deferred voxel may matter (deferral_held), else 1.
 */
static int voxel_means(const glm_acc *a, const unsigned char *mask, glm_out *o)
{
	int held;
	const glm_model *m = a->m;
	int r = m->r, T = m->T, q;
	size_t v, k = 0, row = 0;
	double *pos = xmalloc_array(a->nvox ? a->nvox : 1, sizeof *pos);

	for (v = 0; v < a->nvox; v++) {
		const double *u = a->acc + (size_t)2 * r * row;
		double mean;

		row += fitted(a, v);
		if (a->flag[v] & ACC_BAD) {
			mean = NAN;
		} else if (!m->has_const) {
			mean = a->zsum[v] / T;
		} else if (!fitted(a, v)) {
			mean = a->y0[v] + a->zsum[v] / T;
		} else {
			double s1 = 0.0;

			for (q = 0; q < r; q++)
				s1 += m->g1[q] * u[q];
			mean = (m->has_const ? a->y0[v] : 0.0) + s1 / T;
		}
		o->mean[v] = mean;
		if (isfinite(mean) && mean > 0.0 && (!mask || mask[v]))
			pos[k++] = mean;
	}
	o->ref_intensity = k ? stats_quantile_select(pos, k, GLM_FLOOR_QUANTILE) : NAN;
	o->floor = k ? GLM_FLOOR_FRACTION * o->ref_intensity : 0.0;
	held = deferral_held(a, mask, o, pos, k);
	free(pos);
	memset(o->left_out, 0, sizeof o->left_out);
	for (v = 0; v < a->nvox; v++) {
		double mean = o->mean[v];
		int why = GLM_OUT_NRULES;

		if (mask && !mask[v])
			why = GLM_OUT_MASK;
		else if (a->flag[v] & ACC_BAD)
			why = GLM_OUT_NONFINITE;
		else if (!(mean > 0.0))
			why = GLM_OUT_NONPOSITIVE;
		else if (!(a->flag[v] & ACC_VARIES))
			why = GLM_OUT_CONSTANT;
		else if (mean < o->floor)
			why = GLM_OUT_FLOOR;
		o->rule[v] = (unsigned char)why;
		if (why < GLM_OUT_NRULES)
			o->left_out[why]++;
	}
	return held;
}

/* Voxels per pool job of the finish: large enough that a job's scratch is nothing, small enough to balance. */
#define FINISH_CHUNK 4096
/* a job's first voxel starts a chunk, where acc_row knows its row */
_Static_assert(FINISH_CHUNK % ACC_CHUNK == 0, "finish jobs start at accumulator chunks");

/* Voxels of the finish waiting for their AR(1) refit, PWLANES_N at a time. */
typedef struct refit_group {
	pwlanes_voxel vx[PWLANES_N];
	size_t v[PWLANES_N];
	double sc[PWLANES_N], shift[PWLANES_N];
	int n;
} refit_group;

/* The refits of the group's voxels (the unused lanes repeat the first voxel), into the outputs. */
static void refit_flush(const finish_job *j, refit_group *g, const finish_ws *ws)
{
	const glm_model *m = j->a->m;
	size_t nvox = j->a->nvox;
	int r = m->r, df = m->T - r, c, x;
	double rssw[PWLANES_N], *ef = ws->ef, *vv = ws->vv;
	glm_out *o = j->out;

	if (g->n == 0)
		return;
	for (x = g->n; x < PWLANES_N; x++)
		g->vx[x] = g->vx[0];
	pwlanes_solve(&j->pw, g->vx, j->ncon, j->cq, j->est, ws->pw, rssw, ef, vv, NULL);
	for (x = 0; x < g->n; x++) {
		size_t v = g->v[x];
		double sc = g->sc[x], sig2;

		if (!(rssw[x] >= 0.0))
			continue;
		sig2 = rssw[x] / df;
		for (c = 0; c < j->ncon; c++) {
			if (!j->est[c])
				continue;
			o->effect[(size_t)c * nvox + v] = sc * (ef[c * PWLANES_N + x] + g->shift[x] * j->gc[c]);
			o->var[(size_t)c * nvox + v] = sc * sc * sig2 * vv[c * PWLANES_N + x];
		}
	}
	g->n = 0;
}

/* Voxels v0..v1-1 of the finish, with one worker's scratch. */
static void finish_range(const finish_job *j, size_t v0, size_t v1, const finish_ws *ws)
{
	const glm_acc *a = j->a;
	const glm_model *m = a->m;
	int r = m->r, T = m->T, df = T - r, c, q, s;
	size_t v, nvox = a->nvox, row = acc_row(a, v0);
	glm_out *o = j->out;
	refit_group g;

	g.n = 0;
	for (v = v0; v < v1; v++) {
		size_t at = row;
		const double *u = a->acc + (size_t)2 * r * at, *l = u + r;
		double y0 = a->y0[v], shift = m->has_const ? y0 : 0.0, z0 = m->has_const ? 0.0 : y0;
		double mean, sc, rss, lag, rho, zl, sig2;
		const double *delta = u;
		pwlanes_voxel *pv;

		mean = o->mean[v];
		o->ok[v] = o->rule[v] == GLM_OUT_NRULES;
		for (c = 0; c < j->ncon; c++) {
			o->effect[(size_t)c * nvox + v] = NAN;
			o->var[(size_t)c * nvox + v] = NAN;
		}
		o->rho[v] = NAN;
		if (!fitted(a, v))
			o->ok[v] = 0;
		else
			row++;
		if (!o->ok[v])
			continue;
		zl = a->zprev[at];
		sc = 100.0 / mean;

		/* OLS on the orthonormal basis: delta = U_r'z */
		rss = a->zz[v];
		for (q = 0; q < r; q++)
			rss -= u[q] * u[q];
		if (rss < 0.0)
			rss = 0.0;
		if (!j->ar1) {
			sig2 = rss / df;
			o->rho[v] = 0.0;
			for (c = 0; c < j->ncon; c++) {
				const double *cq = j->cq + (size_t)c * r;
				double ef = 0.0;

				if (!j->est[c])
					continue;
				for (q = 0; q < r; q++)
					ef += cq[q] * delta[q];
				o->effect[(size_t)c * nvox + v] = sc * (ef + shift * j->gc[c]);
				o->var[(size_t)c * nvox + v] = sc * sc * sig2 * j->cnorm2[c];
			}
			continue;
		}

		/* lag-one product of the OLS residuals */
		lag = a->zlag[at];
		for (q = 0; q < r; q++) {
			double lu = 0.0;

			for (s = 0; s < r; s++)
				lu += m->Lq[(size_t)s * r + q] * u[s];
			lag += u[q] * (lu - l[q]);
		}
		rho = rss > 0.0 ? lag / rss : 0.0;
		if (j->ar1 == GLM_AR1_ADJUSTED && m->ftab_ok && rss > 0.0)
			rho = adjusted_rho(m, rho);
		if (rho > GLM_RHO_MAX)
			rho = GLM_RHO_MAX;
		if (rho < -GLM_RHO_MAX)
			rho = -GLM_RHO_MAX;
		o->rho[v] = rho;

		/* the Prais-Winsten refit, PWLANES_N voxels at a time */
		pv = &g.vx[g.n];
		pv->u = u;
		pv->l = l;
		pv->zz = a->zz[v];
		pv->zlag = a->zlag[at];
		pv->z0 = z0;
		pv->zl = zl;
		pv->rho = rho;
		g.v[g.n] = v;
		g.sc[g.n] = sc;
		g.shift[g.n] = shift;
		if (++g.n == PWLANES_N)
			refit_flush(j, &g, ws);
	}
	refit_flush(j, &g, ws);
}

static finish_ws *ws_alloc(int nw, int r, int ncon)
{
	finish_ws *ws = xcalloc(nw > 0 ? (size_t)nw : 1, sizeof *ws);
	size_t n = (size_t)(ncon > 0 ? ncon : 1) * PWLANES_N;
	int i;

	for (i = 0; i < nw; i++) {
		ws[i].pw = dup_zero(pwlanes_ws_size(r));
		ws[i].ef = dup_zero(n);
		ws[i].vv = dup_zero(n);
	}
	return ws;
}

static void ws_free(finish_ws *ws, int nw)
{
	int i;

	for (i = 0; i < nw; i++) {
		free(ws[i].pw);
		free(ws[i].ef);
		free(ws[i].vv);
	}
	free(ws);
}

/* Pool job k: voxels k*FINISH_CHUNK.., then their accumulator pages go back to the system. */
static void finish_chunk(size_t k, int worker, void *ctx)
{
	const finish_job *j = ctx;
	size_t nvox = j->a->nvox, v0 = k * FINISH_CHUNK;
	size_t v1 = nvox - v0 > FINISH_CHUNK ? v0 + FINISH_CHUNK : nvox;

	finish_range(j, v0, v1, &j->ws[worker]);
	acc_release(j->a, v0, v1);
}

sr_status glm_acc_finish(glm_acc *a, int ar1, const double *C, int ncon,
			 const unsigned char *mask, int nthreads, glm_out *out, sr_err *e)
{
	if (a->finished)
		return sr_fail(e, SR_EINVAL, "the fit was already finished");
	const glm_model *m = a->m;
	int r = m->r, c, q, nw;
	size_t nvox = a->nvox, nchunk;
	double *cq, *gc, *cn, *Ls, *Q0;
	unsigned char *est;
	finish_job job;

	memset(out, 0, sizeof *out);
	if (a->k != m->T)
		return sr_fail(e, SR_EDIM, "%d volumes added for a design of %d rows", a->k, m->T);
	if (ncon < 0 || (ncon > 0 && !C))
		return sr_fail(e, SR_EINVAL, "bad contrast count %d", ncon);
	free(a->ybuf);   /* not needed any more: lowers the peak while the outputs exist */
	a->ybuf = NULL;

	out->nvox = nvox;
	out->ncon = ncon;
	out->df = m->T - r;
	out->ok = xcalloc(nvox ? nvox : 1, 1);
	out->estimable = xcalloc(ncon ? (size_t)ncon : 1, 1);
	out->effect = xcalloc(nvox && ncon ? nvox * (size_t)ncon : 1, sizeof(double));
	out->var = xcalloc(nvox && ncon ? nvox * (size_t)ncon : 1, sizeof(double));
	out->rho = xcalloc(nvox ? nvox : 1, sizeof(double));
	out->mean = xcalloc(nvox ? nvox : 1, sizeof(double));
	out->rule = xcalloc(nvox ? nvox : 1, 1);

	cq = dup_zero((size_t)ncon * r);
	gc = dup_zero((size_t)ncon);
	cn = dup_zero((size_t)ncon);
	est = out->estimable;
	for (c = 0; c < ncon; c++) {
		est[c] = (unsigned char)contrast_q(m, C + (size_t)c * m->p, cq + (size_t)c * r);
		for (q = 0; q < r; q++) {
			gc[c] += cq[(size_t)c * r + q] * m->g1[q];
			cn[c] += cq[(size_t)c * r + q] * cq[(size_t)c * r + q];
		}
	}
	Ls = dup_zero((size_t)r * r);
	Q0 = dup_zero((size_t)r * r);
	lag_grams(m, Ls, Q0);
	if (!voxel_means(a, mask, out)) {
		free(cq);
		free(gc);
		free(cn);
		free(Ls);
		free(Q0);
		glm_out_release(out);
		return sr_fail(e, SR_EREDO, "a voxel dim in the run's first volume may be analyzable after "
			       "all: the run must be fitted again without deferral");
	}

	a->finished = 1;
	memset(&job, 0, sizeof job);
	job.a = a;
	job.ar1 = ar1;
	job.ncon = ncon;
	job.cq = cq;
	job.gc = gc;
	job.cnorm2 = cn;
	job.pw.r = r;
	job.pw.Ls = Ls;
	job.pw.Q0 = Q0;
	job.pw.u0 = m->u0;
	job.pw.ul = m->ul;
	job.est = est;
	job.mask = mask;
	job.out = out;
	/* chunks of voxels taken by up to nthreads workers: same numbers for any count */
	nchunk = (nvox + FINISH_CHUNK - 1) / FINISH_CHUNK;
	nw = pool_workers(nchunk, nthreads);
	job.ws = ws_alloc(nw, r, ncon);
	pool_run(nchunk, nthreads, finish_chunk, &job);
	ws_free(job.ws, nw);
	free(cq);
	free(gc);
	free(cn);
	free(Ls);
	free(Q0);
	return SR_OK;
}

void glm_out_release(glm_out *o)
{
	if (!o)
		return;
	free(o->ok);
	free(o->estimable);
	free(o->effect);
	free(o->var);
	free(o->rho);
	free(o->mean);
	free(o->rule);
	memset(o, 0, sizeof *o);
}

void glm_ffx(size_t nvox, int nruns, const double *const *effect, const double *const *var,
	     const int *df, double *E, double *V, double *t, int *dfsum)
{
	size_t v;
	int r;

	for (v = 0; v < nvox; v++) {
		double se = 0.0, sv = 0.0, ev, vv;
		int n = 0, d = 0;

		for (r = 0; r < nruns; r++) {
			double x = effect[r][v], y = var[r][v];

			if (!isfinite(x) || !isfinite(y))
				continue;
			se += x;
			sv += y;
			d += df[r];
			n++;
		}
		if (n == 0) {
			ev = vv = NAN;
		} else {
			ev = se / n;
			vv = sv / ((double)n * n);
		}
		if (E)
			E[v] = ev;
		if (V)
			V[v] = vv;
		if (t)
			t[v] = n ? ev / sqrt(vv) : NAN;
		if (dfsum)
			dfsum[v] = d;
	}
}

sr_status glm_ar1_solve(const glm_model *m, const double *y, double rho, double *beta, double *rss_w,
			sr_err *e)
{
	int T = m->T, r = m->r, p = m->p, k, q;
	double *A = dup_zero((size_t)2 * r), *Ls = dup_zero((size_t)r * r), *Q0 = dup_zero((size_t)r * r);
	double *ws = dup_zero(pwlanes_ws_size(r)), *dwl = dup_zero((size_t)r * PWLANES_N);
	double *dw = dup_zero((size_t)r), *ej = dup_zero((size_t)p), zz = 0.0, zlag = 0.0, rs[PWLANES_N];
	pwlanes_model pm;
	pwlanes_voxel vx[PWLANES_N];
	sr_status st = SR_OK;

	if (!(fabs(rho) < 1.0)) {
		st = sr_fail(e, SR_EINVAL, "autocorrelation %g outside (-1, 1)", rho);
		goto out;
	}
	/* the same sums the stream keeps, without the shift */
	cblas_dgemv(CblasColMajor, CblasNoTrans, 2 * r, T, 1.0, m->A, 2 * r, y, 1, 0.0, A, 1);
	for (k = 0; k < T; k++) {
		zz += y[k] * y[k];
		if (k > 0)
			zlag += y[k] * y[k - 1];
	}
	lag_grams(m, Ls, Q0);
	pm.r = r;
	pm.Ls = Ls;
	pm.Q0 = Q0;
	pm.u0 = m->u0;
	pm.ul = m->ul;
	/* the one series in every lane */
	for (k = 0; k < PWLANES_N; k++) {
		vx[k].u = A;
		vx[k].l = A + r;
		vx[k].zz = zz;
		vx[k].zlag = zlag;
		vx[k].z0 = y[0];
		vx[k].zl = y[T - 1];
		vx[k].rho = rho;
	}
	pwlanes_solve(&pm, vx, 0, NULL, NULL, ws, rs, NULL, NULL, dwl);
	if (rs[0] < 0.0) {
		st = sr_fail(e, SR_ESINGULAR, "whitened design is not positive definite");
		goto out;
	}
	if (rss_w)
		*rss_w = rs[0];
	for (q = 0; q < r; q++)
		dw[q] = dwl[(size_t)q * PWLANES_N] / m->sv[q];
	cblas_dgemv(CblasColMajor, CblasNoTrans, p, r, 1.0, m->V, p, dw, 1, 0.0, beta, 1);
	for (k = 0; k < p; k++) {
		memset(ej, 0, (size_t)p * sizeof(double));
		ej[k] = 1.0;
		beta[k] = contrast_q(m, ej, NULL) ? beta[k] * m->D[k] : NAN;
	}
out:
	free(A);
	free(Ls);
	free(Q0);
	free(ws);
	free(dwl);
	free(dw);
	free(ej);
	return st;
}
