/* Content identity of input files for provenance and resumable runs: size
 * and an XXH3 64-bit hash (libxxhash), never a hand-written hash.
 *
 * A file's digest is taken once per process: a digest is kept with the
 * file's identity (device, inode, size and modification time to the
 * nanosecond, from fstat) and given again while the file still has that
 * identity. The recording's digest is taken while it is opened, from the
 * bytes the open reads anyway (src/io/recording.c), so that a result's
 * provenance and a cohort's resume key do not read the file again. */
#ifndef REMTONE_DIGEST_H
#define REMTONE_DIGEST_H

#include <sys/stat.h>
#include <xxhash.h>

#include "remtone/status.h"

/* Fills *size_bytes and hex (17 bytes: 16 hex digits + NUL). */
rt_status rt_file_digest(const char *path, long long *size_bytes, char hex[17], rt_error *err);

/* The hex digest of the bytes fed to state. */
void rt_digest_hex(XXH3_state_t *state, char hex[17]);

/* Keeps hex as the digest of a regular file whose `bytes` bytes were hashed
 * between the fstat calls *before and *after: only when the file kept its
 * size and modification time meanwhile and that size is what was hashed. */
void rt_digest_remember(const struct stat *before, const struct stat *after, long long bytes,
                        const char hex[17]);

#endif
