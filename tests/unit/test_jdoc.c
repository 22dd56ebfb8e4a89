/* test_jdoc.c - the JSON builder written atomically, the string-member collector (from a file and
 * from a document), deep copies, and read errors that name the file and line. */
#include <math.h>
#include <string.h>
#include <unistd.h>

#include "io/jdoc.h"
#include "testlib.h"
#include "tfiles.h"

/* The value of key among the n pairs, or NULL. */
static const char *lookup(char **keys, char **vals, size_t n, const char *key)
{
	for (size_t i = 0; i < n; i++)
		if (strcmp(keys[i], key) == 0)
			return vals[i];
	return NULL;
}

/* The content of path (up to 64 KiB, malloc'ed: the caller frees it), or NULL. */
static char *slurp(const char *path)
{
	FILE *f = fopen(path, "rb");
	char *buf;
	size_t n;

	if (!f)
		return NULL;
	buf = calloc(1, 65536);
	n = fread(buf, 1, 65535, f);
	buf[n] = '\0';
	fclose(f);
	return buf;
}

static void test_write(const char *dir)
{
	jdoc *d = jdoc_object(), *inner = jdoc_object(), *arr = jdoc_array();
	char path[4200], **k, **v, *text;
	size_t n;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	jdoc_set_str(d, "task", "tones");
	jdoc_set_str(d, "missing", NULL);
	jdoc_set_num(d, "tr", 2.5);
	jdoc_set_num(d, "bad", NAN);
	jdoc_set_int(d, "volumes", 180);
	jdoc_set_bool(d, "done", 1);
	jdoc_set_str(inner, "melody", "1");
	jdoc_set_str(inner, "scrambled", "-1");
	jdoc_set_num(inner, "weight", 0.5);
	jdoc_set(d, "contrast", inner);
	jdoc_push_str(arr, "familiar");
	jdoc_push_num(arr, INFINITY);
	jdoc_push_str(arr, NULL);
	jdoc_set(d, "list", arr);
	jdoc_set_str(d, "subject", "M\xc3\xbcller \"01\"");

	snprintf(path, sizeof path, "%s/out/sub-01/run.json", dir);
	CHECK(jdoc_write(d, path, &e) == SR_OK, "write into missing folders (%s)", e.msg);
	text = slurp(path);
	CHECK(text != NULL, "the file exists");
	if (!text)
		text = calloc(1, 1);
	CHECK(strstr(text, "\"task\": \"tones\"") != NULL, "a string member, indented style");
	CHECK(strstr(text, "\"missing\": null") && strstr(text, "\"bad\": null"),
	      "a NULL string and a NaN number are written as null");
	CHECK(strstr(text, "\"tr\": 2.5") && strstr(text, "\"volumes\": 180") && strstr(text, "\"done\": true"),
	      "number, integer and boolean members");
	CHECK(strstr(text, "\"familiar\",") && strstr(text, "null,") != NULL,
	      "array items, an infinite number as null");
	CHECK(text[0] == '{' && text[strlen(text) - 1] == '\n' && text[strlen(text) - 2] == '}',
	      "one object, ending in a newline");
	CHECK(strstr(text, "\"task\"") < strstr(text, "\"tr\"") &&
		      strstr(text, "\"tr\"") < strstr(text, "\"contrast\""),
	      "members in the order they were set");
	free(text);
	snprintf(path, sizeof path, "%s/out/sub-01", dir);
	{
		char probe[4300];
		snprintf(probe, sizeof probe, "ls -a '%s' | grep -q tmp", path);
		CHECK(system(probe) != 0, "no temporary left beside run.json");
	}

	/* read back: top level strings only (numbers, null, objects and arrays skipped) */
	snprintf(path, sizeof path, "%s/out/sub-01/run.json", dir);
	CHECK(jdoc_read_strings(path, NULL, &k, &v, &n, &e) == SR_OK, "read back (%s)", e.msg);
	CHECK(n == 2 && lookup(k, v, n, "task") && strcmp(lookup(k, v, n, "task"), "tones") == 0 &&
		      lookup(k, v, n, "subject") &&
		      strcmp(lookup(k, v, n, "subject"), "M\xc3\xbcller \"01\"") == 0,
	      "two string members at the top: task and subject (UTF-8 and quotes round trip); n = %zu", n);
	jdoc_strings_free(k, v, n);
	CHECK(jdoc_read_strings(path, "contrast", &k, &v, &n, &e) == SR_OK && n == 2 &&
		      strcmp(lookup(k, v, n, "melody"), "1") == 0 &&
		      strcmp(lookup(k, v, n, "scrambled"), "-1") == 0,
	      "the object under a key: its two strings, not the number (n = %zu)", n);
	jdoc_strings_free(k, v, n);
	CHECK(jdoc_read_strings(path, "nothere", &k, &v, &n, &e) == SR_OK && n == 0,
	      "an absent key: n = 0 and SR_OK");
	jdoc_strings_free(k, v, n);
	CHECK(jdoc_read_strings(path, "list", &k, &v, &n, &e) == SR_OK && n == 0,
	      "a key holding an array: n = 0");
	jdoc_strings_free(k, v, n);

	/* the collector on a document, and deep copies */
	jdoc *c = jdoc_copy(d);
	jdoc_set_str(d, "task", "memory");
	CHECK(jdoc_strings_of(c, &k, &v, &n) == 0 && n == 2 &&
		      strcmp(lookup(k, v, n, "task"), "tones") == 0,
	      "a copy does not follow later changes of the original");
	jdoc_strings_free(k, v, n);
	CHECK(jdoc_strings_of(d, &k, &v, &n) == 0 && strcmp(lookup(k, v, n, "task"), "memory") == 0,
	      "the original has the new value");
	jdoc_strings_free(k, v, n);
	jdoc *a2 = jdoc_array();
	CHECK(jdoc_strings_of(a2, &k, &v, &n) == -1 && n == 0 && k == NULL,
	      "an array is not an object: -1");
	jdoc_free(a2);
	jdoc_free(c);
	jdoc_free(d);
	jdoc_free(NULL);
}

static void test_errors(const char *dir)
{
	char path[4200], **k, **v, *p;
	size_t n = 7;
	sr_err e;
	jdoc *d;

	sr_err_init(&e, NULL, NULL);
	p = tf_write(dir, "broken.json", "{\n  \"task\": \"tones\",\n  \"run\": [1, 2\n}\n", 0);
	CHECK(jdoc_read_strings(p, NULL, &k, &v, &n, &e) == SR_EFORMAT && strstr(e.msg, p) &&
		      strstr(e.msg, "line 4"),
	      "broken JSON: SR_EFORMAT naming the file and line 4: %s", e.msg);
	CHECK(n == 0 && k == NULL && v == NULL, "and nothing is returned");
	free(p);
	p = tf_write(dir, "trailing.json", "{\"a\": \"b\"} x\n", 0);
	CHECK(jdoc_read_strings(p, NULL, &k, &v, &n, &e) == SR_EFORMAT && strstr(e.msg, "line 1"),
	      "text after the object is an error on line 1: %s", e.msg);
	free(p);
	p = tf_write(dir, "empty.json", "", 0);
	CHECK(jdoc_read_strings(p, NULL, &k, &v, &n, &e) == SR_EFORMAT && strstr(e.msg, p),
	      "an empty file is SR_EFORMAT naming it: %s", e.msg);
	free(p);
	snprintf(path, sizeof path, "%s/absent.json", dir);
	CHECK(jdoc_read_strings(path, NULL, &k, &v, &n, &e) == SR_EIO && strstr(e.msg, path),
	      "a missing file: SR_EIO naming it: %s", e.msg);

	/* writing below a regular file fails and names the place */
	free(tf_write(dir, "plain", "x", 0));
	snprintf(path, sizeof path, "%s/plain/run.json", dir);
	d = jdoc_object();
	jdoc_set_str(d, "task", "tones");
	CHECK(jdoc_write(d, path, &e) != SR_OK && strstr(e.msg, "plain"),
	      "a write below a regular file fails naming it: %s", e.msg);
	CHECK(access(path, F_OK) != 0, "and writes nothing");
	jdoc_free(d);
}

static void test_versions(void)
{
	char buf[128];

	jdoc_library_versions(buf, sizeof buf);
	CHECK(strncmp(buf, "jansson 2.", 10) == 0 && strstr(buf, "; zlib 1."),
	      "library versions: '%s'", buf);
}

int main(void)
{
	char *dir = tf_tmpdir();

	test_write(dir);
	test_errors(dir);
	test_versions();
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
