/* The EDFlib lock (edflib_lock.h): one process-wide mutex, the only global
 * of src/io/. */
#include "edflib_lock.h"

#include <pthread.h>

static pthread_mutex_t edflib_lock = PTHREAD_MUTEX_INITIALIZER;

void rt_edflib_lock(void) { pthread_mutex_lock(&edflib_lock); }

void rt_edflib_unlock(void) { pthread_mutex_unlock(&edflib_lock); }
