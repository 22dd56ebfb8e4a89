/* bidsname.h - BIDS file names from entities, in the order of the BIDS specification's entity table. */
#ifndef SR_BIDSNAME_H
#define SR_BIDSNAME_H

#include <stddef.h>

/*
 * The entities splitroi writes. NULL or "" leaves an entity out. Values must
 * be letters and digits only (BIDS labels); bidsname_value makes one from
 * free text. Every output map name of analyze and fit is built here.
 */
typedef struct bids_entities {
	const char *sub, *ses, *task, *acq, *run, *space, *res, *label, *desc;
} bids_entities;

/*
 * Writes "key-value_..._SUFFIX.EXT" into buf (len bytes) with the entities in
 * the specification's order (sub, ses, task, acq, run, space, res, label,
 * desc). ext includes its dot (".nii.gz", ".json", ".tsv"). Returns 0, or -1
 * when a value is not alphanumeric, the suffix is not, or buf is too small
 * (buf then holds "").
 */
int bidsname_make(const bids_entities *b, const char *suffix, const char *ext, char *buf,
		  size_t len);

/* One key-value pair of a file name. */
typedef struct bidsname_kv {
	char key[16];
	char value[128];
} bidsname_kv;

/*
 * Splits a name without suffix and extension ("sub-01_task-tones_run-1") into
 * its key-value pairs (at most max into kv, count in *n). -1 when a part is
 * not key-value, a key is not in the specification's entity table or a value
 * is not alphanumeric or too long.
 */
int bidsname_parse(const char *stem, bidsname_kv *kv, size_t max, size_t *n);

/* Position of key in the specification's entity table (0 for sub), -1 when it is not an entity. */
int bidsname_rank(const char *key);

/*
 * Like bidsname_make for any entities of the table: kv (n pairs, any order,
 * each key at most once) written in the specification's order, then _SUFFIX
 * and ext. 0, or -1 as bidsname_make (and for a key that is not an entity).
 */
int bidsname_build(const bidsname_kv *kv, size_t n, const char *suffix, const char *ext, char *buf,
		   size_t len);

/* 1 when s is a non-empty string of ASCII letters and digits (a BIDS label). */
int bidsname_valid_value(const char *s);

/*
 * An entity value from free text such as an effect expression: letters and
 * digits stay; '-' '+' '*' '/' become Minus Plus Times Over; a '.' between
 * digits becomes 'p'; any other character is dropped; the letter after a
 * dropped or replaced character is upper-cased ("melody - scrambled" gives
 * "melodyMinusScrambled", "0.5*a" gives "0p5TimesA"). "x" when nothing is left.
 */
void bidsname_value(const char *text, char *buf, size_t len);

/*
 * The value of split s of a responses table as an entity value: odd-even:A
 * gives oddevenA, leave-one-out:3 gives leaveoneout3, odd-even:mean gives
 * oddevenmean (a run label <session>.<run> such as 1.2 gives 1r2); "all" with measured task t gives "all<t>" (allmemory).
 */
void bidsname_split(const char *split, const char *task, char *buf, size_t len);

/*
 * The split kind and part of a responses-table split: odd-even:A gives
 * odd-even and A, leave-one-out:3 gives leave-one-out and 3, all gives all
 * and all. Text without a ':' is its own kind and part.
 */
void bidsname_split_parts(const char *split, char *kind, size_t nk, char *part, size_t np);

#endif
