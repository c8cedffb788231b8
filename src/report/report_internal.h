/* Pieces shared by the report writers (JSON, text); nothing here is public. */
#ifndef REMTONE_REPORT_INTERNAL_H
#define REMTONE_REPORT_INTERNAL_H

#include <stdio.h>

#include <jansson.h>

#include "remtone/score.h"

/* The agreement with a manual scoring as JSON (docs/agreement.md, "In the
 * night JSON"): {"present": false} when the night had none; otherwise the
 * scorer and, per role that has compared mini-epochs, per type ("phasic",
 * "tonic", "any"), the counts, percent agreement, kappa and the two rates
 * (null where undefined). Returns a new reference the caller owns (NULL only
 * when out of memory). */
json_t *rt_agreement_json(const rt_agreement *a);

/* The same as a short text table; writes nothing when a->present is false. */
void rt_agreement_write_text(const rt_agreement *a, FILE *out);

#endif
