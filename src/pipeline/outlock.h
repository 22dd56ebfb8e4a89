/* outlock.h - locks on parts of an output folder (one per subject, one for the group step). */
#ifndef SR_OUTLOCK_H
#define SR_OUTLOCK_H

#include "../core/err.h"

typedef struct outlock {
	int fd;          /* -1 when not held */
	char path[4096];
} outlock;

/*
 * Takes the lock OUT/.lock.NAME (NAME "sub-01", "group"; an fcntl write lock,
 * which the system drops when the holder dies, and which works across the
 * nodes of a cluster on a file system with POSIX locks). The holder's pid,
 * host and start time are written into the file, so that a second process
 * can say who holds it: with wait, it prints that once on stderr (prefixed
 * with cmd) and waits; without, it fails with SR_EIO naming the holder.
 * Locks of one process do not exclude each other (threads share them): each
 * name is taken by one thread at a time.
 */
sr_status outlock_take(outlock *l, const char *out, const char *name, int wait, const char *cmd,
		       sr_err *e);
/*
 * Removes what dead processes left in dir: entries named .NAME.tmp.PID[.N]
 * (temporary files, staging folders) whose PID is not running here and that
 * were last changed over a minute ago. prefix, when not NULL, limits it to
 * names starting with prefix (".sub-01.tmp."); skip_prefix, when not NULL,
 * spares names starting with it. Call it holding the lock under which such
 * names are made, so that no live process elsewhere can own them.
 * Returns the number of entries removed.
 */
int outlock_clean_stale(const char *dir, const char *prefix, const char *skip_prefix);

/* Releases the lock (fine on a lock not held). */
void outlock_release(outlock *l);

#endif
