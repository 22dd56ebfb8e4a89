/* main.c - the command table, top-level help and dispatch. */
#include <stdio.h>
#include <stdlib.h>
#ifdef __GLIBC__
#include <malloc.h>
#endif
#include <string.h>
#include <unistd.h>

#include "cmd/cmd.h"
#include "cmd/cmdline.h"
#include "core/text.h"
#include "version.h"

enum { CMD_NEEDS_ARGS = 1 };

/* OpenBLAS (no header of its own here): one BLAS thread, so that products
 * never depend on thread scheduling; the commands run their own threads. */
extern void openblas_set_num_threads(int num_threads);

/* The single list of commands: help and dispatch are generated from it. */
static const struct command {
	const char *name;
	int (*run)(int argc, char **argv);
	int flags;
	const char *summary;
} commands[] = {
	{ "analyze", cmd_analyze, CMD_NEEDS_ARGS, "the whole job: fROIs from one half, responses from the other" },
	{ "check", cmd_check, CMD_NEEDS_ARGS, "validate a study without fitting" },
	{ "fit", cmd_fit, CMD_NEEDS_ARGS, "fit first-level models to BOLD runs" },
	{ "group", cmd_group, CMD_NEEDS_ARGS, "group statistics over the subjects' tables" },
	{ "parcels", cmd_parcels, CMD_NEEDS_ARGS, "make parcels from the group's localizer data or from coordinates" },
	{ "report", cmd_report, CMD_NEEDS_ARGS, "write an HTML report of a study's results" },
	{ "simulate", cmd_simulate, 0, "write an invented BIDS study with known true effects" },
	{ "slurm", cmd_slurm, CMD_NEEDS_ARGS, "write (and submit) SLURM job arrays of the subjects, then the group step; --status" },
	{ NULL, NULL, 0, NULL }
};

static size_t ncommands(void)
{
	return sizeof commands / sizeof commands[0] - 1;
}

static void top_help(FILE *f)
{
	size_t i;

	fprintf(f,
		"splitroi %s - subject-specific functional ROIs for fMRI studies\n\n"
		"usage: splitroi COMMAND [arguments]\n"
		"       splitroi help COMMAND\n"
		"       splitroi --version\n\n"
		"commands:\n",
		SPLITROI_VERSION);
	for (i = 0; i < ncommands(); i++)
		fprintf(f, "  %-10s %s\n", commands[i].name, commands[i].summary);
	fprintf(f, "\nEach command takes --help.\n\n%s", cmdline_caution);
}

static const struct command *lookup(const char *name)
{
	size_t i;

	for (i = 0; i < ncommands(); i++)
		if (strcmp(commands[i].name, name) == 0)
			return &commands[i];
	return NULL;
}

static int unknown(const char *name)
{
	const char *names[64] = { NULL };
	const char *near;
	size_t i, n = 0;

	for (i = 0; i < ncommands() && n < 64; i++)
		names[n++] = commands[i].name;
	near = text_nearest(name, names, n);
	if (near)
		fprintf(stderr, "splitroi: unknown command '%s'; did you mean '%s'?\n", name, near);
	else
		fprintf(stderr, "splitroi: unknown command '%s' (see 'splitroi --help')\n", name);
	return 2;
}

/*
 * OpenBLAS starts its thread pool when the library loads, before main, and
 * openblas_set_num_threads(1) leaves those threads alive: on a 2-core machine
 * they cost a fit about a seventh of its CPU time (system time for the page
 * table flushes a process with idle threads on other cores pays). The pool is
 * sized from OPENBLAS_NUM_THREADS at load, so when the user has not set it the
 * program sets it to 1 and executes itself again, once; the products are the
 * same either way (one BLAS thread). Where /proc/self/exe cannot be executed
 * the program simply goes on.
 */
static void single_blas_pool(char **argv)
{
	if (getenv("OPENBLAS_NUM_THREADS") || setenv("OPENBLAS_NUM_THREADS", "1", 1) != 0)
		return;
	execv("/proc/self/exe", argv);
}

/*
 * glibc raises its mmap threshold to the size of each large block freed, so
 * after a fit frees its volume buffers the output maps of the same size come
 * from the heap, where calloc must clear them page by page, and freed maps
 * stay with the process: a fit's peak grew by several MB that way. A fixed
 * threshold keeps every large block in pages of its own, mapped as zeros
 * when first touched and returned when freed. Only where memory goes: no
 * number changes.
 */
static void fixed_mmap_threshold(void)
{
#ifdef __GLIBC__
	mallopt(M_MMAP_THRESHOLD, 256 * 1024);
#endif
}

static int check_stdout(int status)
{
	if (fflush(stdout) != 0 || ferror(stdout)) {
		fprintf(stderr, "splitroi: could not write to standard output\n");
		return status ? status : 1;
	}
	return status;
}

int main(int argc, char **argv)
{
	const struct command *c;

	single_blas_pool(argv);
	openblas_set_num_threads(1);
	fixed_mmap_threshold();
	if (argc < 2) {
		top_help(stderr);
		return 2;
	}
	if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0) {
		top_help(stdout);
		return check_stdout(0);
	}
	if (strcmp(argv[1], "--version") == 0) {
		printf("splitroi %s\n", SPLITROI_VERSION);
		return check_stdout(0);
	}
	if (strcmp(argv[1], "help") == 0) {
		char *sub[] = { NULL, "--help", NULL };

		if (argc < 3) {
			top_help(stdout);
			return check_stdout(0);
		}
		c = lookup(argv[2]);
		if (!c)
			return unknown(argv[2]);
		sub[0] = argv[2];
		return check_stdout(c->run(2, sub));
	}
	if (argv[1][0] == '-') {
		fprintf(stderr, "splitroi: unknown option '%s' (see 'splitroi --help')\n", argv[1]);
		return 2;
	}
	c = lookup(argv[1]);
	if (!c)
		return unknown(argv[1]);
	if ((c->flags & CMD_NEEDS_ARGS) && argc < 3) {
		char *sub[] = { argv[1], "--help", NULL };

		c->run(2, sub);
		return 2;
	}
	return check_stdout(c->run(argc - 1, argv + 1));
}
