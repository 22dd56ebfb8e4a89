/* jdoc.c - JSON output through jansson, written atomically. */
#include "jdoc.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <zlib.h>

#include "afile.h"

struct jdoc;

static json_t *J(const jdoc *d)
{
	return (json_t *)d;
}

jdoc *jdoc_object(void)
{
	return (jdoc *)json_object();
}

jdoc *jdoc_array(void)
{
	return (jdoc *)json_array();
}

void jdoc_set_str(jdoc *o, const char *key, const char *v)
{
	json_object_set_new(J(o), key, v ? json_string(v) : json_null());
}

void jdoc_set_num(jdoc *o, const char *key, double v)
{
	json_object_set_new(J(o), key, isfinite(v) ? json_real(v) : json_null());
}

void jdoc_set_int(jdoc *o, const char *key, long long v)
{
	json_object_set_new(J(o), key, json_integer(v));
}

void jdoc_set_bool(jdoc *o, const char *key, int v)
{
	json_object_set_new(J(o), key, json_boolean(v));
}

void jdoc_set(jdoc *o, const char *key, jdoc *child)
{
	json_object_set_new(J(o), key, J(child));
}

void jdoc_push_str(jdoc *a, const char *v)
{
	json_array_append_new(J(a), v ? json_string(v) : json_null());
}

void jdoc_push_num(jdoc *a, double v)
{
	json_array_append_new(J(a), isfinite(v) ? json_real(v) : json_null());
}

void jdoc_push(jdoc *a, jdoc *child)
{
	json_array_append_new(J(a), J(child));
}

sr_status jdoc_write(const jdoc *d, const char *path, sr_err *e)
{
	afile a;
	sr_status st;

	st = afile_open(&a, path, e);
	if (st)
		return st;
	if (json_dumpf(J(d), a.f, JSON_INDENT(2) | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(12)) != 0 ||
	    fputc('\n', a.f) == EOF) {
		afile_abort(&a);
		return sr_fail(e, SR_EIO, "%s: could not write JSON", path);
	}
	return afile_commit(&a, e);
}

void jdoc_free(jdoc *d)
{
	if (d)
		json_decref(J(d));
}

void jdoc_library_versions(char *buf, size_t n)
{
	snprintf(buf, n, "jansson %s; zlib %s", JANSSON_VERSION, zlibVersion());
}
