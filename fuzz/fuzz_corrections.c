/* Fuzz target: a reviewer's corrections file (docs/corrections.md), told by
 * content as --corrections tells it: the mini-epoch table CSV, an EDF+
 * annotation file or an XML scoring file with <corrections>. A failed load
 * carries a message; a loaded set holds only decisions rt_corrections_add
 * accepts: a known kind, finite times within 31 days, an exclusion's end
 * after its start, a reviewer and a time. */
#include <math.h>
#include <stdlib.h>

#include "fuzz_support.h"
#include "remtone/corrections.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = rt_fuzz_write_file("input.corrections", data, size);
    rt_error err;
    rt_error_clear(&err);
    rt_corrections *c = NULL;
    rt_status s = rt_corrections_load(path, &c, &err);
    if (s != RT_OK && (err.message[0] == '\0' || c != NULL))
        abort();
    if (s == RT_OK) {
        if (!c || c->n == 0)
            abort();
        for (size_t i = 0; i < c->n; i++) {
            const rt_decision *d = &c->decisions[i];
            if ((unsigned)d->kind >= RT_DECISION_KINDS || !isfinite(d->start_s) ||
                !isfinite(d->end_s) || d->start_s < 0 || d->start_s > 31.0 * 86400.0 ||
                (d->kind == RT_DECISION_EXCLUDE && !(d->end_s > d->start_s)) ||
                !d->reviewer[0] || !d->decided_at[0])
                abort();
        }
    }
    rt_corrections_free(c);
    return 0;
}
