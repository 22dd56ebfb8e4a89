/* outlock.c - locks on parts of an output folder (one per subject, one for the group step). */
#include "outlock.h"

#include <dirent.h>
#include <errno.h>
#include <signal.h>
#include <stdlib.h>
#include <sys/stat.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "subunit.h"

/* Who holds it, as its holder wrote it (one line), into buf. */
static void holder(int fd, char *buf, size_t n)
{
	ssize_t got = pread(fd, buf, n - 1, 0);
	char *nl;

	if (got <= 0) {
		snprintf(buf, n, "another process (it has not said which yet)");
		return;
	}
	buf[got] = '\0';
	if ((nl = strchr(buf, '\n')) != NULL)
		*nl = '\0';
}

static int try_lock(int fd, int block)
{
	struct flock fl;

	memset(&fl, 0, sizeof fl);
	fl.l_type = F_WRLCK;
	fl.l_whence = SEEK_SET;
	for (;;) {
		if (fcntl(fd, block ? F_SETLKW : F_SETLK, &fl) == 0)
			return 0;
		if (errno != EINTR)
			return -1;
	}
}

sr_status outlock_take(outlock *l, const char *out, const char *name, int wait, const char *cmd,
		       sr_err *e)
{
	char who[512], host[256] = "", when[64];
	time_t now = time(NULL);
	struct tm tm;
	int n;

	l->fd = -1;
	snprintf(l->path, sizeof l->path, "%s/.lock.%s", out, name);
	l->fd = open(l->path, O_RDWR | O_CREAT | O_CLOEXEC, 0666);
	if (l->fd < 0)
		return sr_fail(e, SR_EIO, "%s: cannot open the lock file: %s", l->path, strerror(errno));
	if (try_lock(l->fd, 0) != 0) {
		if (errno != EACCES && errno != EAGAIN) {
			int err = errno;

			close(l->fd);
			l->fd = -1;
			return sr_fail(e, SR_EIO, "%s: cannot take the lock: %s", l->path, strerror(err));
		}
		holder(l->fd, who, sizeof who);
		if (!wait) {
			close(l->fd);
			l->fd = -1;
			return sr_fail(e, SR_EIO, "%s: held by %s; not waiting (--no-wait)", l->path, who);
		}
		fprintf(stderr, "%s: %s: waiting for %s, which holds %s\n", cmd, name, who, l->path);
		if (try_lock(l->fd, 1) != 0) {
			int err = errno;

			close(l->fd);
			l->fd = -1;
			return sr_fail(e, SR_EIO, "%s: cannot take the lock: %s", l->path, strerror(err));
		}
	}
	gethostname(host, sizeof host - 1);
	gmtime_r(&now, &tm);
	strftime(when, sizeof when, "%Y-%m-%dT%H:%M:%SZ", &tm);
	n = snprintf(who, sizeof who, "pid %ld on host %s since %s\n", (long)getpid(), host, when);
	{
		/* who holds it is only a courtesy to the next process: failing to say is no error */
		int said = ftruncate(l->fd, 0) == 0 && pwrite(l->fd, who, (size_t)n, 0) == n;

		(void)said;
	}
	return SR_OK;
}

void outlock_release(outlock *l)
{
	if (l->fd >= 0)
		close(l->fd);   /* drops the fcntl lock */
	l->fd = -1;
}

/* The PID of a name .NAME.tmp.PID[.N], or -1 when it is not one. */
static long tmp_pid(const char *name)
{
	const char *t = name[0] == '.' ? strstr(name, ".tmp.") : NULL;
	char *end;
	long pid;

	if (!t)
		return -1;
	/* the last ".tmp." in the name: NAME may hold one itself */
	for (const char *u = t; (u = strstr(u + 1, ".tmp.")) != NULL;)
		t = u;
	pid = strtol(t + 5, &end, 10);
	if (end == t + 5 || pid <= 0 || (*end && *end != '.'))
		return -1;
	if (*end == '.') {
		const char *q = end + 1;

		if (!*q)
			return -1;
		while (*q >= '0' && *q <= '9')
			q++;
		if (*q)
			return -1;
	}
	return pid;
}

int outlock_clean_stale(const char *dir, const char *prefix, const char *skip_prefix)
{
	DIR *d = opendir(dir);
	struct dirent *de;
	time_t now = time(NULL);
	int n = 0;

	if (!d)
		return 0;
	while ((de = readdir(d)) != NULL) {
		char p[4096];
		struct stat sb;
		long pid = tmp_pid(de->d_name);

		if (pid < 0 || (prefix && strncmp(de->d_name, prefix, strlen(prefix)) != 0) ||
		    (skip_prefix && strncmp(de->d_name, skip_prefix, strlen(skip_prefix)) == 0))
			continue;
		if (pid == (long)getpid() || !(kill((pid_t)pid, 0) != 0 && errno == ESRCH))
			continue;
		snprintf(p, sizeof p, "%s/%s", dir, de->d_name);
		if (lstat(p, &sb) != 0 || sb.st_mtime > now - 60)
			continue;
		subunit_remove_tree(p);
		n++;
	}
	closedir(d);
	return n;
}
