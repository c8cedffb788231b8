/* Content identity of input files for provenance and resumable runs: size
 * and an XXH3 64-bit hash (libxxhash), never a hand-written hash. */
#ifndef REMTONE_DIGEST_H
#define REMTONE_DIGEST_H

#include "remtone/status.h"

/* Fills *size_bytes and hex (17 bytes: 16 hex digits + NUL). */
rt_status rt_file_digest(const char *path, long long *size_bytes, char hex[17], rt_error *err);

#endif
