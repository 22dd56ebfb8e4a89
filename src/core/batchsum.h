/* batchsum.h - per-voxel sums of a batch of volumes against the design's columns, in one fixed order. */
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

#endif
