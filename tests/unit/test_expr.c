/* test_expr.c - effect expressions: accepted forms, merging, quotes, lists and error positions. */
#include <string.h>

#include "core/expr.h"
#include "testlib.h"

/* Weight of name in x, or NAN when the term is absent. */
static double weight(const expr *x, const char *name)
{
	size_t i;

	for (i = 0; i < x->nterms; i++)
		if (strcmp(x->terms[i].name, name) == 0)
			return x->terms[i].weight;
	return NAN;
}

/* Parses s, expecting failure with "position P" in the message. */
static void expect_error(const char *s, const char *pos, const char *word)
{
	expr x;
	char msg[256] = "";
	int rc = expr_parse(s, &x, msg, sizeof msg);

	CHECK(rc == -1, "'%s' is rejected", s);
	CHECK(strstr(msg, pos) != NULL, "'%s' error names %s: %s", s, pos, msg);
	if (word)
		CHECK(strstr(msg, word) != NULL, "'%s' error mentions '%s': %s", s, word, msg);
	CHECK(x.terms == NULL && x.text == NULL && x.nterms == 0, "'%s' leaves an empty expr", s);
}

static void test_forms(void)
{
	expr x;
	char msg[256] = "";

	CHECK(expr_parse("melody", &x, msg, sizeof msg) == 0, "single condition");
	CHECK(x.nterms == 1 && x.terms[0].weight == 1.0, "single condition has weight 1");
	CHECK(strcmp(x.text, "melody") == 0, "text of a single condition");
	expr_release(&x);

	CHECK(expr_parse("  melody - scrambled ", &x, msg, sizeof msg) == 0, "difference");
	CHECK(x.nterms == 2, "difference has two terms");
	CHECK(strcmp(x.terms[0].name, "melody") == 0 && x.terms[0].weight == 1.0, "first term +1");
	CHECK(strcmp(x.terms[1].name, "scrambled") == 0 && x.terms[1].weight == -1.0,
	      "second term -1");
	CHECK(strcmp(x.text, "melody-scrambled") == 0, "table name has spaces removed: %s", x.text);
	expr_release(&x);

	CHECK(expr_parse("0.5*familiar + 0.5 * novel - 1e0*rest", &x, msg, sizeof msg) == 0,
	      "numeric factors: %s", msg);
	CHECK_CLOSE(weight(&x, "familiar"), 0.5, 1e-15, "0.5*familiar");
	CHECK_CLOSE(weight(&x, "novel"), 0.5, 1e-15, "0.5 * novel");
	CHECK_CLOSE(weight(&x, "rest"), -1.0, 1e-15, "- 1e0*rest");
	CHECK(strcmp(x.text, "0.5*familiar+0.5*novel-1e0*rest") == 0, "factor text kept: %s",
	      x.text);
	expr_release(&x);

	CHECK(expr_parse("-novel", &x, msg, sizeof msg) == 0, "leading minus");
	CHECK(x.nterms == 1 && x.terms[0].weight == -1.0, "leading minus gives -1");
	expr_release(&x);

	CHECK(expr_parse("+ .25*a.b_2", &x, msg, sizeof msg) == 0, "leading plus, '.5' factor, dotted name");
	CHECK_CLOSE(weight(&x, "a.b_2"), 0.25, 1e-15, "dotted name weight");
	expr_release(&x);

	/* a name may start with a digit: without '*' it is a name, not a factor */
	CHECK(expr_parse("2back - 0back", &x, msg, sizeof msg) == 0, "names starting with digits");
	CHECK(weight(&x, "2back") == 1.0 && weight(&x, "0back") == -1.0, "2back - 0back weights");
	expr_release(&x);
}

static void test_merge(void)
{
	expr x;
	char msg[256] = "";

	CHECK(expr_parse("a + b + 2*a - 0.5*b", &x, msg, sizeof msg) == 0, "repeated names");
	CHECK(x.nterms == 2, "repeated names merge to two terms");
	CHECK_CLOSE(weight(&x, "a"), 3.0, 1e-15, "a merged to 3");
	CHECK_CLOSE(weight(&x, "b"), 0.5, 1e-15, "b merged to 0.5");
	CHECK(strcmp(x.terms[0].name, "a") == 0, "order of first appearance kept");
	expr_release(&x);

	CHECK(expr_parse("a - b + b", &x, msg, sizeof msg) == 0, "cancelling term");
	CHECK(x.nterms == 1 && strcmp(x.terms[0].name, "a") == 0, "cancelled term dropped");
	expr_release(&x);

	expect_error("a - a", "position 1", "cancel");
	/* a name given twice: each factor finite, their sum not (IEEE 754: 2e308 overflows to inf) */
	expect_error("1e308*a + 1e308*a", "position 1", "beyond");
	expect_error("1e308*a - b", "position 1", "beyond 1e+06");
	expect_error("6e5*a + 6e5*a", "'a'", "largest number allowed");
}

static void test_quotes(void)
{
	expr x;
	char msg[256] = "";

	CHECK(expr_parse("\"go-left\" - 2*x", &x, msg, sizeof msg) == 0, "quoted name: %s", msg);
	CHECK(weight(&x, "go-left") == 1.0, "quoted name without quotes in terms");
	CHECK(weight(&x, "x") == -2.0, "2*x after a quoted name");
	CHECK(strcmp(x.text, "\"go-left\"-2*x") == 0, "quotes kept in text: %s", x.text);
	expr_release(&x);

	CHECK(expr_parse("\"big tone, loud\" + \"big tone, loud\"", &x, msg, sizeof msg) == 0,
	      "quoted name with space and comma");
	CHECK(x.nterms == 1 && weight(&x, "big tone, loud") == 2.0, "quoted names merge");
	CHECK(strcmp(x.text, "\"big tone, loud\"+\"big tone, loud\"") == 0,
	      "spaces inside quotes kept: %s", x.text);
	expr_release(&x);

	expect_error("a - \"open", "position 5", "closing");
	expect_error("\"\" - a", "position 1", "empty quoted");
}

static void test_errors(void)
{
	expect_error("", "position 1", "empty");
	expect_error("   ", "position 1", "empty");
	expect_error("melody -", "position 9", "the end");
	expect_error("melody - - scrambled", "position 10", "'-'");
	expect_error("2 melody", "position 3", "2*name");
	expect_error("melody*2", "position 7", "factor first");
	expect_error("a + go@left", "position 7", "'@'");
	expect_error("a & b", "position 3", "'&'");
	expect_error("(a + b)", "position 1", "'('");
	expect_error("1e999*a", "position 1", "finite");
	expect_error("a, b", "position 2", "','");
}

static void test_list(void)
{
	expr *l;
	size_t n = 99;
	char msg[256] = "";
	int rc;

	rc = expr_parse_list("melody, scrambled, melody - scrambled", &l, &n, msg, sizeof msg);
	CHECK(rc == 3 && n == 3, "list of three (rc %d)", rc);
	CHECK(strcmp(l[0].text, "melody") == 0 && strcmp(l[1].text, "scrambled") == 0 &&
		      strcmp(l[2].text, "melody-scrambled") == 0,
	      "list texts");
	expr_list_free(l, n);

	rc = expr_parse_list("\"a,b\" - c, d", &l, &n, msg, sizeof msg);
	CHECK(rc == 2, "comma inside quotes does not split (rc %d: %s)", rc, msg);
	if (rc == 2)
		CHECK(weight(&l[0], "a,b") == 1.0 && weight(&l[1], "d") == 1.0, "quoted comma name");
	expr_list_free(l, rc > 0 ? (size_t)rc : 0);

	rc = expr_parse_list("a, b -, c", &l, &n, msg, sizeof msg);
	CHECK(rc == -1 && l == NULL && n == 0, "bad item fails the list");
	CHECK(strstr(msg, "position 7") != NULL, "position counts from the list start: %s", msg);

	rc = expr_parse_list("a,,b", &l, &n, msg, sizeof msg);
	CHECK(rc == -1 && strstr(msg, "position 3") && strstr(msg, "empty"), "empty item: %s", msg);

	rc = expr_parse_list("a,", &l, &n, msg, sizeof msg);
	CHECK(rc == -1 && strstr(msg, "empty"), "trailing comma: %s", msg);

	rc = expr_parse_list("a - b, c, a-b", &l, &n, msg, sizeof msg);
	CHECK(rc == -1 && strstr(msg, "twice") && strstr(msg, "position 11"),
	      "same effect twice: %s", msg);
}

int main(void)
{
	test_forms();
	test_merge();
	test_quotes();
	test_errors();
	test_list();
	return TEST_DONE();
}
