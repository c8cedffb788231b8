/* The options shared by score and cohort that decide what is left out of
 * REM: --keep-artifacts, --keep-snoring, --keep-respiratory, --event-margin S
 * and --label-map FILE (local stage and event labels). One table entry and
 * one handler, so both commands accept and check them alike. */
#ifndef REMTONE_CLI_EXCLUSION_OPTS_H
#define REMTONE_CLI_EXCLUSION_OPTS_H

#include <stdlib.h>

#include "cli.h"

enum {
    KEY_KEEP_ARTIFACTS = 1200, KEY_KEEP_SNORING, KEY_KEEP_RESPIRATORY, KEY_EVENT_MARGIN,
    KEY_LABEL_MAP
};

#define CLI_EXCLUSION_OPTIONS                                                                   \
    {"label-map", 1, KEY_LABEL_MAP, "FILE", "map local stage or event labels (CSV label,meaning)"}, \
    {"keep-artifacts", 0, KEY_KEEP_ARTIFACTS, NULL, "score mini-epochs under artifact events too"}, \
    {"keep-snoring", 0, KEY_KEEP_SNORING, NULL, "score mini-epochs under snoring events too"},   \
    {"keep-respiratory", 0, KEY_KEEP_RESPIRATORY, NULL,                                          \
     "score mini-epochs under respiratory events and their arousals too"},                      \
    {"event-margin", 1, KEY_EVENT_MARGIN, "S",                                                  \
     "widen every excluding event by S seconds each side (default 0)"}

/* Handles one of those options: returns 1 when key was one (with *rc EXIT_OK,
 * or EXIT_USAGE after naming the problem), 0 otherwise. */
static inline int cli_exclusion_option(const char *command, rt_score_params *p,
                                       const char **label_map, int key, const char *arg, int *rc)
{
    *rc = EXIT_OK;
    char *end = NULL;
    switch (key) {
    case KEY_LABEL_MAP: *label_map = arg; return 1;
    case KEY_KEEP_ARTIFACTS: p->exclude_artifacts = false; return 1;
    case KEY_KEEP_SNORING: p->exclude_snoring = false; return 1;
    case KEY_KEEP_RESPIRATORY: p->exclude_respiratory = false; return 1;
    case KEY_EVENT_MARGIN:
        p->event_margin_s = strtod(arg, &end);
        if (end == arg || *end || !(p->event_margin_s >= 0 && p->event_margin_s <= 60)) {
            fprintf(stderr, "remtone %s: --event-margin must be 0 to 60 seconds, got '%s'\n",
                    command, arg);
            *rc = EXIT_USAGE;
        }
        return 1;
    default: return 0;
    }
}

#endif
