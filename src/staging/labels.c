/* Stage and event labels: the built-in forms remtone understands (AASM,
 * Rechtschaffen & Kales, EDF+ standard texts and common variants) and the
 * user's label map, which is consulted first so that a lab can redefine any
 * built-in form. Built-in forms are compared after folding case, '_', '-' and
 * runs of white space, because the same text reaches us as "Sleep stage W",
 * "SLEEP_STAGE_W" or "sleep  stage w" from different exporters. The map itself
 * compares labels exactly as the header promises: trimmed, case-insensitive. */
#include <ctype.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "remtone/timeline.h"

/* Labels longer than this are no stage or event name; they are never matched. */
enum { LABEL_FOLD_MAX = 128, LABELMAP_MAX_ENTRIES = 10000 };

typedef enum map_kind { MAP_STAGE, MAP_EVENT, MAP_IGNORE } map_kind;

typedef struct map_entry {
    char *label; /* trimmed copy */
    map_kind kind;
    int value;   /* rt_stage or rt_event_type */
} map_entry;

struct rt_labelmap {
    map_entry *entries;
    size_t n, cap;
};

typedef struct stage_form {
    const char *text; /* folded form: lower case, single spaces */
    rt_stage stage;
} stage_form;

/* Sources: [AASM] AASM Manual for the Scoring of Sleep and Associated Events;
 * [RK] Rechtschaffen & Kales 1968, A manual of standardized terminology...;
 * [EDF+] Kemp & Olivan 2003, EDF+ standard texts (from memory);
 * [CP] common practice in exported hypnograms. */
static const stage_form STAGE_FORMS[] = {
    {"w", RT_STAGE_W},                 /* [AASM] [RK] */
    {"n1", RT_STAGE_N1},               /* [AASM] */
    {"n2", RT_STAGE_N2},               /* [AASM] */
    {"n3", RT_STAGE_N3},               /* [AASM] */
    {"r", RT_STAGE_R},                 /* [AASM] */
    {"1", RT_STAGE_N1},                /* [RK] */
    {"2", RT_STAGE_N2},                /* [RK] */
    {"3", RT_STAGE_N3},                /* [RK]; AASM merges R&K 3 and 4 into N3 */
    {"4", RT_STAGE_N3},                /* [RK] */
    {"rem", RT_STAGE_R},               /* [RK] */
    {"mt", RT_STAGE_MOVEMENT},         /* [RK] movement time */
    {"sleep stage w", RT_STAGE_W},     /* [EDF+] */
    {"sleep stage 1", RT_STAGE_N1},    /* [EDF+] */
    {"sleep stage 2", RT_STAGE_N2},    /* [EDF+] */
    {"sleep stage 3", RT_STAGE_N3},    /* [EDF+] */
    {"sleep stage 4", RT_STAGE_N3},    /* [EDF+] */
    {"sleep stage r", RT_STAGE_R},     /* [EDF+] */
    {"sleep stage ?", RT_STAGE_UNSCORED}, /* [EDF+] */
    {"movement time", RT_STAGE_MOVEMENT}, /* [EDF+] */
    {"sleep stage n1", RT_STAGE_N1},   /* [CP] AASM names inside the EDF+ pattern */
    {"sleep stage n2", RT_STAGE_N2},   /* [CP] */
    {"sleep stage n3", RT_STAGE_N3},   /* [CP] */
    {"sleep stage rem", RT_STAGE_R},   /* [CP] */
    {"wake", RT_STAGE_W},              /* [CP] */
    {"s1", RT_STAGE_N1},               /* [CP] */
    {"s2", RT_STAGE_N2},               /* [CP] */
    {"s3", RT_STAGE_N3},               /* [CP] */
    {"s4", RT_STAGE_N3},               /* [CP] */
    {"stage w", RT_STAGE_W},           /* [CP]; R&K prose writes "stage W" (from memory) */
    {"stage 1", RT_STAGE_N1},          /* [CP] */
    {"stage 2", RT_STAGE_N2},          /* [CP] */
    {"stage 3", RT_STAGE_N3},          /* [CP] */
    {"stage 4", RT_STAGE_N3},          /* [CP] */
    {"stage r", RT_STAGE_R},           /* [CP] */
    {"stage rem", RT_STAGE_R},         /* [CP] */
    {"stage n1", RT_STAGE_N1},         /* [CP] */
    {"stage n2", RT_STAGE_N2},         /* [CP] */
    {"stage n3", RT_STAGE_N3},         /* [CP] */
    /* NREM1..NREM4 are unambiguous here only because R&K 3 and 4 both become
     * N3: "NREM3" means N3 whichever manual the scorer followed. [CP] */
    {"nrem1", RT_STAGE_N1},
    {"nrem2", RT_STAGE_N2},
    {"nrem3", RT_STAGE_N3},
    {"nrem4", RT_STAGE_N3},
    {"?", RT_STAGE_UNSCORED},          /* [CP] */
    {"u", RT_STAGE_UNSCORED},          /* [CP] */
    {"unscored", RT_STAGE_UNSCORED},   /* [CP] */
};

typedef struct event_form {
    const char *text; /* folded form */
    rt_event_type type;
} event_form;

/* [TABLE] remtone's event table names (after folding '-' to a space);
 * [EDF+] texts recalled from the EDF+ standard-texts list (from memory,
 * unverified); [CP] common practice in scoring exports. */
static const event_form EVENT_FORMS[] = {
    {"arousal", RT_EVENT_AROUSAL},                   /* [TABLE] [EDF+] */
    {"apnea", RT_EVENT_APNEA},                       /* [TABLE] [CP] */
    {"hypopnea", RT_EVENT_HYPOPNEA},                 /* [TABLE] [EDF+] */
    {"resp arousal", RT_EVENT_RESP_AROUSAL},         /* [TABLE] */
    {"snore", RT_EVENT_SNORE},                       /* [TABLE] [CP] */
    {"artifact", RT_EVENT_ARTIFACT},                 /* [TABLE] [CP] */
    {"limb movement", RT_EVENT_LIMB_MOVEMENT},       /* [TABLE] [CP] */
    {"obstructive apnea", RT_EVENT_APNEA},           /* [EDF+] */
    {"central apnea", RT_EVENT_APNEA},               /* [EDF+] */
    {"mixed apnea", RT_EVENT_APNEA},                 /* [EDF+] */
    {"apnoea", RT_EVENT_APNEA},                      /* [CP] British spelling */
    {"obstructive apnoea", RT_EVENT_APNEA},          /* [CP] */
    {"central apnoea", RT_EVENT_APNEA},              /* [CP] */
    {"mixed apnoea", RT_EVENT_APNEA},                /* [CP] */
    {"hypopnoea", RT_EVENT_HYPOPNEA},                /* [CP] */
    {"obstructive hypopnea", RT_EVENT_HYPOPNEA},     /* [CP] */
    {"central hypopnea", RT_EVENT_HYPOPNEA},         /* [CP] */
    {"respiratory arousal", RT_EVENT_RESP_AROUSAL},  /* [CP] */
    {"rera", RT_EVENT_RESP_AROUSAL},                 /* [CP] respiratory effort-related arousal */
    {"respiratory effort related arousal", RT_EVENT_RESP_AROUSAL}, /* [CP] */
    {"eeg arousal", RT_EVENT_AROUSAL},               /* [CP] */
    {"snoring", RT_EVENT_SNORE},                     /* [CP] */
    {"artefact", RT_EVENT_ARTIFACT},                 /* [CP] British spelling */
    {"leg movement", RT_EVENT_LIMB_MOVEMENT},        /* [CP] */
    {"lm", RT_EVENT_LIMB_MOVEMENT},                  /* [CP] */
    {"plm", RT_EVENT_LIMB_MOVEMENT},                 /* [CP] periodic limb movement */
    {"periodic limb movement", RT_EVENT_LIMB_MOVEMENT}, /* [CP] */
};

static const char *const STAGE_NAMES[RT_STAGE_COUNT] = {"?", "W", "N1", "N2", "N3", "R", "MT"};
static const char *const EVENT_NAMES[RT_EVENT_TYPE_COUNT] = {
    "arousal", "apnea", "hypopnea", "resp-arousal", "snore", "artifact", "limb-movement"};

const char *rt_stage_name(rt_stage stage)
{
    if ((int)stage < 0 || stage >= RT_STAGE_COUNT)
        return "?";
    return STAGE_NAMES[stage];
}

const char *rt_event_type_name(rt_event_type type)
{
    if ((int)type < 0 || type >= RT_EVENT_TYPE_COUNT)
        return "unknown";
    return EVENT_NAMES[type];
}

/* Writes the folded form of label into out; returns false when it is too long
 * to be a known form. */
static bool fold_label(const char *label, char out[LABEL_FOLD_MAX])
{
    size_t n = 0;
    bool pending_space = false;
    for (const unsigned char *p = (const unsigned char *)label; *p; p++) {
        if (isspace(*p) || *p == '_' || *p == '-') {
            pending_space = n > 0;
            continue;
        }
        if (n + 2 >= LABEL_FOLD_MAX)
            return false;
        if (pending_space)
            out[n++] = ' ';
        pending_space = false;
        out[n++] = (char)tolower(*p);
    }
    out[n] = '\0';
    return true;
}

/* The map entry for label, or NULL. Labels compare trimmed, case-insensitively. */
static const map_entry *map_find(const rt_labelmap *map, const char *label)
{
    if (!map || !label)
        return NULL;
    while (isspace((unsigned char)*label))
        label++;
    size_t len = strlen(label);
    while (len > 0 && isspace((unsigned char)label[len - 1]))
        len--;
    for (size_t i = 0; i < map->n; i++) {
        const char *m = map->entries[i].label;
        if (strlen(m) != len)
            continue;
        size_t k = 0;
        while (k < len && tolower((unsigned char)m[k]) == tolower((unsigned char)label[k]))
            k++;
        if (k == len)
            return &map->entries[i];
    }
    return NULL;
}

bool rt_stage_parse(const char *label, const rt_labelmap *map, rt_stage *stage)
{
    if (!label)
        return false;
    const map_entry *e = map_find(map, label);
    if (e) {
        if (e->kind != MAP_STAGE)
            return false;
        if (stage)
            *stage = (rt_stage)e->value;
        return true;
    }
    char folded[LABEL_FOLD_MAX];
    if (!fold_label(label, folded))
        return false;
    for (size_t i = 0; i < sizeof STAGE_FORMS / sizeof STAGE_FORMS[0]; i++) {
        if (strcmp(folded, STAGE_FORMS[i].text) == 0) {
            if (stage)
                *stage = STAGE_FORMS[i].stage;
            return true;
        }
    }
    return false;
}

bool rt_event_parse(const char *label, const rt_labelmap *map, rt_event_type *type)
{
    if (!label)
        return false;
    const map_entry *e = map_find(map, label);
    if (e) {
        if (e->kind != MAP_EVENT)
            return false;
        if (type)
            *type = (rt_event_type)e->value;
        return true;
    }
    char folded[LABEL_FOLD_MAX];
    if (!fold_label(label, folded))
        return false;
    for (size_t i = 0; i < sizeof EVENT_FORMS / sizeof EVENT_FORMS[0]; i++) {
        if (strcmp(folded, EVENT_FORMS[i].text) == 0) {
            if (type)
                *type = EVENT_FORMS[i].type;
            return true;
        }
    }
    return false;
}

bool rt_label_is_ignored(const char *label, const rt_labelmap *map)
{
    const map_entry *e = map_find(map, label);
    return e && e->kind == MAP_IGNORE;
}

rt_status rt_labelmap_new(rt_labelmap **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_labelmap_new: no place for the result");
    if (!(*out = rt_calloc(1, sizeof(rt_labelmap))))
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the label map");
    return RT_OK;
}

void rt_labelmap_free(rt_labelmap *map)
{
    if (!map)
        return;
    for (size_t i = 0; i < map->n; i++)
        free(map->entries[i].label);
    free(map->entries);
    free(map);
}

/* Reads a meaning: a stage name, "unscored", an event type name or "ignore". */
static bool parse_meaning(const char *meaning, map_kind *kind, int *value)
{
    char m[64];
    rt_copy_string(m, sizeof m, meaning);
    rt_trim(m);
    if (rt_equal_nocase(m, "ignore")) {
        *kind = MAP_IGNORE;
        *value = 0;
        return true;
    }
    if (rt_equal_nocase(m, "unscored")) {
        *kind = MAP_STAGE;
        *value = RT_STAGE_UNSCORED;
        return true;
    }
    for (int s = 0; s < RT_STAGE_COUNT; s++) {
        if (rt_equal_nocase(m, STAGE_NAMES[s])) {
            *kind = MAP_STAGE;
            *value = s;
            return true;
        }
    }
    for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++) {
        if (rt_equal_nocase(m, EVENT_NAMES[t])) {
            *kind = MAP_EVENT;
            *value = t;
            return true;
        }
    }
    return false;
}

static const char *meaning_name(map_kind kind, int value)
{
    if (kind == MAP_IGNORE)
        return "ignore";
    return kind == MAP_STAGE ? rt_stage_name((rt_stage)value)
                             : rt_event_type_name((rt_event_type)value);
}

rt_status rt_labelmap_add(rt_labelmap *map, const char *label, const char *meaning, rt_error *err)
{
    if (!map || !label || !meaning)
        return rt_fail(err, RT_ERR_USAGE, "rt_labelmap_add: NULL argument");
    map_kind kind;
    int value;
    if (!parse_meaning(meaning, &kind, &value))
        return rt_fail(err, RT_ERR_STAGING,
                       "meaning \"%.64s\" of label \"%.64s\" is none of W, N1, N2, N3, R, MT, ?, "
                       "unscored, arousal, apnea, hypopnea, resp-arousal, snore, artifact, "
                       "limb-movement, ignore",
                       meaning, label);
    size_t len = strlen(label);
    char *copy = malloc(len + 1);
    if (!copy)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the label map");
    memcpy(copy, label, len + 1);
    rt_trim(copy);
    if (copy[0] == '\0') {
        free(copy);
        return rt_fail(err, RT_ERR_STAGING, "empty label (meaning \"%.64s\")", meaning);
    }
    const map_entry *old = map_find(map, copy);
    if (old) {
        rt_status st = RT_OK;
        if (old->kind != kind || old->value != value)
            st = rt_fail(err, RT_ERR_STAGING, "label \"%.64s\" is already mapped to %s", copy,
                         meaning_name(old->kind, old->value));
        free(copy);
        return st;
    }
    if (map->n == map->cap) {
        if (map->n >= LABELMAP_MAX_ENTRIES) {
            free(copy);
            return rt_fail(err, RT_ERR_STAGING, "label map has more than %d entries",
                           LABELMAP_MAX_ENTRIES);
        }
        size_t cap = map->cap ? map->cap * 2 : 16;
        map_entry *grown = realloc(map->entries, cap * sizeof *grown);
        if (!grown) {
            free(copy);
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for the label map");
        }
        map->entries = grown;
        map->cap = cap;
    }
    map->entries[map->n++] = (map_entry){copy, kind, value};
    return RT_OK;
}
