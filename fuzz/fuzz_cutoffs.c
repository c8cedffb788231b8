/* Fuzz target: a lab's cutoff file (`index,cutoff[,normal_from]`). A failed
 * load carries a message; a loaded table holds only finite cutoffs. */
#include <math.h>
#include <stdlib.h>

#include "fuzz_support.h"
#include "remtone/score.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = rt_fuzz_write_file("input.csv", data, size);
    rt_cutoffs cutoffs;
    rt_cutoffs_published(&cutoffs);
    rt_error err;
    rt_error_clear(&err);
    rt_status s = rt_cutoffs_load(&cutoffs, path, &err);
    if (s != RT_OK && err.message[0] == '\0')
        abort();
    if (s == RT_OK)
        for (int i = 0; i < RT_IX_COUNT; i++)
            if (cutoffs.has[i] && !isfinite(cutoffs.value[i]))
                abort();
    return 0;
}
