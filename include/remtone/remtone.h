/* remtone: measuring REM sleep without atonia in polysomnography.
 * The umbrella header; each part is documented in its own header. */
#ifndef REMTONE_H
#define REMTONE_H

#include "remtone/status.h"
#include "remtone/version.h"
#include "remtone/recording.h"
#include "remtone/roles.h"
#include "remtone/timeline.h"
#include "remtone/synth.h"
#include "remtone/score.h"
#include "remtone/corrections.h"
#include "remtone/report.h"
#include "remtone/cohort.h"
#include "remtone/quality.h"

#endif
