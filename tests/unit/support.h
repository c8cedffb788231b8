/* Shared helpers for the cmocka unit tests. */
#ifndef REMTONE_TEST_SUPPORT_H
#define REMTONE_TEST_SUPPORT_H

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

/* A fresh, empty folder for one test's files (under the build tree); the
 * returned path is static to the test process and valid until the next call. */
const char *rt_test_dir(const char *name);

/* Writes len bytes to path, failing the test on error. */
void rt_test_write_file(const char *path, const void *data, size_t len);

/* Writes a NUL-terminated text to dir/name and returns the full path
 * (static buffer, valid until the next call). */
const char *rt_test_text_file(const char *dir, const char *name, const char *text);

/* Seed for randomised tests: REMTONE_SEED from the environment, or a fixed
 * default; printed so a failing run can be repeated. */
uint64_t rt_test_seed(void);

#endif
