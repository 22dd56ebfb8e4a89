/* fuzz_study.c - afl++ harness for the study-file reader (src/io/study.c: study_load, study_text_get).
 *
 * The reader checks that the folders and files a study names exist (stat only; it reads no data).
 * So that an input can be accepted, the harness makes one throw-away folder per process with an
 * empty data/ folder, empty parcels.nii.gz, parcels.tsv and mask.nii.gz, copies FILE there as
 * study.ini and loads that. Parsing only: nothing else is read. Checked beyond "no crash": every
 * problem names the study file and a line that exists; an accepted study's localizer task and
 * output folder agree with study_text_get on the same text and have a line (study_line).
 */
#include <stdint.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fuzz_common.h"
#include "io/study.h"

static char dir[256], ini[300];

static void cleanup(void)
{
	static const char *const names[] = { "study.ini", "parcels.nii.gz", "parcels.tsv", "mask.nii.gz" };
	char p[400];

	for (size_t i = 0; i < sizeof names / sizeof *names; i++) {
		snprintf(p, sizeof p, "%s/%s", dir, names[i]);
		unlink(p);
	}
	snprintf(p, sizeof p, "%s/data", dir);
	rmdir(p);
	rmdir(dir);
}

/* The folder and its empty files, once a process. */
static void layout(void)
{
	static const char *const empty[] = { "parcels.nii.gz", "parcels.tsv", "mask.nii.gz" };
	const char *tmp = getenv("TMPDIR");
	char p[400];
	FILE *out;

	snprintf(dir, sizeof dir, "%s/splitroi-fuzz-study.XXXXXX", tmp && *tmp ? tmp : "/tmp");
	if (!mkdtemp(dir)) {
		perror(dir);
		exit(2);
	}
	atexit(cleanup);
	snprintf(p, sizeof p, "%s/data", dir);
	mkdir(p, 0777);
	for (size_t i = 0; i < sizeof empty / sizeof *empty; i++) {
		snprintf(p, sizeof p, "%s/%s", dir, empty[i]);
		if ((out = fopen(p, "wb")))
			fclose(out);
	}
	snprintf(ini, sizeof ini, "%s/study.ini", dir);
}

/* FILE copied in as study.ini; returns its number of lines. */
static size_t copy_in(const char *path)
{
	char buf[1 << 14];
	FILE *in, *out;
	size_t n, lines = 1;

	in = fopen(path, "rb");
	out = fopen(ini, "wb");
	if (!in || !out) {
		perror(path);
		exit(2);
	}
	while ((n = fread(buf, 1, sizeof buf, in)) > 0) {
		fwrite(buf, 1, n, out);
		for (size_t i = 0; i < n; i++)
			lines += buf[i] == '\n';
	}
	fclose(in);
	if (fclose(out) != 0)
		exit(2);
	return lines;
}

static void problems(const study_problems *p, size_t lines)
{
	size_t plen = strlen(ini);

	if (p->n == 0) {
		fprintf(stderr, "fuzz: %s refused without a problem\n", ini);
		abort();
	}
	for (size_t i = 0; i < p->n; i++) {
		const char *m = p->msg[i];
		unsigned long long line;

		if (strncmp(m, ini, plen) != 0 || strncmp(m + plen, ": ", 2) != 0) {
			fprintf(stderr, "fuzz: a problem that does not name %s: '%s'\n", ini, m);
			abort();
		}
		if (sscanf(m + plen, ": line %llu:", &line) == 1 && (line < 1 || line > lines)) {
			fprintf(stderr, "fuzz: a problem at line %llu of a %zu-line file: '%s'\n", line, lines, m);
			abort();
		}
	}
	printf("refused: %zu problems, first: %s\n", p->n, p->msg[0]);
}

/* An accepted key agrees with study_text_get and has a line. */
static void agrees(const study *s, const char *section, const char *key, const char *got)
{
	char *t = study_text_get(s->text, section, key);
	size_t line = study_line(s, section, key);

	if (!t || !got || (strcmp(t, got) != 0 && !strstr(got, t)) || line == 0) {
		fprintf(stderr, "fuzz: [%s] %s: the study says '%s', study_text_get '%s', line %zu\n", section,
			key, got ? got : "(none)", t ? t : "(none)", line);
		abort();
	}
	free(t);
}

static int one(const char *path)
{
	size_t lines = copy_in(path);
	study_problems p = { 0 };
	study s;

	if (study_load(ini, &s, &p) != SR_OK) {
		problems(&p, lines);
		study_problems_release(&p);
		return 0;
	}
	if (p.n)
		abort();   /* accepted with problems */
	agrees(&s, "localizer", "task", s.loc_task);
	if (study_line(&s, "study", "out"))
		agrees(&s, "study", "out", s.out);   /* the resolved path ends with the text */
	printf("accepted: localizer task %s, %zu measured tasks, %zu keys\n", s.loc_task, s.nmeasures,
	       s.nkeys);
	study_release(&s);
	return 0;
}

int main(int argc, char **argv)
{
	const char *path = fuzz_path(argc, argv);

	layout();
	FUZZ_MAIN(one, path);
}
