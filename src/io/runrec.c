/* runrec.c - the run record (run.json, via jansson) and a minimal INI key lookup for the report. */
#include <jansson.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "../core/mem.h"
#include "runrec.h"
#include "study.h"

static char *dup_str(json_t *o, const char *key)
{
	json_t *v = json_object_get(o, key);

	return json_is_string(v) ? xstrdup(json_string_value(v)) : NULL;
}

sr_status runrec_read(const char *path, runrec *r, sr_err *e)
{
	json_error_t je;
	json_t *root, *in, *v;
	const char *task;
	json_t *list;
	size_t cap = 0;

	memset(r, 0, sizeof *r);
	r->seconds = NAN;
	root = json_load_file(path, 0, &je);
	if (!root) {
		if (je.line <= 0)
			return sr_fail(e, SR_EIO, "%s: cannot read: %s", path, je.text);
		return sr_fail(e, SR_EFORMAT, "%s: line %d, column %d: %s", path, je.line, je.column,
			       je.text);
	}
	if (!json_is_object(root)) {
		json_decref(root);
		return sr_fail(e, SR_EFORMAT, "%s: expected a JSON object", path);
	}
	r->subject = dup_str(root, "subject");
	r->study_file = dup_str(root, "study_file");
	r->study_text = dup_str(root, "study_text");
	r->parcels = dup_str(root, "parcels");
	v = json_object_get(root, "seconds");
	if (json_is_number(v))
		r->seconds = json_number_value(v);
	in = json_object_get(root, "inputs");
	if (json_is_object(in)) {
		json_object_foreach(in, task, list) {
			size_t i;
			json_t *o;

			if (!json_is_array(list))
				continue;
			json_array_foreach(list, i, o) {
				runrec_run *x;
				json_t *dims;

				if (!json_is_object(o))
					continue;
				XGROW(r->runs, r->nruns, cap);
				x = &r->runs[r->nruns++];
				memset(x, 0, sizeof *x);
				x->task = xstrdup(task);
				x->run = dup_str(o, "run");
				if (!x->run)
					x->run = xstrdup("");
				x->bold = dup_str(o, "bold");
				x->confounds = dup_str(o, "confounds");
				x->events = dup_str(o, "events");
				v = json_object_get(o, "tr");
				x->tr = json_is_number(v) ? json_number_value(v) : NAN;
				dims = json_object_get(o, "dims");
				v = json_is_array(dims) ? json_array_get(dims, 3) : NULL;
				x->nt = json_is_number(v) ? (long long)json_number_value(v) : -1;
			}
		}
	}
	json_decref(root);
	return SR_OK;
}

void runrec_release(runrec *r)
{
	size_t i;

	for (i = 0; i < r->nruns; i++) {
		free(r->runs[i].task);
		free(r->runs[i].run);
		free(r->runs[i].bold);
		free(r->runs[i].confounds);
		free(r->runs[i].events);
	}
	free(r->runs);
	free(r->subject);
	free(r->study_file);
	free(r->study_text);
	free(r->parcels);
	memset(r, 0, sizeof *r);
}

char *runrec_ini_get(const char *text, const char *section, const char *key)
{
	/* the study loader's own reader, so that the report reads keys as analyze did */
	return study_text_get(text, section, key);
}
