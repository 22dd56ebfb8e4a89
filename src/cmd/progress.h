/* progress.h - thread-safe progress and warning lines on stderr: a bar on a terminal, plain lines otherwise. */
#ifndef SR_PROGRESS_H
#define SR_PROGRESS_H

#include <pthread.h>

typedef struct progress {
	pthread_mutex_t lock;
	const char *command;
	int tty, quiet, bar_shown;
	int total, done;
	long warnings;
} progress;

void progress_init(progress *p, const char *command, int total, int quiet);
void progress_release(progress *p);
/* A stage of a unit (subject): a bar update on a terminal, a line otherwise. */
void progress_stage(void *ctx, const char *unit, const char *stage);
/* One unit finished. */
void progress_step(progress *p);
/* A warning line (always shown, also when quiet); usable as an sr_warn_fn. */
void progress_warn(void *ctx, const char *msg);
/* Clears the bar before other output. */
void progress_clear(progress *p);

#endif
