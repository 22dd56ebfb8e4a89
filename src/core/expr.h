/* expr.h - effect expressions: a condition, or a linear combination of conditions. */
#ifndef SR_EXPR_H
#define SR_EXPR_H

#include <stddef.h>

/*
 * The largest factor magnitude an effect may have (each factor and each
 * condition's total): a larger one makes c' Cov c overflow or lose all
 * precision long before it could mean anything in percent signal change.
 */
#define EXPR_MAX_FACTOR 1e6

/* One term: weight * condition. */
typedef struct expr_term {
	char *name;
	double weight;
} expr_term;

/* A parsed effect; terms with the same name are merged. Owned by the caller (expr_release). */
typedef struct expr {
	char *text;        /* the expression with spaces removed: its name in tables */
	expr_term *terms;
	size_t nterms;
} expr;

/*
 * Parses e.g. "melody - scrambled", "0.5*a + 0.5*b - c", "\"go-left\" - 2*x".
 * Names are letters, digits, '_' and '.', or any text in double quotes.
 * Returns 0, or -1 with a message in msg naming the character position (1-based).
 */
int expr_parse(const char *s, expr *out, char *msg, size_t msglen);
void expr_release(expr *x);

/* Splits a comma-separated list of expressions; returns count or -1 with message. *out xmalloc'ed. */
int expr_parse_list(const char *s, expr **out, size_t *n, char *msg, size_t msglen);
void expr_list_free(expr *x, size_t n);

#endif
