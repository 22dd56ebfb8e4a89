/* jdoc.h - a small JSON document builder over jansson, for run records and sidecars. */
#ifndef SR_JDOC_H
#define SR_JDOC_H

#include <stddef.h>

#include "../core/err.h"

/* An opaque JSON value (object or array). Owned by whoever created it unless handed to a parent. */
typedef struct jdoc jdoc;

jdoc *jdoc_object(void);
jdoc *jdoc_array(void);
/* Setters on an object; the child passed to jdoc_set is owned by the parent afterwards. */
void jdoc_set_str(jdoc *o, const char *key, const char *v);   /* NULL writes null */
void jdoc_set_num(jdoc *o, const char *key, double v);        /* non-finite writes null */
void jdoc_set_int(jdoc *o, const char *key, long long v);
void jdoc_set_bool(jdoc *o, const char *key, int v);
void jdoc_set(jdoc *o, const char *key, jdoc *child);
/* Appenders on an array. */
void jdoc_push_str(jdoc *a, const char *v);
void jdoc_push_num(jdoc *a, double v);
void jdoc_push(jdoc *a, jdoc *child);
/* Writes the document, indented, atomically. */
sr_status jdoc_write(const jdoc *d, const char *path, sr_err *e);
void jdoc_free(jdoc *d);
/*
 * Reads the object under key (a top-level key of the JSON object in path, or
 * the top level itself when key is NULL) as string -> string pairs: *keys and
 * *vals (n each, xmalloc'ed; free with jdoc_strings_free). Non-string values
 * are skipped. Errors: unreadable or not JSON (SR_EIO/SR_EFORMAT, naming the
 * file); an absent key gives n = 0 and SR_OK.
 */
sr_status jdoc_read_strings(const char *path, const char *key, char ***keys, char ***vals,
			    size_t *n, sr_err *e);
void jdoc_strings_free(char **keys, char **vals, size_t n);
/*
 * The string member `member` of every object in the top-level array `key` of
 * the JSON object in path (such as every URL of SourceDatasets), in order:
 * *vals (n, xmalloc'ed; free with strv_free_array, core/strv.h). Errors as jdoc_read_strings; a missing key gives n = 0.
 */
sr_status jdoc_read_array_member(const char *path, const char *key, const char *member,
				 char ***vals, size_t *n, sr_err *e);
/* The string members of object o, as jdoc_read_strings gives them; 0 on success. */
int jdoc_strings_of(const jdoc *o, char ***keys, char ***vals, size_t *n);
/* A deep copy of d (the caller owns it). */
jdoc *jdoc_copy(const jdoc *d);
/* Versions of the libraries behind the io layer, as "name version; ..." text, into buf. */
void jdoc_library_versions(char *buf, size_t n);

#endif
