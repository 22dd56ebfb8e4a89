/* outcheck.c - refuses output folders that would overwrite inputs or write outside themselves. */
#include "outcheck.h"

#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/mem.h"

/* The resolved absolute path of p, which need not exist (its nearest existing parent is resolved). */
static char *resolve(const char *p)
{
	char *copy = xstrdup(p), *base = NULL, *out;
	const char *rest = "";
	size_t len;

	for (;;) {
		char *cut;

		if ((base = realpath(*copy ? copy : "/", NULL)) != NULL) {
			rest = p + strlen(copy);
			break;
		}
		cut = strrchr(copy, '/');
		if (!cut) {
			/* nothing of a relative path exists: all of it follows "." */
			base = realpath(".", NULL);
			rest = p;
			break;
		}
		*cut = '\0';
	}
	if (!base)
		base = xstrdup(p);
	while (*rest == '/')
		rest++;
	len = strlen(base) + strlen(rest) + 2;
	out = xmalloc(len);
	snprintf(out, len, "%s%s%s", base, *rest && strcmp(base, "/") ? "/" : "", rest);
	free(base);
	free(copy);
	len = strlen(out);
	while (len > 1 && out[len - 1] == '/')
		out[--len] = '\0';
	return out;
}

/* 1 when a is b or a folder above b. */
static int at_or_above(const char *a, const char *b)
{
	size_t n = strlen(a);

	if (strcmp(a, "/") == 0)
		return 1;
	return strncmp(a, b, n) == 0 && (b[n] == '\0' || b[n] == '/');
}

sr_status outcheck_safe(const study *st, char *const *subs, size_t nsub, sr_err *e)
{
	char *out = resolve(st->out);
	const char *roots[1] = { st->bids };
	sr_status rc = SR_OK;
	size_t i;

	if (strcmp(out, "/") == 0) {
		rc = sr_fail(e, SR_ESTUDY, "%s: out is the root folder '/'; give a folder of its own", st->out);
		goto done;
	}
	for (i = 0; i < sizeof roots / sizeof roots[0]; i++) {
		char *r;

		if (!roots[i])
			continue;
		r = resolve(roots[i]);
		if (at_or_above(out, r)) {
			rc = sr_fail(e, SR_ESTUDY,
				     "%s: out is the dataset %s%s; give a folder of its own (inside the dataset, derivatives/<name> is fine)",
				     st->out, roots[i], strcmp(out, r) ? " or a folder above it" : " itself");
			free(r);
			goto done;
		}
		free(r);
	}
	for (i = 0; i < nsub; i++) {
		char p[PATH_MAX + 64];
		struct stat sb;

		snprintf(p, sizeof p, "%s/sub-%s", st->out, subs[i]);
		if (lstat(p, &sb) == 0 && S_ISLNK(sb.st_mode)) {
			rc = sr_fail(e, SR_ESTUDY,
				     "%s: is a symbolic link; splitroi writes a subject's outputs in a folder of its own (remove the link)",
				     p);
			goto done;
		}
	}
done:
	free(out);
	return rc;
}
