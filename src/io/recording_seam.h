/* A seam for tests only: with it set, rt_recording_open takes the path it
 * takes when remtone's view of the data-record layout disagrees with
 * EDFlib's (EDFlib keeps its handle, reads the samples under the lock and the
 * annotations itself), so that the path, which no valid file takes, is
 * tested against the direct one (tests/unit/test_read_direct.c). Opens that
 * are running when it changes may take either path. */
#ifndef REMTONE_RECORDING_SEAM_H
#define REMTONE_RECORDING_SEAM_H

#include <stdbool.h>

void rt_recording_seam_force_edflib(bool on);

#endif
