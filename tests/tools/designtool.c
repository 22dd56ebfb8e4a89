/* designtool.c - test helper: builds a design matrix from a small text spec and prints it as CSV. */
/*
 * Spec (file argument or stdin), one item per line, '#' starts a comment:
 *   T <volumes>            tr <seconds>          volume_time <0..1>
 *   ncond <n>              cutoff <seconds>|none
 *   event <cond> <onset> <duration>
 *   confound <v_1> ... <v_T>      (n/a for a missing cell)
 * Output: T rows of p comma-separated values (%.17g), columns in design
 * order. Exit 0 ok, 1 bad spec or design error (message on stderr).
 */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/design.h"
#include "core/mem.h"

static int parse_num(const char *s, double *v)
{
	char *end;

	if (strcmp(s, "n/a") == 0) {
		*v = NAN;
		return 0;
	}
	errno = 0;
	*v = strtod(s, &end);
	return (end == s || *end != '\0' || errno) ? -1 : 0;
}

static int fail(const char *src, int line, const char *msg)
{
	fprintf(stderr, "designtool: %s:%d: %s\n", src, line, msg);
	return 1;
}

int main(int argc, char **argv)
{
	const char *src = argc > 1 ? argv[1] : "<stdin>";
	FILE *f = argc > 1 ? fopen(argv[1], "r") : stdin;
	char buf[1 << 16];
	int T = 0, ncond = 0, nconf = 0, line = 0, rc = 1;
	double tr = 0, s = 0.5, cutoff = 128;
	design_event *ev = NULL;
	size_t nev = 0;
	double *conf = NULL;
	char **conf_lines = NULL;
	int *conf_lineno = NULL;
	design d = { 0 };
	sr_err e;

	if (!f) {
		fprintf(stderr, "designtool: cannot open %s\n", src);
		return 1;
	}
	sr_err_init(&e, NULL, NULL);
	while (fgets(buf, sizeof buf, f)) {
		char *hash = strchr(buf, '#'), *key, *tok;
		double v;

		line++;
		if (hash)
			*hash = '\0';
		key = strtok(buf, " \t\r\n");
		if (!key)
			continue;
		if (strcmp(key, "event") == 0) {
			double val[3];

			for (int i = 0; i < 3; i++) {
				tok = strtok(NULL, " \t\r\n");
				if (!tok || parse_num(tok, &val[i]))
					return fail(src, line, "event needs <cond> <onset> <duration>");
			}
			ev = xrealloc(ev, (nev + 1) * sizeof *ev);
			ev[nev].cond = (int)val[0];
			ev[nev].onset = val[1];
			ev[nev].duration = val[2];
			nev++;
		} else if (strcmp(key, "confound") == 0) {
			/* Kept as text until T is known. */
			conf_lines = xrealloc(conf_lines, (size_t)(nconf + 1) * sizeof *conf_lines);
			conf_lineno = xrealloc(conf_lineno, (size_t)(nconf + 1) * sizeof *conf_lineno);
			tok = strtok(NULL, "\r\n");
			conf_lines[nconf] = xstrdup(tok ? tok : "");
			conf_lineno[nconf] = line;
			nconf++;
		} else {
			tok = strtok(NULL, " \t\r\n");
			if (!tok)
				return fail(src, line, "missing value");
			if (strcmp(key, "cutoff") == 0 && strcmp(tok, "none") == 0) {
				cutoff = 0;
				continue;
			}
			if (parse_num(tok, &v))
				return fail(src, line, "bad number");
			if (strcmp(key, "T") == 0)
				T = (int)v;
			else if (strcmp(key, "tr") == 0)
				tr = v;
			else if (strcmp(key, "volume_time") == 0)
				s = v;
			else if (strcmp(key, "ncond") == 0)
				ncond = (int)v;
			else if (strcmp(key, "cutoff") == 0)
				cutoff = v;
			else
				return fail(src, line, "unknown key");
		}
	}
	if (f != stdin)
		fclose(f);
	if (T < 1)
		return fail(src, line, "T missing");
	if (nconf > 0) {
		conf = xmalloc_array((size_t)nconf * (size_t)T, sizeof *conf);
		for (int c = 0; c < nconf; c++) {
			char *tok = strtok(conf_lines[c], " \t");
			int k = 0;

			for (; tok; tok = strtok(NULL, " \t"), k++) {
				if (k >= T || parse_num(tok, &conf[(size_t)c * T + k]))
					return fail(src, conf_lineno[c], "bad confound row");
			}
			if (k != T)
				return fail(src, conf_lineno[c], "confound needs T values");
			free(conf_lines[c]);
		}
		if (design_confounds(T, nconf, conf, &e)) {
			fprintf(stderr, "designtool: %s: %s\n", src, e.msg);
			goto out;
		}
	}
	if (design_build(T, tr, s, ev, nev, ncond, conf, nconf, cutoff, &d, &e)) {
		fprintf(stderr, "designtool: %s: %s\n", src, e.msg);
		goto out;
	}
	for (int k = 0; k < T; k++)
		for (int j = 0; j < d.p; j++)
			printf("%.17g%c", d.X[(size_t)j * T + k], j + 1 < d.p ? ',' : '\n');
	rc = (fflush(stdout) || ferror(stdout)) ? 1 : 0;
out:
	design_release(&d);
	free(ev);
	free(conf);
	free(conf_lines);
	free(conf_lineno);
	return rc;
}
