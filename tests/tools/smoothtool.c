/* smoothtool.c - test helper: smooths a raw float64 field (x fastest) read from stdin, writes it to stdout. */
/*
 * Usage: smoothtool NX NY NZ SIGMA_X SIGMA_Y SIGMA_Z < in.f64 > out.f64
 *        smoothtool --sigma FWHM_MM VOXEL_MM   (prints smooth_fwhm_sigma)
 * Sigmas are in voxels. Exit 0 ok, 1 bad input or smoothing error.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/err.h"
#include "core/mem.h"
#include "core/smooth.h"

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
