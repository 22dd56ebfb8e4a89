/* smoothtool.c - test helper: smooths a raw float64 field (x fastest) read from stdin, writes it to stdout. */
/*
 * Usage: smoothtool NX NY NZ SIGMA_X SIGMA_Y SIGMA_Z < in.f64 > out.f64
 *        smoothtool --sigma FWHM_MM VOXEL_MM   (prints smooth_fwhm_sigma)
 *        smoothtool --support NX NY NZ SX SY SZ NVOL MASK < in > out
 *            NVOL volumes (float64) through one smooth_plan with smooth_support,
 *            in order (so that the support cache is exercised); MASK 1: the
 *            input ends with NX*NY*NZ mask bytes (0 = outside), 0: no mask.
 * Sigmas are in voxels. Exit 0 ok, 1 bad input or smoothing error.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/err.h"
#include "core/mem.h"
#include "core/smooth.h"

static int support_main(char **argv)
{
	int64_t n[3];
	double s[3], *x;
	unsigned char *mask = NULL;
	size_t nvox, nvol, k;
	smooth_plan *p;
	sr_err e;
	int i, rc = 1;

	sr_err_init(&e, NULL, NULL);
	for (i = 0; i < 3; i++) {
		n[i] = atoll(argv[i]);
		s[i] = atof(argv[3 + i]);
		if (n[i] <= 0 || n[i] > 1000)
			return 1;
	}
	nvol = (size_t)atoll(argv[6]);
	nvox = (size_t)(n[0] * n[1] * n[2]);
	if (smooth_plan_alloc(n[0], n[1], n[2], s, &p, &e) != SR_OK) {
		fprintf(stderr, "smoothtool: %s\n", e.msg);
		return 1;
	}
	x = xmalloc_array(nvox * nvol, sizeof *x);
	if (fread(x, sizeof *x, nvox * nvol, stdin) != nvox * nvol)
		goto out;
	if (atoi(argv[7])) {
		mask = xmalloc(nvox);
		if (fread(mask, 1, nvox, stdin) != nvox)
			goto out;
	}
	for (k = 0; k < nvol; k++)
		smooth_support(p, x + k * nvox, mask);
	if (fwrite(x, sizeof *x, nvox * nvol, stdout) == nvox * nvol && fflush(stdout) == 0)
		rc = 0;
out:
	if (rc)
		fprintf(stderr, "smoothtool: short input or failed write\n");
	free(x);
	free(mask);
	smooth_plan_free(p);
	return rc;
}

int main(int argc, char **argv)
{
	int64_t n[3];
	double s[3], *x;
	size_t nvox;
	int i;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	if (argc == 4 && strcmp(argv[1], "--sigma") == 0) {
		printf("%.17g\n", smooth_fwhm_sigma(atof(argv[2]), atof(argv[3])));
		return 0;
	}
	if (argc == 10 && strcmp(argv[1], "--support") == 0)
		return support_main(argv + 2);
	if (argc != 7) {
		fprintf(stderr, "usage: smoothtool NX NY NZ SX SY SZ < in.f64 > out.f64\n");
		return 1;
	}
	for (i = 0; i < 3; i++) {
		n[i] = atoll(argv[1 + i]);
		s[i] = atof(argv[4 + i]);
		if (n[i] <= 0 || n[i] > 1000) {
			fprintf(stderr, "smoothtool: bad size %s\n", argv[1 + i]);
			return 1;
		}
	}
	nvox = (size_t)(n[0] * n[1] * n[2]);
	x = xmalloc_array(nvox, sizeof *x);
	if (fread(x, sizeof *x, nvox, stdin) != nvox) {
		fprintf(stderr, "smoothtool: short input\n");
		free(x);
		return 1;
	}
	if (smooth_gauss3(x, n[0], n[1], n[2], s, &e) != SR_OK) {
		fprintf(stderr, "smoothtool: %s\n", e.msg);
		free(x);
		return 1;
	}
	if (fwrite(x, sizeof *x, nvox, stdout) != nvox || fflush(stdout) != 0) {
		fprintf(stderr, "smoothtool: write failed\n");
		free(x);
		return 1;
	}
	free(x);
	return 0;
}
