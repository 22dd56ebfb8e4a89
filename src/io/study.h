/* study.h - the study file (INI, INTERFACE.md): every key read, typed and checked. */
#ifndef SR_STUDY_H
#define SR_STUDY_H

#include <stddef.h>

#include "../core/expr.h"
#include "../core/err.h"
#include "bids.h"

enum study_split { SPLIT_ODD_EVEN, SPLIT_LEAVE_ONE_OUT };
enum study_select { SELECT_TOP_PERCENT, SELECT_TOP_VOXELS, SELECT_MIN_T };

/* A task measured in the fROIs ([measure NAME] section). */
typedef struct study_measure {
	char *name;        /* section name */
	char *task;
	expr *effects;
	size_t neffects;
	char **localizers; /* labels (study_localizer.label) of the localizers whose fROIs it uses: every one by default */
	size_t nlocalizers;
} study_measure;

/*
 * One localizer with its parcels: a [localizer NAME] and [parcels NAME] pair,
 * or the unnamed [localizer] and [parcels] (INTERFACE.md "Several localizers").
 */
typedef struct study_localizer {
	char *name;                       /* NAME of [localizer NAME]; NULL for the unnamed form */
	char *label;                      /* the tables' localizer column: name, else the task label */
	size_t line;                      /* line of its [localizer] header (0 when absent) */
	char *task;
	expr contrast;
	enum study_split split;
	expr *effects;
	size_t neffects;
	char *parcels, *parcel_names;     /* names NULL when empty */
	enum study_select select;
	char *top_percent_text;
	double select_value;
	int resample_parcels;
} study_localizer;

/* Everything the study file says, paths made absolute (relative to the file's folder). */
typedef struct study {
	char *path;        /* the study file */
	char *text;        /* its full content (for the run record) */
	char *bids, *out, *mask;          /* mask NULL when empty */
	int mask_auto;                    /* mask = auto: the intersection of each subject's runs' desc-brain_mask */
	char *derivatives;                /* BIDS Derivatives dataset of the preprocessed BOLD, or NULL */
	char *space, *desc, *res;         /* its entity filters, NULL when not given (desc: preproc) */
	char **subjects;   /* NULL = all */
	size_t nsubjects;
	/* every localizer in file order (nlocs >= 1 after a good load); the flat
	   [localizer]/[parcels] fields below alias locs[0] (study_use_localizer
	   makes a view of another one) */
	study_localizer *locs;
	size_t nlocs;
	int named_localizers;             /* 1: [localizer NAME] sections; 0: the unnamed form */
	/* [localizer] */
	char *loc_task;
	expr contrast;
	enum study_split split;
	expr *loc_effects;
	size_t nloc_effects;
	char *condition_column;           /* default trial_type */
	/* [parcels] */
	char *parcels, *parcel_names;     /* names NULL when empty */
	enum study_select select;
	char *top_percent_text;           /* exact decimal text, e.g. "10" or "12.5" */
	double select_value;              /* top_percent p, top_voxels N, or min_t t0 */
	int resample_parcels;             /* nearest-neighbour resampling onto the data grid */
	/* [model] */
	int ar1;                          /* 2 AR(1) with bias-adjusted rho (default), 1 AR(1), 0 OLS */
	double drift_cutoff;              /* seconds; 0 = none */
	double volume_time;
	double smoothing_fwhm;            /* mm, METHODS.md section 2b; 0 = none */
	double timecourse_window;         /* seconds after onset of the response time courses (FIR) */
	char **confounds;
	size_t nconfounds;
	char *confounds_suffix;
	char **motion;                    /* six rigid-body columns for QC, NULL when not given */
	size_t nmotion;
	int motion_deg;                   /* rotations in degrees (motion_units = mm_deg), else radians */
	double fd_threshold;              /* framewise displacement limit, mm */
	int skip_volumes;                 /* initial volumes dropped from every run (0) */
	double censor_fd;                 /* censor volumes whose framewise_displacement exceeds it, mm; 0 = off */
	/* [measure ...] */
	study_measure *measures;
	size_t nmeasures;
	/* where each key was set, for messages about values (study_line) */
	struct study_key *keys;
	size_t nkeys;
} study;

/* One key as found in the file. */
typedef struct study_key {
	char *section;     /* "study", "measure memory", ... */
	char *key;
	size_t line;
} study_key;

/*
 * A list of problems, each a full message naming file and line; cap is the
 * allocated length. A zeroed list ({ 0 }) is empty; study_problems_release
 * frees the messages and zeroes it again.
 */
typedef struct study_problems {
	char **msg;
	size_t n, cap;
} study_problems;

/*
 * Appends one message to p; when line > 0 it reads "FILE: line N: ...",
 * else "FILE: ...". file may be NULL for a message of its own.
 */
void study_problems_add(study_problems *p, const char *file, size_t line, const char *fmt, ...)
	__attribute__((format(printf, 4, 5)));

/* The line where section/key was set, or 0 when the file does not set it (a default). */
size_t study_line(const study *s, const char *section, const char *key);

/*
 * The value of key in [section] of a study file's text, read exactly as
 * study_load reads it (comments, quotes, indented continuation lines);
 * malloc'ed, NULL when absent or empty. For readers of a recorded study text
 * (the report); problems in the text are not reported here.
 */
char *study_text_get(const char *text, const char *section, const char *key);

/*
 * Loads and checks the study file: unknown sections and keys (with the nearest
 * valid one), types and ranges, files that must exist. Every problem found is
 * appended to probs (all of them, not only the first, in line order; probs
 * starts zeroed or holding earlier problems); returns SR_OK only when there
 * are none (SR_EIO when the file cannot be read, else SR_ESTUDY). On SR_OK
 * the caller owns s (study_release); otherwise s is left empty.
 *
 * Syntax beyond INTERFACE.md: `;` or `#` at the start of a line, or after
 * whitespace outside double quotes, starts a comment; a long value may go on
 * indented continuation lines (joined with one space); a key may be set once.
 * Defaults: subjects all, split odd-even, effects = the contrast's conditions
 * then the contrast, condition_column trial_type, top_percent 10, resample
 * no, autocorrelation ar1-adjusted, drift_cutoff 128, volume_time 0.5, smoothing_fwhm none,
 * timecourse_window 20,
 * confounds_suffix _confounds.tsv, motion_units mm_rad, fd_threshold 0.5.
 * top_percent_text is NULL unless the selection is top_percent.
 */
sr_status study_load(const char *path, study *s, study_problems *probs);
void study_release(study *s);

/*
 * A view of s with localizer i in the flat [localizer]/[parcels] fields and
 * only the measures that use it (strings borrowed from s). Release it with
 * study_view_release (it frees the view's measure array only).
 */
void study_use_localizer(const study *s, size_t i, study *view);
void study_view_release(study *view);
/* The localizer column of localizer i: its name, else its task label. */
const char *study_loc_label(const study *s, size_t i);

/* Flags for study_load_flags. */
enum {
	STUDY_PARCELS_OPTIONAL = 1   /* [parcels] image may be absent or not exist yet (making parcels) */
};
/* study_load with flags (0 = study_load). */
sr_status study_load_flags(const char *path, study *s, study_problems *probs, unsigned flags);

/* The runs of one subject and task by the study's layout (bids_find_runs). */
sr_status study_runs(const study *s, const char *subject, const char *task, bids_run **runs,
		     size_t *n, sr_err *e);

/* 1 when a path holds the {subject} placeholder (per-subject parcels). */
int study_per_subject(const char *path);
/* 1 when the study's mask depends on the subject (mask = auto, or {subject} in its path). */
int study_mask_per_subject(const study *st);
/* The path with every {subject} replaced by label; xmalloc'ed, caller frees. */
char *study_subject_path(const char *path, const char *label);
void study_problems_release(study_problems *p);

#endif
