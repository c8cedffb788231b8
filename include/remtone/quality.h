/* Signal quality of a whole recording, before any scoring: what `remtone scan`
 * shows so a technologist can re-prepare electrodes or re-run before trusting
 * a score (docs/quality.md). The scorer applies the same detectors to REM. */
#ifndef REMTONE_QUALITY_PUBLIC_H
#define REMTONE_QUALITY_PUBLIC_H

#include "remtone/recording.h"
#include "remtone/roles.h"
#include "remtone/score.h"
#include "remtone/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* For every EMG role present: minutes not scorable by kind over the whole
 * recording (read in 5-minute chunks, so memory stays bounded), the mains
 * line and its level (first 5 minutes), and whether ECG-locked activity is
 * found in the first 5 minutes (beats from the ECG role, else from the chin).
 * out[r] of absent roles is zeroed. */
rt_status rt_recording_quality(rt_recording *rec, const rt_role_map *roles,
                               rt_channel_quality out[RT_ROLE_COUNT], rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
