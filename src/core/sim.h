/* sim.h - the simulator's numerics: seeded random numbers, head phantom, parcels, active regions, noise, events. */
#ifndef SR_SIM_H
#define SR_SIM_H

#include <stddef.h>
#include <stdint.h>

#include "design.h"

/*
 * Random numbers. xoshiro256** 1.0 (Blackman and Vigna, "Scrambled linear
 * pseudorandom number generators", ACM TOMS 2021), its state filled by
 * splitmix64 (Steele, Lea and Flood, OOPSLA 2014) as the authors advise.
 * A generator is plain data owned by the caller; give each thread its own.
 */
typedef struct sim_rng {
	uint64_t s[4];
	double spare;      /* second Box-Muller deviate, valid when has_spare */
	int has_spare;
} sim_rng;

/* One splitmix64 step: advances *state and returns the mixed output. */
uint64_t sim_splitmix64(uint64_t *state);

/*
 * Seeds r for (seed, stream): distinct streams of one seed are unrelated
 * sequences, so a subject's or run's draws do not depend on how many other
 * subjects or runs were made. The state is splitmix64 outputs started from
 * splitmix64(seed) xor a multiple of the stream number.
 */
void sim_rng_seed(sim_rng *r, uint64_t seed, uint64_t stream);
/* Seeds r with the state s[0..3] as given (for reference tests); all zero becomes s[0] = 1. */
void sim_rng_set_state(sim_rng *r, const uint64_t s[4]);
/* The next 64-bit output of xoshiro256**. */
uint64_t sim_rng_next(sim_rng *r);
/* Uniform on [0, 1) with 53 random bits. */
double sim_rng_uniform(sim_rng *r);
/* Standard normal deviate, Box-Muller transform (Box and Muller 1958), pairs cached. */
double sim_rng_normal(sim_rng *r);

/*
 * AR(1) noise of unit variance, one independent process per element:
 * e_0 ~ N(0, 1) (the stationary law), e_k = rho e_(k-1) + sqrt(1 - rho^2) z_k.
 * init draws e_0 for n processes; step advances all n by one sample.
 * |rho| < 1 is the caller's to check.
 */
void sim_ar1_init(sim_rng *r, size_t n, double *state);
void sim_ar1_step(sim_rng *r, double rho, size_t n, double *state);
/* One AR(1) series of length T through the two calls above (the per-voxel law, for tests). */
void sim_ar1_series(sim_rng *r, double rho, size_t T, double *out);

/* A voxel grid in world space: dims and the voxel-to-world affine (mm). */
typedef struct sim_space {
	int64_t nx, ny, nz;
	double affine[3][4];
} sim_space;

/*
 * The head: an ellipsoid brain inside a skull-like ellipsoidal shell, zero
 * outside. Sized from the data grid's field of view and centred in it, so that
 * the same world point gets the same answer on any grid (parcels written on a
 * finer grid agree with the data's grid).
 */
typedef struct sim_head {
	double center[3];  /* mm */
	double brain[3];   /* brain semi-axes, mm */
} sim_head;

/*
 * Brain radius and the shell's outer radius as fractions of the field of
 * view's half-width per axis (the shell lies between the two). The grid's axes
 * are taken as aligned with the world's, as nii_grid_make makes them.
 */
#define SIM_BRAIN 0.80
#define SIM_SKULL_OUTER 0.92

/* The head that fits the field of view of sp. */
void sim_head_for(const sim_space *sp, sim_head *h);

/* Tissue classes of the phantom. */
enum { SIM_BACKGROUND = 0, SIM_SKULL = 1, SIM_BRAIN_TISSUE = 2 };

/*
 * The phantom of one subject on sp: tissue class per voxel and baseline
 * intensity (0 in background, 200-300 in the shell, 500-1000 in the brain,
 * varying smoothly with a subject-specific field drawn from r). Also the
 * normalized coordinates u (3 per voxel, x fastest in NIfTI order) that later
 * steps use. Arrays have nx*ny*nz (u: 3 times that) elements.
 */
void sim_phantom(const sim_space *sp, const sim_head *h, sim_rng *r, uint8_t *tissue,
		 double *baseline, double *u);

/* Number of parcels of the phantom; labels are 1..SIM_NPARCELS. */
#define SIM_NPARCELS 4
/* Parcel radius in normalized brain units. */
#define SIM_PARCEL_RADIUS 0.42

/*
 * Parcel labels on sp: a brain voxel gets the parcel whose centre is nearest
 * (normalized units) if within SIM_PARCEL_RADIUS, else 0. Fixed geometry, no
 * randomness: every subject and seed shares the parcels.
 */
void sim_parcels(const sim_space *sp, const sim_head *h, int32_t *labels);

/* Plateau radius and edge width of an active region, normalized brain units. */
#define SIM_REGION_PLATEAU 0.30
#define SIM_REGION_EDGE 0.05
/* Largest displacement of a subject's region from its parcel's centre. */
#define SIM_REGION_SHIFT 0.08

/* A subject's region centre in parcel p: the parcel centre displaced uniformly within SIM_REGION_SHIFT. */
void sim_region_center(sim_rng *r, int p, double c[3]);

/*
 * Region weights: for a voxel of parcel p with normalized coordinates u, at
 * distance d from the region centre c_p, w = 1 for d <= plateau, else
 * exp(-(d - plateau)^2 / (2 edge^2)) (a flat-topped Gaussian blob, so the
 * top of the region is a set of voxels of weight exactly 1); 0 outside every
 * parcel. centers holds SIM_NPARCELS centres (3 each).
 */
void sim_region_weights(size_t nvox, const int32_t *labels, const double *u,
			const double *centers, double *w);

/*
 * The expected fROI mean weight: the mean of the k = ceil(percent * n / 100)
 * largest weights among the n voxels labelled p (0 when n = 0). percent is
 * given in hundredths of a percent (1000 = 10%) so that k is exact. scratch
 * has room for nvox doubles. Also sets *k and *n when not NULL.
 */
double sim_top_mean(size_t nvox, const int32_t *labels, const double *w, int p,
		    long centi_percent, double *scratch, size_t *k, size_t *n);

/*
 * True effects in percent signal change of the baseline for parcel p (1-based),
 * task kind (0 = localizer, 1 = measured task) and condition 0 or 1 (the
 * conditions in sorted order): the nominal value before the subject factor.
 */
double sim_nominal_effect(int p, int task, int cond);

/*
 * Block design of a localizer run: blocks of block_s seconds of the two
 * conditions alternating with rest of the same length, the first after a rest
 * of 8 s plus a jitter in [0, 4) s (0.1 s steps), the order counterbalanced by
 * `order` (even: condition 0 first). Blocks stop so that 16 s of rest remain
 * at the end. Returns the number of events written to ev (at most max).
 */
size_t sim_block_events(sim_rng *r, int T, double tr, double block_s, int order,
			design_event *ev, size_t max);

/*
 * Event design of a measured-task run: events of dur seconds, conditions in a
 * shuffled balanced order, onset-to-onset intervals uniform in [isi_lo, isi_hi)
 * (0.1 s steps), the first after 6 s, the last ending 16 s before the run ends.
 */
size_t sim_event_events(sim_rng *r, int T, double tr, double dur, double isi_lo, double isi_hi,
			design_event *ev, size_t max);

/*
 * Motion-like confounds: six smooth random walks (T x 6, column-major):
 * translations x, y, z in mm, then rotations about x, y, z in radians; each
 * increment is an AR(1) (rho 0.8) of small steps, the walk starts at 0.
 */
void sim_motion(sim_rng *r, int T, double *m);

/* Everything one volume needs, fixed for a run. Arrays are borrowed. */
typedef struct sim_run {
	size_t nvox;
	const double *baseline;  /* per voxel; 0 = background (written 0, no noise) */
	const double *u;         /* normalized coordinates, 3 per voxel */
	const double *amp;       /* ncond x nvox: w(v) * beta_c(v) in percent */
	int ncond;
	double noise;            /* noise SD, percent of baseline */
	double rho;              /* AR(1) coefficient of the noise */
	double drift[2];         /* amplitudes of cosine drifts q = 1, 2, percent */
	double leak[6];          /* percent signal per mm (translations) or per radian (rotations), times u */
} sim_run;

/*
 * Volume k of T: y = b (1 + (sum_c amp_c xc_c + drift + leak) / 100) + b noise / 100 e,
 * with xc the run-centred regressor values at volume k (ncond values), mc the
 * run-centred motion values (6), drift = sum_q drift_q cos(pi q (2k+1) / (2T))
 * scaled by (1 + 0.3 u_z), leak = sum_j leak_j mc_j u_(j mod 3), and e the
 * AR(1) state (advanced by the caller). Centring makes the noise-free run mean
 * equal the baseline, so amp is exactly the percent-of-run-mean beta that a
 * GLM with a constant estimates.
 */
void sim_volume(const sim_run *run, int k, int T, const double *xc, const double *mc,
		const double *e, double *vol);

#endif
