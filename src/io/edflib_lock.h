/* The one lock around EDFlib. EDFlib keeps a process-wide table of open files
 * and is not thread-safe (edflib.h, "EDFlib and thread-safety"), so every
 * EDFlib call in remtone, reading or writing, runs while this lock is held.
 * Only src/io/ calls EDFlib (tests/cli/test_layers.sh keeps it so). Internal. */
#ifndef REMTONE_EDFLIB_LOCK_H
#define REMTONE_EDFLIB_LOCK_H

void rt_edflib_lock(void);
void rt_edflib_unlock(void);

#endif
