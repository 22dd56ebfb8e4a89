/* cmdline.c - long-option parsing with help text and typo suggestions. */
#include "cmdline.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

#include "../core/text.h"

const char cmdline_caution[] =
	"splitroi is research software. It is not validated for clinical or\n"
	"presurgical decisions; those belong to licensed clinicians under local\n"
	"regulations.\n";

void cmdline_error(const char *command, const char *fmt, ...)
{
	va_list ap;

	fprintf(stderr, "splitroi %s: ", command);
	va_start(ap, fmt);
	vfprintf(stderr, fmt, ap);
	va_end(ap);
	fputc('\n', stderr);
}

static int is_renamed(const cmdline_opt *o)
{
	return o->arg && strcmp(o->arg, CMDLINE_RENAMED) == 0;
}

/* Prints the command's help to f (for --help). */
static void cmdline_usage(const cmdline_spec *spec, FILE *f)
{
	const cmdline_opt *o;
	int width = 0;

	fprintf(f, "usage: splitroi %s %s\n\n%s\n", spec->command, spec->usage, spec->about);
	for (o = spec->opts; o && o->name; o++) {
		int w = (int)strlen(o->name) + (o->arg ? (int)strlen(o->arg) + 1 : 0);

		if (is_renamed(o))
			continue;
		if (w > width)
			width = w;
	}
	if (spec->opts && spec->opts->name)
		fprintf(f, "\noptions:\n");
	for (o = spec->opts; o && o->name; o++) {
		char left[128];

		if (is_renamed(o))
			continue;
		snprintf(left, sizeof left, "%s%s%s", o->name, o->arg ? " " : "", o->arg ? o->arg : "");
		fprintf(f, "  --%-*s  %s\n", width, left, o->help);
	}
	fprintf(f, "  --%-*s  %s\n", width, "help", "show this help");
	fprintf(f, "\n%s", cmdline_caution);
}

static int find_opt(const cmdline_spec *spec, const char *name, size_t len)
{
	int i;

	for (i = 0; spec->opts && spec->opts[i].name; i++)
		if (strlen(spec->opts[i].name) == len && strncmp(spec->opts[i].name, name, len) == 0)
			return i;
	return -1;
}

static void suggest(const cmdline_spec *spec, const char *bad)
{
	const char *names[64];
	size_t n = 0;
	const char *near;
	int i;

	for (i = 0; spec->opts && spec->opts[i].name && n < 63; i++)
		if (!is_renamed(&spec->opts[i]))
			names[n++] = spec->opts[i].name;
	names[n++] = "help";
	near = text_nearest(bad, names, n);
	if (near)
		cmdline_error(spec->command, "unknown option '--%s'; did you mean '--%s'?", bad, near);
	else
		cmdline_error(spec->command, "unknown option '--%s' (see 'splitroi help %s')", bad,
			      spec->command);
}

int cmdline_parse(const cmdline_spec *spec, int argc, char **argv,
		  const char **values, const char **pos, int *npos)
{
	int i, nopt = 0, only_pos = 0;

	while (spec->opts && spec->opts[nopt].name)
		nopt++;
	for (i = 0; i < nopt; i++)
		values[i] = NULL;
	*npos = 0;
	for (i = 1; i < argc; i++) {
		const char *a = argv[i], *name, *eq;
		size_t len;
		int k;

		if (only_pos || a[0] != '-' || a[1] == '\0') {
			pos[(*npos)++] = a;
			continue;
		}
		if (strcmp(a, "--") == 0) {
			only_pos = 1;
			continue;
		}
		if (strcmp(a, "-h") == 0 || strcmp(a, "--help") == 0) {
			cmdline_usage(spec, stdout);
			return 1;
		}
		if (a[1] != '-') {
			cmdline_error(spec->command, "unknown option '%s' (options are long: --name)", a);
			return 2;
		}
		name = a + 2;
		eq = strchr(name, '=');
		len = eq ? (size_t)(eq - name) : strlen(name);
		k = find_opt(spec, name, len);
		if (k < 0) {
			char buf[128];

			snprintf(buf, sizeof buf, "%.*s", (int)len, name);
			suggest(spec, buf);
			return 2;
		}
		if (is_renamed(&spec->opts[k])) {
			cmdline_error(spec->command, "'--%s' is now '--%s' (see 'splitroi help %s')",
				      spec->opts[k].name, spec->opts[k].help, spec->command);
			return 2;
		}
		if (!spec->opts[k].arg) {
			if (eq) {
				cmdline_error(spec->command, "option '--%s' takes no value", spec->opts[k].name);
				return 2;
			}
			values[k] = "1";
		} else if (eq) {
			values[k] = eq + 1;
		} else if (i + 1 < argc) {
			values[k] = argv[++i];
		} else {
			cmdline_error(spec->command, "option '--%s' needs a value (%s)", spec->opts[k].name,
				      spec->opts[k].arg);
			return 2;
		}
	}
	return 0;
}

int cmdline_int(const char *command, const char *opt, const char *s, long lo, long hi, long *out)
{
	char *end;
	long v;

	errno = 0;
	v = strtol(s, &end, 10);
	if (errno || end == s || *end != '\0' || v < lo || v > hi) {
		cmdline_error(command, "--%s wants a whole number from %ld to %ld, not '%s'", opt, lo, hi, s);
		return -1;
	}
	*out = v;
	return 0;
}

int cmdline_double(const char *command, const char *opt, const char *s, double lo, double hi,
		   double *out)
{
	char *end;
	double v;

	errno = 0;
	v = strtod(s, &end);
	if (errno || end == s || *end != '\0' || !isfinite(v) || v < lo || v > hi) {
		cmdline_error(command, "--%s wants a number from %g to %g, not '%s'", opt, lo, hi, s);
		return -1;
	}
	*out = v;
	return 0;
}
