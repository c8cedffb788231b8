/* The one table of indices, cutoffs and sources, printed by `remtone rules`
 * and used by every report. A value marked from_memory was recalled, not
 * checked against the published text; such a
 * cutoff is shown as context and never raises the review level on its own
 * (indices.c, review). Every other cutoff was checked against the text named
 * beside it; tests/unit/test_rules_sources.c quotes the passages. */
#include <math.h>
#include <string.h>

#include "internal.h"
#include "remtone/score.h"

static const char SRC_AASM[] = "AASM Manual for the Scoring of Sleep v2.x (definition; no cutoff)";
/* Verified: the abstract gives "18%" ("any" mentalis, 3-s) and "32%" (with both
 * phasic FDS, 3-s) at 100 % specificity; the decimals 18.2 and 31.9 are the
 * results table's, recalled. */
static const char SRC_SINBAR[] = "Frauscher et al. 2012, Sleep 35:835-847 (100 % specificity; "
                                 "abstract: 18 %, 32 %)";
/* Verified: "None of the subjects exceeded the tonic mentalis cutoff of 9.6%"
 * (Frauscher et al. 2014, abstract, quoting the 2012 cutoff). */
static const char SRC_SINBAR_TONIC[] = "Frauscher et al. 2012, Sleep 35:835-847 (9.6 % as quoted by "
                                       "Frauscher et al. 2014, Sleep 37:763-773, abstract)";
/* Not verified: in the tables of the 2012 paper, which could not be read. */
static const char SRC_SINBAR_TABLE[] = "Frauscher et al. 2012, Sleep 35:835-847 (results table, "
                                       "not verified)";
/* Not verified as a cutoff of this index: "The cutoff of 27 % ... suggested by
 * the SINBAR group was also included in the ... ICSD" (Hoegl & Stefani 2017,
 * Somnologie, doi 10.1007/s11818-016-0048-6, abstract) confirms the number, not the index it
 * belongs to nor how its epochs were scored. */
static const char SRC_SINBAR_30S[] = "Frauscher et al. 2012, Sleep 35:835-847 (27 % per Hoegl & "
                                     "Stefani 2017, Somnologie; definition not verified)";
/* Verified: "tonic chin EMG density >=30%; ... phasic chin EMG density >=15%
 * and ... >=24 leg movements per hour of REM sleep" (abstract). */
static const char SRC_MONTREAL[] = "Montplaisir et al. 2010, Mov Disord 25:2044-2051";
/* Verified: "Two arbitrary thresholds were established at AI<0.8 and
 * 0.8<AI<0.9" (abstract). */
static const char SRC_RAI[] = "Ferri et al. 2010, Sleep Med 11:947-949";
/* Context values. Verified: "the 90th percentile for phasic mentalis EMG
 * activity for 30-sec epochs according to AASM recommendation was 15.6%, and
 * for tonic mentalis EMG activity 2.6%" (abstract). */
static const char SRC_HEALTHY[] = "Frauscher et al. 2014, Sleep 37:763-773 (90th percentile, "
                                  "healthy sleepers)";
/* Context values, from memory (not checked). */
static const char SRC_NORMS[] = "Feemster et al. 2019, Sleep (95th percentile, adults without RBD; "
                                "from memory)";

#define NONE NAN

/* One row per index, every field named (rt_index_rule, include/remtone/score.h):
 * cutoff and normal_from are NONE when there is none, context_source NULL
 * when there is no context value. */
static const rt_index_rule RULES[RT_IX_COUNT] = {
    [RT_IX_AASM_TONIC_CHIN] = {
        .id = "aasm.tonic_chin_epochs",
        .title = "REM epochs with sustained chin activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = false, .cutoff = NONE, .normal_from = NONE,
        .source = SRC_AASM, .from_memory = false,
        .context_value = 2.6, .context_source = SRC_HEALTHY,
    },
    [RT_IX_AASM_PHASIC_CHIN] = {
        .id = "aasm.phasic_chin_epochs",
        .title = "REM epochs with excessive transient chin activity (>= 5 of 10 mini-epochs)",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = false, .cutoff = NONE, .normal_from = NONE,
        .source = SRC_AASM, .from_memory = false,
        .context_value = 15.6, .context_source = SRC_HEALTHY,
    },
    [RT_IX_AASM_PHASIC_ANY] = {
        .id = "aasm.phasic_any_epochs",
        .title = "REM epochs with excessive transient activity, chin or limbs",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = false, .cutoff = NONE, .normal_from = NONE,
        .source = SRC_AASM, .from_memory = false,
        .context_value = NONE, .context_source = NULL,
    },
    [RT_IX_AASM_RSWA] = {
        .id = "aasm.rswa_epochs",
        .title = "REM epochs with sustained or excessive transient activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = false, .cutoff = NONE, .normal_from = NONE,
        .source = SRC_AASM, .from_memory = false,
        .context_value = NONE, .context_source = NULL,
    },
    [RT_IX_SINBAR_CHIN_ANY_3S] = {
        .id = "sinbar.chin_any_3s",
        .title = "3-s REM mini-epochs with any chin activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 18.2, .normal_from = NONE,
        .source = SRC_SINBAR, .from_memory = false,
        .context_value = 9.1, .context_source = SRC_NORMS,
    },
    [RT_IX_SINBAR_CHIN_PHASIC_3S] = {
        .id = "sinbar.chin_phasic_3s",
        .title = "3-s REM mini-epochs with phasic chin activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 16.3, .normal_from = NONE,
        .source = SRC_SINBAR_TABLE, .from_memory = true,
        .context_value = 8.6, .context_source = SRC_NORMS,
    },
    [RT_IX_SINBAR_CHIN_TONIC_30S] = {
        .id = "sinbar.chin_tonic_30s",
        .title = "30-s REM epochs with tonic chin activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 9.6, .normal_from = NONE,
        .source = SRC_SINBAR_TONIC, .from_memory = false,
        .context_value = 0.99, .context_source = SRC_NORMS,
    },
    [RT_IX_SINBAR_FDS_PHASIC_3S] = {
        .id = "sinbar.fds_phasic_3s",
        .title = "3-s REM mini-epochs with phasic activity in either arm (FDS)",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 16.8, .normal_from = NONE,
        .source = SRC_SINBAR_TABLE, .from_memory = true,
        .context_value = NONE, .context_source = NULL,
    },
    [RT_IX_SINBAR_COMBINED_3S] = {
        .id = "sinbar.chin_any_fds_phasic_3s",
        .title = "3-s REM mini-epochs with any chin or phasic arm activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 31.9, .normal_from = NONE,
        .source = SRC_SINBAR, .from_memory = false,
        .context_value = NONE, .context_source = NULL,
    },
    [RT_IX_SINBAR_COMBINED_30S] = {
        .id = "sinbar.chin_any_fds_phasic_30s",
        .title = "30-s REM epochs with >= 5 of 10 3-s minis holding any chin or phasic arm activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 27.0, .normal_from = NONE,
        .source = SRC_SINBAR_30S, .from_memory = true,
        .context_value = NONE, .context_source = NULL,
    },
    [RT_IX_MONTREAL_TONIC_CHIN] = {
        .id = "montreal.tonic_chin",
        .title = "20-s REM epochs with tonic chin activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 30.0, .normal_from = NONE,
        .source = SRC_MONTREAL, .from_memory = false,
        .context_value = NONE, .context_source = NULL,
    },
    [RT_IX_MONTREAL_PHASIC_CHIN] = {
        .id = "montreal.phasic_chin",
        .title = "2-s REM mini-epochs with phasic chin activity",
        .unit = "%", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 15.0, .normal_from = NONE,
        .source = SRC_MONTREAL, .from_memory = false,
        .context_value = NONE, .context_source = NULL,
    },
    [RT_IX_RAI] = {
        .id = "rai",
        .title = "REM Atonia Index (1 = full atonia)",
        .unit = "ratio", .lower_is_worse = true,
        .has_cutoff = true, .cutoff = 0.8, .normal_from = 0.9,
        .source = SRC_RAI, .from_memory = false,
        .context_value = 0.85, .context_source = SRC_NORMS,
    },
    [RT_IX_MONTREAL_LM_PER_H] = {
        .id = "montreal.rem_leg_movements_per_h",
        .title = "leg movements in REM per hour",
        .unit = "/h", .lower_is_worse = false,
        .has_cutoff = true, .cutoff = 24.0, .normal_from = NONE,
        .source = SRC_MONTREAL, .from_memory = false,
        .context_value = NONE, .context_source = NULL,
    },
};

const rt_index_rule *rt_index_rules(void) { return RULES; }

const rt_index_rule *rt_index_rule_find(const char *id, rt_index_id *out_id)
{
    for (int i = 0; i < RT_IX_COUNT; i++) {
        if (strcmp(RULES[i].id, id) == 0) {
            if (out_id)
                *out_id = (rt_index_id)i;
            return &RULES[i];
        }
    }
    return NULL;
}

void rt_cutoffs_published(rt_cutoffs *cutoffs)
{
    memset(cutoffs, 0, sizeof *cutoffs);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        cutoffs->has[i] = RULES[i].has_cutoff;
        cutoffs->value[i] = RULES[i].cutoff;
        cutoffs->normal_from[i] = RULES[i].normal_from;
    }
    rt_copy_string(cutoffs->origin, sizeof cutoffs->origin, "published");
}

const char *rt_index_status_name(rt_index_status status)
{
    switch (status) {
    case RT_STATUS_ABOVE: return "above";
    case RT_STATUS_BELOW: return "below";
    case RT_STATUS_INTERMEDIATE: return "intermediate";
    case RT_STATUS_NO_CUTOFF: return "no-cutoff";
    case RT_STATUS_NOT_COMPUTED: return "not-computed";
    }
    return "unknown";
}

const char *rt_review_level_name(rt_review_level level)
{
    switch (level) {
    case RT_REVIEW_CLEAR: return "clear";
    case RT_REVIEW_NEAR: return "near-cutoff";
    case RT_REVIEW_FLAGGED: return "review";
    case RT_REVIEW_NOT_ASSESSABLE: return "not-assessable";
    }
    return "unknown";
}
