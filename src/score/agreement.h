/* Agreement arithmetic between a manual RSWA scoring and remtone's labels,
 * kept apart so that it can be tested on its own (docs/agreement.md). */
#ifndef REMTONE_AGREEMENT_H
#define REMTONE_AGREEMENT_H

#include <stddef.h>

#include "remtone/score.h"

/* Cohen's kappa (Cohen 1960, Educ Psychol Meas 20:37-46) of a 2x2 table of
 * two raters: both = marked by both, a_only / b_only = marked by one rater
 * only, neither = marked by none. kappa = (p_o - p_e) / (1 - p_e), p_o the
 * observed and p_e the chance agreement from the raters' margins. Returns
 * NaN when it is undefined: no items, or p_e = 1 (both raters put every item
 * in the same single category). */
double rt_cohen_kappa(size_t both, size_t a_only, size_t b_only, size_t neither);

/* Fills the derived fields of a cell (percent, kappa, manual_pct, auto_pct)
 * from its counts; NaN where n = 0. */
void rt_agreement_cell_finish(rt_agreement_cell *cell);

/* The agreement of a list of mini-epoch marks (a manual scoring, or a
 * reviewer's decisions) with night's labels, into *ag, by the rules of
 * rt_night_agreement (score.h): matched by onset within 1 ms, minis remtone
 * left out and the ECG role skipped. present is true when n_manual > 0. */
void rt_agreement_compute(const rt_night *night, const rt_manual_mini *manual, size_t n_manual,
                          const char *scorer, rt_agreement *ag);

#endif
