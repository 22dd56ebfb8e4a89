/* glmtool.c - drives the streamed GLM from raw float64 files, for the Python reference tests.
 *
 * usage: glmtool X.bin Y.bin C.bin T P NVOX NCON AR1 NTHREADS OUT.bin
 *   X: T x P column-major; Y: T volumes of NVOX values; C: NCON x P row-major.
 * OUT (float64): df, rank, estimable[NCON], ok[NVOX], rho[NVOX], mean[NVOX],
 *   effect[NCON][NVOX], var[NCON][NVOX].
 */
#include <stdio.h>
#include <stdlib.h>

#include "core/glm.h"
#include "core/mem.h"

static double *slurp(const char *path, size_t n)
{
	FILE *f = fopen(path, "rb");
	double *d = xmalloc_array(n ? n : 1, sizeof(double));

	if (!f || fread(d, sizeof(double), n, f) != n) {
		fprintf(stderr, "glmtool: cannot read %zu values from %s\n", n, path);
		exit(1);
	}
	fclose(f);
	return d;
}

static void put(FILE *f, double v)
{
	fwrite(&v, sizeof v, 1, f);
}

int main(int argc, char **argv)
{
	int T, P, ncon, ar1, nth, k, c;
	size_t nv, v;
	double *X, *Y, *C;
	glm_model *m;
	glm_acc *a;
	glm_out o;
	sr_err e;
	FILE *f;

	if (argc != 11) {
		fprintf(stderr, "usage: glmtool X.bin Y.bin C.bin T P NVOX NCON AR1 NTHREADS OUT.bin\n");
		return 2;
	}
	T = atoi(argv[4]);
	P = atoi(argv[5]);
	nv = (size_t)atol(argv[6]);
	ncon = atoi(argv[7]);
	ar1 = atoi(argv[8]);
	nth = atoi(argv[9]);
	sr_err_init(&e, NULL, NULL);
	X = slurp(argv[1], (size_t)T * P);
	Y = slurp(argv[2], (size_t)T * nv);
	C = slurp(argv[3], (size_t)ncon * P);
	if (glm_model_make(X, T, P, &m, &e) != SR_OK) {
		fprintf(stderr, "glmtool: %s\n", e.msg);
		return 1;
	}
	a = glm_acc_alloc(m, nv);
	for (k = 0; k < T; k++)
		glm_acc_add(a, Y + (size_t)k * nv, &e);
	if (glm_acc_finish(a, ar1, C, ncon, NULL, nth, &o, &e) != SR_OK) {
		fprintf(stderr, "glmtool: %s\n", e.msg);
		return 1;
	}
	f = fopen(argv[10], "wb");
	if (!f)
		return 1;
	put(f, o.df);
	put(f, glm_model_rank(m));
	for (c = 0; c < ncon; c++)
		put(f, o.estimable[c]);
	for (v = 0; v < nv; v++)
		put(f, o.ok[v]);
	fwrite(o.rho, sizeof(double), nv, f);
	fwrite(o.mean, sizeof(double), nv, f);
	fwrite(o.effect, sizeof(double), nv * ncon, f);
	fwrite(o.var, sizeof(double), nv * ncon, f);
	if (fclose(f) != 0)
		return 1;
	glm_out_release(&o);
	glm_acc_free(a);
	glm_model_free(m);
	free(X);
	free(Y);
	free(C);
	return 0;
}
