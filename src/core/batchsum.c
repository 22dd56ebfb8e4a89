/* batchsum.c - the fixed-order batch sums of batchsum.h, with a vector build for CPUs that have FMA. */
#include "batchsum.h"

#include <math.h>
#include <stdint.h>

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define BATCHSUM_X86 1
#endif

static int force_plain;

void batchsum_set_plain(int plain)
{
	force_plain = plain;
}

static int have_avx2_fma(void)
{
#ifdef BATCHSUM_X86
	return !force_plain && __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
#else
	return 0;
#endif
}

/* One voxel: the groups of columns g, g + 1, ... of A against its values z[b * ldz]. */
static inline __attribute__((always_inline)) void voxel(double *restrict s, int m,
							 const double *restrict A, int lda,
							 const double *z, size_t ldz, int n)
{
	int g, b, j;

	for (g = 0; g < n; g += BATCHSUM_GROUP) {
		if (n - g >= 8 && BATCHSUM_GROUP == 4) {
			/* two groups in one pass over s: each s[j] is read and written once,
			   with the same two additions as two passes */
			const double *a0 = A + (size_t)lda * g, *a1 = a0 + lda, *a2 = a1 + lda, *a3 = a2 + lda;
			const double *a4 = a3 + lda, *a5 = a4 + lda, *a6 = a5 + lda, *a7 = a6 + lda;
			double z0 = z[ldz * g], z1 = z[ldz * (g + 1)], z2 = z[ldz * (g + 2)], z3 = z[ldz * (g + 3)];
			double z4 = z[ldz * (g + 4)], z5 = z[ldz * (g + 5)], z6 = z[ldz * (g + 6)];
			double z7 = z[ldz * (g + 7)];

			for (j = 0; j < m; j++) {
				double t = a0[j] * z0, u = a4[j] * z4;

				t = fma(a1[j], z1, t);
				u = fma(a5[j], z5, u);
				t = fma(a2[j], z2, t);
				u = fma(a6[j], z6, u);
				t = fma(a3[j], z3, t);
				u = fma(a7[j], z7, u);
				s[j] = (s[j] + t) + u;
			}
			g += BATCHSUM_GROUP;
		} else if (n - g >= 4 && BATCHSUM_GROUP == 4) {
			const double *a0 = A + (size_t)lda * g, *a1 = a0 + lda, *a2 = a1 + lda, *a3 = a2 + lda;
			double z0 = z[ldz * g], z1 = z[ldz * (g + 1)], z2 = z[ldz * (g + 2)], z3 = z[ldz * (g + 3)];

			for (j = 0; j < m; j++) {
				double t = a0[j] * z0;

				t = fma(a1[j], z1, t);
				t = fma(a2[j], z2, t);
				t = fma(a3[j], z3, t);
				s[j] += t;
			}
		} else {
			int e = n - g < BATCHSUM_GROUP ? n : g + BATCHSUM_GROUP;

			for (j = 0; j < m; j++) {
				double t = A[(size_t)lda * g + j] * z[ldz * g];

				for (b = g + 1; b < e; b++)
					t = fma(A[(size_t)lda * b + j], z[ldz * b], t);
				s[j] += t;
			}
		}
	}
}

static inline __attribute__((always_inline)) void add_all(double *S, int m, const double *A, int lda,
							   const double *z, size_t ldz, int n, size_t nv)
{
	size_t v;

	for (v = 0; v < nv; v++)
		voxel(S + (size_t)m * v, m, A, lda, z + v, ldz, n);
}

static void add_plain(double *S, int m, const double *A, int lda, const double *z, size_t ldz, int n,
		      size_t nv)
{
	add_all(S, m, A, lda, z, ldz, n, nv);
}

#ifdef BATCHSUM_X86
/* The same code where fma is one instruction; the bits are the same (fma is exactly rounded). */
__attribute__((target("avx2,fma"))) static void add_fma(double *S, int m, const double *A, int lda,
							  const double *z, size_t ldz, int n, size_t nv)
{
	add_all(S, m, A, lda, z, ldz, n, nv);
}
#endif

void batchsum_add(double *S, int m, const double *A, int lda, const double *z, size_t ldz, int n,
		  size_t nv)
{
#ifdef BATCHSUM_X86
	if (have_avx2_fma()) {
		add_fma(S, m, A, lda, z, ldz, n, nv);
		return;
	}
#endif
	add_plain(S, m, A, lda, z, ldz, n, nv);
}

/* batchsum_shift for voxels v0..v1-1, one at a time. */
static void shift_plain(const batchsum_run *r, double *Y, size_t ldy, int nb, size_t v0, size_t v1)
{
	size_t v;
	int b;

	for (v = v0; v < v1; v++) {
		double y0 = r->y0[v];
		unsigned char f = r->flag[v];

		for (b = 0; b < nb; b++) {
			double y = Y[ldy * b + v], z = r->shift ? y - y0 : y;

			if (!isfinite(z)) {
				f |= r->bad;
				z = 0.0;
			}
			if (y != y0)
				f |= r->varies;
			if (r->zz) {
				r->zz[v] += z * z;
				r->zlag[v] += z * r->zprev[v];
				r->zprev[v] = z;
			}
			if (r->zsum)
				r->zsum[v] += z;
			Y[ldy * b + v] = z;
		}
		r->flag[v] = f;
	}
}

#ifdef BATCHSUM_X86
/*
 * Four voxels at a time with the same operations in the same order: a
 * subtraction, a product and a sum per step, each rounded, as in
 * shift_plain (a lane's z is zeroed where it is not finite, and NaN or
 * unequal lanes set the flags).
 */
__attribute__((target("avx2,fma"))) static void shift_avx2(const batchsum_run *r, double *Y, size_t ldy,
							     int nb, size_t nv)
{
	const __m256d big = _mm256_set1_pd(1.7976931348623157e308), sign = _mm256_set1_pd(-0.0);
	size_t v, n4 = nv / 4 * 4;
	int b, i;

	for (v = 0; v < n4; v += 4) {
		__m256d y0 = _mm256_loadu_pd(r->y0 + v), zz = _mm256_setzero_pd(), zl = zz, zp = zz, zs = zz;
		__m256d bad = _mm256_setzero_pd(), var = bad;
		int mb, mv;

		if (r->zz) {
			zz = _mm256_loadu_pd(r->zz + v);
			zl = _mm256_loadu_pd(r->zlag + v);
			zp = _mm256_loadu_pd(r->zprev + v);
		}
		if (r->zsum)
			zs = _mm256_loadu_pd(r->zsum + v);
		for (b = 0; b < nb; b++) {
			double *yp = Y + ldy * b + v;
			__m256d y = _mm256_loadu_pd(yp), z = r->shift ? _mm256_sub_pd(y, y0) : y;
			/* finite: |z| <= DBL_MAX, false for NaN and infinities */
			__m256d fin = _mm256_cmp_pd(_mm256_andnot_pd(sign, z), big, _CMP_LE_OQ);

			bad = _mm256_or_pd(bad, _mm256_xor_pd(fin, _mm256_castsi256_pd(_mm256_set1_epi64x(-1))));
			z = _mm256_and_pd(z, fin);
			var = _mm256_or_pd(var, _mm256_cmp_pd(y, y0, _CMP_NEQ_UQ));
			zz = _mm256_add_pd(zz, _mm256_mul_pd(z, z));
			zl = _mm256_add_pd(zl, _mm256_mul_pd(z, zp));
			zp = z;
			zs = _mm256_add_pd(zs, z);
			_mm256_storeu_pd(yp, z);
		}
		if (r->zz) {
			_mm256_storeu_pd(r->zz + v, zz);
			_mm256_storeu_pd(r->zlag + v, zl);
			_mm256_storeu_pd(r->zprev + v, zp);
		}
		if (r->zsum)
			_mm256_storeu_pd(r->zsum + v, zs);
		mb = _mm256_movemask_pd(bad);
		mv = _mm256_movemask_pd(var);
		for (i = 0; i < 4; i++)
			r->flag[v + i] |= (unsigned char)(((mb >> i) & 1 ? r->bad : 0) | ((mv >> i) & 1 ? r->varies : 0));
	}
	/* the compiler put no vzeroupper before this tail call: without it the upper halves stay
	   dirty and every SSE instruction after it (the smoothing's, say) ran about 3x slower */
	_mm256_zeroupper();
	shift_plain(r, Y, ldy, nb, n4, nv);
}
#endif

void batchsum_shift(const batchsum_run *r, double *Y, size_t ldy, int nb, size_t nv)
{
#ifdef BATCHSUM_X86
	if (have_avx2_fma()) {
		shift_avx2(r, Y, ldy, nb, nv);
		return;
	}
#endif
	shift_plain(r, Y, ldy, nb, 0, nv);
}
