/* jdoc.c - JSON output through jansson, written atomically. */
#include "jdoc.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <zlib.h>

#include "../core/mem.h"
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

/* The string members of object o as parallel malloc'ed arrays (other members skipped). */
static void string_members(json_t *o, char ***keys, char ***vals, size_t *n)
{
	size_t cap = json_object_size(o) + 1;
	const char *k;
	json_t *v;

	*keys = xcalloc(cap, sizeof **keys);
	*vals = xcalloc(cap, sizeof **vals);
	json_object_foreach(o, k, v) {
		if (!json_is_string(v))
			continue;
		(*keys)[*n] = xstrdup(k);
		(*vals)[*n] = xstrdup(json_string_value(v));
		(*n)++;
	}
}

sr_status jdoc_read_strings(const char *path, const char *key, char ***keys, char ***vals,
			    size_t *n, sr_err *e)
{
	json_error_t je;
	json_t *root = json_load_file(path, 0, &je), *o;

	*keys = *vals = NULL;
	*n = 0;
	if (!root) {
		if (je.line <= 0)
			return sr_fail(e, SR_EIO, "%s: cannot read: %s", path, je.text);
		return sr_fail(e, SR_EFORMAT, "%s: line %d, column %d: %s", path, je.line, je.column,
			       je.text);
	}
	o = key ? json_object_get(root, key) : root;
	if (json_is_object(o))
		string_members(o, keys, vals, n);
	json_decref(root);
	return SR_OK;
}

sr_status jdoc_read_array_member(const char *path, const char *key, const char *member,
				 char ***vals, size_t *n, sr_err *e)
{
	json_error_t je;
	json_t *root = json_load_file(path, 0, &je), *a, *el;
	size_t i;

	*vals = NULL;
	*n = 0;
	if (!root) {
		if (je.line <= 0)
			return sr_fail(e, SR_EIO, "%s: cannot read: %s", path, je.text);
		return sr_fail(e, SR_EFORMAT, "%s: line %d, column %d: %s", path, je.line, je.column,
			       je.text);
	}
	a = json_is_object(root) ? json_object_get(root, key) : NULL;
	if (json_is_array(a)) {
		*vals = xcalloc(json_array_size(a) + 1, sizeof **vals);
		json_array_foreach(a, i, el) {
			json_t *v = json_is_object(el) ? json_object_get(el, member) : NULL;

			if (json_is_string(v))
				(*vals)[(*n)++] = xstrdup(json_string_value(v));
		}
	}
	json_decref(root);
	return SR_OK;
}

void jdoc_strings_free(char **keys, char **vals, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++) {
		free(keys[i]);
		free(vals[i]);
	}
	free(keys);
	free(vals);
}

int jdoc_strings_of(const jdoc *d, char ***keys, char ***vals, size_t *n)
{
	json_t *o = J(d);

	*keys = *vals = NULL;
	*n = 0;
	if (!json_is_object(o))
		return -1;
	string_members(o, keys, vals, n);
	return 0;
}

jdoc *jdoc_copy(const jdoc *d)
{
	return (jdoc *)json_deep_copy(J(d));
}
