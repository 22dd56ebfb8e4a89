/* watershed.c - priority-flood watershed from regional maxima (see watershed.h). */
#include "watershed.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

typedef struct grid3 {
	int64_t nx, ny, nz;
	int noff;
	int off[26][3];
} grid3;

static void grid_init(grid3 *g, int64_t nx, int64_t ny, int64_t nz, int connectivity)
{
	int a, b, c;

	g->nx = nx;
	g->ny = ny;
	g->nz = nz;
	g->noff = 0;
	for (c = -1; c <= 1; c++)
		for (b = -1; b <= 1; b++)
			for (a = -1; a <= 1; a++) {
				int m = abs(a) + abs(b) + abs(c);

				if (m == 0 || (connectivity == 6 && m > 1))
					continue;
				g->off[g->noff][0] = a;
				g->off[g->noff][1] = b;
				g->off[g->noff][2] = c;
				g->noff++;
			}
}

/* Neighbour n of voxel v, or -1 outside the grid. */
static int64_t neighbour(const grid3 *g, int64_t v, int n)
{
	int64_t i = v % g->nx, j = v / g->nx % g->ny, k = v / (g->nx * g->ny);

	i += g->off[n][0];
	j += g->off[n][1];
	k += g->off[n][2];
	if (i < 0 || j < 0 || k < 0 || i >= g->nx || j >= g->ny || k >= g->nz)
		return -1;
	return i + g->nx * (j + g->ny * k);
}

/* Max-heap on (value, -index): the highest value first, then the lowest index. */
typedef struct heap {
	int64_t *v;
	size_t n;
	const double *f;
} heap;

static int before(const heap *h, int64_t a, int64_t b)
{
	if (h->f[a] != h->f[b])
		return h->f[a] > h->f[b];
	return a < b;
}

static void heap_push(heap *h, int64_t v)
{
	size_t i = h->n++;

	h->v[i] = v;
	while (i > 0) {
		size_t p = (i - 1) / 2;

		if (!before(h, h->v[i], h->v[p]))
			break;
		h->v[i] = h->v[p];
		h->v[p] = v;
		i = p;
	}
}

static int64_t heap_pop(heap *h)
{
	int64_t top = h->v[0], x;
	size_t i = 0;

	x = h->v[--h->n];
	if (h->n == 0)
		return top;
	h->v[0] = x;
	for (;;) {
		size_t l = 2 * i + 1, r = l + 1, m = i;

		if (l < h->n && before(h, h->v[l], h->v[m]))
			m = l;
		if (r < h->n && before(h, h->v[r], h->v[m]))
			m = r;
		if (m == i)
			break;
		h->v[i] = h->v[m];
		h->v[m] = x;
		i = m;
	}
	return top;
}

typedef struct marker {
	double peak;
	int64_t first;
	int32_t tmp;
} marker;

static int cmp_marker(const void *a, const void *b)
{
	const marker *x = a, *y = b;

	if (x->peak != y->peak)
		return x->peak > y->peak ? -1 : 1;
	return (x->first > y->first) - (x->first < y->first);
}

sr_status watershed_label(const double *f, int64_t nx, int64_t ny, int64_t nz, double floor_value,
			  int connectivity, int32_t *labels, int32_t *nlabels, sr_err *e)
{
	grid3 g;
	size_t nvox;
	int64_t v, *stack, *plateau;
	unsigned char *fg, *seen;
	marker *mk = NULL;
	int32_t *remap;
	size_t nmk = 0, cap = 0, m;
	heap h;

	*nlabels = 0;
	if (nx <= 0 || ny <= 0 || nz <= 0 ||
	    sr_mul_size((size_t)nx, (size_t)ny, &nvox) || sr_mul_size(nvox, (size_t)nz, &nvox) ||
	    nvox > (size_t)INT32_MAX)
		return sr_fail(e, SR_EDIM, "watershed: bad grid size %lld x %lld x %lld", (long long)nx,
			       (long long)ny, (long long)nz);
	if (connectivity != 6 && connectivity != 26)
		return sr_fail(e, SR_EINVAL, "watershed: connectivity must be 6 or 26, not %d",
			       connectivity);
	grid_init(&g, nx, ny, nz, connectivity);
	fg = xmalloc(nvox);
	seen = xcalloc(nvox, 1);
	stack = xmalloc_array(nvox, sizeof *stack);
	plateau = xmalloc_array(nvox, sizeof *plateau);
	for (v = 0; v < (int64_t)nvox; v++) {
		fg[v] = isfinite(f[v]) && f[v] >= floor_value;
		labels[v] = 0;
	}
	/* 1. regional maxima: plateaus of equal value with no higher neighbour */
	for (v = 0; v < (int64_t)nvox; v++) {
		size_t ns = 0, np = 0, q;
		int is_max = 1;

		if (!fg[v] || seen[v])
			continue;
		seen[v] = 1;
		stack[ns++] = v;
		while (ns) {
			int64_t u = stack[--ns];
			int n;

			plateau[np++] = u;
			for (n = 0; n < g.noff; n++) {
				int64_t w = neighbour(&g, u, n);

				if (w < 0 || !isfinite(f[w]))
					continue;
				if (f[w] > f[u])
					is_max = 0;
				else if (f[w] == f[u] && fg[w] && !seen[w]) {
					seen[w] = 1;
					stack[ns++] = w;
				}
			}
		}
		if (!is_max)
			continue;
		XGROW(mk, nmk, cap);
		mk[nmk].peak = f[v];
		mk[nmk].first = v;   /* v is the plateau's lowest index: the scan reaches it first */
		mk[nmk].tmp = (int32_t)(nmk + 1);
		for (q = 0; q < np; q++)
			labels[plateau[q]] = (int32_t)(nmk + 1);
		nmk++;
	}
	/* number the basins by peak, highest first */
	if (nmk)
		qsort(mk, nmk, sizeof *mk, cmp_marker);
	remap = xmalloc_array(nmk + 1, sizeof *remap);
	remap[0] = 0;
	for (m = 0; m < nmk; m++)
		remap[mk[m].tmp] = (int32_t)(m + 1);
	for (v = 0; v < (int64_t)nvox; v++)
		labels[v] = remap[labels[v]];
	/* 2-3. flood in order of decreasing value, ties by index */
	h.v = stack;
	h.n = 0;
	h.f = f;
	for (v = 0; v < (int64_t)nvox; v++)
		if (labels[v])
			heap_push(&h, v);
	while (h.n) {
		int64_t u = heap_pop(&h);
		int n;

		for (n = 0; n < g.noff; n++) {
			int64_t w = neighbour(&g, u, n);

			if (w < 0 || !fg[w] || labels[w])
				continue;
			labels[w] = labels[u];
			heap_push(&h, w);
		}
	}
	*nlabels = (int32_t)nmk;
	free(remap);
	free(mk);
	free(fg);
	free(seen);
	free(stack);
	free(plateau);
	return SR_OK;
}
