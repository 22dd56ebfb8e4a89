/* csvtool.c - test tool: writes a table given as JSON through csvout, or dumps a table read by table_read. */
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/err.h"
#include "io/csvout.h"
#include "io/table.h"

/*
 * csvtool write SPEC.json OUT.csv
 *   SPEC: {"header": [names], "rows": [[cell, ...], ...]} where a cell is a
 *   string (csvout_str), an integer (csvout_int), a real (csvout_num), null
 *   (csvout_empty) or {"num": "nan"|"inf"|"-inf"} (csvout_num of that value).
 * csvtool read FILE
 *   prints a JSON object {"header": [...], "rows": [[...]], "lines": [...]}
 *   of what table_read sees.
 */
static int do_write(const char *spec, const char *out)
{
	json_error_t jerr;
	json_t *root = json_load_file(spec, 0, &jerr), *hdr, *rows, *row, *cell;
	const char **names;
	size_t nh, i, j;
	csvout c;
	sr_err e;

	sr_err_init(&e, NULL, NULL);
	if (!root) {
		fprintf(stderr, "csvtool: %s: line %d: %s\n", spec, jerr.line, jerr.text);
		return 1;
	}
	hdr = json_object_get(root, "header");
	rows = json_object_get(root, "rows");
	nh = json_array_size(hdr);
	names = calloc(nh ? nh : 1, sizeof *names);
	json_array_foreach(hdr, i, cell)
		names[i] = json_string_value(cell);
	if (csvout_open(&c, out, names, nh, &e)) {
		fprintf(stderr, "csvtool: %s\n", e.msg);
		return 1;
	}
	json_array_foreach(rows, i, row) {
		json_array_foreach(row, j, cell) {
			if (json_is_string(cell))
				csvout_str(&c, json_string_value(cell));
			else if (json_is_integer(cell))
				csvout_int(&c, (long long)json_integer_value(cell));
			else if (json_is_real(cell))
				csvout_num(&c, json_real_value(cell));
			else if (json_is_object(cell)) {
				const char *k = json_string_value(json_object_get(cell, "num"));

				csvout_num(&c, strcmp(k, "nan") == 0 ? NAN :
					       strcmp(k, "inf") == 0 ? INFINITY : -INFINITY);
			} else
				csvout_empty(&c);
		}
		csvout_endrow(&c);
	}
	free(names);
	json_decref(root);
	if (csvout_commit(&c, &e)) {
		fprintf(stderr, "csvtool: %s\n", e.msg);
		return 1;
	}
	return 0;
}

static int do_read(const char *path)
{
	json_t *root = json_object(), *hdr = json_array(), *rows = json_array(), *lines = json_array();
	table t;
	sr_err e;
	char *s;

	sr_err_init(&e, NULL, NULL);
	if (table_read(path, 0, &t, &e)) {
		fprintf(stderr, "csvtool: %s\n", e.msg);
		return 1;
	}
	for (size_t j = 0; j < t.ncols; j++)
		json_array_append_new(hdr, json_string(t.header[j]));
	for (size_t i = 0; i < t.nrows; i++) {
		json_t *row = json_array();

		for (size_t j = 0; j < t.ncols; j++)
			json_array_append_new(row, json_string(table_cell(&t, i, j)));
		json_array_append_new(rows, row);
		json_array_append_new(lines, json_integer((json_int_t)t.line[i]));
	}
	json_object_set_new(root, "header", hdr);
	json_object_set_new(root, "rows", rows);
	json_object_set_new(root, "lines", lines);
	s = json_dumps(root, JSON_COMPACT);
	puts(s);
	free(s);
	json_decref(root);
	table_release(&t);
	return 0;
}

int main(int argc, char **argv)
{
	if (argc == 4 && strcmp(argv[1], "write") == 0)
		return do_write(argv[2], argv[3]);
	if (argc == 3 && strcmp(argv[1], "read") == 0)
		return do_read(argv[2]);
	fprintf(stderr, "usage: csvtool write SPEC.json OUT.csv | csvtool read FILE\n");
	return 2;
}
