/* study.c - reading the study file through inih and checking every key, collecting all problems. */
#include "study.h"

#include <ctype.h>
#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <ini.h>

#include "../core/mem.h"
#include "../core/strv.h"
#include "../core/text.h"
#include "readall.h"

/* The largest study file we read: anything bigger is not a study file. */
#define STUDY_MAX_BYTES (1u << 20)
/* The current section after a malformed header: no real section has this name. */
#define BAD_SECTION "\x01"

/* ---- problem lists ---- */

void study_problems_add(study_problems *p, const char *file, size_t line, const char *fmt, ...)
{
	char body[1536], full[2048];
	va_list ap;

	va_start(ap, fmt);
	vsnprintf(body, sizeof body, fmt, ap);
	va_end(ap);
	if (file && line > 0)
		snprintf(full, sizeof full, "%s: line %zu: %s", file, line, body);
	else if (file)
		snprintf(full, sizeof full, "%s: %s", file, body);
	else
		snprintf(full, sizeof full, "%s", body);
	XGROW(p->msg, p->n, p->cap);
	p->msg[p->n++] = xstrdup(full);
}

void study_problems_release(study_problems *p)
{
	size_t i;

	if (!p)
		return;
	for (i = 0; i < p->n; i++)
		free(p->msg[i]);
	free(p->msg);
	memset(p, 0, sizeof *p);
}

/* ---- the loader's state ---- */

struct entry {
	char *section;
	char *key;
	char *value;
	size_t line;
	int used;
};

struct section {
	char *name;
	size_t line;
};

struct problem {
	size_t line;   /* 0 = not tied to a line: sorted last */
	size_t seq;    /* keeps the order of problems on one line */
	char *msg;
};

enum line_kind { AFTER_NOTHING, AFTER_KEY, AFTER_DROPPED_KEY };

struct loader {
	const char *path;      /* as given, for messages */
	unsigned flags;        /* STUDY_* */
	char *dir;             /* absolute folder of the file */
	const char *text;
	size_t len, pos;
	size_t line;           /* line last handed to inih */
	char *work;            /* the processed line */
	size_t workcap;
	char cursec[256];
	enum line_kind after;
	int continuation;      /* the line handed out continues the previous key */
	struct entry *ent;
	size_t nent, capent;
	struct section *sec;
	size_t nsec, capsec;
	struct problem *prob;
	size_t nprob, capprob;
	size_t caplocs;        /* allocated length of the study's locs */
};

static void prob(struct loader *ld, size_t line, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));

static void prob(struct loader *ld, size_t line, const char *fmt, ...)
{
	char body[1536], full[2048];
	va_list ap;

	va_start(ap, fmt);
	vsnprintf(body, sizeof body, fmt, ap);
	va_end(ap);
	if (line > 0)
		snprintf(full, sizeof full, "%s: line %zu: %s", ld->path, line, body);
	else
		snprintf(full, sizeof full, "%s: %s", ld->path, body);
	XGROW(ld->prob, ld->nprob, ld->capprob);
	ld->prob[ld->nprob].line = line;
	ld->prob[ld->nprob].seq = ld->nprob;
	ld->prob[ld->nprob].msg = xstrdup(full);
	ld->nprob++;
}

static int prob_cmp(const void *a, const void *b)
{
	const struct problem *x = a, *y = b;
	size_t lx = x->line ? x->line : SIZE_MAX, ly = y->line ? y->line : SIZE_MAX;

	if (lx != ly)
		return lx < ly ? -1 : 1;
	return x->seq < y->seq ? -1 : x->seq > y->seq;
}

/* ---- the line reader handed to inih ---- */

static int is_key_char(char c)
{
	return isalnum((unsigned char)c) || c == '_';
}

/* A line of the form "identifier = ..." (so an indented one is a key, not a continuation). */
static int looks_like_key(const char *s)
{
	const char *p = s;

	while (is_key_char(*p))
		p++;
	if (p == s)
		return 0;
	while (*p == ' ' || *p == '\t')
		p++;
	return *p == '=';
}

static void rtrim(char *s)
{
	size_t n = strlen(s);

	while (n > 0 && isspace((unsigned char)s[n - 1]))
		s[--n] = '\0';
}

/* Cuts a comment: ';' or '#' at the start or after whitespace, outside double quotes. */
static void strip_comment(char *s)
{
	int quoted = 0;
	size_t i;

	for (i = 0; s[i]; i++) {
		if (s[i] == '"')
			quoted = !quoted;
		else if (!quoted && (s[i] == ';' || s[i] == '#') &&
			 (i == 0 || isspace((unsigned char)s[i - 1]))) {
			s[i] = '\0';
			return;
		}
	}
}

/* Shortens text for quoting in a message. */
static const char *clip(const char *s, char *buf, size_t len)
{
	size_t n = strlen(s);

	if (n < len) {
		memcpy(buf, s, n + 1);
	} else {
		memcpy(buf, s, len - 4);
		memcpy(buf + len - 4, "...", 4);
	}
	return buf;
}

/* Hands out an empty line: inih skips it, the problem is already recorded. */
static char *give_blank(char *buf)
{
	buf[0] = '\0';
	return buf;
}

/*
 * inih's reader: one line per call, so the line number of every key is
 * known (the library's handler gets none). The line is checked and cleaned
 * here (comments, '#' inline, indentation) so that inih only splits keys
 * from values.
 */
static char *reader(char *buf, int num, void *stream)
{
	struct loader *ld = stream;
	const char *start, *eol;
	size_t n, lead;
	char *w, clipbuf[48];

	if (ld->pos >= ld->len)
		return NULL;
	start = ld->text + ld->pos;
	eol = memchr(start, '\n', ld->len - ld->pos);
	n = eol ? (size_t)(eol - start) : ld->len - ld->pos;
	ld->pos += n + (eol ? 1 : 0);
	ld->line++;
	ld->continuation = 0;
	if (ld->line == 1 && n >= 3 && memcmp(start, "\xEF\xBB\xBF", 3) == 0) {
		start += 3;
		n -= 3;
	}
	if (n + 1 > ld->workcap) {
		ld->workcap = n + 1;
		ld->work = xrealloc(ld->work, ld->workcap);
	}
	w = ld->work;
	memcpy(w, start, n);
	w[n] = '\0';
	if (memchr(w, '\0', n)) {
		prob(ld, ld->line, "contains a NUL byte (not a text file?)");
		return give_blank(buf);
	}
	strip_comment(w);
	rtrim(w);
	lead = strspn(w, " \t");
	if (!w[lead])
		return give_blank(buf);
	if (w[lead] == '[') {
		char *inner = w + lead + 1, *close = strrchr(inner, ']');

		ld->after = AFTER_NOTHING;
		if (!close || close[1] != '\0') {
			prob(ld, ld->line, "section header '%s' has no closing ']'",
			     clip(w + lead, clipbuf, sizeof clipbuf));
			/* keys that follow belong to no section and go unreported */
			snprintf(ld->cursec, sizeof ld->cursec, "%s", BAD_SECTION);
			return give_blank(buf);
		}
		*close = '\0';
		while (isspace((unsigned char)*inner))
			inner++;
		rtrim(inner);
		if (strlen(inner) + 3 > (size_t)num || strlen(inner) >= 48) {
			prob(ld, ld->line, "section name '%s' is too long",
			     clip(inner, clipbuf, sizeof clipbuf));
			snprintf(ld->cursec, sizeof ld->cursec, "%s", BAD_SECTION);
			return give_blank(buf);
		}
		snprintf(ld->cursec, sizeof ld->cursec, "%s", inner);
		XGROW(ld->sec, ld->nsec, ld->capsec);
		ld->sec[ld->nsec].name = xstrdup(inner);
		ld->sec[ld->nsec].line = ld->line;
		ld->nsec++;
		snprintf(buf, (size_t)num, "[%s]", inner);
		return buf;
	}
	if (lead > 0 && ld->after != AFTER_NOTHING && !looks_like_key(w + lead)) {
		/* a continuation of the previous value */
		if (ld->after == AFTER_DROPPED_KEY)
			return give_blank(buf);
		if (strlen(w + lead) + 2 > (size_t)num) {
			prob(ld, ld->line, "line is longer than %d characters; split the value over more indented lines",
			     num - 2);
			return give_blank(buf);
		}
		ld->continuation = 1;
		snprintf(buf, (size_t)num, " %s", w + lead);
		return buf;
	}
	w += lead;
	{
		const char *eq = strchr(w, '=');
		size_t klen = eq ? (size_t)(eq - w) : 0;
		const char *p;

		ld->after = AFTER_DROPPED_KEY;
		while (klen > 0 && isspace((unsigned char)w[klen - 1]))
			klen--;
		if (!eq) {
			prob(ld, ld->line, "expected 'key = value' or '[section]', found '%s'",
			     clip(w, clipbuf, sizeof clipbuf));
			return give_blank(buf);
		}
		for (p = w; p < w + klen; p++)
			if (!is_key_char(*p))
				break;
		if (klen == 0 || p < w + klen) {
			char key[48];

			snprintf(key, sizeof key, "%.*s", (int)(klen < 40 ? klen : 40), w);
			prob(ld, ld->line, "'%s' is not a key name (letters, digits and '_')", key);
			return give_blank(buf);
		}
		if (klen >= 48) {
			prob(ld, ld->line, "key name '%.40s...' is too long", w);
			return give_blank(buf);
		}
		for (p = eq + 1; *p; p++) {
			if (*p == ';' && isspace((unsigned char)p[-1])) {
				prob(ld, ld->line,
				     "';' after a space inside quotes would start a comment; remove the space");
				return give_blank(buf);
			}
		}
		if (strlen(w) + 1 > (size_t)num) {
			prob(ld, ld->line, "line is longer than %d characters; continue the value on indented lines below",
			     num - 2);
			return give_blank(buf);
		}
		ld->after = AFTER_KEY;
		snprintf(buf, (size_t)num, "%s", w);
		return buf;
	}
}

static int handler(void *user, const char *section, const char *name, const char *value)
{
	struct loader *ld = user;
	struct entry *e;

	(void)section;   /* the reader's copy is not truncated */
	if (ld->continuation && ld->nent > 0) {
		size_t a, b;

		e = &ld->ent[ld->nent - 1];
		a = strlen(e->value);
		b = strlen(value);
		e->value = xrealloc(e->value, a + b + 2);
		if (a > 0)
			e->value[a++] = ' ';
		memcpy(e->value + a, value, b + 1);
		return 1;
	}
	XGROW(ld->ent, ld->nent, ld->capent);
	e = &ld->ent[ld->nent++];
	e->section = xstrdup(ld->cursec);
	e->key = xstrdup(name);
	e->value = xstrdup(value);
	e->line = ld->line;
	e->used = 0;
	return 1;
}

/* ---- the schema ---- */

enum sec_kind { SEC_NONE = -1, SEC_STUDY, SEC_LOCALIZER, SEC_PARCELS, SEC_MODEL, SEC_MEASURE };

static const char *const section_names[] = { "study", "localizer", "parcels", "model", "measure" };

static const char *const keys_study[] = { "bids", "out", "subjects", "mask", "derivatives",
					  "space", "desc", "res" };
static const char *const keys_localizer[] = { "task", "contrast", "split", "effects",
					      "condition_column" };
static const char *const keys_parcels[] = { "image", "names", "top_percent", "top_voxels",
					    "min_t", "resample" };
static const char *const keys_model[] = { "autocorrelation", "drift_cutoff", "volume_time",
					  "smoothing_fwhm", "timecourse_window",
					  "confounds", "confounds_suffix", "motion",
					  "motion_units", "fd_threshold", "skip_volumes", "censor_fd" };
static const char *const keys_measure[] = { "task", "effects", "localizers" };
/* keys that were renamed (old, new): an old key is an error that names the new one */
static const char *const keys_renamed[][2] = { { "slice_reference", "volume_time" } };

static const struct {
	const char *const *keys;
	size_t n;
} schema[] = {
	{ keys_study, sizeof keys_study / sizeof *keys_study },
	{ keys_localizer, sizeof keys_localizer / sizeof *keys_localizer },
	{ keys_parcels, sizeof keys_parcels / sizeof *keys_parcels },
	{ keys_model, sizeof keys_model / sizeof *keys_model },
	{ keys_measure, sizeof keys_measure / sizeof *keys_measure },
};

/*
 * The kind of a section name; for "measure NAME", "localizer NAME" and
 * "parcels NAME" *name points at NAME (else NULL).
 */
static enum sec_kind section_kind(const char *s, const char **name)
{
	static const enum sec_kind named[] = { SEC_LOCALIZER, SEC_PARCELS, SEC_MEASURE };
	size_t i;

	*name = NULL;
	for (i = 0; i < SEC_MEASURE; i++)
		if (strcmp(s, section_names[i]) == 0)
			return (enum sec_kind)i;
	for (i = 0; i < sizeof named / sizeof *named; i++) {
		size_t n = strlen(section_names[named[i]]);

		if (strncmp(s, section_names[named[i]], n) == 0 && isspace((unsigned char)s[n])) {
			const char *p = s + n;

			while (isspace((unsigned char)*p))
				p++;
			*name = p;
			return named[i];
		}
	}
	return SEC_NONE;
}

static int valid_label(const char *s)
{
	if (!*s)
		return 0;
	for (; *s; s++)
		if (!isalnum((unsigned char)*s))
			return 0;
	return 1;
}

static int key_in(const char *key, enum sec_kind k)
{
	size_t i;

	for (i = 0; i < schema[k].n; i++)
		if (strcmp(schema[k].keys[i], key) == 0)
			return 1;
	return 0;
}

static void list_keys(enum sec_kind k, char *buf, size_t len)
{
	size_t i, used = 0;

	buf[0] = '\0';
	for (i = 0; i < schema[k].n && used < len; i++)
		used += (size_t)snprintf(buf + used, len - used, "%s%s", i ? ", " : "",
					 schema[k].keys[i]);
}

/* Checks sections and keys against the schema; marks duplicates. */
static void check_names(struct loader *ld)
{
	size_t i, j;
	char list[256];

	for (i = 0; i < ld->nsec; i++) {
		const char *mname;
		enum sec_kind k = section_kind(ld->sec[i].name, &mname);

		for (j = 0; j < i; j++) {
			if (strcmp(ld->sec[j].name, ld->sec[i].name) == 0) {
				prob(ld, ld->sec[i].line, "section [%s] repeated (first on line %zu)",
				     ld->sec[i].name, ld->sec[j].line);
				break;
			}
		}
		if (k == SEC_MEASURE) {
			const char *p;

			for (p = mname; *p; p++)
				if (!(isalnum((unsigned char)*p) || *p == '_' || *p == '-' || *p == '.'))
					break;
			if (*p)
				prob(ld, ld->sec[i].line,
				     "measure name '%s' may hold only letters, digits, '_', '-' and '.'",
				     mname);
		} else if ((k == SEC_LOCALIZER || k == SEC_PARCELS) && mname) {
			if (!valid_label(mname))
				prob(ld, ld->sec[i].line,
				     "localizer name '%s' may hold only letters and digits (it goes into table cells and file names)",
				     mname);
		} else if (k == SEC_NONE) {
			char word[64];
			const char *near, *rest;
			size_t wl = strcspn(ld->sec[i].name, " \t");

			snprintf(word, sizeof word, "%.*s", (int)(wl < 63 ? wl : 63), ld->sec[i].name);
			rest = ld->sec[i].name + wl;
			near = text_nearest(word, section_names, sizeof section_names / sizeof *section_names);
			if (strcmp(word, "measure") == 0)
				prob(ld, ld->sec[i].line,
				     "section [measure] needs a name, as in [measure memory]");
			else if (near && strcmp(near, "measure") == 0 && *rest)
				prob(ld, ld->sec[i].line, "unknown section [%s]; did you mean [measure%s]?",
				     ld->sec[i].name, rest);
			else if (near)
				prob(ld, ld->sec[i].line, "unknown section [%s]; did you mean [%s]?",
				     ld->sec[i].name, near);
			else
				prob(ld, ld->sec[i].line,
				     "unknown section [%s] (sections: study, localizer [NAME], parcels [NAME], model, measure NAME)",
				     ld->sec[i].name);
		}
	}
	for (i = 0; i < ld->nent; i++) {
		struct entry *e = &ld->ent[i];
		const char *mname;
		enum sec_kind k;

		if (e->section[0] == '\0') {
			prob(ld, e->line, "key '%s' comes before any [section]", e->key);
			continue;
		}
		k = section_kind(e->section, &mname);
		if (k == SEC_NONE)
			continue;  /* the section itself is reported */
		if (!key_in(e->key, k)) {
			const char *near = text_nearest(e->key, schema[k].keys, schema[k].n);
			enum sec_kind other;
			int placed = 0;
			size_t r;

			for (r = 0; r < sizeof keys_renamed / sizeof keys_renamed[0]; r++)
				if (strcmp(e->key, keys_renamed[r][0]) == 0) {
					prob(ld, e->line, "key '%s' is now called '%s'", e->key, keys_renamed[r][1]);
					placed = 1;
				}
			if (placed)
				continue;

			for (other = SEC_STUDY; other <= SEC_MODEL && !near; other++) {
				if (other != k && key_in(e->key, other)) {
					prob(ld, e->line, "key '%s' belongs in [%s], not [%s]", e->key,
					     section_names[other], e->section);
					placed = 1;
					break;
				}
			}
			if (placed)
				continue;
			if (near) {
				prob(ld, e->line, "unknown key '%s' in [%s]; did you mean '%s'?", e->key,
				     e->section, near);
			} else {
				list_keys(k, list, sizeof list);
				prob(ld, e->line, "unknown key '%s' in [%s] (keys: %s)", e->key,
				     e->section, list);
			}
			continue;
		}
		for (j = 0; j < i; j++) {
			if (strcmp(ld->ent[j].section, e->section) == 0 &&
			    strcmp(ld->ent[j].key, e->key) == 0) {
				prob(ld, e->line, "'%s' is set twice in [%s] (first on line %zu)", e->key,
				     e->section, ld->ent[j].line);
				break;
			}
		}
		if (j == i)
			e->used = 1;
	}
}

/* The first valid entry for section/key, or NULL. */
static const struct entry *get(const struct loader *ld, const char *section, const char *key)
{
	size_t i;

	for (i = 0; i < ld->nent; i++)
		if (ld->ent[i].used && strcmp(ld->ent[i].section, section) == 0 &&
		    strcmp(ld->ent[i].key, key) == 0)
			return &ld->ent[i];
	return NULL;
}

/* The entry's value, or NULL when absent or empty. */
static const char *val(const struct entry *e)
{
	return e && e->value[0] ? e->value : NULL;
}

static size_t section_line(const struct loader *ld, const char *section)
{
	size_t i;

	for (i = 0; i < ld->nsec; i++)
		if (strcmp(ld->sec[i].name, section) == 0)
			return ld->sec[i].line;
	return 0;
}

/* The line of section/key, else fallback. */
static size_t study_line_of(const struct loader *ld, const char *section, const char *key, size_t fallback)
{
	const struct entry *e = get(ld, section, key);

	return e ? e->line : fallback;
}

/* Reports a required key that is missing or empty. */
static void missing(struct loader *ld, const char *section, const char *key, const char *what)
{
	const struct entry *e = get(ld, section, key);

	if (e)
		prob(ld, e->line, "%s is empty (%s)", key, what);
	else if (section_line(ld, section))
		prob(ld, section_line(ld, section), "[%s] needs '%s' (%s)", section, key, what);
	else
		prob(ld, 0, "no [%s] section: it needs '%s' (%s)", section, key, what);
}

/* ---- values ---- */

/* A finite decimal number making up the whole of s (no hex, inf or nan). */
static int parse_number(const char *s, double *v)
{
	const char *p;
	char *end;

	if (!*s)
		return 0;
	for (p = s; *p; p++)
		if (!(isdigit((unsigned char)*p) || *p == '.' || *p == '-' || *p == '+' || *p == 'e' ||
		      *p == 'E'))
			return 0;
	errno = 0;
	*v = strtod(s, &end);
	return *end == '\0' && end != s && isfinite(*v);
}

static char *resolve(const struct loader *ld, const char *v)
{
	char *p;
	size_t a, b;

	if (v[0] == '/')
		return xstrdup(v);
	a = strlen(ld->dir);
	b = strlen(v);
	p = xmalloc(a + b + 2);
	memcpy(p, ld->dir, a);
	p[a] = '/';
	memcpy(p + a + 1, v, b + 1);
	return p;
}

/* Resolves a path key; when must (1 file, 2 folder) it has to exist as such. */
static char *path_key(struct loader *ld, const struct entry *e, int must)
{
	struct stat st;
	char *p;

	if (!val(e))
		return NULL;
	p = resolve(ld, e->value);
	if (must && stat(p, &st) != 0) {
		if (strcmp(p, e->value) == 0)
			prob(ld, e->line, "%s: '%s' does not exist", e->key, p);
		else
			prob(ld, e->line, "%s: '%s' (%s) does not exist", e->key, e->value, p);
	} else if (must == 1 && !S_ISREG(st.st_mode)) {
		prob(ld, e->line, "%s: '%s' is not a file", e->key, p);
	} else if (must == 2 && !S_ISDIR(st.st_mode)) {
		prob(ld, e->line, "%s: '%s' is not a folder", e->key, p);
	}
	return p;
}

/* One word from a fixed list; returns its index, or -1 after reporting. */
static int choice(struct loader *ld, const struct entry *e, const char *const *words, size_t n,
		  int dflt)
{
	size_t i;
	const char *near;
	char list[128];
	size_t used = 0;

	if (!e)
		return dflt;
	for (i = 0; i < n; i++)
		if (strcmp(e->value, words[i]) == 0)
			return (int)i;
	list[0] = '\0';
	for (i = 0; i < n && used < sizeof list; i++)
		used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? " | " : "",
					 words[i]);
	near = e->value[0] ? text_nearest(e->value, words, n) : NULL;
	if (near)
		prob(ld, e->line, "%s: '%s' is not one of %s; did you mean '%s'?", e->key, e->value,
		     list, near);
	else
		prob(ld, e->line, "%s: '%s' is not one of %s", e->key, e->value, list);
	return dflt;
}

/* Splits on whitespace and commas into xstrdup'ed words. */
static char **words(const char *s, size_t *n)
{
	char **w = NULL;
	size_t k = 0, cap = 0;

	while (*s) {
		size_t len;

		s += strspn(s, " \t,");
		len = strcspn(s, " \t,");
		if (len == 0)
			break;
		XGROW(w, k, cap);
		w[k] = xmalloc(len + 1);
		memcpy(w[k], s, len);
		w[k][len] = '\0';
		k++;
		s += len;
	}
	*n = k;
	return w;
}

/* Names that must not repeat (confound and motion columns). */
static char **name_list(struct loader *ld, const struct entry *e, size_t *n)
{
	char **w;
	size_t i, j;

	*n = 0;
	if (!val(e))
		return NULL;
	w = words(e->value, n);
	for (i = 0; i < *n; i++)
		for (j = 0; j < i; j++)
			if (strcmp(w[i], w[j]) == 0) {
				prob(ld, e->line, "%s: column '%s' is listed twice", e->key, w[i]);
				j = i;
			}
	return w;
}

static char *task_key(struct loader *ld, const char *section)
{
	const struct entry *e = get(ld, section, "task");

	if (!val(e)) {
		missing(ld, section, "task", "the BIDS task label");
		return NULL;
	}
	if (!valid_label(e->value))
		prob(ld, e->line, "task: '%s' is not a BIDS label (letters and digits only)",
		     e->value);
	return xstrdup(e->value);
}

/* Parses a list of effects; NULL and 0 after reporting. */
static expr *effects_key(struct loader *ld, const struct entry *e, size_t *n)
{
	expr *list;
	char msg[512];

	*n = 0;
	if (expr_parse_list(e->value, &list, n, msg, sizeof msg) < 0) {
		prob(ld, e->line, "effects: %s", msg);
		return NULL;
	}
	return list;
}

/* The condition as an expression on its own: plain when it is a plain name, else quoted. */
static void term_expr(const char *name, expr *out)
{
	char *s = xmalloc(strlen(name) + 3), msg[8];
	const char *p;
	int plain = 1;

	for (p = name; *p; p++)
		if (!(isalnum((unsigned char)*p) || *p == '_' || *p == '.'))
			plain = 0;
	if (plain)
		strcpy(s, name);
	else
		sprintf(s, "\"%s\"", name);
	if (expr_parse(s, out, msg, sizeof msg) != 0)
		memset(out, 0, sizeof *out);  /* cannot happen: the name came from a parsed expr */
	free(s);
}

static int decimal_text(const char *s)
{
	const char *p = s;
	int digits = 0;

	while (isdigit((unsigned char)*p)) {
		p++;
		digits++;
	}
	if (*p == '.') {
		p++;
		while (isdigit((unsigned char)*p)) {
			p++;
			digits++;
		}
	}
	return digits > 0 && *p == '\0';
}

static void load_study(struct loader *ld, study *s)
{
	const struct entry *e;

	e = get(ld, "study", "bids");
	if (!val(e))
		missing(ld, "study", "bids", "the BIDS dataset folder");
	else
		s->bids = path_key(ld, e, 2);
	e = get(ld, "study", "out");
	if (!val(e)) {
		missing(ld, "study", "out", "the folder for results");
	} else {
		struct stat st;

		s->out = path_key(ld, e, 0);
		if (stat(s->out, &st) == 0 && !S_ISDIR(st.st_mode))
			prob(ld, e->line, "out: '%s' exists and is not a folder", s->out);
	}
	s->derivatives = path_key(ld, get(ld, "study", "derivatives"), 2);
	e = get(ld, "study", "mask");
	if (val(e) && strcmp(e->value, "auto") == 0) {
		s->mask_auto = 1;
		if (!s->derivatives)
			prob(ld, e->line, "mask: auto takes each run's desc-brain_mask from a derivatives dataset; set derivatives = in [study]");
	} else {
		/* with {subject}, each subject's mask is checked when it is read */
		s->mask = path_key(ld, e, val(e) && study_per_subject(e->value) ? 0 : 1);
	}
	{
		static const char *const ent[] = { "space", "desc", "res" };
		char **dst[] = { &s->space, &s->desc, &s->res };

		for (size_t k = 0; k < 3; k++) {
			e = get(ld, "study", ent[k]);
			if (!val(e))
				continue;
			if (!s->derivatives)
				prob(ld, e->line, "%s: only used with derivatives = (a BIDS Derivatives dataset)",
				     ent[k]);
			if (!valid_label(e->value))
				prob(ld, e->line, "%s: '%s' is not a BIDS label (letters and digits only)",
				     ent[k], e->value);
			*dst[k] = xstrdup(e->value);
		}
	}
	e = get(ld, "study", "subjects");
	if (val(e) && strcmp(e->value, "all") != 0) {
		size_t i, j, n;
		char **w = words(e->value, &n);

		for (i = 0; i < n; i++) {
			if (strncmp(w[i], "sub-", 4) == 0)
				memmove(w[i], w[i] + 4, strlen(w[i] + 4) + 1);
			if (strcmp(w[i], "all") == 0)
				prob(ld, e->line, "subjects: 'all' cannot be mixed with labels");
			else if (!valid_label(w[i]))
				prob(ld, e->line,
				     "subjects: '%s' is not a subject label (letters and digits, optionally after sub-)",
				     w[i]);
			for (j = 0; j < i; j++)
				if (strcmp(w[i], w[j]) == 0) {
					prob(ld, e->line, "subjects: '%s' is listed twice", w[i]);
					break;
				}
		}
		s->subjects = w;
		s->nsubjects = n;
	}
}

/* One localizer section sec into L; its condition_column into *condcol (xmalloc'ed). */
static void load_localizer(struct loader *ld, const char *sec, study_localizer *L, char **condcol)
{
	static const char *const splits[] = { "odd-even", "leave-one-out" };
	const struct entry *e;
	char msg[512];
	int have_contrast = 0;

	L->task = task_key(ld, sec);
	e = get(ld, sec, "contrast");
	if (!val(e)) {
		missing(ld, sec, "contrast", "the localizer contrast, e.g. melody - scrambled");
	} else if (expr_parse(e->value, &L->contrast, msg, sizeof msg) != 0) {
		prob(ld, e->line, "contrast: %s", msg);
	} else {
		have_contrast = 1;
	}
	L->split = (enum study_split)choice(ld, get(ld, sec, "split"), splits, 2,
					    SPLIT_ODD_EVEN);
	e = get(ld, sec, "condition_column");
	if (e && !val(e))
		prob(ld, e->line, "condition_column is empty (the events column naming the condition)");
	*condcol = xstrdup(val(e) ? e->value : "trial_type");
	e = get(ld, sec, "effects");
	if (e && !val(e)) {
		prob(ld, e->line, "effects is empty (leave the key out for the default)");
	} else if (e) {
		L->effects = effects_key(ld, e, &L->neffects);
	} else if (have_contrast) {
		size_t i, n = L->contrast.nterms;
		int same = 0;

		L->effects = xcalloc(n + 1, sizeof *L->effects);
		for (i = 0; i < n; i++) {
			term_expr(L->contrast.terms[i].name, &L->effects[i]);
			if (strcmp(L->effects[i].text, L->contrast.text) == 0)
				same = 1;
		}
		if (!same)
			expr_parse(L->contrast.text, &L->effects[n++], msg, sizeof msg);
		L->neffects = n;
	}
}

/* One parcels section sec into L. */
static void load_parcels(struct loader *ld, const char *sec, study_localizer *L)
{
	static const char *const resample[] = { "no", "nearest" };
	const struct entry *e, *sel[3];
	static const char *const selkey[3] = { "top_percent", "top_voxels", "min_t" };
	size_t i, nsel = 0;
	int which = -1;

	int need = !(ld->flags & STUDY_PARCELS_OPTIONAL);

	e = get(ld, sec, "image");
	if (!val(e)) {
		if (need)
			missing(ld, sec, "image", "the parcel label image");
	} else {
		/* with {subject}, each subject's file is checked when it is read */
		L->parcels = path_key(ld, e, need && !study_per_subject(e->value) ? 1 : 0);
	}
	e = get(ld, sec, "names");
	L->parcel_names = path_key(ld, e, need && !(e && study_per_subject(e->value)) ? 1 : 0);
	L->resample_parcels = choice(ld, get(ld, sec, "resample"), resample, 2, 0);
	for (i = 0; i < 3; i++) {
		sel[i] = get(ld, sec, selkey[i]);
		if (sel[i]) {
			nsel++;
			if (which < 0)
				which = (int)i;
		}
	}
	if (nsel > 1) {
		char where[128] = "";
		size_t used = 0;

		for (i = 0; i < 3; i++)
			if (sel[i])
				used += (size_t)snprintf(where + used, sizeof where - used, "%s%s (line %zu)",
							 used ? ", " : "", selkey[i], sel[i]->line);
		prob(ld, sel[which]->line, "give only one of top_percent, top_voxels, min_t; found %s",
		     where);
	}
	L->select = SELECT_TOP_PERCENT;
	L->select_value = 10;
	if (which < 0) {
		L->top_percent_text = xstrdup("10");
		return;
	}
	e = sel[which];
	if (which == 0) {
		double p;

		if (!decimal_text(e->value) || !parse_number(e->value, &p) || !(p > 0 && p <= 100)) {
			prob(ld, e->line, "top_percent: '%s' is not a percentage in (0, 100] (plain decimal, e.g. 12.5)",
			     e->value);
			return;
		}
		L->top_percent_text = xstrdup(e->value);
		L->select_value = p;
	} else if (which == 1) {
		const char *p = e->value;
		double v = 0;

		while (isdigit((unsigned char)*p))
			p++;
		if (p == e->value || *p || !parse_number(e->value, &v) || v < 1 || v > 1e9) {
			prob(ld, e->line, "top_voxels: '%s' is not a whole number of voxels >= 1", e->value);
			return;
		}
		L->select = SELECT_TOP_VOXELS;
		L->select_value = v;
	} else {
		double v;

		if (!parse_number(e->value, &v)) {
			prob(ld, e->line, "min_t: '%s' is not a finite number", e->value);
			return;
		}
		L->select = SELECT_MIN_T;
		L->select_value = v;
	}
}

/* The index of the section of kind k named name (NULL: the unnamed one), or -1. */
static long find_section(const struct loader *ld, enum sec_kind k, const char *name)
{
	size_t i;

	for (i = 0; i < ld->nsec; i++) {
		const char *nm;

		if (section_kind(ld->sec[i].name, &nm) != k)
			continue;
		if ((!nm && !name) || (nm && name && strcmp(nm, name) == 0))
			return (long)i;
	}
	return -1;
}

static void localizer_release(study_localizer *L)
{
	free(L->name);
	free(L->label);
	free(L->task);
	expr_release(&L->contrast);
	expr_list_free(L->effects, L->neffects);
	free(L->parcels);
	free(L->parcel_names);
	free(L->top_percent_text);
	memset(L, 0, sizeof *L);
}

/* Points the flat [localizer]/[parcels] fields of s at L (borrowed). */
static void alias_localizer(study *s, const study_localizer *L)
{
	s->loc_task = L->task;
	s->contrast = L->contrast;
	s->split = L->split;
	s->loc_effects = L->effects;
	s->nloc_effects = L->neffects;
	s->parcels = L->parcels;
	s->parcel_names = L->parcel_names;
	s->select = L->select;
	s->top_percent_text = L->top_percent_text;
	s->select_value = L->select_value;
	s->resample_parcels = L->resample_parcels;
}

/* Adds the localizer of section index si (-1: none in the file) and its parcels. */
static void add_localizer(struct loader *ld, study *s, long si, const char *name, char **condcol)
{
	study_localizer *L;
	long pi = find_section(ld, SEC_PARCELS, name);

	XGROW(s->locs, s->nlocs, ld->caplocs);
	L = &s->locs[s->nlocs++];
	memset(L, 0, sizeof *L);
	L->name = name ? xstrdup(name) : NULL;
	L->line = si >= 0 ? ld->sec[si].line : 0;
	load_localizer(ld, si >= 0 ? ld->sec[si].name : "localizer", L, condcol);
	if (name && pi < 0)
		prob(ld, L->line, "[localizer %s] has no [parcels %s] section (its parcels and selection rule)",
		     name, name);
	else
		load_parcels(ld, pi >= 0 ? ld->sec[pi].name : "parcels", L);
	L->label = xstrdup(name ? name : L->task ? L->task : "");
}

/* 1 when the file has a [localizer NAME] section. */
static int any_named(const struct loader *ld)
{
	size_t i;

	for (i = 0; i < ld->nsec; i++) {
		const char *nm;

		if (section_kind(ld->sec[i].name, &nm) == SEC_LOCALIZER && nm)
			return 1;
	}
	return 0;
}

/*
 * Every localizer with its parcels: the unnamed [localizer] and [parcels],
 * or [localizer NAME] and [parcels NAME] pairs, never both forms.
 */
static void load_localizers(struct loader *ld, study *s)
{
	size_t i, j, first_unnamed = 0, first_named = 0;

	for (i = 0; i < ld->nsec; i++) {
		const char *nm;
		enum sec_kind k = section_kind(ld->sec[i].name, &nm);
		char *cc = NULL;

		if (k == SEC_PARCELS && nm && find_section(ld, SEC_LOCALIZER, nm) < 0)
			prob(ld, ld->sec[i].line, "[parcels %s] has no [localizer %s] section", nm, nm);
		if (k == SEC_PARCELS && !nm && find_section(ld, SEC_LOCALIZER, NULL) < 0 && any_named(ld))
			prob(ld, ld->sec[i].line,
			     "an unnamed [parcels] section goes with the unnamed [localizer]; with named localizers write [parcels NAME]");
		if (k != SEC_LOCALIZER)
			continue;
		if (nm && !first_named)
			first_named = ld->sec[i].line;
		if (!nm && !first_unnamed)
			first_unnamed = ld->sec[i].line;
		for (j = 0; j < s->nlocs; j++)
			if ((!nm && !s->locs[j].name) || (nm && s->locs[j].name && strcmp(nm, s->locs[j].name) == 0))
				break;
		if (j < s->nlocs)
			continue;   /* a repeated section, reported */
		add_localizer(ld, s, (long)i, nm, &cc);
		if (!s->condition_column) {
			s->condition_column = cc;
		} else {
			if (strcmp(cc, s->condition_column) != 0)
				prob(ld, study_line_of(ld, ld->sec[i].name, "condition_column", ld->sec[i].line),
				     "condition_column '%s' differs from the first localizer's '%s': every task is read with one events column",
				     cc, s->condition_column);
			free(cc);
		}
	}
	if (first_named && first_unnamed)
		prob(ld, first_named > first_unnamed ? first_named : first_unnamed,
		     "the unnamed [localizer] (line %zu) and named [localizer NAME] sections (line %zu) cannot be mixed: name every localizer, each with its [parcels NAME]",
		     first_unnamed, first_named);
	if (s->nlocs == 0)
		add_localizer(ld, s, -1, NULL, &s->condition_column);
	s->named_localizers = first_named > 0;
	alias_localizer(s, &s->locs[0]);
}

static void load_model(struct loader *ld, study *s)
{
	static const char *const autocorr[] = { "ar1-adjusted", "ar1", "none" };
	static const char *const units[] = { "mm_rad", "mm_deg" };
	const struct entry *e;
	double v;

	{
		/* ar1-adjusted = 2 (the default, METHODS.md 4), ar1 = 1 (plain AR(1)), none = 0 (OLS) */
		static const int code[] = { 2, 1, 0 };

		const struct entry *ea = get(ld, "model", "autocorrelation");

		if (ea && strcmp(ea->value, "ols") == 0) {
			prob(ld, ea->line, "autocorrelation: 'ols' is called 'none' here (no autocorrelation model: ordinary least squares)");
			ea = NULL;
		}
		s->ar1 = code[choice(ld, ea, autocorr, 3, 0)];
	}
	s->drift_cutoff = 128;
	e = get(ld, "model", "drift_cutoff");
	if (e) {
		if (strcmp(e->value, "none") == 0)
			s->drift_cutoff = 0;
		else if (parse_number(e->value, &v) && v > 0)
			s->drift_cutoff = v;
		else
			prob(ld, e->line, "drift_cutoff: '%s' is not a positive number of seconds or none",
			     e->value);
	}
	s->volume_time = 0.5;
	e = get(ld, "model", "volume_time");
	if (e) {
		if (parse_number(e->value, &v) && v >= 0 && v <= 1)
			s->volume_time = v;
		else
			prob(ld, e->line, "volume_time: '%s' is not a number in [0, 1] (a fraction of the TR)",
			     e->value);
	}
	s->smoothing_fwhm = 0;
	e = get(ld, "model", "smoothing_fwhm");
	if (val(e) && strcmp(e->value, "none") != 0) {
		/* 0 reads as none; beyond a metre it is surely a unit mistake */
		if (parse_number(e->value, &v) && v >= 0 && v <= 1000)
			s->smoothing_fwhm = v;
		else
			prob(ld, e->line, "smoothing_fwhm: '%s' is not a FWHM in mm (a number from 0 to 1000) or none",
			     e->value);
	}
	s->timecourse_window = 20;
	e = get(ld, "model", "timecourse_window");
	if (e) {
		/* bins of one TR from 0 s; beyond two minutes an event-related window is surely a mistake */
		if (parse_number(e->value, &v) && v > 0 && v <= 120)
			s->timecourse_window = v;
		else
			prob(ld, e->line, "timecourse_window: '%s' is not a number of seconds in (0, 120]",
			     e->value);
	}
	s->confounds = name_list(ld, get(ld, "model", "confounds"), &s->nconfounds);
	e = get(ld, "model", "confounds_suffix");
	if (e && (!val(e) || strchr(e->value, '/') || strchr(e->value, ' ')))
		prob(ld, e->line, "confounds_suffix: '%s' is not a file name ending (e.g. _confounds.tsv)",
		     e->value);
	s->confounds_suffix = xstrdup(val(e) ? e->value : "_confounds.tsv");
	e = get(ld, "model", "skip_volumes");
	if (e) {
		if (parse_number(e->value, &v) && v >= 0 && v == floor(v) && v <= 100000)
			s->skip_volumes = (int)v;
		else
			prob(ld, e->line, "skip_volumes: '%s' is not a whole number of volumes >= 0", e->value);
	}
	e = get(ld, "model", "censor_fd");
	if (e && strcmp(e->value, "none") != 0) {
		if (parse_number(e->value, &v) && v > 0)
			s->censor_fd = v;
		else
			prob(ld, e->line, "censor_fd: '%s' is not a positive number of mm or none", e->value);
	}
	e = get(ld, "model", "motion");
	s->motion = name_list(ld, e, &s->nmotion);
	if (s->motion && s->nmotion != 6)
		prob(ld, e->line, "motion: expected six column names (three translations, three rotations), found %zu",
		     s->nmotion);
	s->motion_deg = choice(ld, get(ld, "model", "motion_units"), units, 2, 0) == 1;
	s->fd_threshold = 0.5;
	e = get(ld, "model", "fd_threshold");
	if (e) {
		if (parse_number(e->value, &v) && v > 0)
			s->fd_threshold = v;
		else
			prob(ld, e->line, "fd_threshold: '%s' is not a positive number of mm", e->value);
	}
}

/*
 * The measure's localizers key (default: every localizer); a localizer's own
 * task cannot be measured in that localizer's fROIs (its held-out runs do that).
 */
static void measure_localizers(struct loader *ld, const study *s, study_measure *m, const char *sec)
{
	const struct entry *e = get(ld, sec, "localizers");
	size_t i, j, k, cap = 0;

	if (e && !val(e)) {
		prob(ld, e->line, "localizers is empty (leave the key out for every localizer)");
		e = NULL;
	}
	if (val(e)) {
		char **w = words(e->value, &k);

		for (i = 0; i < k; i++) {
			for (j = 0; j < s->nlocs; j++)
				if (strcmp(w[i], s->locs[j].label) == 0)
					break;
			if (j == s->nlocs) {
				char known[512] = "";
				size_t used = 0;

				for (j = 0; j < s->nlocs && used < sizeof known; j++)
					used += (size_t)snprintf(known + used, sizeof known - used, "%s%s",
								 j ? ", " : "", s->locs[j].label);
				prob(ld, e->line, "localizers: '%s' is not a localizer of this study (localizers: %s)",
				     w[i], known);
				continue;
			}
			for (j = 0; j < m->nlocalizers; j++)
				if (strcmp(m->localizers[j], w[i]) == 0)
					break;
			if (j < m->nlocalizers) {
				prob(ld, e->line, "localizers: '%s' is listed twice", w[i]);
				continue;
			}
			XGROW(m->localizers, m->nlocalizers, cap);
			m->localizers[m->nlocalizers++] = xstrdup(w[i]);
		}
		strv_free_array(w, k);
	} else {
		m->localizers = xcalloc(s->nlocs ? s->nlocs : 1, sizeof *m->localizers);
		for (j = 0; j < s->nlocs; j++)
			m->localizers[m->nlocalizers++] = xstrdup(s->locs[j].label);
	}
	for (j = 0; m->task && j < s->nlocs; j++) {
		const study_localizer *L = &s->locs[j];

		for (k = 0; k < m->nlocalizers; k++)
			if (strcmp(m->localizers[k], L->label) == 0)
				break;
		if (k == m->nlocalizers || !L->task || strcmp(L->task, m->task) != 0)
			continue;
		if (s->nlocs == 1)
			prob(ld, get(ld, sec, "task")->line,
			     "task '%s' is the localizer task: measure its effects in held-out runs with [localizer] effects",
			     m->task);
		else
			prob(ld, e ? e->line : get(ld, sec, "task")->line,
			     "task '%s' is the task of localizer '%s': measure it there with [localizer %s] effects, and list only the other localizers here (localizers = ...)",
			     m->task, L->label, L->label);
	}
}

static void load_measures(struct loader *ld, study *s)
{
	size_t i, j, cap = 0;

	for (i = 0; i < ld->nsec; i++) {
		const char *mname;
		const struct entry *e;
		study_measure *m;

		if (section_kind(ld->sec[i].name, &mname) != SEC_MEASURE)
			continue;
		for (j = 0; j < s->nmeasures; j++)
			if (strcmp(s->measures[j].name, mname) == 0)
				break;
		if (j < s->nmeasures)
			continue;  /* a repeated section, reported */
		XGROW(s->measures, s->nmeasures, cap);
		m = &s->measures[s->nmeasures++];
		memset(m, 0, sizeof *m);
		m->name = xstrdup(mname);
		m->task = task_key(ld, ld->sec[i].name);
		e = get(ld, ld->sec[i].name, "effects");
		if (!val(e))
			missing(ld, ld->sec[i].name, "effects", "what to measure, e.g. familiar, novel");
		else
			m->effects = effects_key(ld, e, &m->neffects);
		measure_localizers(ld, s, m, ld->sec[i].name);
		for (j = 0; m->task && j + 1 < s->nmeasures; j++)
			if (s->measures[j].task && strcmp(s->measures[j].task, m->task) == 0)
				prob(ld, get(ld, ld->sec[i].name, "task")->line,
				     "task '%s' is already measured in [measure %s]", m->task,
				     s->measures[j].name);
	}
}

/* Reads the whole file; returns NULL after reporting. */
static char *slurp(struct loader *ld, const char *path, size_t *len)
{
	char *buf;

	switch (readall_file(path, STUDY_MAX_BYTES, &buf, len)) {
	case READALL_OK:
		return buf;
	case READALL_EOPEN:
		prob(ld, 0, "cannot open the study file: %s", strerror(errno));
		return NULL;
	case READALL_EREAD:
		prob(ld, 0, "cannot read the study file: %s", strerror(errno));
		return NULL;
	default:
		prob(ld, 0, "larger than %u bytes: not a study file", STUDY_MAX_BYTES);
		return NULL;
	}
}

/* The absolute folder holding path. */
static char *folder_of(const char *path)
{
	const char *slash = strrchr(path, '/');
	char *dir, *abs;

	if (!slash)
		dir = xstrdup(".");
	else if (slash == path)
		dir = xstrdup("/");
	else {
		dir = xmalloc((size_t)(slash - path) + 1);
		memcpy(dir, path, (size_t)(slash - path));
		dir[slash - path] = '\0';
	}
	abs = realpath(dir, NULL);
	if (abs) {
		free(dir);
		return abs;
	}
	return dir;
}

static void loader_release(struct loader *ld)
{
	size_t i;

	for (i = 0; i < ld->nent; i++) {
		free(ld->ent[i].section);
		free(ld->ent[i].key);
		free(ld->ent[i].value);
	}
	free(ld->ent);
	for (i = 0; i < ld->nsec; i++)
		free(ld->sec[i].name);
	free(ld->sec);
	for (i = 0; i < ld->nprob; i++)
		free(ld->prob[i].msg);
	free(ld->prob);
	free(ld->work);
	free(ld->dir);
}

sr_status study_load(const char *path, study *s, study_problems *probs)
{
	return study_load_flags(path, s, probs, 0);
}

sr_status study_load_flags(const char *path, study *s, study_problems *probs, unsigned flags)
{
	struct loader ld;
	sr_status st = SR_OK;
	size_t i;
	char *text;
	int rc;

	memset(s, 0, sizeof *s);
	memset(&ld, 0, sizeof ld);
	ld.path = path;
	ld.flags = flags;
	text = slurp(&ld, path, &ld.len);
	if (!text) {
		st = SR_EIO;
		goto out;
	}
	ld.text = text;
	ld.dir = folder_of(path);
	rc = ini_parse_stream(reader, &ld, handler, &ld);
	if (rc > 0 && ld.nprob == 0)
		prob(&ld, (size_t)rc, "the INI parser rejected this line");
	else if (rc < 0)
		prob(&ld, 0, "the INI parser failed (out of memory)");
	check_names(&ld);
	s->path = xstrdup(path);
	s->text = text;
	load_study(&ld, s);
	load_localizers(&ld, s);
	load_model(&ld, s);
	load_measures(&ld, s);
	s->keys = xcalloc(ld.nent ? ld.nent : 1, sizeof *s->keys);
	for (i = 0; i < ld.nent; i++) {
		if (!ld.ent[i].used)
			continue;
		s->keys[s->nkeys].section = xstrdup(ld.ent[i].section);
		s->keys[s->nkeys].key = xstrdup(ld.ent[i].key);
		s->keys[s->nkeys].line = ld.ent[i].line;
		s->nkeys++;
	}
	if (ld.nprob > 0)
		st = SR_ESTUDY;
out:
	if (ld.nprob > 1)
		qsort(ld.prob, ld.nprob, sizeof *ld.prob, prob_cmp);
	for (i = 0; i < ld.nprob; i++) {
		XGROW(probs->msg, probs->n, probs->cap);
		probs->msg[probs->n++] = ld.prob[i].msg;
		ld.prob[i].msg = NULL;
	}
	loader_release(&ld);
	if (st != SR_OK)
		study_release(s);
	return st;
}

char *study_text_get(const char *text, const char *section, const char *key)
{
	struct loader ld;
	char *value = NULL;
	size_t i;

	memset(&ld, 0, sizeof ld);
	ld.path = "(study text)";
	ld.text = text ? text : "";
	ld.len = strlen(ld.text);
	(void)ini_parse_stream(reader, &ld, handler, &ld);
	for (i = ld.nent; i-- > 0;)
		if (strcmp(ld.ent[i].section, section) == 0 && strcmp(ld.ent[i].key, key) == 0) {
			if (ld.ent[i].value[0])
				value = xstrdup(ld.ent[i].value);
			break;
		}
	ld.text = NULL;
	loader_release(&ld);
	return value;
}

size_t study_line(const study *s, const char *section, const char *key)
{
	size_t i;

	for (i = 0; i < s->nkeys; i++)
		if (strcmp(s->keys[i].section, section) == 0 && strcmp(s->keys[i].key, key) == 0)
			return s->keys[i].line;
	return 0;
}

void study_release(study *s)
{
	size_t i;

	if (!s)
		return;
	free(s->path);
	free(s->text);
	free(s->bids);
	free(s->out);
	free(s->mask);
	free(s->derivatives);
	free(s->space);
	free(s->desc);
	free(s->res);
	strv_free_array(s->subjects, s->nsubjects);
	/* the flat localizer fields alias locs[0] */
	for (i = 0; i < s->nlocs; i++)
		localizer_release(&s->locs[i]);
	free(s->locs);
	free(s->condition_column);
	strv_free_array(s->confounds, s->nconfounds);
	free(s->confounds_suffix);
	strv_free_array(s->motion, s->nmotion);
	for (i = 0; i < s->nmeasures; i++) {
		free(s->measures[i].name);
		free(s->measures[i].task);
		expr_list_free(s->measures[i].effects, s->measures[i].neffects);
		strv_free_array(s->measures[i].localizers, s->measures[i].nlocalizers);
	}
	free(s->measures);
	for (i = 0; i < s->nkeys; i++) {
		free(s->keys[i].section);
		free(s->keys[i].key);
	}
	free(s->keys);
	memset(s, 0, sizeof *s);
}

void study_use_localizer(const study *s, size_t i, study *view)
{
	size_t j, k;

	*view = *s;
	alias_localizer(view, &s->locs[i]);
	view->measures = xcalloc(s->nmeasures ? s->nmeasures : 1, sizeof *view->measures);
	view->nmeasures = 0;
	for (j = 0; j < s->nmeasures; j++)
		for (k = 0; k < s->measures[j].nlocalizers; k++)
			if (strcmp(s->measures[j].localizers[k], s->locs[i].label) == 0) {
				view->measures[view->nmeasures++] = s->measures[j];
				break;
			}
}

void study_view_release(study *view)
{
	free(view->measures);
	memset(view, 0, sizeof *view);
}

const char *study_loc_label(const study *s, size_t i)
{
	return s->locs[i].label;
}

/* Where the runs come from (bids, derivatives and their filters); src borrows s's strings. */
static void study_bids_src(const study *s, bids_src *src)
{
	src->raw = s->bids;
	src->deriv = s->derivatives;
	src->space = s->space;
	src->desc = s->desc;
	src->res = s->res;
}

sr_status study_runs(const study *s, const char *subject, const char *task, bids_run **runs,
		     size_t *n, sr_err *e)
{
	bids_src src;

	study_bids_src(s, &src);
	return bids_find_runs(&src, subject, task, runs, n, e);
}

int study_per_subject(const char *path)
{
	return path && strstr(path, "{subject}") != NULL;
}

int study_mask_per_subject(const study *st)
{
	return st->mask_auto || study_per_subject(st->mask);
}

char *study_subject_path(const char *path, const char *label)
{
	static const char key[] = "{subject}";
	size_t n = 0, kl = sizeof key - 1, ll = strlen(label);
	const char *p;
	char *out, *w;

	if (!path)
		return NULL;
	for (p = strstr(path, key); p; p = strstr(p + kl, key))
		n++;
	out = xmalloc(strlen(path) + n * ll + 1);
	w = out;
	for (p = path; *p;) {
		if (strncmp(p, key, kl) == 0) {
			memcpy(w, label, ll);
			w += ll;
			p += kl;
		} else {
			*w++ = *p++;
		}
	}
	*w = '\0';
	return out;
}
