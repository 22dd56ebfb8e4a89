/* jsonout.c - flat JSON objects through jansson, written atomically. */
#include "jsonout.h"

#include <jansson.h>
#include <math.h>

#include "afile.h"

sr_status jsonout_write_flat(const char *path, const jsonout_field *f, size_t n, sr_err *e)
{
	json_t *obj = json_object();
	sr_status st = SR_OK;
	afile a;
	size_t i;

	if (!obj)
		return sr_fail(e, SR_ENOMEM, "%s: out of memory building JSON", path);
	for (i = 0; i < n; i++) {
		json_t *v;

		if (f[i].str) {
			v = json_string(f[i].str);
		} else {
			if (!isfinite(f[i].num)) {
				st = sr_fail(e, SR_EINVAL, "%s: value of '%s' is not a finite number",
					     path, f[i].key);
				goto out;
			}
			v = json_real(f[i].num);
		}
		if (!v || json_object_set_new(obj, f[i].key, v) != 0) {
			st = sr_fail(e, SR_EFORMAT, "%s: cannot store '%s' (not UTF-8?)", path, f[i].key);
			goto out;
		}
	}
	st = afile_open(&a, path, e);
	if (st != SR_OK)
		goto out;
	if (json_dumpf(obj, a.f, JSON_INDENT(2) | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(12)) != 0 ||
	    fputc('\n', a.f) == EOF) {
		afile_abort(&a);
		st = sr_fail(e, SR_EIO, "%s: write failed", path);
		goto out;
	}
	st = afile_commit(&a, e);
out:
	json_decref(obj);
	return st;
}
