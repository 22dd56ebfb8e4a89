/* test_batchsum.c - the fixed-order batch sums: the documented order, bit for bit; agreement with BLAS dgemm. */
#include <cblas.h>
#include <math.h>
#include <string.h>

#include "core/batchsum.h"
#include "testlib.h"

static unsigned long long rng = 88172645463325252ULL;

/* xorshift64 (Marsaglia 2003), values of mixed sign over 7 decades. */
static double rnd(void)
{
	double u;

	rng ^= rng << 13;
	rng ^= rng >> 7;
	rng ^= rng << 17;
	u = (double)(rng >> 11) / 9007199254740992.0 - 0.5;
	return u * pow(10.0, (double)(rng % 7) - 3.0);
}

/* The order batchsum.h states, written out one entry at a time. */
static double ref_entry(double s, const double *A, int lda, const double *z, size_t ldz, int n, int j)
{
	int g, b;

	for (g = 0; g < n; g += BATCHSUM_GROUP) {
		double t = A[(size_t)lda * g + j] * z[ldz * g];

		for (b = g + 1; b < n && b < g + BATCHSUM_GROUP; b++)
			t = fma(A[(size_t)lda * b + j], z[ldz * b], t);
		s += t;
	}
	return s;
}

/* One voxel of batchsum_shift as batchsum.h states it, step by step. */
static void ref_shift(int shift, int sums, int with_zsum, double y0, double *zz, double *zlag, double *zprev,
		      double *zsum, unsigned char *flag, double *y, size_t ldy, int nb)
{
	int b;

	for (b = 0; b < nb; b++) {
		double yy = y[ldy * b], z = shift ? yy - y0 : yy;

		if (!isfinite(z)) {
			*flag |= 1;
			z = 0.0;
		}
		if (yy != y0)
			*flag |= 4;
		if (sums) {
			*zz += z * z;
			*zlag += z * *zprev;
			*zprev = z;
		}
		if (with_zsum)
			*zsum += z;
		y[ldy * b] = z;
	}
}

/* A value for the shift tests: ordinary, equal to y0, NaN, +-inf, -0, huge (its difference overflows). */
static double shift_value(double y0, unsigned long long k)
{
	switch (k % 23) {
	case 0: return y0;
	case 1: return NAN;
	case 2: return INFINITY;
	case 3: return -INFINITY;
	case 4: return -0.0;
	case 5: return k % 2 ? 1.7e308 : -1.7e308;
	default: return y0 + rnd();
	}
}

/* batchsum_shift, vector and plain paths, against ref_shift bit for bit. */
static void test_shift(void)
{
	int plain, shift, sums, zs, nb, bad = 0, cases = 0, flagged = 0;

	for (plain = 0; plain < 2; plain++) {
		batchsum_set_plain(plain);
		for (shift = 0; shift < 2; shift++)
			for (sums = 0; sums < 2; sums++)
				for (zs = 0; zs < 2; zs++)
					for (nb = 1; nb <= 9; nb++) {
						size_t nv = (size_t)(nb * 5 + shift * 3 + sums + zs) % 37 + 1, ldy = nv + 3, v;
						double y0[40], zz[40], zl[40], zp[40], zsum[40], Y[9 * 43];
						double rzz[40], rzl[40], rzp[40], rzs[40], RY[9 * 43];
						unsigned char fl[40], rfl[40];
						batchsum_run r;

						for (v = 0; v < nv; v++) {
							y0[v] = v % 11 == 3 ? 1e308 : 500.0 * rnd();
							rzz[v] = zz[v] = fabs(rnd());
							rzl[v] = zl[v] = rnd();
							rzp[v] = zp[v] = rnd();
							rzs[v] = zsum[v] = rnd();
							rfl[v] = fl[v] = (unsigned char)(v % 3 == 0 ? 2 : 0);
						}
						for (v = 0; v < ldy * (size_t)nb; v++)
							RY[v] = Y[v] = shift_value(y0[v % ldy < nv ? v % ldy : 0], rng >> 7 ^ v);
						r.y0 = y0;
						r.zz = sums ? zz : NULL;
						r.zlag = sums ? zl : NULL;
						r.zprev = sums ? zp : NULL;
						r.zsum = zs ? zsum : NULL;
						r.flag = fl;
						r.bad = 1;
						r.varies = 4;
						r.shift = shift;
						batchsum_shift(&r, Y, ldy, nb, nv);
						for (v = 0; v < nv; v++)
							ref_shift(shift, sums, zs, y0[v], &rzz[v], &rzl[v], &rzp[v], &rzs[v], &rfl[v],
								  RY + v, ldy, nb);
						bad += memcmp(Y, RY, sizeof(double) * ldy * (size_t)nb) != 0;
						bad += memcmp(zz, rzz, sizeof(double) * nv) || memcmp(zl, rzl, sizeof(double) * nv);
						bad += memcmp(zp, rzp, sizeof(double) * nv) || memcmp(zsum, rzs, sizeof(double) * nv);
						bad += memcmp(fl, rfl, nv) != 0;
						for (v = 0; v < nv; v++)
							flagged += (fl[v] & 5) == 5;
						cases++;
					}
	}
	batchsum_set_plain(0);
	CHECK(bad == 0 && cases == 144, "%d cases (vector and plain paths): shifted values, sums and flags bit for bit as stated (%d differ)",
	      cases, bad);
	CHECK(flagged > 50, "the cases hold voxels with both flags set (%d)", flagged);
}

int main(void)
{
	int m, n, bad_order = 0, bad_blas = 0, cases = 0;
	long same_blas = 0, entries = 0;

	for (m = 1; m <= 41; m += 4) {
		for (n = 1; n <= 2 * BATCHSUM_GROUP + 1; n++) {
			size_t nv = (size_t)(m * 7 + n) % 300 + 1, ldz = nv + 5, v;
			int lda = m + 3, j, b;
			double *A = malloc(sizeof(double) * (size_t)lda * n);
			double *z = malloc(sizeof(double) * ldz * n);
			double *S = malloc(sizeof(double) * (size_t)m * nv);
			double *S0 = malloc(sizeof(double) * (size_t)m * nv);
			double *Sb = malloc(sizeof(double) * (size_t)m * nv);

			for (j = 0; j < lda * n; j++)
				A[j] = rnd();
			for (v = 0; v < ldz * n; v++)
				z[v] = rnd();
			for (v = 0; v < (size_t)m * nv; v++)
				S0[v] = S[v] = Sb[v] = 100.0 * rnd();
			batchsum_add(S, m, A, lda, z, ldz, n, nv);
			/* the reference BLAS route: one dgemm per group of columns */
			for (b = 0; b < n; b += BATCHSUM_GROUP)
				cblas_dgemm(CblasColMajor, CblasNoTrans, CblasTrans, m, (int)nv,
					    n - b < BATCHSUM_GROUP ? n - b : BATCHSUM_GROUP, 1.0,
					    A + (size_t)lda * b, lda, z + ldz * b, (int)ldz, 1.0, Sb, m);
			for (v = 0; v < nv; v++) {
				for (j = 0; j < m; j++) {
					double got = S[v * m + j], want = ref_entry(S0[v * m + j], A, lda, z + v, ldz, n, j);
					double scale = fabs(S0[v * m + j]);

					for (b = 0; b < n; b++)
						scale += fabs(A[(size_t)lda * b + j] * z[ldz * b + v]);
					bad_order += memcmp(&got, &want, sizeof got) != 0;
					bad_blas += !(fabs(got - Sb[v * m + j]) <= 1e-14 * scale);
					same_blas += memcmp(&got, &Sb[v * m + j], sizeof got) == 0;
					entries++;
				}
			}
			cases++;
			free(A);
			free(z);
			free(S);
			free(S0);
			free(Sb);
		}
	}
	CHECK(bad_order == 0, "%d cases: every sum in the documented order, bit for bit (%d differ)", cases,
	      bad_order);
	CHECK(bad_blas == 0, "every sum within 1e-14 of its terms' size of BLAS dgemm (%d outside)", bad_blas);
	printf("# %ld of %ld sums bit-identical to this machine's dgemm\n", same_blas, entries);

	{
		/* zeros leave +0 sums at +0 (the skipped background relies on it) */
		double A[4] = { 1.5, -2.0, 3.0, -0.5 }, z[4] = { 0.0, -0.0, 0.0, -0.0 }, S[1] = { 0.0 };

		batchsum_add(S, 1, A, 1, z, 1, 4, 1);
		CHECK(S[0] == 0.0 && !signbit(S[0]), "zero values keep a +0 sum at +0");
	}
	{
		/* fused, not multiplied then added: -1 + (1 + 2^-27)^2 is 2^-26 + 2^-54 exactly
		   with one rounding, but 2^-26 when the product is rounded first */
		double e = ldexp(1.0, -27);
		double A[2] = { -1.0, 1.0 + e }, z[2] = { 1.0, 1.0 + e }, S[1] = { 0.0 };

		batchsum_add(S, 1, A, 1, z, 1, 2, 1);
		CHECK(S[0] == ldexp(1.0, -26) + ldexp(1.0, -54), "the second product is fused into the first (%.17g)",
		      S[0]);
	}
	test_shift();
	return TEST_DONE();
}
