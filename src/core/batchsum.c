/* batchsum.c - the fixed-order batch sums of batchsum.h, with a vector build for CPUs that have FMA. */
#include "batchsum.h"

#include <math.h>

/* One voxel: the groups of columns g, g + 1, ... of A against its values z[b * ldz]. */
static inline __attribute__((always_inline)) void voxel(double *restrict s, int m,
							 const double *restrict A, int lda,
							 const double *z, size_t ldz, int n)
{
	int g, b, j;

	for (g = 0; g < n; g += BATCHSUM_GROUP) {
		if (n - g >= 4 && BATCHSUM_GROUP == 4) {
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

#if defined(__x86_64__) && defined(__GNUC__)
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
#if defined(__x86_64__) && defined(__GNUC__)
	if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma")) {
		add_fma(S, m, A, lda, z, ldz, n, nv);
		return;
	}
#endif
	add_plain(S, m, A, lda, z, ldz, n, nv);
}
