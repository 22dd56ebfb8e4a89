/* readall.h - a whole file read into memory (the study file, tables): the one reader under both. */
#ifndef SR_READALL_H
#define SR_READALL_H

#include <stddef.h>

enum { READALL_OK = 0, READALL_EOPEN, READALL_EREAD, READALL_ETOOBIG };

/*
 * Reads path whole into *buf (NUL-terminated, *len bytes without the NUL; the
 * caller frees it). max > 0 refuses a file of more than max bytes
 * (READALL_ETOOBIG, reading stops after max + 1 bytes); 0 means no limit.
 * Returns READALL_OK, or READALL_EOPEN / READALL_EREAD with errno from the
 * failing call, so that each caller words its own message; on failure *buf
 * is NULL. Thread safe.
 */
int readall_file(const char *path, size_t max, char **buf, size_t *len);

#endif
