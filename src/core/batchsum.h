/* batchsum.h - per-voxel sums of a batch of volumes: against the design's columns, and running sums, in one fixed order. */
#ifndef SR_BATCHSUM_H
#define SR_BATCHSUM_H

#include <stddef.h>

/*
 * S[:, v] += A[:, 0..n-1] z_v for nv voxels, where S is m x nv (column v at
 * S + m v), A is m x n (column b at A + lda b) and voxel v's n values are
 * z[b * ldz + v]. The order of the arithmetic is fixed, whatever the CPU:
 * the columns go in groups of BATCHSUM_GROUP from the first; within a group
 * the products are chained by fused multiply-adds from the first product,
 * and the group's result is then added to S:
 *   t = A[j,g] z[g];  t = fma(A[j,b], z[b], t) for b = g+1 ..;  S[j,v] += t.
 * This is what one dgemm of BATCHSUM_GROUP volumes per call did on the CPU
 * the project's reference outputs were made on, so a batch of several groups
 * reads and writes each voxel's sums once instead of once per group, with
 * the same bits.
 */
#define BATCHSUM_GROUP 4

void batchsum_add(double *S, int m, const double *A, int lda, const double *z, size_t ldz, int n,
		  size_t nv);

/*
 * The running sums of a batch of volumes after the first volume of the run,
 * voxel by voxel, each voxel's values in volume order. For voxel v < nv and
 * b = 0..nb-1, with y = Y[b * ldy + v]:
 *   z = shift ? y - y0[v] : y;  if z is not finite: flag[v] |= bad, z = 0;
 *   if y != y0[v]: flag[v] |= varies;
 *   with zz: zz[v] += z * z; zlag[v] += z * zprev[v]; zprev[v] = z;
 *   with zsum: zsum[v] += z;
 *   Y[b * ldy + v] = z.
 * zz, zlag and zprev are all given or all NULL; zsum may be NULL. Each
 * product and sum is rounded on its own (no fused multiply-add), so the bits
 * are the same on every CPU.
 */
typedef struct batchsum_run {
	const double *y0;
	double *zz, *zlag, *zprev, *zsum;
	unsigned char *flag;
	unsigned char bad, varies;
	int shift;
} batchsum_run;

void batchsum_shift(const batchsum_run *r, double *Y, size_t ldy, int nb, size_t nv);

/* Tests only: 1 makes both kernels take their plain C path whatever the CPU has. */
void batchsum_set_plain(int plain);

#endif
