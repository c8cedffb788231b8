/* Fuzz target: a lab's norms file (`index,sex,age_from,age_to,percentile,
 * value,unit,source[,method]`, docs/scoring.md, "A lab's norms file"). A
 * failed load carries a message and no result; a loaded file gives, for
 * every index and a few people, a stratum whose band holds the age, whose
 * sex is the person's or either, and whose value is finite. */
#include <math.h>
#include <stdlib.h>

#include "fuzz_support.h"
#include "remtone/score.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = rt_fuzz_write_file("input.csv", data, size);
    rt_norms *norms = NULL;
    rt_error err;
    rt_error_clear(&err);
    rt_status s = rt_norms_load(path, &norms, &err);
    if (s != RT_OK && (err.message[0] == '\0' || norms))
        abort();
    static const struct { double age; char sex; } PEOPLE[] = {
        {64, 'F'}, {70, 'M'}, {NAN, 'F'}, {30, 0}, {0, 'M'}, {130, 'F'}};
    for (int i = 0; s == RT_OK && i < RT_IX_COUNT; i++) {
        for (size_t k = 0; k < sizeof PEOPLE / sizeof PEOPLE[0]; k++) {
            rt_norm_stratum st;
            char why[200];
            int got = rt_norms_choose(norms, (rt_index_id)i, PEOPLE[k].age, PEOPLE[k].sex, &st,
                                      why, sizeof why);
            if (got == 0 && why[0] == '\0')
                abort();
            if (got == 1 && (!isfinite(st.value) || st.line < 1 ||
                             !(PEOPLE[k].age >= st.age_from && PEOPLE[k].age < st.age_to) ||
                             (st.sex != 0 && st.sex != PEOPLE[k].sex)))
                abort();
        }
    }
    rt_norms_free(norms);
    return 0;
}
