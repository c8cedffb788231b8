/* Fuzz target: the cohort manifest (rt_manifest_load). The manifest is
 * written into the scratch folder beside three small files that a seed's
 * relative paths can name (night.edf, stages.csv, events.csv), so rows can
 * get past the check that their inputs exist. */
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "fuzz_support.h"
#include "remtone/cohort.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static int prepared;
    if (!prepared) {
        static const uint8_t empty[1];
        rt_fuzz_write_file("night.edf", empty, 0);
        rt_fuzz_write_file("stages.csv", empty, 0);
        rt_fuzz_write_file("events.csv", empty, 0);
        prepared = 1;
    }
    const char *path = rt_fuzz_write_file("manifest.csv", data, size);
    rt_error err;
    rt_error_clear(&err);
    rt_manifest *m = NULL;
    if (rt_manifest_load(path, &m, &err) != RT_OK) {
        if (err.message[0] == '\0')
            abort();
        return 0;
    }
    for (size_t i = 0; i < m->n_entries; i++) {
        const rt_manifest_entry *e = &m->entries[i];
        if (!e->recording || !rt_cohort_id_is_safe(e->id))
            abort();
        for (size_t j = 0; j < i; j++)
            if (strcasecmp(m->entries[j].id, e->id) == 0)
                abort();
        (void)rt_cohort_part_of(e->id, 7);
    }
    rt_manifest_free(m);
    return 0;
}
