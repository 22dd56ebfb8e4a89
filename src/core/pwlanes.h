/* pwlanes.h - the Prais-Winsten refit from a voxel's sums (glm's finish), for PWLANES_N voxels at once. */
#ifndef SR_PWLANES_H
#define SR_PWLANES_H

#include <stddef.h>

#define PWLANES_N 4

/* What every voxel of a run shares: r x r matrices column-major, r-vectors. */
typedef struct pwlanes_model {
	int r;
	const double *Ls;      /* Lq + Lq' */
	const double *Q0;      /* u_0 u_0' + u_T-1 u_T-1' */
	const double *u0, *ul; /* the first and the last row of U_r */
} pwlanes_model;

/* One voxel: its sums (r values each at u and l) and its rho. */
typedef struct pwlanes_voxel {
	const double *u, *l;
	double zz, zlag, z0, zl, rho;
} pwlanes_voxel;

/* Scratch doubles pwlanes_solve needs for rank r. */
size_t pwlanes_ws_size(int r);

/*
 * For each voxel i of vx[0..PWLANES_N-1], with a1 = 1 + rho^2, r2 = rho^2:
 * G = a1 I - rho Ls - r2 Q0 and its Cholesky factor R (G = R'R),
 * h = a1 u - rho l - r2 (u0 z0 + ul zl), w = R^-T h, dw = R^-1 w, and
 * rssw[i] = a1 zz - 2 rho zlag - r2 (z0^2 + zl^2) - w'w (0 when below 0),
 * or -1 when G is not positive definite. For each contrast c with est[c]
 * (cq: ncon rows of r values): ef[c * PWLANES_N + i] = cq_c' dw and
 * vv[c * PWLANES_N + i] = ||R^-T cq_c||^2. dw (r x PWLANES_N, element q of
 * voxel i at dw[q * PWLANES_N + i]) may be NULL.
 *
 * Each voxel's numbers are one fixed sequence of rounded operations
 * (no fused multiply-add), whatever the other voxels hold and whatever the
 * CPU, so a voxel gets the same bits alone or beside any others.
 */
void pwlanes_solve(const pwlanes_model *m, const pwlanes_voxel *vx, int ncon, const double *cq,
		   const unsigned char *est, double *ws, double *rssw, double *ef, double *vv, double *dw);

/* Tests only: 1 makes pwlanes_solve take its plain C path whatever the CPU has. */
void pwlanes_set_plain(int plain);

#endif
