/* test_sbuf.c - the growing text buffer: zeroed start, growth past the first capacity, printf of any length. */
#include <string.h>

#include "core/sbuf.h"
#include "testlib.h"

int main(void)
{
	sbuf b = {0}, c;
	size_t i;
	int ok = 1;

	sbuf_printf(&b, "%s", "");
	CHECK(b.p && b.p[0] == 0 && b.n == 0, "a zeroed buffer after an empty printf holds \"\"");
	sbuf_puts(&b, "tones");
	sbuf_printf(&b, " run %d of %d", 2, 3);
	CHECK(strcmp(b.p, "tones run 2 of 3") == 0 && b.n == 16, "puts then printf: '%s' (%zu)", b.p, b.n);
	for (i = 0; i < 5000; i++)
		sbuf_printf(&b, "%03zu,", i % 1000);
	CHECK(b.n == 16 + 5000 * 4 && strlen(b.p) == b.n, "20016 bytes after 5000 appends (n %zu)", b.n);
	for (i = 0; i < 5000; i++)
		ok &= b.p[16 + 4 * i + 3] == ',' && b.p[16 + 4 * i] == (char)('0' + (i % 1000) / 100);
	CHECK(ok, "every piece where it belongs");
	CHECK(b.cap > b.n, "the NUL fits (cap %zu > n %zu)", b.cap, b.n);
	sbuf_release(&b);
	CHECK(!b.p && !b.n && !b.cap, "release zeroes");
	sbuf_init(&c);
	CHECK(c.p && c.p[0] == 0 && c.n == 0 && c.cap == 4096, "init: empty with 4096 bytes");
	{
		char big[10000];

		memset(big, 'x', sizeof big - 1);
		big[sizeof big - 1] = 0;
		sbuf_printf(&c, "<%s>", big);   /* longer than the first capacity in one go */
	}
	CHECK(c.n == 10001 && c.p[0] == '<' && c.p[10000] == '>' && c.p[10001] == 0,
	      "one printf longer than the capacity is complete (n %zu)", c.n);
	sbuf_release(&c);
	return TEST_DONE();
}
