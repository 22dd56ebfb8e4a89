/* expr.c - parsing effect expressions (weighted sums of condition names) and lists of them. */
#include "expr.h"

#include <ctype.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "mem.h"

static int fail(char *msg, size_t msglen, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));

static int fail(char *msg, size_t msglen, const char *fmt, ...)
{
	va_list ap;

	if (msg && msglen) {
		va_start(ap, fmt);
		vsnprintf(msg, msglen, fmt, ap);
		va_end(ap);
	}
	return -1;
}

static int is_name_char(char c)
{
	return isalnum((unsigned char)c) || c == '_' || c == '.';
}

static const char *skip_space(const char *p)
{
	while (*p && isspace((unsigned char)*p))
		p++;
	return p;
}

/* Length of a plain decimal number at p (digits, optional fraction, optional exponent), or 0. */
static size_t scan_number(const char *p)
{
	size_t i = 0, digits = 0;

	while (isdigit((unsigned char)p[i])) {
		i++;
		digits++;
	}
	if (p[i] == '.') {
		i++;
		while (isdigit((unsigned char)p[i])) {
			i++;
			digits++;
		}
	}
	if (digits == 0)
		return 0;
	if (p[i] == 'e' || p[i] == 'E') {
		size_t j = i + 1;

		if (p[j] == '+' || p[j] == '-')
			j++;
		if (isdigit((unsigned char)p[j])) {
			while (isdigit((unsigned char)p[j]))
				j++;
			i = j;
		}
	}
	return i;
}

/* A short quotation of the text at p for messages: one character, or "the end". */
static void describe(const char *p, char *buf, size_t len)
{
	if (!*p)
		snprintf(buf, len, "the end");
	else if (isprint((unsigned char)*p))
		snprintf(buf, len, "'%c'", *p);
	else
		snprintf(buf, len, "byte 0x%02x", (unsigned)(unsigned char)*p);
}

static void add_term(expr *x, size_t *cap, const char *name, size_t len, double w)
{
	size_t i;

	for (i = 0; i < x->nterms; i++) {
		if (strlen(x->terms[i].name) == len && memcmp(x->terms[i].name, name, len) == 0) {
			x->terms[i].weight += w;
			return;
		}
	}
	XGROW(x->terms, x->nterms, *cap);
	x->terms[x->nterms].name = xmalloc(len + 1);
	memcpy(x->terms[x->nterms].name, name, len);
	x->terms[x->nterms].name[len] = '\0';
	x->terms[x->nterms].weight = w;
	x->nterms++;
}

/* The expression without whitespace outside quotes: its name in tables. */
static char *squeeze(const char *s)
{
	char *t = xmalloc(strlen(s) + 1), *q = t;
	int quoted = 0;

	for (; *s; s++) {
		if (*s == '"')
			quoted = !quoted;
		if (!quoted && isspace((unsigned char)*s))
			continue;
		*q++ = *s;
	}
	*q = '\0';
	return t;
}

/* Drops terms whose weights cancelled to zero, keeping the order of first appearance. */
static void drop_zero_terms(expr *x)
{
	size_t i, k = 0;

	for (i = 0; i < x->nterms; i++) {
		if (x->terms[i].weight == 0.0) {
			free(x->terms[i].name);
			continue;
		}
		x->terms[k++] = x->terms[i];
	}
	x->nterms = k;
}

/*
 * Grammar: [sign] term { sign term }, term = [number '*'] name, where name is
 * [A-Za-z0-9_.]+ or "any text but a quote". A factor needs its '*' so that a
 * name that starts with a digit ("2back") is never read as "2 * back".
 */
static int parse(const char *s, size_t off, expr *out, char *msg, size_t msglen)
{
	const char *p = s;
	size_t cap = 0;
	int first = 1;
	char what[32];

	memset(out, 0, sizeof *out);
	p = skip_space(p);
	if (!*p) {
		fail(msg, msglen, "position %zu: empty effect (expected a condition name)", off + 1);
		goto bad;
	}
	while (*p) {
		double sign = 1.0, w = 1.0;
		const char *name;
		size_t len, nlen;

		if (*p == '+' || *p == '-') {
			sign = *p == '-' ? -1.0 : 1.0;
			p = skip_space(p + 1);
		} else if (!first) {
			describe(p, what, sizeof what);
			if (*p == '*')
				fail(msg, msglen,
				     "position %zu: found '*' after a name; write the factor first, as in 0.5*name",
				     off + (size_t)(p - s) + 1);
			else
				fail(msg, msglen,
				     "position %zu: expected '+' or '-' between terms, found %s (a factor is written 2*name)",
				     off + (size_t)(p - s) + 1, what);
			goto bad;
		}
		first = 0;
		/* optional factor */
		len = scan_number(p);
		if (len > 0 && *skip_space(p + len) == '*') {
			char buf[64];

			if (len >= sizeof buf) {
				fail(msg, msglen, "position %zu: factor too long", off + (size_t)(p - s) + 1);
				goto bad;
			}
			memcpy(buf, p, len);
			buf[len] = '\0';
			w = strtod(buf, NULL);
			if (!isfinite(w)) {
				fail(msg, msglen, "position %zu: factor '%s' is not a finite number",
				     off + (size_t)(p - s) + 1, buf);
				goto bad;
			}
			if (fabs(w) > EXPR_MAX_FACTOR) {
				fail(msg, msglen, "position %zu: factor '%s' is beyond %g: the effect's variance would not be computable",
				     off + (size_t)(p - s) + 1, buf, EXPR_MAX_FACTOR);
				goto bad;
			}
			p = skip_space(skip_space(p + len) + 1);
		}
		/* the name */
		if (*p == '"') {
			const char *close = strchr(p + 1, '"');

			if (!close) {
				fail(msg, msglen, "position %zu: quoted name has no closing '\"'",
				     off + (size_t)(p - s) + 1);
				goto bad;
			}
			name = p + 1;
			nlen = (size_t)(close - name);
			if (nlen == 0) {
				fail(msg, msglen, "position %zu: empty quoted name", off + (size_t)(p - s) + 1);
				goto bad;
			}
			p = close + 1;
		} else if (is_name_char(*p)) {
			name = p;
			while (is_name_char(*p))
				p++;
			nlen = (size_t)(p - name);
		} else {
			describe(p, what, sizeof what);
			fail(msg, msglen,
			     "position %zu: expected a condition name, found %s (names are letters, digits, '_' and '.', or text in double quotes)",
			     off + (size_t)(p - s) + 1, what);
			goto bad;
		}
		add_term(out, &cap, name, nlen, sign * w);
		p = skip_space(p);
	}
	/* each factor is finite, but a name given twice can add up past the largest double */
	for (size_t i = 0; i < out->nterms; i++)
		if (!isfinite(out->terms[i].weight) || fabs(out->terms[i].weight) > EXPR_MAX_FACTOR) {
			fail(msg, msglen, "the factors of '%s' add up to more than the largest number allowed (%g)",
			     out->terms[i].name, EXPR_MAX_FACTOR);
			goto bad;
		}
	drop_zero_terms(out);
	if (out->nterms == 0) {
		fail(msg, msglen, "position %zu: the weights cancel out, leaving no condition", off + 1);
		goto bad;
	}
	out->text = squeeze(s);
	return 0;
bad:
	expr_release(out);
	return -1;
}

int expr_parse(const char *s, expr *out, char *msg, size_t msglen)
{
	return parse(s, 0, out, msg, msglen);
}

void expr_release(expr *x)
{
	size_t i;

	if (!x)
		return;
	for (i = 0; i < x->nterms; i++)
		free(x->terms[i].name);
	free(x->terms);
	free(x->text);
	memset(x, 0, sizeof *x);
}

int expr_parse_list(const char *s, expr **out, size_t *n, char *msg, size_t msglen)
{
	expr *list = NULL;
	size_t count = 0, cap = 0, start = 0, i = 0, j;
	int quoted = 0;

	*out = NULL;
	*n = 0;
	for (;; i++) {
		char *piece;
		int rc;

		if (s[i] == '"')
			quoted = !quoted;
		if (s[i] && (quoted || s[i] != ','))
			continue;
		XGROW(list, count, cap);
		piece = xmalloc(i - start + 1);
		memcpy(piece, s + start, i - start);
		piece[i - start] = '\0';
		rc = parse(piece, start, &list[count], msg, msglen);
		free(piece);
		if (rc != 0)
			goto bad;
		for (j = 0; j < count; j++) {
			if (strcmp(list[j].text, list[count].text) == 0) {
				fail(msg, msglen, "position %zu: effect '%s' is listed twice",
				     (size_t)(skip_space(s + start) - s) + 1, list[count].text);
				expr_release(&list[count]);
				goto bad;
			}
		}
		count++;
		if (!s[i])
			break;
		start = i + 1;
	}
	*out = list;
	*n = count;
	return (int)count;
bad:
	expr_list_free(list, count);
	return -1;
}

void expr_list_free(expr *x, size_t n)
{
	size_t i;

	if (!x)
		return;
	for (i = 0; i < n; i++)
		expr_release(&x[i]);
	free(x);
}
