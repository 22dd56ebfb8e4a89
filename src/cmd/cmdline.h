/* cmdline.h - option parsing shared by the commands: long options, help, suggestions. */
#ifndef SR_CMDLINE_H
#define SR_CMDLINE_H

#include <stdio.h>

/*
 * One option of a command. `arg` names the value ("N", "DIR") or is NULL for a flag.
 * A renamed option is a row { "old-name", CMDLINE_RENAMED, "new-name" } after the live
 * ones (so that the enum of indexes stays as it was): it is not shown in the help, and
 * giving it is a usage error that names the new option. The values array needs a slot
 * for these rows as well.
 */
#define CMDLINE_RENAMED "\x01renamed"
typedef struct cmdline_opt {
	const char *name;   /* long name without dashes, e.g. "out" */
	const char *arg;    /* value placeholder, NULL for a flag */
	const char *help;   /* one line */
} cmdline_opt;

/* What a command is: usage line, description paragraph, options (NULL-terminated by name). */
typedef struct cmdline_spec {
	const char *command;
	const char *usage;       /* e.g. "STUDY.ini [options]" */
	const char *about;       /* a paragraph */
	const cmdline_opt *opts; /* array ending with {NULL} */
} cmdline_spec;

/*
 * Parses argv (argv[0] = command name) against spec.
 * Options: --name VALUE, --name=VALUE, flags --name; "--" ends options.
 * On return values[i] is the value of opts[i] (flags: "1"), or NULL if absent;
 * positional arguments are gathered in pos (caller gives room for argc).
 * Returns 0 on success, 1 when --help was printed (caller returns 0),
 * 2 on a usage error (message with a suggestion already printed on stderr).
 */
int cmdline_parse(const cmdline_spec *spec, int argc, char **argv,
		  const char **values, const char **pos, int *npos);

/* Prints "splitroi COMMAND: message" on stderr. */
void cmdline_error(const char *command, const char *fmt, ...)
	__attribute__((format(printf, 2, 3)));

/* Parses a whole decimal integer within [lo, hi]; prints an error naming the option on failure. */
int cmdline_int(const char *command, const char *opt, const char *s, long lo, long hi, long *out);
/* Parses a finite decimal number within [lo, hi]. */
int cmdline_double(const char *command, const char *opt, const char *s, double lo, double hi,
		   double *out);

/* The research-software caution printed by every --help. */
extern const char cmdline_caution[];

#endif
