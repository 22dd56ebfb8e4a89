/* subunit.c - one subject's outputs as a unit: staged in a folder of their own, then swapped in. */
#define _GNU_SOURCE   /* renameat2, nftw */
#include "subunit.h"

#include <errno.h>
#include <fcntl.h>
#include <ftw.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fresh.h"
#include "outlock.h"
#include "studyset.h"

static int rm_entry(const char *p, const struct stat *sb, int flag, struct FTW *ftw)
{
	(void)sb;
	(void)flag;
	(void)ftw;
	return remove(p) != 0 && errno != ENOENT;
}

void subunit_remove_tree(const char *dir)
{
	nftw(dir, rm_entry, 16, FTW_DEPTH | FTW_PHYS);
}

/* Puts the complete staging folder in place of final; the earlier outputs are removed after. */
static sr_status swap_in(const char *stage, const char *final, const char *label, sr_err *e)
{
	char old[4096];
	struct stat sb;

	if (lstat(final, &sb) != 0) {
		if (rename(stage, final) != 0)
			return sr_fail(e, SR_EIO, "%s: cannot rename the finished outputs into place: %s",
				       final, strerror(errno));
		return SR_OK;
	}
#ifdef RENAME_EXCHANGE
	if (renameat2(AT_FDCWD, stage, AT_FDCWD, final, RENAME_EXCHANGE) == 0) {
		subunit_remove_tree(stage);   /* now the earlier outputs */
		return SR_OK;
	}
#endif
	/* no atomic exchange here (e.g. NFS): the earlier outputs step aside for a moment */
	snprintf(old, sizeof old, "%s.old", stage);
	subunit_remove_tree(old);
	if (rename(final, old) != 0)
		return sr_fail(e, SR_EIO, "%s: cannot move the earlier outputs aside: %s", final,
			       strerror(errno));
	if (rename(stage, final) != 0) {
		int err = errno;

		rename(old, final);
		return sr_fail(e, SR_EIO, "sub-%s: cannot rename the finished outputs into place: %s",
			       label, strerror(err));
	}
	subunit_remove_tree(old);
	return SR_OK;
}

/*
 * subject_analyze into a staging folder OUT/.sub-<label>.tmp.PID, then swaps
 * it with OUT/sub-<label> (one atomic exchange where the file system has it,
 * else two renames) and removes the earlier outputs: until the new outputs
 * are complete the earlier complete ones stay in place, and a failed redo
 * leaves them as they were. The caller holds the subject's lock (outlock.h).
 */
static sr_status subunit_analyze(const subject_ctx *ctx, const char *label, subject_result *res,
			  sr_err *e)
{
	char stage[4096], final[4096];
	subject_ctx c = *ctx;
	sr_status rc;

	if (strlen(ctx->st->out) + strlen(label) + 48 > sizeof stage)
		return sr_fail(e, SR_EINVAL, "%s: the output folder name is too long", ctx->st->out);
	snprintf(final, sizeof final, "%s/sub-%s", ctx->st->out, label);
	snprintf(stage, sizeof stage, "%s/.sub-%s.tmp.%ld", ctx->st->out, label, (long)getpid());
	subunit_remove_tree(stage);
	if (mkdir(stage, 0777) != 0)
		return sr_fail(e, SR_EIO, "%s: cannot create the staging folder: %s", stage, strerror(errno));
	c.dir = stage;
	/* fingerprints before reading: an input edited during the analysis makes the record stale */
	c.fingerprints = fresh_record(ctx->st, label);
	rc = subject_analyze(&c, label, res, e);
	jdoc_free((jdoc *)c.fingerprints);
	if (!rc)
		rc = swap_in(stage, final, label, e);
	subunit_remove_tree(stage);
	return rc;
}

sr_status subunit_run(const subject_ctx *ctx, const char *label, int force, int wait,
		      subject_result *res, int *skipped, sr_err *e)
{
	char name[512], prefix[512];
	outlock l;
	sr_status rc;

	*skipped = 0;
	memset(res, 0, sizeof *res);
	snprintf(name, sizeof name, "sub-%s", label);
	rc = outlock_take(&l, ctx->st->out, name, wait, "splitroi analyze", e);
	if (rc)
		return rc;
	snprintf(prefix, sizeof prefix, ".sub-%s.tmp.", label);
	outlock_clean_stale(ctx->st->out, prefix, NULL);
	if (!force && studyset_complete(ctx->st, label)) {
		*skipped = 1;
		outlock_release(&l);
		return SR_OK;
	}
	rc = subunit_analyze(ctx, label, res, e);
	outlock_release(&l);
	return rc;
}
