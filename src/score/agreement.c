/* Agreement between a scorer's manual RSWA scoring (from an XML scoring file)
 * and remtone's own mini-epoch labels: for each role and activity type, the
 * 2x2 table of the 3-s mini-epochs both scored, the observed agreement,
 * Cohen's kappa and the two rates. The comparison is mini-epoch by
 * mini-epoch, not index against index, because two scorings can reach the
 * same index with different mini-epochs; the rates are given too, so the
 * index difference can be read off. Mini-epochs remtone did not score
 * (excluded by an event, channel absent) are left out: they have no
 * automatic label to agree or disagree with. Definitions: docs/agreement.md. */
#include <math.h>
#include <string.h>

#include "agreement.h"
#include "internal.h"

/* Manual onsets and remtone's minis both sit on the 3-s grid; 1 ms absorbs
 * decimal text and clock arithmetic, far below the 3-s spacing. */
#define MATCH_TOL_S 1e-3

double rt_cohen_kappa(size_t both, size_t a_only, size_t b_only, size_t neither)
{
    /* In counts rather than proportions: with n the total,
     * kappa = (n (both + neither) - S) / (n^2 - S), S = sum over categories
     * of the product of the two raters' margins. Exact in doubles for any
     * count a night can have (products stay far below 2^53). */
    double a = (double)both, b = (double)a_only, c = (double)b_only, d = (double)neither;
    double n = a + b + c + d;
    if (n <= 0.0)
        return NAN;
    double chance = (a + b) * (a + c) + (c + d) * (b + d);
    double denom = n * n - chance;
    if (denom == 0.0)
        return NAN;
    return (n * (a + d) - chance) / denom;
}

void rt_agreement_cell_finish(rt_agreement_cell *cell)
{
    cell->n = cell->both + cell->manual_only + cell->auto_only + cell->neither;
    if (cell->n == 0) {
        cell->percent = cell->kappa = cell->manual_pct = cell->auto_pct = NAN;
        return;
    }
    double n = (double)cell->n;
    cell->percent = 100.0 * (double)(cell->both + cell->neither) / n;
    cell->kappa = rt_cohen_kappa(cell->both, cell->manual_only, cell->auto_only, cell->neither);
    cell->manual_pct = 100.0 * (double)(cell->both + cell->manual_only) / n;
    cell->auto_pct = 100.0 * (double)(cell->both + cell->auto_only) / n;
}

/* The mini of night->minis3 (time-ordered) starting at onset_s, or NULL. */
static const rt_mini *find_mini(const rt_night *night, double onset_s)
{
    size_t lo = 0, hi = night->n_minis3;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (night->minis3[mid].onset_s < onset_s - MATCH_TOL_S)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (lo < night->n_minis3 && fabs(night->minis3[lo].onset_s - onset_s) <= MATCH_TOL_S)
        return &night->minis3[lo];
    return NULL;
}

static void count(rt_agreement_cell *cell, bool manual, bool automatic)
{
    if (manual && automatic)
        cell->both++;
    else if (manual)
        cell->manual_only++;
    else if (automatic)
        cell->auto_only++;
    else
        cell->neither++;
}

void rt_agreement_compute(const rt_night *night, const rt_manual_mini *manual, size_t n_manual,
                          const char *scorer, rt_agreement *ag)
{
    memset(ag, 0, sizeof *ag);
    static const unsigned auto_label[RT_AGREE_TYPES] = {
        RT_LABEL_SINBAR_PHASIC, RT_LABEL_SINBAR_TONIC, RT_LABEL_SINBAR_ANY};
    if (n_manual > 0) {
        ag->present = true;
        rt_copy_string(ag->scorer, sizeof ag->scorer, scorer ? scorer : "");
        for (size_t i = 0; i < n_manual; i++) {
            const rt_manual_mini *m = &manual[i];
            /* ECG carries no muscle activity to score. */
            if (m->role < 0 || m->role >= RT_ROLE_COUNT || m->role == RT_ROLE_ECG)
                continue;
            const rt_mini *mini = find_mini(night, m->onset_s);
            if (!mini)
                continue; /* not a REM mini-epoch remtone scored */
            unsigned labels = mini->labels[m->role];
            if (labels & (RT_LABEL_EXCLUDED | RT_LABEL_ABSENT))
                continue;
            bool marked[RT_AGREE_TYPES] = {m->phasic != 0, m->tonic != 0,
                                           m->phasic != 0 || m->tonic != 0};
            for (int t = 0; t < RT_AGREE_TYPES; t++)
                count(&ag->cell[m->role][t], marked[t], (labels & auto_label[t]) != 0);
        }
    }
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        for (int t = 0; t < RT_AGREE_TYPES; t++)
            rt_agreement_cell_finish(&ag->cell[r][t]);
}

void rt_night_agreement(rt_night *night, const rt_timeline *tl)
{
    if (!night)
        return;
    if (tl)
        rt_agreement_compute(night, tl->manual, tl->n_manual, tl->scorer, &night->agreement);
    else
        rt_agreement_compute(night, NULL, 0, NULL, &night->agreement);
}
