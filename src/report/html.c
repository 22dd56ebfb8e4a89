/* html.c - escaping, base64 data URIs and the page frame of the HTML report. */
#include <math.h>
#include <stdarg.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "../core/mem.h"
#include "../io/afile.h"
#include "../version.h"
#include "report.h"

void html_esc(sbuf *b, const char *s)
{
	for (; s && *s; s++)
		switch (*s) {
		case '&': sbuf_puts(b, "&amp;"); break;
		case '<': sbuf_puts(b, "&lt;"); break;
		case '>': sbuf_puts(b, "&gt;"); break;
		case '"': sbuf_puts(b, "&quot;"); break;
		case '\'': sbuf_puts(b, "&#39;"); break;
		default:
			sbuf_room(b, 1);
			b->p[b->n++] = *s;
			b->p[b->n] = 0;
		}
}

/* RFC 4648 base64, padded. */
void html_data_uri(sbuf *b, const unsigned char *d, size_t n)
{
	static const char al[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
	size_t i;
	char *o;

	sbuf_puts(b, "data:image/png;base64,");
	sbuf_room(b, (n + 2) / 3 * 4);
	o = b->p + b->n;
	for (i = 0; i + 2 < n; i += 3) {
		unsigned v = (unsigned)d[i] << 16 | (unsigned)d[i + 1] << 8 | d[i + 2];

		*o++ = al[v >> 18 & 63];
		*o++ = al[v >> 12 & 63];
		*o++ = al[v >> 6 & 63];
		*o++ = al[v & 63];
	}
	if (i < n) {
		unsigned v = (unsigned)d[i] << 16 | (i + 1 < n ? (unsigned)d[i + 1] << 8 : 0);

		*o++ = al[v >> 18 & 63];
		*o++ = al[v >> 12 & 63];
		*o++ = i + 1 < n ? al[v >> 6 & 63] : '=';
		*o++ = '=';
	}
	*o = 0;
	b->n = (size_t)(o - b->p);
}

void html_num(sbuf *b, double v)
{
	if (isnan(v))
		sbuf_puts(b, "&ndash;");
	else
		sbuf_printf(b, "%.4g", v);
}

/*
 * The style sheet: warm paper, ink-dark text, one accent; figures and tables
 * carry labels and patterns so a gray-scale print reads the same.
 */
static const char css[] =
	":root{--ink:#1d232b;--soft:#5b6470;--rule:#d9d4c7;--paper:#fbfaf6;--card:#ffffff;"
	"--accent:#8a3b12;--warn:#9b1c1c}\n"
	"*{box-sizing:border-box}\n"
	"body{margin:0;background:var(--paper);color:var(--ink);"
	"font:15px/1.5 \"Iowan Old Style\",\"Palatino Linotype\",Palatino,Georgia,serif}\n"
	"header.top{padding:28px 40px 18px;border-bottom:3px double var(--ink)}\n"
	"header.top h1{margin:0;font-size:26px;letter-spacing:.02em;font-weight:600}\n"
	"header.top p{margin:4px 0 0;color:var(--soft)}\n"
	"header.top a.back{font:13px/1 system-ui,sans-serif;color:var(--accent)}\n"
	"main{padding:8px 40px 40px;max-width:1180px}\n"
	"h2{font-size:19px;margin:30px 0 8px;padding-bottom:3px;border-bottom:1px solid var(--rule)}\n"
	"h3{font-size:16px;margin:20px 0 6px}\n"
	"p.note,figcaption,.small{color:var(--soft);font-size:13px}\n"
	"figure{margin:10px 0 18px;display:inline-block;vertical-align:top;background:var(--card);"
	"border:1px solid var(--rule);padding:10px 12px;break-inside:avoid}\n"
	"figure img{image-rendering:pixelated;display:block}\n"
	".strip{display:flex;flex-wrap:wrap;gap:6px;align-items:flex-end}\n"
	".strip div{font:12px/1.3 system-ui,sans-serif;text-align:center}\n"
	"table{border-collapse:collapse;margin:8px 0 18px;font:13px/1.35 system-ui,sans-serif;"
	"background:var(--card)}\n"
	"th,td{padding:3px 9px;border-bottom:1px solid var(--rule);text-align:left;white-space:nowrap}\n"
	"div.wide{overflow-x:auto;max-width:100%}\n"
	"th{border-bottom:2px solid var(--ink);font-weight:600}\n"
	"td.n{text-align:right;font-variant-numeric:tabular-nums}\n"
	"tr.flag td{background:#f7e9e4}\n"
	"div.banner{margin:16px 0 8px;padding:10px 14px;border:2px solid var(--warn);background:#fbeeea;"
	"font:14px/1.45 system-ui,sans-serif}\n"
	"div.banner ul{margin:4px 0 4px 18px;padding:0}\n"
	"div.wide{border:1px solid var(--rule);max-height:70vh;overflow:auto}\n"
	"div.wide table{margin:0}\n"
	"div.wide{margin:8px 0 18px}div.wide th{position:sticky;top:0;background:var(--card)}\n"
	"div.slice{display:inline-grid;grid-template-columns:auto auto auto;align-items:center;"
	"justify-items:center;gap:0 3px}\n"
	"div.slice span.o{font:700 12px/1 system-ui,sans-serif;color:var(--accent)}\n"
	"div.slice span.z{grid-column:1/4}\n"
	"span.flag{color:var(--warn);font-weight:700}\n"
	"nav.toc{font:13px/1.6 system-ui,sans-serif}\n"
	"nav.toc a,main a{color:var(--accent)}\n"
	"svg text{font-family:system-ui,sans-serif;fill:var(--ink)}\n"
	"@media print{body{background:#fff;font-size:10pt}header.top{padding:0 0 8px}"
	"main{padding:0;max-width:none}a{color:inherit;text-decoration:none}div.wide{max-height:none}"
	"a.back,nav.toc{display:none}figure{border:0;padding:0}h2{break-after:avoid}"
	"table{font-size:8.5pt}tr{break-inside:avoid}div.wide{overflow:visible}th,td{white-space:normal}}\n";

void html_begin(sbuf *b, const char *title, const char *subtitle, const char *back_href,
	      const char *back_text)
{
	sbuf_puts(b, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
		   "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>");
	html_esc(b, title);
	sbuf_puts(b, "</title>\n<style>\n");
	sbuf_puts(b, css);
	sbuf_puts(b, "</style>\n</head>\n<body>\n<header class=\"top\">\n");
	if (back_href) {
		sbuf_puts(b, "<a class=\"back\" href=\"");
		html_esc(b, back_href);
		sbuf_puts(b, "\">&larr; ");
		html_esc(b, back_text);
		sbuf_puts(b, "</a>\n");
	}
	sbuf_puts(b, "<h1>");
	html_esc(b, title);
	sbuf_puts(b, "</h1>\n");
	if (subtitle) {
		sbuf_puts(b, "<p>");
		html_esc(b, subtitle);
		sbuf_puts(b, "</p>\n");
	}
	sbuf_puts(b, "</header>\n<main>\n");
}

void html_end(sbuf *b, const char *study_file)
{
	char when[64] = "";
	time_t now = time(NULL);
	struct tm tm;

	if (gmtime_r(&now, &tm))
		strftime(when, sizeof when, "%Y-%m-%d %H:%M UTC", &tm);
	sbuf_puts(b, "<footer class=\"made\"><p class=\"note\">Study file <b class=\"study\">");
	html_esc(b, study_file && *study_file ? study_file : "(not recorded)");
	sbuf_puts(b, "</b>; page written by splitroi <b class=\"version\">" SPLITROI_VERSION "</b> on <b class=\"date\">");
	html_esc(b, when);
	sbuf_puts(b, "</b>. Research software: check every result against the data before relying on it.</p></footer>\n"
		   "</main>\n</body>\n</html>\n");
}

sr_status html_write(const char *path, const sbuf *b, sr_err *e)
{
	afile a;
	sr_status rc = afile_open(&a, path, e);

	if (rc)
		return rc;
	if (fwrite(b->p, 1, b->n, a.f) != b->n) {
		int err = errno;

		afile_abort(&a);
		return sr_fail(e, SR_EIO, "%s: write failed: %s", path, err ? strerror(err) : "short write");
	}
	return afile_commit(&a, e);
}
