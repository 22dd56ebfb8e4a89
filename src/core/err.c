/* err.c - filling error records and forwarding warnings. */
#include "err.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

void sr_err_init(sr_err *e, sr_warn_fn warn, void *ctx)
{
	memset(e, 0, sizeof *e);
	e->warn = warn;
	e->warn_ctx = ctx;
}

sr_status sr_fail(sr_err *e, sr_status code, const char *fmt, ...)
{
	va_list ap;

	if (!e)
		return code;
	e->code = code;
	va_start(ap, fmt);
	vsnprintf(e->msg, sizeof e->msg, fmt, ap);
	va_end(ap);
	return code;
}

void sr_warnf(sr_err *e, const char *fmt, ...)
{
	char buf[2048];
	va_list ap;

	if (!e || !e->warn)
		return;
	va_start(ap, fmt);
	vsnprintf(buf, sizeof buf, fmt, ap);
	va_end(ap);
	e->warn(e->warn_ctx, buf);
}

