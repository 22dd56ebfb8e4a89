/* test_afile.c - atomic output files: a temporary name beside the target, renamed on commit; no
 * temporary left after a commit, an abort or a failure; the old target untouched until commit. */
#include <dirent.h>
#include <fcntl.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "io/afile.h"
#include "testlib.h"
#include "tfiles.h"

/* The content of path (static buffer), or NULL when it cannot be read. */
static const char *slurp(const char *path)
{
	static char buf[256];
	FILE *f = fopen(path, "rb");
	size_t n;

	if (!f)
		return NULL;
	n = fread(buf, 1, sizeof buf - 1, f);
	buf[n] = '\0';
	fclose(f);
	return buf;
}

static void test_commit(const char *dir)
{
	char path[4200], sub[4200];
	const char *got;
	struct stat st;
	afile a;
	sr_err e;
	int n, t;

	sr_err_init(&e, NULL, NULL);
	snprintf(sub, sizeof sub, "%s/derivatives/sub-01", dir);
	snprintf(path, sizeof path, "%s/beta.tsv", sub);
	CHECK(afile_open(&a, path, &e) == SR_OK, "open creates missing folders (%s)", e.msg);
	n = tf_entries(sub, &t);
	CHECK(n == 1 && t == 1, "while open: only a temporary in the folder (%d entries, %d temporary)",
	      n, t);
	CHECK(access(path, F_OK) != 0, "and no target yet");
	CHECK(a.tmp && strncmp(a.tmp, sub, strlen(sub)) == 0 && strstr(a.tmp, "/.beta.tsv.tmp."),
	      "the temporary sits in the target's folder: %s", a.tmp ? a.tmp : "(null)");
	fputs("melody\t1.5\n", a.f);
	CHECK(afile_commit(&a, &e) == SR_OK, "commit (%s)", e.msg);
	got = slurp(path);
	CHECK(got && strcmp(got, "melody\t1.5\n") == 0, "the target has the content written");
	n = tf_entries(sub, &t);
	CHECK(n == 1 && t == 0, "after commit: the target alone, no temporary (%d, %d)", n, t);
	CHECK(a.f == NULL && a.tmp == NULL && a.path == NULL, "the afile is released");
	CHECK(stat(path, &st) == 0 && (st.st_mode & 0777) == 0644,
	      "mode 0666 less the umask 022 = 0644 (got %o)", st.st_mode & 0777);
	CHECK(afile_commit(&a, &e) == SR_EINVAL && strstr(e.msg, "not open"),
	      "a second commit is refused: %s", e.msg);

	/* replacing: the old content stays until commit; an abort keeps it */
	CHECK(afile_open(&a, path, &e) == SR_OK, "open over an existing file");
	fputs("novel\t2\n", a.f);
	fflush(a.f);
	got = slurp(path);
	CHECK(got && strcmp(got, "melody\t1.5\n") == 0, "before commit the old content is intact");
	afile_abort(&a);
	got = slurp(path);
	CHECK(got && strcmp(got, "melody\t1.5\n") == 0, "after abort the old content is intact");
	n = tf_entries(sub, &t);
	CHECK(n == 1 && t == 0, "and no temporary is left (%d, %d)", n, t);
	afile_abort(&a);
	CHECK(a.tmp == NULL, "a second abort is harmless");

	CHECK(afile_open(&a, path, &e) == SR_OK, "open again");
	fputs("novel\t2\n", a.f);
	CHECK(afile_commit(&a, &e) == SR_OK, "commit replaces");
	got = slurp(path);
	CHECK(got && strcmp(got, "novel\t2\n") == 0, "with the new content");

	/* a relative name: the temporary goes in the current folder */
	char cwd[4200];
	CHECK(getcwd(cwd, sizeof cwd) && chdir(sub) == 0, "into the folder");
	CHECK(afile_open(&a, "rel.txt", &e) == SR_OK && strncmp(a.tmp, ".rel.txt.tmp.", 13) == 0,
	      "a bare file name gets a bare temporary name: %s", a.tmp ? a.tmp : "(null)");
	fputs("x", a.f);
	CHECK(afile_commit(&a, &e) == SR_OK && access("rel.txt", F_OK) == 0, "and is committed");
	CHECK(chdir(cwd) == 0, "back");
}

static void test_failures(const char *dir)
{
	char path[4200], blocker[4200], folder[4200];
	afile a;
	sr_err e;
	int n, t;

	sr_err_init(&e, NULL, NULL);
	/* a regular file where a parent folder should be */
	free(tf_write(dir, "fail/plain", "not a folder\n", 0));
	snprintf(blocker, sizeof blocker, "%s/fail/plain", dir);
	snprintf(path, sizeof path, "%s/x/out.tsv", blocker);
	CHECK(afile_open(&a, path, &e) == SR_EIO && strstr(e.msg, blocker) && strstr(e.msg, "not a folder"),
	      "a file in the way of a parent: SR_EIO naming it: %s", e.msg);
	CHECK(a.f == NULL && a.tmp == NULL, "nothing is open after a failed open");
	afile_abort(&a);
	{
		struct stat st;

		CHECK(a.f == NULL && a.tmp == NULL && a.path == NULL && stat(blocker, &st) == 0 &&
			      S_ISREG(st.st_mode) && st.st_size == 13,
		      "abort after a failed open leaves an empty record and the file in the way untouched");
	}

	snprintf(path, sizeof path, "%s/fail/", dir);
	CHECK(afile_open(&a, path, &e) == SR_EINVAL && strstr(e.msg, "is a folder"),
	      "a name ending in / is refused: %s", e.msg);

	/* the target is a folder with something in it: the rename fails at commit; the error
	 * names the target and the temporary is removed */
	snprintf(folder, sizeof folder, "%s/fail/taken", dir);
	free(tf_write(dir, "fail/taken/inside", "x", 0));
	CHECK(afile_open(&a, folder, &e) == SR_OK, "open onto a folder's name works at first");
	fputs("data\n", a.f);
	CHECK(afile_commit(&a, &e) == SR_EIO && strstr(e.msg, folder) && strstr(e.msg, "rename"),
	      "commit fails with SR_EIO naming the target: %s", e.msg);
	snprintf(path, sizeof path, "%s/fail", dir);
	n = tf_entries(path, &t);
	CHECK(n == 2 && t == 0, "no temporary is left beside it (%d entries, %d temporary)", n, t);
	CHECK(a.tmp == NULL && a.path == NULL, "the afile is released after a failed commit");
}

static void test_reserve(const char *dir)
{
	char path[4200], sub[4200], *tmp = NULL;
	const char *got;
	sr_err e;
	int fd, n, t;

	sr_err_init(&e, NULL, NULL);
	snprintf(sub, sizeof sub, "%s/gz/deep", dir);
	snprintf(path, sizeof path, "%s/map.nii.gz", sub);
	fd = afile_reserve(path, &tmp, &e);
	CHECK(fd >= 0 && tmp && strstr(tmp, "/.map.nii.gz.tmp."), "reserve gives a descriptor and a name (%s)",
	      tmp ? tmp : e.msg);
	CHECK(write(fd, "gzbytes", 7) == 7 && close(fd) == 0, "write through the descriptor");
	CHECK(access(path, F_OK) != 0, "no target before publish");
	CHECK(afile_publish(tmp, path, &e) == SR_OK, "publish (%s)", e.msg);
	got = slurp(path);
	CHECK(got && strcmp(got, "gzbytes") == 0, "the target has the bytes");
	n = tf_entries(sub, &t);
	CHECK(n == 1 && t == 0, "the temporary is gone (%d, %d)", n, t);
	free(tmp);

	/* publish onto a folder that does not exist: fails, names the target, removes tmp */
	fd = afile_reserve(path, &tmp, &e);
	close(fd);
	snprintf(path, sizeof path, "%s/missing/map.nii.gz", sub);
	CHECK(afile_publish(tmp, path, &e) == SR_EIO && strstr(e.msg, path),
	      "publish into a missing folder fails naming the target: %s", e.msg);
	CHECK(access(tmp, F_OK) != 0, "and removes the temporary");
	free(tmp);
}

static void test_mkdirs(const char *dir)
{
	char p[4200];
	struct stat st;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	snprintf(p, sizeof p, "%s/m//a/b/c/", dir);
	CHECK(afile_mkdirs(p, &e) == SR_OK, "mkdir -p with a double and a trailing slash (%s)", e.msg);
	snprintf(p, sizeof p, "%s/m/a/b/c", dir);
	CHECK(stat(p, &st) == 0 && S_ISDIR(st.st_mode), "every level exists");
	CHECK(afile_mkdirs(p, &e) == SR_OK, "an existing folder is fine");
	CHECK(afile_mkdirs("", &e) == SR_OK && afile_mkdirs(NULL, &e) == SR_OK, "empty and NULL do nothing");
	free(tf_write(dir, "m/a/file", "x", 0));
	snprintf(p, sizeof p, "%s/m/a/file/z", dir);
	CHECK(afile_mkdirs(p, &e) == SR_EIO && strstr(e.msg, "m/a/file"),
	      "a file on the way is SR_EIO naming it: %s", e.msg);
}

int main(void)
{
	char *dir = tf_tmpdir();

	umask(022);
	test_commit(dir);
	test_failures(dir);
	test_reserve(dir);
	test_mkdirs(dir);
	tf_rmtree(dir);
	free(dir);
	return TEST_DONE();
}
