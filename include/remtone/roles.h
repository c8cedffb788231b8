/* Channel roles: which channel (or bipolar pair) carries chin, arm, leg and ECG.
 *
 * Roles are detected from each channel's label and transducer text; the user
 * may override any role with a label, or with "A-B" to derive A minus B from
 * two channels of equal rate. Two candidates for one role are reported, not
 * guessed. EMG roles whose unit is not a voltage are refused unless allowed. */
#ifndef REMTONE_ROLES_H
#define REMTONE_ROLES_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/recording.h"
#include "remtone/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum rt_role {
    RT_ROLE_NONE = -1,
    RT_ROLE_CHIN = 0,
    RT_ROLE_ARM_LEFT,
    RT_ROLE_ARM_RIGHT,
    RT_ROLE_LEG_LEFT,
    RT_ROLE_LEG_RIGHT,
    RT_ROLE_ECG,
    RT_ROLE_COUNT
} rt_role;

/* "chin", "arm-left", "arm-right", "leg-left", "leg-right", "ecg"; "none" for RT_ROLE_NONE. */
const char *rt_role_name(rt_role role);
/* Inverse of rt_role_name; RT_ROLE_NONE when name is not a role. */
rt_role rt_role_from_name(const char *name);

/* The role a label and transducer text suggest, or RT_ROLE_NONE. */
rt_role rt_role_detect(const char *label, const char *transducer);

typedef struct rt_role_source {
    int channel;     /* channel index, -1 when the role is absent */
    int reference;   /* channel subtracted for a bipolar derivation, -1 otherwise */
    double rate_hz;  /* sampling rate of the derived signal */
    char label[40];  /* "Chin1-Chin2" or the channel label */
    bool detected;   /* true when found by detection, false when given by the user */
} rt_role_source;

typedef struct rt_role_map {
    rt_role_source role[RT_ROLE_COUNT];
} rt_role_map;

typedef struct rt_role_options {
    const char *override[RT_ROLE_COUNT]; /* NULL = detect; "LABEL" or "A-B" */
    bool allow_any_unit;                 /* accept EMG channels whose unit is not a voltage */
} rt_role_options;

/* Resolves every role of rec. Fails with RT_ERR_CHANNEL when an override names
 * no channel, a bipolar pair has unequal rates, detection finds two candidates
 * for one role (the message lists them and the option that settles it), or an
 * EMG role's unit is not a voltage (unless allowed). A role nothing matches is
 * left absent (channel -1); callers decide whether that is an error.
 * options may be NULL (detect everything, voltages only). */
rt_status rt_roles_resolve(const rt_recording *rec, const rt_role_options *options,
                           rt_role_map *map, rt_error *err);

/* Reads n samples of a role's signal from sample `first`, in microvolts.
 * For a bipolar derivation, scratch must hold n doubles; else it may be NULL.
 * RT_ERR_CHANNEL when the role is absent (channel -1), RT_ERR_USAGE when a
 * derivation has no scratch, otherwise the reader's status (rt_recording_read_uv). */
rt_status rt_role_read_uv(rt_recording *rec, const rt_role_source *src, long long first,
                          size_t n, double *out, double *scratch, rt_error *err);

/* rt_role_read_uv through a keep of data records (rt_recording_read_uv_kept; NULL: none). */
rt_status rt_role_read_uv_kept(rt_recording *rec, rt_record_keep *keep, const rt_role_source *src,
                               long long first, size_t n, double *out, double *scratch,
                               rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
