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

/* ---- shared fixtures (one copy for every test file) ---- */

#include <stdbool.h>
#include <jansson.h>

#include "remtone/remtone.h"

/* A seeded xorshift64* stream (Vigna 2016, constants from memory) with
 * uniform (0, 1) and Box-Muller Gaussian draws; seed it with rt_test_seed(). */
void rt_test_rng_seed(uint64_t seed);
double rt_test_uniform(void);
double rt_test_gauss(void);

/* Filters x in place with the scorer's band-pass (lo-hi Hz, order 4). */
void rt_test_filter(double *x, size_t n, double rate_hz, double lo_hz, double hi_hz);

/* n samples of Gaussian noise band-limited to lo-hi Hz by the scorer's own
 * band-pass, scaled to a mean rectified value of rect_uv. Caller frees. */
double *rt_test_band_noise(size_t n, double rate_hz, double lo_hz, double hi_hz, double rect_uv);

/* The whole file, NUL-terminated; *len without the NUL. Caller frees. */
char *rt_test_read_all(const char *path, size_t *len);

/* dir/truth.json of a synthetic night. Caller json_decref()s. */
json_t *rt_test_load_truth(const char *dir);

/* Writes the synthetic night o into dir, opens it, resolves its roles, loads
 * stages.csv (and events.csv when with_events) and scores it with default
 * parameters; fails the test on any error. Caller closes and frees. */
void rt_test_score_synthetic(const rt_synth_options *o, const char *dir, bool with_events,
                             rt_recording **rec, rt_night **night);

#endif
