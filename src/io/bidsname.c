/* bidsname.c - BIDS file names from entities (bidsname.h). */
#include "bidsname.h"

#include <ctype.h>
#include <stdio.h>
#include <string.h>

int bidsname_valid_value(const char *s)
{
	if (!s || !*s)
		return 0;
	for (; *s; s++)
		if (!isalnum((unsigned char)*s) || (unsigned char)*s > 127)
			return 0;
	return 1;
}

/* The BIDS specification's entity table, in its order (Appendix: Entity table). */
static const char *const spec_keys[] = {
	"sub", "ses", "sample", "task", "tracksys", "acq", "nuc", "voi", "ce", "trc", "stain", "rec",
	"dir", "run", "mod", "echo", "flip", "inv", "mt", "part", "proc", "hemi", "space", "split",
	"recording", "chunk", "seg", "res", "den", "label", "desc",
};
enum { NSPEC = sizeof spec_keys / sizeof spec_keys[0] };

int bidsname_rank(const char *key)
{
	int i;

	for (i = 0; i < NSPEC; i++)
		if (strcmp(key, spec_keys[i]) == 0)
			return i;
	return -1;
}

int bidsname_parse(const char *stem, bidsname_kv *kv, size_t max, size_t *n)
{
	const char *p = stem;

	*n = 0;
	while (*p) {
		const char *end = strchr(p, '_'), *dash;
		size_t len = end ? (size_t)(end - p) : strlen(p), kl, vl;

		dash = memchr(p, '-', len);
		if (!dash || *n >= max)
			return -1;
		kl = (size_t)(dash - p);
		vl = len - kl - 1;
		if (kl == 0 || kl >= sizeof kv->key || vl == 0 || vl >= sizeof kv->value)
			return -1;
		memcpy(kv[*n].key, p, kl);
		kv[*n].key[kl] = '\0';
		memcpy(kv[*n].value, dash + 1, vl);
		kv[*n].value[vl] = '\0';
		if (bidsname_rank(kv[*n].key) < 0 || !bidsname_valid_value(kv[*n].value))
			return -1;
		(*n)++;
		p += len;
		if (*p == '_')
			p++;
	}
	return 0;
}

int bidsname_build(const bidsname_kv *kv, size_t n, const char *suffix, const char *ext, char *buf,
		   size_t len)
{
	size_t used = 0, i;
	int r, k;

	if (!len)
		return -1;
	buf[0] = '\0';
	if (!bidsname_valid_value(suffix))
		return -1;
	for (i = 0; i < n; i++)
		if (bidsname_rank(kv[i].key) < 0 || !bidsname_valid_value(kv[i].value))
			return -1;
	for (r = 0; r < NSPEC; r++)
		for (i = 0, k = 0; i < n; i++) {
			if (strcmp(kv[i].key, spec_keys[r]) != 0)
				continue;
			if (k++)
				goto fail;   /* a key given twice */
			if ((size_t)snprintf(buf + used, len - used, "%s-%s_", kv[i].key, kv[i].value) >= len - used)
				goto fail;
			used += strlen(buf + used);
		}
	if ((size_t)snprintf(buf + used, len - used, "%s%s", suffix, ext ? ext : "") >= len - used)
		goto fail;
	return 0;
fail:
	buf[0] = '\0';
	return -1;
}

int bidsname_make(const bids_entities *b, const char *suffix, const char *ext, char *buf,
		  size_t len)
{
	const char *key[] = { "sub", "ses", "task", "acq", "run", "space", "res", "label", "desc" };
	const char *val[] = { b->sub, b->ses, b->task, b->acq, b->run, b->space, b->res, b->label,
			      b->desc };
	bidsname_kv kv[9];
	size_t i, n = 0;

	if (len)
		buf[0] = '\0';
	for (i = 0; i < sizeof key / sizeof key[0]; i++) {
		if (!val[i] || !*val[i])
			continue;
		if (strlen(val[i]) >= sizeof kv[n].value)
			return -1;
		snprintf(kv[n].key, sizeof kv[n].key, "%s", key[i]);
		snprintf(kv[n].value, sizeof kv[n].value, "%s", val[i]);
		n++;
	}
	return bidsname_build(kv, n, suffix, ext, buf, len);
}

void bidsname_value(const char *text, char *buf, size_t len)
{
	size_t used = 0, i;
	int upper = 0;

	if (!len)
		return;
	for (i = 0; text[i] && used + 6 < len; i++) {
		unsigned char ch = (unsigned char)text[i];
		const char *rep = NULL;

		if (ch < 128 && isalnum(ch)) {
			buf[used] = (char)(upper && used ? toupper(ch) : ch);
			used++;
			upper = 0;
			continue;
		}
		if (ch == '-')
			rep = "Minus";
		else if (ch == '+')
			rep = "Plus";
		else if (ch == '*')
			rep = "Times";
		else if (ch == '/')
			rep = "Over";
		else if (ch == '.' && i > 0 && isdigit((unsigned char)text[i - 1]) &&
			 isdigit((unsigned char)text[i + 1]))
			rep = "p";
		if (rep) {
			size_t m = strlen(rep);

			if (used == 0 && strcmp(rep, "Minus") == 0)   /* a leading minus: lower case like a word */
				rep = "minus";
			memcpy(buf + used, rep, m);
			used += m;
			upper = m > 1;   /* the next word starts upper case; the digit after a 'p' stays */
			continue;
		}
		upper = 1;
	}
	buf[used] = '\0';
	if (!used)
		snprintf(buf, len, "x");
}

void bidsname_split_parts(const char *split, char *kind, size_t nk, char *part, size_t np)
{
	const char *colon = strchr(split, ':');

	if (!colon) {
		snprintf(kind, nk, "%s", split);
		snprintf(part, np, "%s", split);
		return;
	}
	snprintf(kind, nk, "%.*s", (int)(colon - split), split);
	snprintf(part, np, "%s", colon + 1);
}

void bidsname_split(const char *split, const char *task, char *buf, size_t len)
{
	char kind[128], part[128], a[128], b[128];

	bidsname_split_parts(split, kind, sizeof kind, part, sizeof part);
	if (strcmp(kind, "all") == 0) {
		bidsname_value(task ? task : "", b, sizeof b);
		snprintf(buf, len, "all%s", task && *task ? b : "");
		return;
	}
	/* odd-even -> oddeven, leave-one-out -> leaveoneout: the kind's letters, lower case */
	{
		size_t i, n = 0;

		for (i = 0; kind[i] && n + 1 < sizeof a; i++)
			if (isalnum((unsigned char)kind[i]))
				a[n++] = kind[i];
		a[n] = '\0';
		n = 0;
		for (i = 0; part[i] && n + 1 < sizeof b; i++)
			if (isalnum((unsigned char)part[i]))
				b[n++] = part[i];
			else if (part[i] == '.')   /* a run label <session>.<run>: 1.2 gives 1r2 */
				b[n++] = 'r';
		b[n] = '\0';
	}
	snprintf(buf, len, "%s%s", a, b);
}
