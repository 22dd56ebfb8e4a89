/* test_report.c - the report's text helpers: base64 (RFC 4648 test vectors) and HTML escaping. */
#include <string.h>

#include "report/report.h"
#include "testlib.h"

static void b64(const char *in, const char *want)
{
	sbuf b;
	const char *pre = "data:image/png;base64,";

	sbuf_init(&b);
	html_data_uri(&b, (const unsigned char *)in, strlen(in));
	CHECK(strncmp(b.p, pre, strlen(pre)) == 0 && strcmp(b.p + strlen(pre), want) == 0,
	      "base64(\"%s\") = \"%s\" (RFC 4648 section 10; got \"%s\")", in, want, b.p + strlen(pre));
	sbuf_release(&b);
}

int main(void)
{
	sbuf b;
	int i;

	/* RFC 4648, section 10 test vectors */
	b64("", "");
	b64("f", "Zg==");
	b64("fo", "Zm8=");
	b64("foo", "Zm9v");
	b64("foob", "Zm9vYg==");
	b64("fooba", "Zm9vYmE=");
	b64("foobar", "Zm9vYmFy");
	sbuf_init(&b);
	html_esc(&b, "a<b & \"c\" 'd'>");
	CHECK(strcmp(b.p, "a&lt;b &amp; &quot;c&quot; &#39;d&#39;&gt;") == 0, "escaping of <, &, quotes and > (got %s)", b.p);
	sbuf_release(&b);
	sbuf_init(&b);
	for (i = 0; i < 3000; i++)
		sbuf_printf(&b, "%04d,", i);
	CHECK(b.n == 15000 && strncmp(b.p + 14995, "2999,", 5) == 0, "the buffer grows past its first size intact");
	sbuf_release(&b);
	return TEST_DONE();
}
