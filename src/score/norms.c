/* Each index against published values of adults without REM sleep behavior
 * disorder (docs/scoring.md, "Norms").
 *
 * The normative limits are the overall 95th percentiles of Feemster et al.
 * 2019 ("Normative and isolated rapid eye movement sleep without atonia in
 * adults without REM sleep behavior disorder", Sleep 42(10), zsz124), as
 * stated in the published abstract: submentalis phasic 8.6 %, "any" 9.1 %,
 * tonic 0.99 %, REM Atonia Index 0.85; 21-88 years, women and men together.
 * The paper also gives percentiles by age and sex deciles; remtone does not
 * hold that table (it could not be read for this release), so every age and
 * both sexes are placed against the overall values, and the reports say so.
 * The RBD cutoffs beside them are McCarter et al. 2014 (Sleep 37(10):
 * 1649-1657, abstract): submentalis 3-s phasic 15.5 %, "any" 21.6 %, tonic
 * 1.2 %, from Parkinson disease patients with RBD against controls.
 *
 * Both papers scored by eye with the Mayo method: phasic, tonic and "any"
 * activity of the submentalis in 3-s mini-epochs (tonic by 30-s epochs),
 * the REM Atonia Index computed automatically. remtone's automatic indices
 * are close in definition but not identical (docs/scoring.md), so a
 * placement is context for the reader and never decides the review level. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "night_internal.h"

#define FEEMSTER "Feemster et al. 2019, Sleep 42(10) zsz124 (abstract): overall 95th percentile"
#define MCCARTER "McCarter et al. 2014, Sleep 37(10):1649-1657 (abstract)"
#define GROUP "adults without RBD aged 21-88, women and men together"
#define MAYO "visual scoring (Mayo method): submentalis activity in 3-s mini-epochs"

static const rt_norm_row TABLE[] = {
    {RT_IX_SINBAR_CHIN_ANY_3S, "submentalis \"any\" (phasic or tonic) 3-s mini-epochs, %", 9.1,
     FEEMSTER, false, 21.6, MCCARTER, false, 21.0, 88.0, GROUP, MAYO},
    {RT_IX_SINBAR_CHIN_PHASIC_3S, "submentalis phasic 3-s mini-epochs, %", 8.6, FEEMSTER, false,
     15.5, MCCARTER, false, 21.0, 88.0, GROUP, MAYO},
    {RT_IX_SINBAR_CHIN_TONIC_30S, "submentalis tonic activity, % of REM", 0.99, FEEMSTER, false,
     1.2, MCCARTER, false, 21.0, 88.0, GROUP,
     "visual scoring (Mayo method): submentalis tonic activity by 30-s epochs"},
    {RT_IX_RAI, "REM Atonia Index of the submentalis (automatic)", 0.85,
     "Feemster et al. 2019, Sleep 42(10) zsz124 (abstract): the limit given with the 95th "
     "percentiles; lower is further from atonia",
     false, NAN, "", false, 21.0, 88.0, GROUP,
     "the REM Atonia Index (Ferri et al. 2010) computed automatically"},
};

const rt_norm_row *rt_norm_table(size_t *count)
{
    *count = sizeof TABLE / sizeof TABLE[0];
    return TABLE;
}

const char *rt_norm_band_name(rt_norm_band band)
{
    switch (band) {
    case RT_NORM_NOT_PLACED: return "not-placed";
    case RT_NORM_WITHIN: return "within";
    case RT_NORM_BEYOND: return "beyond-normal-limit";
    case RT_NORM_BEYOND_RBD_CUTOFF: return "beyond-rbd-cutoff";
    }
    return "unknown";
}

/* The built-in row as the stratum placed against (line 0). */
static void builtin_stratum(const rt_norm_row *r, rt_norm_stratum *out)
{
    memset(out, 0, sizeof *out);
    out->age_from = r->age_from;
    out->age_to = r->age_to;
    out->value = r->limit;
    bool lower_worse = rt_index_rules()[r->index].lower_is_worse;
    /* the RAI's limit is given with the percentiles, not as one */
    out->percentile = lower_worse ? NAN : 95.0;
    snprintf(out->who, sizeof out->who, "%s", GROUP);
    if (lower_worse)
        snprintf(out->label, sizeof out->label, "low limit %.2f of %s", r->limit, GROUP);
    else
        snprintf(out->label, sizeof out->label, "95th percentile (%g %%) of %s", r->limit, GROUP);
    snprintf(out->source, sizeof out->source, "%s", r->limit_source);
    snprintf(out->method, sizeof out->method, "%s", r->method);
}

/* Places value v against the stratum s (and the built-in row's RBD cutoff,
 * when the index has one): the band, and a phrase for the reports. */
static void place(const rt_norm_stratum *s, const rt_norm_row *r, bool lower_worse, double v,
                  rt_norm_place *out)
{
    if (lower_worse) {
        out->band = v >= s->value ? RT_NORM_WITHIN : RT_NORM_BEYOND;
        snprintf(out->text, sizeof out->text, "%s the %s",
                 out->band == RT_NORM_WITHIN ? "at or above" : "below", s->label);
        return;
    }
    bool cut = r && isfinite(r->rbd_cutoff) && !r->rbd_cutoff_from_memory && v >= r->rbd_cutoff;
    out->band = v <= s->value ? RT_NORM_WITHIN : cut ? RT_NORM_BEYOND_RBD_CUTOFF : RT_NORM_BEYOND;
    if (out->band == RT_NORM_WITHIN)
        snprintf(out->text, sizeof out->text, "at or below the %s", s->label);
    else if (!cut)
        snprintf(out->text, sizeof out->text, "above the %s", s->label);
    else
        snprintf(out->text, sizeof out->text, "above the %s, and at or above the %g %% that "
                 "separated RBD from controls (McCarter et al. 2014)", s->label, r->rbd_cutoff);
}

/* Index i against the built-in row r (NULL: none) or the lab's file. */
static void place_index(rt_night *night, const rt_norms *norms, int i, const rt_norm_row *r,
                        double age_years, char sex)
{
    rt_norm_place *p = &night->norms[i];
    const rt_index_value *v = &night->index[i];
    bool lower_worse = rt_index_rules()[i].lower_is_worse;
    char why[200];
    int chosen = norms ? rt_norms_choose(norms, (rt_index_id)i, age_years, sex, &p->stratum, why,
                                         sizeof why) : -1;
    p->lab = chosen >= 0;
    if (!p->lab && !r)
        return; /* no norm for this index */
    if (!p->lab)
        builtin_stratum(r, &p->stratum);
    p->applied = chosen == 1 || (!p->lab && !r->limit_from_memory &&
                                 (isnan(age_years) || (age_years >= r->age_from &&
                                                       age_years <= r->age_to)));
    if (v->status == RT_STATUS_NOT_COMPUTED || !isfinite(v->value))
        snprintf(p->text, sizeof p->text, "not placed: the index was not computed");
    else if (chosen == 0)
        snprintf(p->text, sizeof p->text, "not placed: %s", why);
    /* a recalled value is never used to place anyone */
    else if (!p->lab && r->limit_from_memory)
        snprintf(p->text, sizeof p->text, "not placed: the normative value was not verified");
    else if (!p->applied)
        snprintf(p->text, sizeof p->text, "not placed: the norms cover ages %g-%g, not %g",
                 r->age_from, r->age_to, age_years);
    else
        place(&p->stratum, r, lower_worse, v->value, p);
}

rt_status rt_night_place_norms_from(rt_night *night, const rt_norms *norms, double age_years,
                                    char sex, rt_error *err)
{
    if (!night)
        return rt_fail(err, RT_ERR_USAGE, "norms: no night");
    if (!isnan(age_years) && !(age_years >= 0.0 && age_years <= 130.0))
        return rt_fail(err, RT_ERR_USAGE, "age %g years is outside 0 .. 130", age_years);
    if (sex != 0 && sex != 'F' && sex != 'M')
        return rt_fail(err, RT_ERR_USAGE, "sex must be F or M");
    night->person.age_years = age_years;
    night->person.sex = sex;
    night->norms_placed = true;
    rt_copy_string(night->norms_file, sizeof night->norms_file, norms ? rt_norms_path(norms) : "");
    size_t n = 0;
    const rt_norm_row *t = rt_norm_table(&n);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        rt_norm_place *p = &night->norms[i];
        memset(p, 0, sizeof *p);
        p->band = RT_NORM_NOT_PLACED;
        p->row = -1;
        const rt_norm_row *r = NULL;
        for (size_t k = 0; k < n && !r; k++)
            if ((int)t[k].index == i) {
                r = &t[k];
                p->row = (int)k;
            }
        place_index(night, norms, i, r, age_years, sex);
    }
    return RT_OK;
}

rt_status rt_night_place_norms(rt_night *night, double age_years, char sex, rt_error *err)
{
    return rt_night_place_norms_from(night, NULL, age_years, sex, err);
}
