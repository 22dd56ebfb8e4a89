/* sim.c - the simulator's numerics: random numbers, phantom, parcels, regions, noise, events, volumes. */
#include "sim.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

uint64_t sim_splitmix64(uint64_t *state)
{
	uint64_t z = (*state += UINT64_C(0x9E3779B97F4A7C15));

	z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
	z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
	return z ^ (z >> 31);
}

void sim_rng_set_state(sim_rng *r, const uint64_t s[4])
{
	memcpy(r->s, s, sizeof r->s);
	if (!(s[0] | s[1] | s[2] | s[3]))
		r->s[0] = 1; /* the all-zero state is a fixed point of xoshiro */
	r->has_spare = 0;
	r->spare = 0;
}

void sim_rng_seed(sim_rng *r, uint64_t seed, uint64_t stream)
{
	uint64_t a = seed, s[4];
	uint64_t x = sim_splitmix64(&a) ^ (stream * UINT64_C(0xD1B54A32D192ED03));
	int i;

	for (i = 0; i < 4; i++)
		s[i] = sim_splitmix64(&x);
	sim_rng_set_state(r, s);
}

static inline uint64_t rotl(uint64_t x, int k)
{
	return (x << k) | (x >> (64 - k));
}

uint64_t sim_rng_next(sim_rng *r)
{
	uint64_t *s = r->s;
	uint64_t result = rotl(s[1] * 5, 7) * 9;
	uint64_t t = s[1] << 17;

	s[2] ^= s[0];
	s[3] ^= s[1];
	s[1] ^= s[2];
	s[0] ^= s[3];
	s[2] ^= t;
	s[3] = rotl(s[3], 45);
	return result;
}

double sim_rng_uniform(sim_rng *r)
{
	return (double)(sim_rng_next(r) >> 11) * 0x1.0p-53;
}

double sim_rng_normal(sim_rng *r)
{
	double u1, u2, rad;

	if (r->has_spare) {
		r->has_spare = 0;
		return r->spare;
	}
	/* u1 in (0, 1] so that log(u1) is finite */
	u1 = 1.0 - sim_rng_uniform(r);
	u2 = sim_rng_uniform(r);
	rad = sqrt(-2.0 * log(u1));
	r->spare = rad * sin(2.0 * M_PI * u2);
	r->has_spare = 1;
	return rad * cos(2.0 * M_PI * u2);
}

void sim_ar1_init(sim_rng *r, size_t n, double *state)
{
	size_t i;

	for (i = 0; i < n; i++)
		state[i] = sim_rng_normal(r);
}

void sim_ar1_step(sim_rng *r, double rho, size_t n, double *state)
{
	/* innovation scaled so that the stationary variance stays 1 */
	double g = sqrt(1.0 - rho * rho);
	size_t i;

	for (i = 0; i < n; i++)
		state[i] = rho * state[i] + g * sim_rng_normal(r);
}

void sim_ar1_series(sim_rng *r, double rho, size_t T, double *out)
{
	double e;
	size_t k;

	if (T == 0)
		return;
	sim_ar1_init(r, 1, &e);
	out[0] = e;
	for (k = 1; k < T; k++) {
		sim_ar1_step(r, rho, 1, &e);
		out[k] = e;
	}
}

static void voxel_world(const sim_space *sp, double i, double j, double k, double xyz[3])
{
	int a;

	for (a = 0; a < 3; a++)
		xyz[a] = sp->affine[a][0] * i + sp->affine[a][1] * j + sp->affine[a][2] * k +
			 sp->affine[a][3];
}

void sim_head_for(const sim_space *sp, sim_head *h)
{
	double n[3] = { (double)sp->nx, (double)sp->ny, (double)sp->nz };
	int a;

	voxel_world(sp, (n[0] - 1) / 2, (n[1] - 1) / 2, (n[2] - 1) / 2, h->center);
	for (a = 0; a < 3; a++) {
		double vs = sqrt(sp->affine[0][a] * sp->affine[0][a] +
				 sp->affine[1][a] * sp->affine[1][a] +
				 sp->affine[2][a] * sp->affine[2][a]);

		h->brain[a] = SIM_BRAIN * 0.5 * n[a] * vs;
	}
}

/* Normalized brain coordinates u of world point xyz: |u| <= 1 is inside the brain. */
static void sim_head_coords(const sim_head *h, const double xyz[3], double u[3])
{
	int a;

	for (a = 0; a < 3; a++)
		u[a] = (xyz[a] - h->center[a]) / h->brain[a];
}

static double norm3(const double u[3])
{
	return sqrt(u[0] * u[0] + u[1] * u[1] + u[2] * u[2]);
}

void sim_phantom(const sim_space *sp, const sim_head *h, sim_rng *r, uint8_t *tissue,
		 double *baseline, double *u)
{
	double s[4];
	int64_t i, j, k;
	size_t v = 0;
	int q;

	/* a smooth subject-specific intensity field: two gradients, a tilt and a radial term */
	for (q = 0; q < 4; q++)
		s[q] = 2.0 * sim_rng_uniform(r) - 1.0;
	for (k = 0; k < sp->nz; k++)
		for (j = 0; j < sp->ny; j++)
			for (i = 0; i < sp->nx; i++, v++) {
				double xyz[3], *uv = u + 3 * v, rad, f;

				voxel_world(sp, (double)i, (double)j, (double)k, xyz);
				sim_head_coords(h, xyz, uv);
				rad = norm3(uv);
				f = 0.5 * s[0] * uv[0] + 0.5 * s[1] * uv[1] + 0.3 * s[2] * uv[2] +
				    0.4 * s[3] * cos(M_PI * rad);
				if (rad <= 1.0) {
					tissue[v] = SIM_BRAIN_TISSUE;
					baseline[v] = 750.0 + 240.0 * tanh(f);
				} else if (rad <= SIM_SKULL_OUTER / SIM_BRAIN) {
					tissue[v] = SIM_SKULL;
					baseline[v] = 250.0 + 45.0 * tanh(f);
				} else {
					tissue[v] = SIM_BACKGROUND;
					baseline[v] = 0.0;
				}
			}
}

static const double parcel_centers[SIM_NPARCELS][3] = {
	{ -0.60, -0.10, -0.15 },  /* left, slightly posterior and inferior */
	{ 0.60, -0.10, -0.15 },   /* its mirror image */
	{ 0.30, 0.62, 0.20 },     /* right anterior */
	{ 0.00, -0.72, 0.10 },    /* posterior midline */
};

static int parcel_at(const double u[3])
{
	double best = SIM_PARCEL_RADIUS;
	int p, label = 0;

	if (norm3(u) > 1.0)
		return 0;
	for (p = 0; p < SIM_NPARCELS; p++) {
		double d[3] = { u[0] - parcel_centers[p][0], u[1] - parcel_centers[p][1],
				u[2] - parcel_centers[p][2] };
		double dist = norm3(d);

		if (dist <= best) {
			best = dist;
			label = p + 1;
		}
	}
	return label;
}

void sim_parcels(const sim_space *sp, const sim_head *h, int32_t *labels)
{
	int64_t i, j, k;
	size_t v = 0;

	for (k = 0; k < sp->nz; k++)
		for (j = 0; j < sp->ny; j++)
			for (i = 0; i < sp->nx; i++, v++) {
				double xyz[3], u[3];

				voxel_world(sp, (double)i, (double)j, (double)k, xyz);
				sim_head_coords(h, xyz, u);
				labels[v] = parcel_at(u);
			}
}

void sim_region_center(sim_rng *r, int p, double c[3])
{
	double d[3], n;
	int a;

	/* uniform in the ball by rejection from the cube */
	do {
		for (a = 0; a < 3; a++)
			d[a] = 2.0 * sim_rng_uniform(r) - 1.0;
		n = norm3(d);
	} while (n > 1.0);
	for (a = 0; a < 3; a++)
		c[a] = parcel_centers[p - 1][a] + SIM_REGION_SHIFT * d[a];
}

void sim_region_weights(size_t nvox, const int32_t *labels, const double *u,
			const double *centers, double *w)
{
	size_t v;

	for (v = 0; v < nvox; v++) {
		const double *c, *uv = u + 3 * v;
		double d[3], dist, x;

		if (labels[v] < 1 || labels[v] > SIM_NPARCELS) {
			w[v] = 0.0;
			continue;
		}
		c = centers + 3 * (labels[v] - 1);
		d[0] = uv[0] - c[0];
		d[1] = uv[1] - c[1];
		d[2] = uv[2] - c[2];
		dist = norm3(d);
		x = (dist - SIM_REGION_PLATEAU) / SIM_REGION_EDGE;
		w[v] = dist <= SIM_REGION_PLATEAU ? 1.0 : exp(-0.5 * x * x);
	}
}

static int cmp_desc(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;

	return (x < y) - (x > y);
}

double sim_top_mean(size_t nvox, const int32_t *labels, const double *w, int p,
		    long centi_percent, double *scratch, size_t *kout, size_t *nout)
{
	size_t n = 0, k, v;
	double sum = 0.0;

	for (v = 0; v < nvox; v++)
		if (labels[v] == p)
			scratch[n++] = w[v];
	/* k = ceil(percent * n / 100) in whole numbers, as METHODS.md section 7 asks */
	k = (size_t)(((unsigned long long)centi_percent * n + 9999) / 10000);
	if (k > n)
		k = n;
	if (kout)
		*kout = k;
	if (nout)
		*nout = n;
	if (k == 0)
		return 0.0;
	qsort(scratch, n, sizeof *scratch, cmp_desc);
	for (v = 0; v < k; v++)
		sum += scratch[v];
	return sum / (double)k;
}

double sim_nominal_effect(int p, int task, int cond)
{
	/* [parcel][task][condition], percent signal change of the baseline */
	static const double eff[SIM_NPARCELS][2][2] = {
		{ { 2.0, 1.0 }, { 1.0, 1.5 } },
		{ { 1.8, 0.9 }, { 0.8, 1.2 } },
		{ { 1.2, 0.4 }, { 1.5, 0.7 } },
		{ { 0.0, 0.0 }, { 0.0, 0.0 } },
	};

	if (p < 1 || p > SIM_NPARCELS || task < 0 || task > 1 || cond < 0 || cond > 1)
		return 0.0;
	return eff[p - 1][task][cond];
}

/* t rounded to 0.01 s so that the value written as text ("%.2f") reads back as the same double */
static double centi(double t)
{
	return round(t * 100.0) / 100.0;
}

size_t sim_block_events(sim_rng *r, int T, double tr, double block_s, int order,
			design_event *ev, size_t max)
{
	double end = T * tr, t = 8.0 + 0.1 * floor(40.0 * sim_rng_uniform(r));
	size_t n = 0;
	int c = order % 2;

	while (n < max && t + block_s + 16.0 <= end) {
		ev[n].onset = centi(t);
		ev[n].duration = block_s;
		ev[n].cond = c;
		n++;
		c = 1 - c;
		t += 2.0 * block_s + 0.1 * floor(20.0 * sim_rng_uniform(r));
	}
	return n;
}

size_t sim_event_events(sim_rng *r, int T, double tr, double dur, double isi_lo, double isi_hi,
			design_event *ev, size_t max)
{
	double end = T * tr, t = 6.0;
	size_t n = 0, i;

	while (n < max && t + dur + 16.0 <= end) {
		ev[n].onset = centi(t);
		ev[n].duration = dur;
		ev[n].cond = (int)(n % 2);
		n++;
		t += isi_lo + 0.1 * floor(10.0 * (isi_hi - isi_lo) * sim_rng_uniform(r));
	}
	/* shuffle the balanced condition list (Fisher-Yates) */
	for (i = n; i > 1; i--) {
		size_t j = (size_t)(sim_rng_uniform(r) * (double)i);
		int tmp = ev[i - 1].cond;

		ev[i - 1].cond = ev[j].cond;
		ev[j].cond = tmp;
	}
	return n;
}

void sim_motion(sim_rng *r, int T, double *m)
{
	static const double step[6] = { 0.006, 0.007, 0.009, 0.00015, 0.0001, 0.00015 };
	int j, k;

	for (j = 0; j < 6; j++) {
		double d = 0.0, pos = 0.0;

		for (k = 0; k < T; k++) {
			if (k > 0) {
				d = 0.8 * d + step[j] * sim_rng_normal(r);
				pos += d;
			}
			m[(size_t)j * T + k] = pos;
		}
	}
}

void sim_volume(const sim_run *run, int k, int T, const double *xc, const double *mc,
		const double *e, double *vol)
{
	double cq[2];
	size_t v;
	int q, c, j;

	for (q = 0; q < 2; q++)
		cq[q] = cos(M_PI * (q + 1) * (2.0 * k + 1.0) / (2.0 * T));
	for (v = 0; v < run->nvox; v++) {
		const double *u = run->u + 3 * v;
		double b = run->baseline[v], pct;

		if (b <= 0.0) {
			vol[v] = 0.0;
			continue;
		}
		pct = (run->drift[0] * cq[0] + run->drift[1] * cq[1]) * (1.0 + 0.3 * u[2]);
		for (c = 0; c < run->ncond; c++)
			pct += run->amp[(size_t)c * run->nvox + v] * xc[c];
		for (j = 0; j < 6; j++)
			pct += run->leak[j] * mc[j] * u[j % 3];
		vol[v] = b * (1.0 + pct / 100.0) + b * run->noise / 100.0 * e[v];
	}
}
