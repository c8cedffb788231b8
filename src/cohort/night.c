/* One night of a cohort run: decide from its key whether the stored result
 * is current, otherwise score it with the library (open, stage, resolve
 * roles, score, write JSON) and record the outcome. The key holds the sizes
 * and XXH3 digests of the inputs and a digest of the settings, so a rerun
 * rescores exactly the nights whose data or settings changed. Files land in
 * this order -- old key removed, result, key -- so a run stopped anywhere
 * leaves either a current pair or a result without a key, which the next run
 * rescores and the merge ignores. */
#include "cohort_internal.h"

#include <errno.h>
#include <fcntl.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <xxhash.h>

#include "digest.h"
#include "internal.h"
#include "report/report_internal.h"
#include "output.h"
#include "remtone/corrections.h"
#include "remtone/report.h"
#include "remtone/version.h"

int cohort_night_path(char *dst, size_t cap, const char *nights_dir, const char *id,
                      const char *suffix)
{
    int n = snprintf(dst, cap, "%s/%s%s", nights_dir, id, suffix);
    return n > 0 && (size_t)n < cap;
}

static size_t add_text(char *dst, size_t cap, size_t used, const char *name, double v)
{
    if (used >= cap)
        return used;
    int n = snprintf(dst + used, cap - used, "%s=%.17g\n", name, v);
    return n > 0 ? used + (size_t)n : used;
}

void cohort_settings_text(cohort_shared *s)
{
    const rt_score_params *p = &s->options->params;
    char *t = s->settings;
    size_t cap = sizeof s->settings;
    size_t u = (size_t)snprintf(t, cap, "remtone %s\n", rt_version());
    /* every parameter of the descriptor table: a change in any one rescoring the night */
    size_t n_params = 0;
    const rt_param_desc *table = rt_score_param_table(&n_params);
    for (size_t i = 0; i < n_params; i++)
        u = add_text(t, cap, u, table[i].name, rt_score_param_get(p, &table[i]));
    /* the cutoffs change each index's status and the review level */
    for (int i = 0; i < RT_IX_COUNT; i++) {
        u = add_text(t, cap, u, "has", s->cutoffs.has[i]);
        u = add_text(t, cap, u, rt_index_rules()[i].id, s->cutoffs.value[i]);
        u = add_text(t, cap, u, "normal_from", s->cutoffs.normal_from[i]);
    }
}

/* The row's own cutoff file, norms file and label map, else the run's (NULL: none). */
static const char *night_cutoffs_path(const cohort_shared *s, const rt_manifest_entry *e)
{
    return e->cutoffs ? e->cutoffs : s->options->cutoffs_path;
}

static const char *night_norms_path(const cohort_shared *s, const rt_manifest_entry *e)
{
    return e->norms ? e->norms : s->options->norms_path;
}

static const char *night_label_map_path(const cohort_shared *s, const rt_manifest_entry *e)
{
    return e->label_map ? e->label_map : s->options->label_map_path;
}

/* The identity of a night: what its result depends on, not where it lives. */
static rt_status night_identity(const cohort_shared *s, const rt_manifest_entry *e, json_t **out,
                                rt_error *err)
{
    json_t *id = json_object();
    if (!id)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    rt_status st = rt_file_identity_add(id, "recording", e->recording, false, err);
    if (st == RT_OK)
        st = rt_file_identity_add(id, "stages", e->stages, false, err);
    if (st == RT_OK)
        st = rt_file_identity_add(id, "events", e->events, false, err);
    if (st == RT_OK)
        st = rt_file_identity_add(id, "cutoffs", night_cutoffs_path(s, e), false, err);
    if (st == RT_OK)
        st = rt_file_identity_add(id, "label_map", night_label_map_path(s, e), false, err);
    /* other norms place the night otherwise: another result */
    if (st == RT_OK)
        st = rt_file_identity_add(id, "norms", night_norms_path(s, e), false, err);
    /* a night rescored with other decisions is another result */
    if (st == RT_OK)
        st = rt_file_identity_add(id, "corrections", e->corrections, false, err);
    if (st != RT_OK) {
        json_decref(id);
        return st;
    }
    XXH3_state_t *h = XXH3_createState();
    if (!h) {
        json_decref(id);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    }
    XXH3_64bits_reset(h);
    XXH3_64bits_update(h, s->settings, strlen(s->settings));
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const char *o = e->role_override[r] ? e->role_override[r] : "";
        XXH3_64bits_update(h, rt_role_name((rt_role)r), strlen(rt_role_name((rt_role)r)));
        XXH3_64bits_update(h, "=", 1);
        XXH3_64bits_update(h, o, strlen(o) + 1);
    }
    char hex[17];
    snprintf(hex, sizeof hex, "%016llx", (unsigned long long)XXH3_64bits_digest(h));
    XXH3_freeState(h);
    bool ok = true;
    rt_json_set(id, "stages_from", json_string(e->stages ? "file" : "annotations"), &ok);
    rt_json_set(id, "settings", json_string(hex), &ok);
    if (!(*out = rt_json_done(id, ok)))
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    return RT_OK;
}

static rt_status write_json_atomic(json_t *root, const char *path, rt_error *err)
{
    return rt_json_write(root, path, JSON_INDENT(2) | JSON_SORT_KEYS, err);
}

/* What the manifest says of the night's person, in its key and in its
 * error record alike: the merge reads them from either (its table, the
 * subjects, the strata by sex and age). */
static void set_person(json_t *k, const rt_manifest_entry *e, bool *ok)
{
    rt_json_set(k, "id", rt_json_text(e->id), ok);
    rt_json_set(k, "group", rt_json_text(e->group), ok);
    rt_json_set(k, "subject", rt_json_text(e->subject), ok);
    rt_json_set(k, "visit", rt_json_text(e->visit), ok);
    char sex[2] = {e->sex, '\0'};
    rt_json_set(k, "age", isnan(e->age_years) ? json_null() : json_real(e->age_years), ok);
    rt_json_set(k, "sex", json_string(sex), ok);
}

/* The key file's content (NULL when out of memory); identity is not taken. */
static json_t *key_json(const rt_manifest_entry *e, json_t *identity)
{
    bool ok = true;
    json_t *k = json_object();
    rt_json_set(k, "schema", json_string("remtone-cohort-key/1"), &ok);
    set_person(k, e, &ok);
    rt_json_set(k, "identity", json_incref(identity), &ok);
    return rt_json_done(k, ok);
}

/* A current result: it parses as a night result (cohort_result_usable: a
 * file cut short or damaged is rescored, never merged), its key exists, names
 * this night and holds the same identity. A changed group, subject or visit
 * alone rewrites the key without rescoring. */
static bool result_current(const char *json_path, const char *key_path,
                           const rt_manifest_entry *e, json_t *identity)
{
    json_t *result = json_load_file(json_path, 0, NULL);
    bool usable = result && cohort_result_usable(result);
    json_decref(result);
    if (!usable)
        return false;
    json_t *old = json_load_file(key_path, 0, NULL);
    if (!old)
        return false;
    /* a changed age or sex changes the norms in the result: score again */
    json_t *age = json_object_get(old, "age"), *sex = json_object_get(old, "sex");
    char sex_now[2] = {e->sex, '\0'};
    bool same_person = (isnan(e->age_years) ? json_is_null(age)
                                            : json_is_real(age) &&
                                                  json_real_value(age) == e->age_years) &&
                       json_is_string(sex) && strcmp(json_string_value(sex), sex_now) == 0;
    bool same = same_person && json_equal(json_object_get(old, "identity"), identity) &&
                json_is_string(json_object_get(old, "id")) &&
                strcmp(json_string_value(json_object_get(old, "id")), e->id) == 0;
    /* the group, subject and visit label a result without changing it */
    bool regroup = false;
    const char *labels[3][2] = {{"group", e->group}, {"subject", e->subject}, {"visit", e->visit}};
    for (int k = 0; k < 3; k++) {
        const char *was = json_string_value(json_object_get(old, labels[k][0]));
        regroup |= same && (!was || strcmp(was, labels[k][1]) != 0);
    }
    json_decref(old);
    if (regroup) {
        json_t *k = key_json(e, identity);
        bool ok = k && write_json_atomic(k, key_path, NULL) == RT_OK;
        json_decref(k);
        return ok;
    }
    return same;
}

static rt_status score_and_write(const cohort_shared *s, const rt_manifest_entry *e,
                                 const char *json_path, const char *page_path, rt_error *err)
{
    rt_recording *rec = NULL;
    rt_timeline *tl = NULL;
    rt_night *night = NULL;
    rt_corrections *corrections = NULL;
    rt_norms *norms = NULL;
    rt_role_map roles;
    rt_role_options ro;
    memset(&ro, 0, sizeof ro);
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        ro.override[r] = e->role_override[r];
    rt_labelmap *map = NULL;
    const char *map_path = night_label_map_path(s, e), *cut_path = night_cutoffs_path(s, e);
    /* a row's own cutoff file replaces the run's; the published ones stay underneath */
    rt_cutoffs cutoffs = s->cutoffs;
    rt_status st = RT_OK;
    if (e->cutoffs) {
        rt_cutoffs_published(&cutoffs);
        st = rt_cutoffs_load(&cutoffs, e->cutoffs, err);
    }
    const char *norms_path = night_norms_path(s, e);
    if (st == RT_OK && norms_path)
        st = rt_norms_load(norms_path, &norms, err);
    if (st == RT_OK && map_path)
        st = rt_labelmap_load(map_path, &map, err);
    if (st == RT_OK)
        st = rt_recording_open(e->recording, &rec, err);
    if (st == RT_OK)
        st = rt_timeline_new(&tl, err);
    if (st == RT_OK)
        st = e->stages ? rt_timeline_load_staging(tl, e->stages, map, err)
                       : rt_timeline_load_annotations(tl, rec, map, true, true, err);
    if (st == RT_OK && e->events)
        st = rt_timeline_load_events_csv(tl, e->events, map, err);
    if (st == RT_OK)
        st = rt_timeline_check(tl, rt_recording_duration_s(rec), err);
    if (st == RT_OK)
        st = rt_roles_resolve(rec, &ro, &roles, err);
    if (st == RT_OK && e->corrections)
        st = rt_corrections_load(e->corrections, &corrections, err);
    if (st == RT_OK)
        st = rt_night_score_threads(rec, &roles, tl, &s->options->params, &cutoffs, s->threads,
                                    &night, err);
    /* the norms place the indices the night ends with: the corrected ones */
    if (st == RT_OK && corrections)
        st = rt_night_correct(night, tl, corrections, err);
    if (st == RT_OK && (!isnan(e->age_years) || e->sex || norms))
        st = rt_night_place_norms_from(night, norms, e->age_years, e->sex, err);
    if (st == RT_OK) {
        rt_run_inputs in = {e->recording, e->stages, e->events, cut_path, map_path,
                            e->corrections, NULL};
        st = rt_night_write_json(night, &in, json_path, err);
    }
    if (st == RT_OK && s->options->pages) {
        rt_report_options ro_page = {.show_identity = false, .recording_id = e->id};
        /* de-identified, named by the id */
        st = rt_night_write_html(night, rec, tl, &ro_page, page_path, err);
    }
    rt_labelmap_free(map);
    rt_night_free(night);
    rt_corrections_free(corrections);
    rt_norms_free(norms);
    rt_timeline_free(tl);
    rt_recording_close(rec);
    return st;
}

/* The exit code `remtone score` gives for the same failure (README.md, "Exit
 * codes"); input problems only, since the cohort's own outputs failing stop
 * nothing else. */
static int exit_code_of(rt_status st)
{
    static const int codes[] = {0, 2, 3, 4, 5, 6, 8, 9};
    return (int)st >= 0 && (size_t)st < sizeof codes / sizeof codes[0] ? codes[st] : 9;
}

static void append_log(const char *log_path, const char *what, const char *id)
{
    char line[256];
    int n = snprintf(line, sizeof line, "%s %s\n", what, id);
    int fd = open(log_path, O_WRONLY | O_CREAT | O_APPEND, 0666);
    if (fd < 0)
        return; /* the log is a convenience; the results are the record */
    /* one write of a short line with O_APPEND: lines of parallel runs never interleave */
    ssize_t w = write(fd, line, (size_t)n);
    (void)w;
    close(fd);
}

static void write_error(const cohort_shared *s, const rt_manifest_entry *e, const rt_error *why)
{
    char path[COHORT_PATH_MAX];
    if (!cohort_night_path(path, sizeof path, s->nights_dir, e->id, ".error.json"))
        return;
    bool ok = true;
    json_t *root = json_object();
    rt_json_set(root, "schema", json_string("remtone-cohort-error/1"), &ok);
    /* every text through rt_json_text: a message quoting bytes of a broken file
     * must not cost the night its failure record, and so its row in cohort.csv */
    set_person(root, e, &ok);
    rt_json_set(root, "status", json_string(rt_status_name(why->status)), &ok);
    rt_json_set(root, "exit_code", json_integer(exit_code_of(why->status)), &ok);
    rt_json_set(root, "message",
                rt_json_text(why->message[0] ? why->message : rt_status_name(why->status)), &ok);
    rt_json_set(root, "recording", rt_json_text(e->recording), &ok);
    /* the night has failed already; without memory for its record, the
     * missing result and the log line still say so */
    if ((root = rt_json_done(root, ok)))
        write_json_atomic(root, path, NULL);
    json_decref(root);
}

night_outcome cohort_night(const cohort_shared *s, const rt_manifest_entry *e)
{
    char json_path[COHORT_PATH_MAX], key_path[COHORT_PATH_MAX], err_path[COHORT_PATH_MAX],
        page_path[COHORT_PATH_MAX];
    rt_error err;
    rt_error_clear(&err);
    if (!cohort_night_path(json_path, sizeof json_path, s->nights_dir, e->id, ".json") ||
        !cohort_night_path(key_path, sizeof key_path, s->nights_dir, e->id, ".key") ||
        !cohort_night_path(err_path, sizeof err_path, s->nights_dir, e->id, ".error.json") ||
        !cohort_night_path(page_path, sizeof page_path, s->nights_dir, e->id, ".html")) {
        rt_fail(&err, RT_ERR_USAGE, "%s: output path too long", e->id);
        write_error(s, e, &err);
        return NIGHT_FAILED;
    }
    json_t *identity = NULL;
    rt_status st = night_identity(s, e, &identity, &err);
    if (st == RT_OK && !s->options->force && result_current(json_path, key_path, e, identity) &&
        (!s->options->pages || access(page_path, F_OK) == 0)) {
        json_decref(identity);
        return NIGHT_SKIPPED;
    }
    if (st == RT_OK && unlink(key_path) != 0 && errno != ENOENT)
        st = rt_fail(&err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot remove: %s", key_path,
                     strerror(errno));
    /* a page of an older result must not sit beside the new one */
    if (st == RT_OK && unlink(page_path) != 0 && errno != ENOENT)
        st = rt_fail(&err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot remove: %s", page_path,
                     strerror(errno));
    if (st == RT_OK)
        st = score_and_write(s, e, json_path, page_path, &err);
    if (st == RT_OK) {
        json_t *k = key_json(e, identity);
        st = k ? write_json_atomic(k, key_path, &err) : rt_fail(&err, RT_ERR_NOMEM, "out of memory");
        json_decref(k);
    }
    json_decref(identity);
    if (st != RT_OK) {
        /* a stale result of older inputs must not outlive a failed rescoring */
        unlink(json_path);
        unlink(key_path);
        unlink(page_path);
        write_error(s, e, &err);
        append_log(s->log_path, "failed", e->id);
        return NIGHT_FAILED;
    }
    unlink(err_path);
    append_log(s->log_path, "scored", e->id);
    return NIGHT_SCORED;
}
