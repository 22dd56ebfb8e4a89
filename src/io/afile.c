/* afile.c - atomic output files: a temporary name in the target folder, checked writes, rename. */
#include "afile.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../core/mem.h"

sr_status afile_mkdirs(const char *dir, sr_err *e)
{
	char *p, *s;
	struct stat st;
	sr_status rc = SR_OK;

	if (!dir || !*dir)
		return SR_OK;
	p = xstrdup(dir);
	/* Walk the path, creating each missing prefix; EEXIST is fine when it is a folder. */
	for (s = p + 1;; s++) {
		if (*s != '/' && *s != '\0')
			continue;
		char c = *s;
		*s = '\0';
		if (mkdir(p, 0777) != 0 && errno != EEXIST) {
			rc = sr_fail(e, SR_EIO, "%s: cannot create folder: %s", p, strerror(errno));
			goto out;
		}
		if (stat(p, &st) != 0 || !S_ISDIR(st.st_mode)) {
			rc = sr_fail(e, SR_EIO, "%s: exists and is not a folder", p);
			goto out;
		}
		*s = c;
		if (c == '\0')
			break;
		while (s[1] == '/')
			s++;
		if (s[1] == '\0')
			break;
	}
out:
	free(p);
	return rc;
}

/* The folder part of path ("" when there is none); caller frees. */
static char *dir_of(const char *path)
{
	const char *slash = strrchr(path, '/');
	char *d;

	if (!slash)
		return xstrdup("");
	if (slash == path)
		return xstrdup("/");
	d = xmalloc((size_t)(slash - path) + 1);
	memcpy(d, path, (size_t)(slash - path));
	d[slash - path] = '\0';
	return d;
}

int afile_reserve(const char *path, char **tmp, sr_err *e)
{
	const char *slash = strrchr(path, '/');
	const char *base = slash ? slash + 1 : path;
	char *dir;
	size_t n;
	int fd = -1;

	*tmp = NULL;
	if (!*base) {
		sr_fail(e, SR_EINVAL, "%s: output name is a folder", path);
		return -1;
	}
	dir = dir_of(path);
	if (afile_mkdirs(dir, e) != SR_OK) {
		free(dir);
		return -1;
	}
	n = strlen(path) + 64;
	*tmp = xmalloc(n);
	/*
	 * ".NAME.tmp.PID.N" in the same folder, so rename() never crosses file
	 * systems; O_EXCL with a counter avoids clashing with another writer and
	 * keeps the umask's permissions (unlike mkstemp's 0600).
	 */
	for (unsigned i = 0; i < 1000; i++) {
		snprintf(*tmp, n, "%s%s.%s.tmp.%ld.%u", dir, *dir && strcmp(dir, "/") ? "/" : "",
			 base, (long)getpid(), i);
		fd = open(*tmp, O_WRONLY | O_CREAT | O_EXCL, 0666);
		if (fd >= 0 || errno != EEXIST)
			break;
	}
	if (fd < 0) {
		sr_fail(e, SR_EIO, "%s: cannot create temporary file %s: %s", path, *tmp,
			strerror(errno));
		free(*tmp);
		*tmp = NULL;
	}
	free(dir);
	return fd;
}

sr_status afile_publish(const char *tmp, const char *path, sr_err *e)
{
	int fd = open(tmp, O_RDONLY);

	/* fsync before rename: a crash must leave the old file or the whole new one. */
	if (fd < 0 || fsync(fd) != 0) {
		int err = errno;

		if (fd >= 0)
			close(fd);
		unlink(tmp);
		return sr_fail(e, SR_EIO, "%s: cannot sync %s: %s", path, tmp, strerror(err));
	}
	close(fd);
	if (rename(tmp, path) != 0) {
		int err = errno;

		unlink(tmp);
		return sr_fail(e, SR_EIO, "%s: cannot rename %s into place: %s", path, tmp,
			       strerror(err));
	}
	return SR_OK;
}

sr_status afile_open(afile *a, const char *path, sr_err *e)
{
	int fd;

	memset(a, 0, sizeof *a);
	fd = afile_reserve(path, &a->tmp, e);
	if (fd < 0)
		return e ? e->code : SR_EIO;
	a->f = fdopen(fd, "w");
	if (!a->f) {
		int err = errno;

		close(fd);
		unlink(a->tmp);
		free(a->tmp);
		a->tmp = NULL;
		return sr_fail(e, SR_EIO, "%s: cannot open temporary file: %s", path, strerror(err));
	}
	a->path = xstrdup(path);
	return SR_OK;
}

sr_status afile_commit(afile *a, sr_err *e)
{
	sr_status rc = SR_OK;
	int err = 0;

	if (!a->f)
		return sr_fail(e, SR_EINVAL, "%s: file is not open", a->path ? a->path : "(none)");
	if (fflush(a->f) != 0 || ferror(a->f))
		err = errno ? errno : EIO;
	if (!err && fsync(fileno(a->f)) != 0)
		err = errno;
	if (fclose(a->f) != 0 && !err)
		err = errno ? errno : EIO;
	a->f = NULL;
	if (err) {
		unlink(a->tmp);
		rc = sr_fail(e, SR_EIO, "%s: write failed: %s", a->path, strerror(err));
	} else if (rename(a->tmp, a->path) != 0) {
		err = errno;
		unlink(a->tmp);
		rc = sr_fail(e, SR_EIO, "%s: cannot rename %s into place: %s", a->path, a->tmp,
			     strerror(err));
	}
	free(a->tmp);
	free(a->path);
	a->tmp = a->path = NULL;
	return rc;
}

void afile_abort(afile *a)
{
	if (!a)
		return;
	if (a->f)
		fclose(a->f);
	if (a->tmp)
		unlink(a->tmp);
	free(a->tmp);
	free(a->path);
	a->f = NULL;
	a->tmp = a->path = NULL;
}
