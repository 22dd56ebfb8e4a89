/* progress.c - progress bar and warning lines, serialised across worker threads. */
#include "progress.h"

#include <stdio.h>
#include <string.h>
#include <unistd.h>

void progress_init(progress *p, const char *command, int total, int quiet)
{
	memset(p, 0, sizeof *p);
	pthread_mutex_init(&p->lock, NULL);
	p->command = command;
	p->tty = isatty(2);
	p->quiet = quiet;
	p->total = total;
}

void progress_release(progress *p)
{
	progress_clear(p);
	pthread_mutex_destroy(&p->lock);
}

static void clear_locked(progress *p)
{
	if (p->bar_shown) {
		fprintf(stderr, "\r\033[K");
		p->bar_shown = 0;
	}
}

void progress_clear(progress *p)
{
	pthread_mutex_lock(&p->lock);
	clear_locked(p);
	pthread_mutex_unlock(&p->lock);
}

static void bar_locked(progress *p, const char *unit, const char *stage)
{
	char bar[21];
	int i, fill = p->total ? 20 * p->done / p->total : 0;

	for (i = 0; i < 20; i++)
		bar[i] = i < fill ? '#' : '.';
	bar[20] = '\0';
	fprintf(stderr, "\r\033[K[%s] %d/%d  %s%s%s", bar, p->done, p->total, unit ? unit : "",
		unit ? ": " : "", stage ? stage : "");
	p->bar_shown = 1;
	fflush(stderr);
}

void progress_stage(void *ctx, const char *unit, const char *stage)
{
	progress *p = ctx;

	if (p->quiet)
		return;
	pthread_mutex_lock(&p->lock);
	if (p->tty)
		bar_locked(p, unit, stage);
	else
		fprintf(stderr, "splitroi %s: sub-%s: %s\n", p->command, unit, stage);
	pthread_mutex_unlock(&p->lock);
}

void progress_step(progress *p)
{
	pthread_mutex_lock(&p->lock);
	p->done++;
	if (!p->quiet && p->tty)
		bar_locked(p, NULL, p->done == p->total ? "done" : NULL);
	pthread_mutex_unlock(&p->lock);
}

void progress_warn(void *ctx, const char *msg)
{
	progress *p = ctx;

	pthread_mutex_lock(&p->lock);
	clear_locked(p);
	fprintf(stderr, "splitroi %s: warning: %s\n", p->command, msg);
	p->warnings++;
	pthread_mutex_unlock(&p->lock);
}
