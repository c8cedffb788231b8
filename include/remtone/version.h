/* The library's version. */
#ifndef REMTONE_VERSION_H
#define REMTONE_VERSION_H

#define RT_VERSION_MAJOR 0
#define RT_VERSION_MINOR 1
#define RT_VERSION_PATCH 0
#define RT_VERSION_STRING "0.1.0"

/* The version of the library actually linked, "MAJOR.MINOR.PATCH". */
const char *rt_version(void);

#endif
