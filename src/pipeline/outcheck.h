/* outcheck.h - refuses output folders that would overwrite inputs or write outside themselves. */
#ifndef SR_OUTCHECK_H
#define SR_OUTCHECK_H

#include <stddef.h>

#include "../core/err.h"
#include "../io/study.h"

/*
 * SR_OK when st->out may be written: not "/", not the BIDS (or derivatives)
 * dataset root nor a folder above it (a folder inside it, such as
 * derivatives/<name>, is fine), and no OUT/sub-<label> of the subjects is a
 * symbolic link (writes would follow it elsewhere). Paths are compared after
 * resolving links; an out folder that does not exist yet is resolved through
 * its nearest existing parent. Errors name the folder (SR_ESTUDY).
 */
sr_status outcheck_safe(const study *st, char *const *subs, size_t nsub, sr_err *e);

#endif
