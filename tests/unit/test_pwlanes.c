/* test_pwlanes.c - the four-voxel Prais-Winsten refits: the bits of the plain scalar steps, whatever the neighbours. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "core/pwlanes.h"
#include "testlib.h"

static unsigned long long rng = 0x9E3779B97F4A7C15ULL;

/* xorshift64 (Marsaglia 2003), uniform in [-0.5, 0.5). */
static double rnd(void)
{
	rng ^= rng << 13;
	rng ^= rng >> 7;
	rng ^= rng << 17;
	return (double)(rng >> 11) / 9007199254740992.0 - 0.5;
}

/*
 * The refit of one voxel written out as pwlanes.h states it, one rounded
 * operation after another (the scalar code the finish used before the lanes).
 */
static double ref_refit(const pwlanes_model *m, const pwlanes_voxel *x, int ncon, const double *cq, const unsigned char *est,
			double *ef, double *vv, double *dw)
{
	int r = m->r, i, j, k, q, c;
	double a1 = 1.0 + x->rho * x->rho, r2 = x->rho * x->rho, rssw;
	double *G = malloc(sizeof(double) * (size_t)r * r), *h = malloc(sizeof(double) * r);
	double *w = malloc(sizeof(double) * r), *t = malloc(sizeof(double) * r);

	for (q = 0; q < r * r; q++)
		G[q] = -x->rho * m->Ls[q] - r2 * m->Q0[q];
	for (q = 0; q < r; q++) {
		G[q * r + q] += a1;
		h[q] = a1 * x->u[q] - x->rho * x->l[q] - r2 * (m->u0[q] * x->z0 + m->ul[q] * x->zl);
	}
	rssw = a1 * x->zz - 2.0 * x->rho * x->zlag - r2 * (x->z0 * x->z0 + x->zl * x->zl);
	for (j = 0; j < r; j++) {
		double d = G[j * r + j];

		for (k = 0; k < j; k++)
			d -= G[j * r + k] * G[j * r + k];
		if (!(d > 0.0)) {
			rssw = -2.0;
			goto out;
		}
		d = sqrt(d);
		G[j * r + j] = d;
		for (i = j + 1; i < r; i++) {
			double s = G[i * r + j];

			for (k = 0; k < j; k++)
				s -= G[j * r + k] * G[i * r + k];
			G[i * r + j] = s / d;
		}
	}
	for (i = 0; i < r; i++) {
		double s = h[i];

		for (k = 0; k < i; k++)
			s -= G[i * r + k] * w[k];
		w[i] = s / G[i * r + i];
	}
	for (i = r - 1; i >= 0; i--) {
		double s = w[i];

		for (k = i + 1; k < r; k++)
			s -= G[k * r + i] * dw[k];
		dw[i] = s / G[i * r + i];
	}
	for (q = 0; q < r; q++)
		rssw -= w[q] * w[q];
	if (rssw < 0.0)
		rssw = 0.0;
	for (c = 0; c < ncon; c++) {
		const double *cc = cq + c * r;

		if (!est[c])
			continue;
		for (i = 0; i < r; i++) {
			double s = cc[i];

			for (k = 0; k < i; k++)
				s -= G[i * r + k] * t[k];
			t[i] = s / G[i * r + i];
		}
		ef[c] = vv[c] = 0.0;
		for (q = 0; q < r; q++) {
			ef[c] += cc[q] * dw[q];
			vv[c] += t[q] * t[q];
		}
	}
out:
	free(G);
	free(h);
	free(w);
	free(t);
	return rssw;
}

static int same(double a, double b)
{
	return memcmp(&a, &b, sizeof a) == 0;
}

int main(void)
{
	enum { MAXR = 17, MAXC = 3 };
	static double Ls[MAXR * MAXR], Q0[MAXR * MAXR], u0[MAXR], ul[MAXR], cq[MAXC * MAXR];
	static double sums[8][2 * MAXR], ws[PWLANES_N * (MAXR * MAXR + 4 * MAXR)];
	int r, ncon, i, q, c, x, bad_ref = 0, bad_pos = 0, bad_pd = 0, cases = 0, refused = 0;
	unsigned char est[MAXC] = { 1, 0, 1 };

	int plain;

	CHECK(pwlanes_ws_size(MAXR) <= sizeof ws / sizeof *ws, "scratch size %zu fits the test's buffer", pwlanes_ws_size(MAXR));
	for (plain = 0; plain < 2; plain++) {
		pwlanes_set_plain(plain);
		for (r = 1; r <= MAXR; r += 2) {
			for (ncon = 0; ncon <= MAXC; ncon++) {
				pwlanes_model m = { r, Ls, Q0, u0, ul };
				pwlanes_voxel vx[8];
				double rs[PWLANES_N], ef[MAXC * PWLANES_N], vv[MAXC * PWLANES_N], dw[MAXR * PWLANES_N];
				double rs2[PWLANES_N], ef2[MAXC * PWLANES_N], vv2[MAXC * PWLANES_N], dw2[MAXR * PWLANES_N];

				/* the lag Gram of an orthonormal basis is small; u0, ul are rows of one */
				for (i = 0; i < r; i++) {
					u0[i] = 0.3 * rnd();
					ul[i] = 0.3 * rnd();
				}
				for (i = 0; i < r; i++)
					for (q = 0; q <= i; q++) {
						Ls[i * r + q] = Ls[q * r + i] = (i == q ? 1.6 : 0.4) * rnd() / r;
						Q0[i * r + q] = Q0[q * r + i] = u0[i] * u0[q] + ul[i] * ul[q];
					}
				for (i = 0; i < MAXC * r; i++)
					cq[i] = rnd();
				for (x = 0; x < 8; x++) {
					for (i = 0; i < 2 * r; i++)
						sums[x][i] = 50.0 * rnd();
					vx[x].u = sums[x];
					vx[x].l = sums[x] + r;
					vx[x].zz = 1000.0 + 500.0 * rnd();
					vx[x].zlag = 300.0 * rnd();
					vx[x].z0 = 10.0 * rnd();
					vx[x].zl = 10.0 * rnd();
					vx[x].rho = 1.98 * rnd();
				}
				pwlanes_solve(&m, vx, ncon, cq, est, ws, rs, ef, vv, dw);
				for (x = 0; x < PWLANES_N; x++) {
					double ref_ef[MAXC], ref_vv[MAXC], ref_dw[MAXR];
					double want = ref_refit(&m, &vx[x], ncon, cq, est, ref_ef, ref_vv, ref_dw);

					bad_ref += !same(rs[x], want);
					for (q = 0; q < r; q++)
						bad_ref += !same(dw[q * PWLANES_N + x], ref_dw[q]);
					for (c = 0; c < ncon; c++)
						if (est[c])
							bad_ref += !same(ef[c * PWLANES_N + x], ref_ef[c]) ||
								   !same(vv[c * PWLANES_N + x], ref_vv[c]);
				}
				/* the same voxels in other lanes beside other neighbours: the same bits */
				{
					pwlanes_voxel p[PWLANES_N] = { vx[5], vx[2], vx[6], vx[0] };
					int from[PWLANES_N] = { -1, 2, -1, 0 };

					pwlanes_solve(&m, p, ncon, cq, est, ws, rs2, ef2, vv2, dw2);
					for (x = 0; x < PWLANES_N; x++) {
						int y = from[x];

						if (y < 0)
							continue;
						bad_pos += !same(rs2[x], rs[y]);
						for (q = 0; q < r; q++)
							bad_pos += !same(dw2[q * PWLANES_N + x], dw[q * PWLANES_N + y]);
						for (c = 0; c < ncon; c++)
							if (est[c])
								bad_pos += !same(ef2[c * PWLANES_N + x], ef[c * PWLANES_N + y]) ||
									   !same(vv2[c * PWLANES_N + x], vv[c * PWLANES_N + y]);
					}
				}
				/* a lane whose G is not positive definite is refused and leaves the others alone */
				{
					pwlanes_voxel p[PWLANES_N] = { vx[0], vx[1], vx[2], vx[3] };
					pwlanes_model mb = m;
					static double Lb[MAXR * MAXR];

					/* rho = 0.99 with Ls = 100 I: G's first pivot is 1.98 - 99 - ... < 0 */
					memcpy(Lb, Ls, sizeof(double) * (size_t)r * r);
					Lb[0] = 100.0;
					mb.Ls = Lb;
					pwlanes_solve(&mb, p, ncon, cq, est, ws, rs2, ef2, vv2, dw2);
					for (x = 0; x < PWLANES_N; x++) {
						double ref_ef[MAXC], ref_vv[MAXC], ref_dw[MAXR];
						double want = ref_refit(&mb, &p[x], ncon, cq, est, ref_ef, ref_vv, ref_dw);

						if (want == -2.0) {
							refused++;
							bad_pd += rs2[x] != -1.0;
						} else {
							bad_pd += !same(rs2[x], want);
						}
					}
				}
				cases++;
			}
		}
	}
	pwlanes_set_plain(0);
	CHECK(bad_ref == 0, "%d cases (vector and plain paths), ranks 1 to %d: every lane's RSS, dw, effect and variance bit for bit as the scalar steps (%d differ)",
	      cases, MAXR, bad_ref);
	CHECK(bad_pos == 0, "a voxel in another lane beside other voxels gets the same bits (%d differ)", bad_pos);
	CHECK(bad_pd == 0 && refused > 0, "lanes that are not positive definite give -1 (%d of them), the others their own bits (%d wrong)",
	      refused, bad_pd);
	return TEST_DONE();
}
