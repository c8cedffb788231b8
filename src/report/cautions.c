/* The cautions of SAFETY.md. A test checks that each sentence here stands in
 * SAFETY.md word for word, so the two cannot drift apart. */
#include <stddef.h>

#include "remtone/report.h"

static const char *const CAUTIONS[] = {
    "remtone is a measurement aid, not a diagnosis: REM sleep behavior disorder is diagnosed by a "
    "physician from the history and video-polysomnography, never from an EMG index alone.",
    "REM sleep without atonia can be found without REM sleep behavior disorder, and dream "
    "enactment can have other causes; review the flagged epochs on the synchronised video before "
    "drawing conclusions.",
    "Published cutoffs were derived from visual scoring of selected groups; an automatic index "
    "approximates, but does not reproduce, a human scorer, and the cutoffs may not transfer to "
    "this laboratory, montage or population.",
    "Serotonergic antidepressants (SSRI, SNRI) and other medications raise REM muscle activity; "
    "check the medication list.",
    "Obstructive sleep apnea can mimic REM sleep behavior disorder through arousal-bound "
    "movements; indices are less reliable when the REM apnea-hypopnea index is 15 per hour or "
    "more.",
    "Narcolepsy is associated with REM sleep without atonia; consider it in the clinical picture.",
    "Values above published limits are common in healthy older adults, especially men, and vary "
    "from night to night; one night is one sample.",
    "The result depends on the staging, the channel assignment and the signal quality it was "
    "given; check the REM minutes scored and the channel quality summary.",
    "Defer to the physician's judgement and to local practice and guidelines.",
};

size_t rt_caution_count(void) { return sizeof CAUTIONS / sizeof CAUTIONS[0]; }

const char *rt_caution(size_t index)
{
    return index < rt_caution_count() ? CAUTIONS[index] : "";
}

const char *rt_visual_scoring_note(void)
{
    return "Published cutoffs come from visual scoring; remtone's automatic detection "
           "approximates it (docs/scoring.md).";
}
