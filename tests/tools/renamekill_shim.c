/* renamekill_shim.c - LD_PRELOAD library for tests/cli/test_kill_every_rename.sh.
 *
 * Intercepts rename(), renameat() and renameat2(). Every call is counted (one
 * counter for the process, all threads); with SR_KILL_RENAME=N the Nth call
 * kills the process with SIGKILL instead of renaming, as a power cut or an OOM
 * killer would (no atexit handler, no unlock, nothing flushed). With
 * SR_KILL_WHEN=after the Nth rename is done first and the kill follows it.
 * SR_RENAME_LOG=FILE appends one line per call, "N<TAB>from<TAB>to", written
 * before the rename, so that a run with no kill lists every rename it makes.
 *
 * Built as a shared object, not linked with the project's library (the rule in
 * the Makefile); it takes no sanitizer flags, so ASan builds preload it with
 * ASAN_OPTIONS=verify_asan_link_order=0.
 */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <fcntl.h>
#include <signal.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static atomic_long calls;

static long env_long(const char *name)
{
	const char *s = getenv(name);
	if (!s || !*s)
		return 0;
	return strtol(s, NULL, 10);
}

static void log_call(long n, const char *from, const char *to)
{
	const char *path = getenv("SR_RENAME_LOG");
	if (!path || !*path)
		return;
	char line[8192];
	int len = snprintf(line, sizeof line, "%ld\t%s\t%s\n", n, from, to);
	if (len < 0)
		return;
	if ((size_t)len >= sizeof line)
		len = (int)sizeof line - 1;
	int fd = open(path, O_WRONLY | O_APPEND | O_CREAT | O_CLOEXEC, 0644);
	if (fd < 0)
		return;
	ssize_t w = write(fd, line, (size_t)len); /* one write: O_APPEND keeps lines whole */
	(void)w;
	close(fd);
}

/* Counts the call; kills here when it is the chosen one and the kill comes first.
 * Returns whether the kill follows the rename. */
static int before_rename(const char *from, const char *to)
{
	long n = atomic_fetch_add(&calls, 1) + 1;
	log_call(n, from, to);
	long at = env_long("SR_KILL_RENAME");
	if (at <= 0 || n != at)
		return 0;
	const char *when = getenv("SR_KILL_WHEN");
	if (when && strcmp(when, "after") == 0)
		return 1;
	raise(SIGKILL);
	return 0;
}

static void *next(const char *name)
{
	void *f = dlsym(RTLD_NEXT, name);
	if (!f) {
		static const char msg[] = "renamekill_shim: symbol not found\n";
		ssize_t w = write(2, msg, sizeof msg - 1);
		(void)w;
		_exit(127);
	}
	return f;
}

int rename(const char *from, const char *to)
{
	static int (*real)(const char *, const char *);
	if (!real)
		real = (int (*)(const char *, const char *))next("rename");
	int kill_after = before_rename(from, to);
	int rc = real(from, to);
	if (kill_after)
		raise(SIGKILL);
	return rc;
}

int renameat(int fromfd, const char *from, int tofd, const char *to)
{
	static int (*real)(int, const char *, int, const char *);
	if (!real)
		real = (int (*)(int, const char *, int, const char *))next("renameat");
	int kill_after = before_rename(from, to);
	int rc = real(fromfd, from, tofd, to);
	if (kill_after)
		raise(SIGKILL);
	return rc;
}

int renameat2(int fromfd, const char *from, int tofd, const char *to, unsigned int flags)
{
	static int (*real)(int, const char *, int, const char *, unsigned int);
	if (!real)
		real = (int (*)(int, const char *, int, const char *, unsigned int))next("renameat2");
	int kill_after = before_rename(from, to);
	int rc = real(fromfd, from, tofd, to, flags);
	if (kill_after)
		raise(SIGKILL);
	return rc;
}
