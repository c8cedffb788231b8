/* The role options shared by scan and score: --chin LABEL ... --any-unit. */
#ifndef REMTONE_CLI_ROLES_OPTS_H
#define REMTONE_CLI_ROLES_OPTS_H

#include "cli.h"

enum { KEY_ROLE_BASE = 1000, KEY_ANY_UNIT = 1100 };

#define CLI_ROLE_OPTIONS                                                                        \
    {"chin", 1, KEY_ROLE_BASE + RT_ROLE_CHIN, "LABEL", "chin EMG channel: its label (exact, else any case when unique), '#N' for channel N counted from 1 (labels that repeat), or A-B for a bipolar derivation"}, \
    {"arm-left", 1, KEY_ROLE_BASE + RT_ROLE_ARM_LEFT, "LABEL", "left arm (FDS) EMG channel or A-B"}, \
    {"arm-right", 1, KEY_ROLE_BASE + RT_ROLE_ARM_RIGHT, "LABEL", "right arm (FDS) EMG channel or A-B"}, \
    {"leg-left", 1, KEY_ROLE_BASE + RT_ROLE_LEG_LEFT, "LABEL", "left leg (tibialis anterior) EMG or A-B"}, \
    {"leg-right", 1, KEY_ROLE_BASE + RT_ROLE_LEG_RIGHT, "LABEL", "right leg (tibialis anterior) EMG or A-B"}, \
    {"ecg", 1, KEY_ROLE_BASE + RT_ROLE_ECG, "LABEL", "ECG channel"}, \
    {"any-unit", 0, KEY_ANY_UNIT, NULL, "accept EMG channels whose unit is not a voltage (read as uV)"}

/* Handles a role option; returns 1 when key was one. */
static inline int cli_role_option(rt_role_options *ro, int key, const char *arg)
{
    if (key >= KEY_ROLE_BASE && key < KEY_ROLE_BASE + RT_ROLE_COUNT) {
        ro->override[key - KEY_ROLE_BASE] = arg;
        return 1;
    }
    if (key == KEY_ANY_UNIT) {
        ro->allow_any_unit = true;
        return 1;
    }
    return 0;
}

#endif
