/* err.h - status codes and the caller-owned error record shared by every layer. */
#ifndef SR_ERR_H
#define SR_ERR_H

#include <stddef.h>

/* Status returned by every library function that can fail. */
typedef enum sr_status {
	SR_OK = 0,
	SR_EIO,        /* file missing, unreadable, short read, failed write */
	SR_EFORMAT,    /* malformed content: bad header, bad table cell */
	SR_EDIM,       /* sizes disagree, or overflow when multiplied */
	SR_ESINGULAR,  /* a matrix could not be factorized */
	SR_ENOMEM,     /* an allocation failed (normally fatal in xmalloc) */
	SR_EINVAL,     /* a bad argument or option value */
	SR_ESTUDY,     /* the study is inconsistent (unknown condition, ...) */
	SR_EREDO       /* a shortcut's guess did not hold: the caller does it again the plain way */
} sr_status;

/* Receives a warning (lower-case text, no final full stop). */
typedef void (*sr_warn_fn)(void *ctx, const char *msg);

/*
 * The error record: filled by the failing function, owned by the caller.
 * `warn` is optional; library code reports warnings through sr_warnf(),
 * which does nothing when it is NULL. Not shared between threads: give each
 * thread its own record (the warn callback itself must then be thread safe).
 */
typedef struct sr_err {
	sr_status code;
	char msg[2048];
	sr_warn_fn warn;
	void *warn_ctx;
} sr_err;

/* Sets code and message and returns code, so `return sr_fail(e, ...)` reads naturally. */
sr_status sr_fail(sr_err *e, sr_status code, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));

/* Sends a formatted warning to e->warn when set. */
void sr_warnf(sr_err *e, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

/* Initialises an empty record with an optional warning sink. */
void sr_err_init(sr_err *e, sr_warn_fn warn, void *ctx);


#endif
