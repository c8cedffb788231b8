/* Channel roles: which channel carries the chin, arm, leg and ECG signals.
 *
 * Detection is a word matcher driven by three tables. A label is cut into
 * lower-case words of letters and digits ("EMG Tib.L" -> "emg" "tib" "l");
 * trailing digits are split off a word ("chin1" -> "chin" + "1"). Every word
 * must be a muscle word, a side word or a neutral word, otherwise the label is
 * not an EMG/ECG label at all: that is what keeps "C4-M1", "SpO2" or "Machine"
 * out. When the label has side and neutral words only ("L", "EMG R"), the
 * transducer text may supply the muscle. Arms and legs need exactly one side;
 * the chin and ECG ignore sides. Two candidates for one role are reported,
 * never guessed, because a wrong muscle silently changes every index. */
#include "remtone/roles.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"

typedef enum muscle { M_NONE, M_CHIN, M_ARM, M_LEG, M_ECG } muscle;
typedef enum side { S_NONE, S_LEFT, S_RIGHT, S_FROM_DIGIT } side;

typedef struct word_rule {
    const char *stem; /* lower case, trailing digits removed */
    muscle m;
    side s;           /* side the word itself implies; S_FROM_DIGIT: 1 = left, 2 = right */
} word_rule;

/* Label forms in use at sleep laboratories (common practice). */
static const word_rule MUSCLE_WORDS[] = {
    /* chin: submentalis / mentalis */
    {"chin", M_CHIN, S_NONE},
    {"submental", M_CHIN, S_NONE},
    {"submentalis", M_CHIN, S_NONE},
    {"ment", M_CHIN, S_NONE},
    {"mentalis", M_CHIN, S_NONE},
    {"sm", M_CHIN, S_NONE},
    /* arms: flexor digitorum superficialis; "FDS1"/"FDS2" number left then right */
    {"fds", M_ARM, S_FROM_DIGIT},
    {"arm", M_ARM, S_FROM_DIGIT},
    {"larm", M_ARM, S_LEFT},
    {"rarm", M_ARM, S_RIGHT},
    {"lfds", M_ARM, S_LEFT},
    {"rfds", M_ARM, S_RIGHT},
    /* legs: tibialis anterior; "Leg1"/"Leg2" number left then right */
    {"lat", M_LEG, S_LEFT},
    {"rat", M_LEG, S_RIGHT},
    {"tib", M_LEG, S_NONE},
    {"tibl", M_LEG, S_LEFT},
    {"tibr", M_LEG, S_RIGHT},
    {"tibialis", M_LEG, S_NONE},
    {"leg", M_LEG, S_FROM_DIGIT},
    {"lleg", M_LEG, S_LEFT},
    {"rleg", M_LEG, S_RIGHT},
    /* heart */
    {"ecg", M_ECG, S_NONE},
    {"ekg", M_ECG, S_NONE},
};

static const word_rule SIDE_WORDS[] = {
    {"l", M_NONE, S_LEFT},  {"left", M_NONE, S_LEFT},   {"1", M_NONE, S_LEFT},
    {"r", M_NONE, S_RIGHT}, {"right", M_NONE, S_RIGHT}, {"2", M_NONE, S_RIGHT},
};

/* Words that say nothing about the muscle: the modality and ECG lead names. */
static const char *const NEUTRAL_WORDS[] = {"emg", "anterior", "ant", "muscle", "lead", "i", "ii", "iii"};

static const char *const ROLE_NAMES[RT_ROLE_COUNT] = {"chin", "arm-left", "arm-right", "leg-left",
                                                      "leg-right", "ecg"};

enum { WORD_MAX = 32 };

/* What the words of one text say. */
typedef struct reading {
    muscle m;
    bool muscle_conflict; /* two different muscles named */
    int left, right;      /* side votes */
    bool unknown;         /* a word no table knows */
} reading;

const char *rt_role_name(rt_role role)
{
    if (role < 0 || role >= RT_ROLE_COUNT)
        return "none";
    return ROLE_NAMES[role];
}

rt_role rt_role_from_name(const char *name)
{
    for (int r = 0; name && r < RT_ROLE_COUNT; r++)
        if (rt_equal_nocase(name, ROLE_NAMES[r]))
            return (rt_role)r;
    return RT_ROLE_NONE;
}

/* ---- words ----------------------------------------------------------------- */

/* Copies the next run of letters and digits from *p, lower-cased, into word;
 * returns false at the end of the text. */
static bool next_word(const char **p, char *word)
{
    const unsigned char *s = (const unsigned char *)*p;
    while (*s && !isalnum(*s))
        s++;
    size_t n = 0;
    while (*s && isalnum(*s)) {
        if (n + 1 < WORD_MAX)
            word[n++] = (char)tolower(*s);
        s++;
    }
    word[n] = '\0';
    *p = (const char *)s;
    return n > 0;
}

static const word_rule *find_rule(const word_rule *table, size_t count, const char *stem)
{
    for (size_t i = 0; i < count; i++)
        if (strcmp(table[i].stem, stem) == 0)
            return &table[i];
    return NULL;
}

static bool is_neutral(const char *word)
{
    for (size_t i = 0; i < sizeof NEUTRAL_WORDS / sizeof NEUTRAL_WORDS[0]; i++)
        if (strcmp(NEUTRAL_WORDS[i], word) == 0)
            return true;
    return false;
}

static void vote_side(reading *r, side s)
{
    if (s == S_LEFT)
        r->left++;
    else if (s == S_RIGHT)
        r->right++;
}

static void note_muscle(reading *r, const word_rule *rule, const char *digits)
{
    if (r->m != M_NONE && r->m != rule->m)
        r->muscle_conflict = true;
    r->m = rule->m;
    if (rule->s != S_FROM_DIGIT)
        vote_side(r, rule->s);
    else if (strcmp(digits, "1") == 0)
        vote_side(r, S_LEFT);
    else if (strcmp(digits, "2") == 0)
        vote_side(r, S_RIGHT);
}

/* Sorts one word into the reading. */
static void read_word(reading *r, const char *word)
{
    const word_rule *rule = find_rule(SIDE_WORDS, sizeof SIDE_WORDS / sizeof SIDE_WORDS[0], word);
    if (rule) {
        vote_side(r, rule->s);
        return;
    }
    if (is_neutral(word))
        return;
    char stem[WORD_MAX];
    size_t n = strlen(word);
    while (n > 0 && isdigit((unsigned char)word[n - 1]))
        n--;
    memcpy(stem, word, n);
    stem[n] = '\0';
    rule = find_rule(MUSCLE_WORDS, sizeof MUSCLE_WORDS / sizeof MUSCLE_WORDS[0], stem);
    if (rule)
        note_muscle(r, rule, word + n);
    else
        r->unknown = true;
}

static reading read_text(const char *text)
{
    reading r = {0};
    char word[WORD_MAX];
    const char *p = text ? text : "";
    while (next_word(&p, word))
        read_word(&r, word);
    return r;
}

static rt_role role_of(const reading *r)
{
    if (r->muscle_conflict)
        return RT_ROLE_NONE;
    bool left = r->left > 0 && r->right == 0;
    bool right = r->right > 0 && r->left == 0;
    switch (r->m) {
    case M_CHIN: return RT_ROLE_CHIN;
    case M_ECG: return RT_ROLE_ECG;
    case M_ARM: return left ? RT_ROLE_ARM_LEFT : right ? RT_ROLE_ARM_RIGHT : RT_ROLE_NONE;
    case M_LEG: return left ? RT_ROLE_LEG_LEFT : right ? RT_ROLE_LEG_RIGHT : RT_ROLE_NONE;
    default: return RT_ROLE_NONE;
    }
}

rt_role rt_role_detect(const char *label, const char *transducer)
{
    reading r = read_text(label);
    if (r.unknown)
        return RT_ROLE_NONE;
    if (r.m == M_NONE) {
        /* The transducer is free text ("AgAgCl electrode"), so unknown words
         * there are ignored; it only lends the muscle to a side-only label. */
        reading t = read_text(transducer);
        if (t.muscle_conflict)
            return RT_ROLE_NONE;
        r.m = t.m;
        r.left += t.left;
        r.right += t.right;
    }
    return role_of(&r);
}

/* ---- overrides --------------------------------------------------------------- */

static void list_channels(const rt_recording *rec, char *out, size_t cap)
{
    out[0] = '\0';
    for (int i = 0; i < rt_recording_channel_count(rec); i++) {
        size_t n = strlen(out);
        snprintf(out + n, cap - n, "%s\"%s\" (#%d)", i ? ", " : "", rt_recording_channel(rec, i)->label,
                 i + 1);
    }
}

/* Tries every '-' as the split point, so a label that itself holds '-' can be
 * either half. Returns true with both channel indices when one split fits. */
static bool find_pair(const rt_recording *rec, const char *text, int *a, int *b)
{
    char left[128];
    for (const char *dash = strchr(text, '-'); dash; dash = strchr(dash + 1, '-')) {
        size_t n = (size_t)(dash - text);
        if (n >= sizeof left)
            break;
        memcpy(left, text, n);
        left[n] = '\0';
        *a = rt_recording_find_channel(rec, left);
        *b = rt_recording_find_channel(rec, dash + 1);
        if (*a >= 0 && *b >= 0)
            return true;
    }
    return false;
}

static void set_single(const rt_recording *rec, int channel, bool detected, rt_role_source *src)
{
    const rt_channel_info *ch = rt_recording_channel(rec, channel);
    *src = (rt_role_source){.channel = channel, .reference = -1, .rate_hz = ch->rate_hz,
                            .detected = detected};
    rt_copy_string(src->label, sizeof src->label, ch->label);
}

static rt_status set_pair(const rt_recording *rec, rt_role role, int a, int b, rt_role_source *src,
                          rt_error *err)
{
    const rt_channel_info *ca = rt_recording_channel(rec, a);
    const rt_channel_info *cb = rt_recording_channel(rec, b);
    if (a == b)
        return rt_fail(err, RT_ERR_CHANNEL, "%s: --%s %s-%s: a channel minus itself is zero",
                       rt_recording_path(rec), rt_role_name(role), ca->label, cb->label);
    if (ca->rate_hz != cb->rate_hz || ca->n_samples != cb->n_samples)
        return rt_fail(err, RT_ERR_CHANNEL,
                       "%s: --%s %s-%s: the channels differ in rate (%g Hz and %g Hz); "
                       "a bipolar derivation needs equal rates",
                       rt_recording_path(rec), rt_role_name(role), ca->label, cb->label, ca->rate_hz,
                       cb->rate_hz);
    *src = (rt_role_source){.channel = a, .reference = b, .rate_hz = ca->rate_hz, .detected = false};
    snprintf(src->label, sizeof src->label, "%s-%s", ca->label, cb->label);
    return RT_OK;
}

static rt_status resolve_override(const rt_recording *rec, rt_role role, const char *text,
                                  rt_role_source *src, rt_error *err)
{
    int channel = rt_recording_find_channel(rec, text);
    if (channel >= 0) {
        set_single(rec, channel, false, src);
        return RT_OK;
    }
    if (channel == RT_CHANNEL_AMBIGUOUS) {
        char names[700] = "";
        int last = 0;
        for (int i = 0; i < rt_recording_channel_count(rec); i++)
            if (rt_equal_nocase(rt_recording_channel(rec, i)->label, text)) {
                size_t n = strlen(names);
                snprintf(names + n, sizeof names - n, "%s\"%s\" (#%d)", names[0] ? ", " : "",
                         rt_recording_channel(rec, i)->label, i + 1);
                last = i + 1;
            }
        return rt_fail(err, RT_ERR_CHANNEL,
                       "%s: --%s \"%s\": several channels have this label (%s); choose one by "
                       "its number, counted from 1, e.g. --%s '#%d'",
                       rt_recording_path(rec), rt_role_name(role), text, names, rt_role_name(role),
                       last);
    }
    int a, b;
    if (find_pair(rec, text, &a, &b))
        return set_pair(rec, role, a, b, src, err);
    char names[700];
    list_channels(rec, names, sizeof names);
    return rt_fail(err, RT_ERR_CHANNEL,
                   "%s: --%s \"%s\": no channel has this label, and it is not A-B of two labels "
                   "(channels: %s; a channel whose label repeats is named by number, '#N')",
                   rt_recording_path(rec), rt_role_name(role), text, names);
}

/* ---- detection ----------------------------------------------------------------- */

/* "Chin1", "Chin2", "Chin3": one electrode each, referred to a common point. */
static bool is_single_electrode(const char *label)
{
    const char *p = label;
    char word[WORD_MAX];
    int words = 0;
    bool digit = false;
    while (next_word(&p, word)) {
        words++;
        digit = isdigit((unsigned char)word[strlen(word) - 1]) != 0;
    }
    return words == 1 && digit;
}

/* How an override names channel i: its label when that names it alone
 * (rt_recording_find_channel), else its number "#N". */
static void channel_name(const rt_recording *rec, int i, char *out, size_t cap)
{
    const char *label = rt_recording_channel(rec, i)->label;
    if (rt_recording_find_channel(rec, label) == i)
        snprintf(out, cap, "%s", label);
    else
        snprintf(out, cap, "'#%d'", i + 1);
}

static rt_status fail_ambiguous(const rt_recording *rec, rt_role role, const int *found, int n,
                                rt_error *err)
{
    char names[700] = "";
    bool electrodes = role == RT_ROLE_CHIN;
    for (int i = 0; i < n; i++) {
        const char *label = rt_recording_channel(rec, found[i])->label;
        size_t len = strlen(names);
        snprintf(names + len, sizeof names - len, "%s\"%s\" (#%d)",
                 i == 0 ? "" : i == n - 1 ? " and " : ", ", label, found[i] + 1);
        electrodes = electrodes && is_single_electrode(label);
    }
    const char *path = rt_recording_path(rec), *name = rt_role_name(role);
    char first[80], second[80];
    channel_name(rec, found[0], first, sizeof first);
    channel_name(rec, found[1], second, sizeof second);
    if (electrodes)
        return rt_fail(err, RT_ERR_CHANNEL,
                       "%s: channels %s are separate chin electrodes; choose a derivation with "
                       "--chin %s-%s (or one channel with --chin %s)",
                       path, names, first, second, first);
    /* a label that repeats names no channel: then only a number chooses */
    if (first[0] == '\'')
        return rt_fail(err, RT_ERR_CHANNEL, "%s: channels %s all look like the %s; choose one by "
                       "its number, counted from 1: --%s %s", path, names, name, name, first);
    return rt_fail(err, RT_ERR_CHANNEL, "%s: channels %s all look like the %s; choose one with --%s LABEL",
                   path, names, name, name);
}

static rt_status detect_role(const rt_recording *rec, rt_role role, rt_role_source *src, rt_error *err)
{
    int found[16], n = 0;
    for (int i = 0; i < rt_recording_channel_count(rec); i++) {
        const rt_channel_info *ch = rt_recording_channel(rec, i);
        if (rt_role_detect(ch->label, ch->transducer) == role && n < 16)
            found[n++] = i;
    }
    if (n > 1)
        return fail_ambiguous(rec, role, found, n, err);
    if (n == 1)
        set_single(rec, found[0], true, src);
    return RT_OK;
}

/* ---- units ----------------------------------------------------------------------- */

static rt_status check_voltage(const rt_recording *rec, rt_role role, int channel, rt_error *err)
{
    const rt_channel_info *ch = rt_recording_channel(rec, channel);
    if (ch->is_voltage)
        return RT_OK;
    return rt_fail(err, RT_ERR_CHANNEL,
                   "%s: channel \"%s\" (%s) has unit \"%s\", not a voltage (V, mV, uV, nV); "
                   "allow it with the any-unit option, or choose another channel with --%s",
                   rt_recording_path(rec), ch->label, rt_role_name(role), ch->unit, rt_role_name(role));
}

/* Surface EMG stays far below 100 mV, and amplifiers' input ranges with it
 * (common practice: a few mV at most); a channel whose header allows more
 * cannot hold EMG in the unit it claims, so it is refused rather than scored
 * (with +-1e100 uV every sample quantises to a huge step, and the night would
 * score as all tonic). */
#define EMG_RANGE_MAX_UV 1e5

static rt_status check_range(const rt_recording *rec, rt_role role, int channel, rt_error *err)
{
    const rt_channel_info *ch = rt_recording_channel(rec, channel);
    double most_uv = fmax(fabs(ch->phys_min), fabs(ch->phys_max)) * ch->uv_per_unit;
    if (most_uv <= EMG_RANGE_MAX_UV)
        return RT_OK;
    return rt_fail(err, RT_ERR_CHANNEL,
                   "%s: channel \"%s\" (%s) has physical range %g..%g %s, implausible for EMG "
                   "(more than +-100 mV); fix the header or choose another channel with --%s",
                   rt_recording_path(rec), ch->label, rt_role_name(role), ch->phys_min, ch->phys_max,
                   ch->unit, rt_role_name(role));
}

/* EMG sampling rates remtone scores. Below 200 Hz, the AASM Manual's minimum
 * for EMG (desirable 500 Hz; from memory), the 10-100 Hz band the scorer
 * keeps reaches the Nyquist frequency. Above 65536 Hz the zero-phase
 * band-pass's response (10-Hz corner, narrow mains notches) no longer fits
 * its largest FFT block (src/dsp/bandpass.c; 65536 Hz is the highest power of
 * two tested to score), and surface EMG holds nothing of interest there. */
#define EMG_RATE_MIN_HZ 200.0
#define EMG_RATE_MAX_HZ 65536.0

static rt_status check_rate(const rt_recording *rec, rt_role role, int channel, rt_error *err)
{
    const rt_channel_info *ch = rt_recording_channel(rec, channel);
    if (ch->rate_hz >= EMG_RATE_MIN_HZ && ch->rate_hz <= EMG_RATE_MAX_HZ)
        return RT_OK;
    return rt_fail(err, RT_ERR_CHANNEL,
                   "%s: channel \"%s\" (%s, signal %d) is sampled at %g Hz; remtone scores EMG "
                   "sampled at %g to %g Hz (below, the 10-100 Hz EMG band reaches the Nyquist "
                   "frequency; above, the band-pass cannot be applied): resample it, or choose "
                   "another channel with --%s",
                   rt_recording_path(rec), ch->label, rt_role_name(role), channel + 1, ch->rate_hz,
                   EMG_RATE_MIN_HZ, EMG_RATE_MAX_HZ, rt_role_name(role));
}

static rt_status check_role_unit(const rt_recording *rec, rt_role role, const rt_role_source *src,
                                 bool allow_any_unit, rt_error *err)
{
    if (role == RT_ROLE_ECG || src->channel < 0)
        return RT_OK;
    rt_status s = check_rate(rec, role, src->channel, err);
    if (s == RT_OK && src->reference >= 0)
        s = check_rate(rec, role, src->reference, err);
    if (s == RT_OK)
        s = check_range(rec, role, src->channel, err);
    if (s == RT_OK && src->reference >= 0)
        s = check_range(rec, role, src->reference, err);
    if (s != RT_OK || allow_any_unit)
        return s;
    s = check_voltage(rec, role, src->channel, err);
    if (s == RT_OK && src->reference >= 0)
        s = check_voltage(rec, role, src->reference, err);
    return s;
}

static rt_status resolve_one(const rt_recording *rec, rt_role role, const rt_role_options *options,
                             rt_role_source *src, rt_error *err)
{
    *src = (rt_role_source){.channel = -1, .reference = -1};
    const char *override = options ? options->override[role] : NULL;
    rt_status s = override ? resolve_override(rec, role, override, src, err) : detect_role(rec, role, src, err);
    if (s != RT_OK)
        return s;
    return check_role_unit(rec, role, src, options && options->allow_any_unit, err);
}

rt_status rt_roles_resolve(const rt_recording *rec, const rt_role_options *options, rt_role_map *map,
                           rt_error *err)
{
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        rt_status s = resolve_one(rec, (rt_role)r, options, &map->role[r], err);
        if (s != RT_OK)
            return s;
    }
    return RT_OK;
}

rt_status rt_role_read_uv(rt_recording *rec, const rt_role_source *src, long long first, size_t n,
                          double *out, double *scratch, rt_error *err)
{
    return rt_role_read_uv_kept(rec, NULL, src, first, n, out, scratch, err);
}

rt_status rt_role_read_uv_kept(rt_recording *rec, rt_record_keep *keep, const rt_role_source *src,
                               long long first, size_t n, double *out, double *scratch,
                               rt_error *err)
{
    if (src->channel < 0)
        return rt_fail(err, RT_ERR_CHANNEL, "%s: the role has no channel", rt_recording_path(rec));
    if (src->reference >= 0 && !scratch)
        return rt_fail(err, RT_ERR_USAGE, "%s: reading %s needs a scratch buffer", rt_recording_path(rec),
                       src->label);
    rt_status s = rt_recording_read_uv_kept(rec, keep, src->channel, first, n, out, err);
    if (s != RT_OK || src->reference < 0)
        return s;
    s = rt_recording_read_uv_kept(rec, keep, src->reference, first, n, scratch, err);
    for (size_t i = 0; s == RT_OK && i < n; i++)
        out[i] -= scratch[i];
    return s;
}
