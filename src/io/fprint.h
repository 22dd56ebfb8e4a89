/* fprint.h - content fingerprints of input and output files, for freshness and completion records. */
#ifndef SR_FPRINT_H
#define SR_FPRINT_H

#include <stddef.h>

#include "../core/err.h"

/*
 * A file's fingerprint as text, into buf (at least 96 bytes):
 * - a gzip file (first bytes 1f 8b) when whole is 0: "gz SIZE CRC ISIZE", its
 *   size and the CRC-32 and length of the last member's uncompressed data
 *   from the gzip trailer (RFC 1952), read without inflating anything;
 * - otherwise "crc32 SIZE CRC", the CRC-32 of the whole content.
 * Two fingerprints are compared as strings: equal text, same content (up to
 * CRC-32 collisions, which an edit does not make by accident). Errors name
 * the file. Thread safe.
 */
sr_status fprint_file(const char *path, int whole, char *buf, size_t n, sr_err *e);

#endif
