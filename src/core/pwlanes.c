/* pwlanes.c - the refits of pwlanes.h, with the voxels as the inner loop so that they vectorize. */
#include "pwlanes.h"

#include <math.h>

#define L PWLANES_N

static int force_plain;

void pwlanes_set_plain(int plain)
{
	force_plain = plain;
}

size_t pwlanes_ws_size(int r)
{
	return (size_t)L * ((size_t)r * r + 4 * (size_t)r);
}

/* In-place Cholesky of each voxel's G (upper part used); bad[i] = 1 where not positive definite. */
static inline __attribute__((always_inline)) void chol_lanes(double *G, int n, int *bad)
{
	int i, j, k, x;

	for (j = 0; j < n; j++) {
		double d[L];

		for (x = 0; x < L; x++)
			d[x] = G[((size_t)j * n + j) * L + x];
		for (k = 0; k < j; k++)
			for (x = 0; x < L; x++)
				d[x] -= G[((size_t)j * n + k) * L + x] * G[((size_t)j * n + k) * L + x];
		for (x = 0; x < L; x++) {
			bad[x] |= !(d[x] > 0.0);
			d[x] = sqrt(d[x]);
			G[((size_t)j * n + j) * L + x] = d[x];
		}
		for (i = j + 1; i < n; i++) {
			double s[L];

			for (x = 0; x < L; x++)
				s[x] = G[((size_t)i * n + j) * L + x];
			for (k = 0; k < j; k++)
				for (x = 0; x < L; x++)
					s[x] -= G[((size_t)j * n + k) * L + x] * G[((size_t)i * n + k) * L + x];
			for (x = 0; x < L; x++)
				G[((size_t)i * n + j) * L + x] = s[x] / d[x];
		}
	}
}

/* w = R^-T h for each voxel (R[j][i] at G[(i n + j) L + x], j <= i); h is per voxel, or shared when hs. */
static inline __attribute__((always_inline)) void fwd_lanes(const double *G, int n, const double *h, int hs,
							      double *w)
{
	int i, k, x;

	for (i = 0; i < n; i++) {
		double s[L];

		for (x = 0; x < L; x++)
			s[x] = hs ? h[i] : h[(size_t)i * L + x];
		for (k = 0; k < i; k++)
			for (x = 0; x < L; x++)
				s[x] -= G[((size_t)i * n + k) * L + x] * w[(size_t)k * L + x];
		for (x = 0; x < L; x++)
			w[(size_t)i * L + x] = s[x] / G[((size_t)i * n + i) * L + x];
	}
}

/* x = R^-1 w for each voxel. */
static inline __attribute__((always_inline)) void back_lanes(const double *G, int n, const double *w, double *out)
{
	int i, k, x;

	for (i = n - 1; i >= 0; i--) {
		double s[L];

		for (x = 0; x < L; x++)
			s[x] = w[(size_t)i * L + x];
		for (k = i + 1; k < n; k++)
			for (x = 0; x < L; x++)
				s[x] -= G[((size_t)k * n + i) * L + x] * out[(size_t)k * L + x];
		for (x = 0; x < L; x++)
			out[(size_t)i * L + x] = s[x] / G[((size_t)i * n + i) * L + x];
	}
}

static inline __attribute__((always_inline)) void lanes(const pwlanes_model *m, const pwlanes_voxel *vx, int ncon,
							 const double *cq, const unsigned char *est, double *ws,
							 double *rssw, double *ef, double *vv, double *dwo)
{
	int r = m->r, q, x, c;
	double *G = ws, *h = G + (size_t)r * r * L, *w = h + (size_t)r * L, *dw = w + (size_t)r * L;
	double *t = dw + (size_t)r * L;
	double a1[L], r2[L], rho[L], rs[L];
	int bad[L];

	for (x = 0; x < L; x++) {
		rho[x] = vx[x].rho;
		a1[x] = 1.0 + rho[x] * rho[x];
		r2[x] = rho[x] * rho[x];
		bad[x] = 0;
	}
	for (q = 0; q < r * r; q++)
		for (x = 0; x < L; x++)
			G[(size_t)q * L + x] = -rho[x] * m->Ls[q] - r2[x] * m->Q0[q];
	for (q = 0; q < r; q++) {
		for (x = 0; x < L; x++)
			G[((size_t)q * r + q) * L + x] += a1[x];
		for (x = 0; x < L; x++)
			h[(size_t)q * L + x] = a1[x] * vx[x].u[q] - rho[x] * vx[x].l[q] -
					       r2[x] * (m->u0[q] * vx[x].z0 + m->ul[q] * vx[x].zl);
	}
	for (x = 0; x < L; x++)
		rs[x] = a1[x] * vx[x].zz - 2.0 * rho[x] * vx[x].zlag -
			r2[x] * (vx[x].z0 * vx[x].z0 + vx[x].zl * vx[x].zl);
	chol_lanes(G, r, bad);
	fwd_lanes(G, r, h, 0, w);
	back_lanes(G, r, w, dw);
	for (q = 0; q < r; q++)
		for (x = 0; x < L; x++)
			rs[x] -= w[(size_t)q * L + x] * w[(size_t)q * L + x];
	for (x = 0; x < L; x++)
		rssw[x] = bad[x] ? -1.0 : rs[x] < 0.0 ? 0.0 : rs[x];
	for (c = 0; c < ncon; c++) {
		const double *cc = cq + (size_t)c * r;
		double e[L], s[L];

		if (!est[c])
			continue;
		fwd_lanes(G, r, cc, 1, t);
		for (x = 0; x < L; x++)
			e[x] = s[x] = 0.0;
		for (q = 0; q < r; q++)
			for (x = 0; x < L; x++) {
				e[x] += cc[q] * dw[(size_t)q * L + x];
				s[x] += t[(size_t)q * L + x] * t[(size_t)q * L + x];
			}
		for (x = 0; x < L; x++) {
			ef[(size_t)c * L + x] = e[x];
			vv[(size_t)c * L + x] = s[x];
		}
	}
	if (dwo)
		for (q = 0; q < r * L; q++)
			dwo[q] = dw[q];
}

static void lanes_plain(const pwlanes_model *m, const pwlanes_voxel *vx, int ncon, const double *cq,
			const unsigned char *est, double *ws, double *rssw, double *ef, double *vv, double *dw)
{
	lanes(m, vx, ncon, cq, est, ws, rssw, ef, vv, dw);
}

#if defined(__x86_64__) && defined(__GNUC__)
/* The same code, four voxels to a register (the build keeps products and sums apart: -ffp-contract=off). */
__attribute__((target("avx2"))) static void lanes_avx2(const pwlanes_model *m, const pwlanes_voxel *vx, int ncon,
						       const double *cq, const unsigned char *est, double *ws,
						       double *rssw, double *ef, double *vv, double *dw)
{
	lanes(m, vx, ncon, cq, est, ws, rssw, ef, vv, dw);
}
#endif

void pwlanes_solve(const pwlanes_model *m, const pwlanes_voxel *vx, int ncon, const double *cq,
		   const unsigned char *est, double *ws, double *rssw, double *ef, double *vv, double *dw)
{
#if defined(__x86_64__) && defined(__GNUC__)
	if (!force_plain && __builtin_cpu_supports("avx2")) {
		lanes_avx2(m, vx, ncon, cq, est, ws, rssw, ef, vv, dw);
		return;
	}
#endif
	lanes_plain(m, vx, ncon, cq, est, ws, rssw, ef, vv, dw);
}
