/* Gathering a cohort: reads every night's result (or failure record) back
 * from OUT/nights with jansson, sorts the rows by id so the output depends
 * only on the results, and writes the cohort table, the calibration of each
 * index against the positive and negative groups, a cutoff file of the
 * Youden-optimal cutoffs in the format `remtone score --cutoffs` reads, and
 * the HTML overview. Whole runs call it at their end; after a Slurm array the
 * `cohort-merge` command calls it once. */
#include "cohort_internal.h"

#include <dirent.h>
#include <errno.h>
#include <jansson.h>
#include <unistd.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "internal.h"
#include "output.h"
#include "text.h"

typedef struct rows {
    cohort_row *v;
    size_t n, cap;
} rows;

static bool ends_with(const char *s, const char *suffix)
{
    size_t n = strlen(s), k = strlen(suffix);
    return n > k && strcmp(s + n - k, suffix) == 0;
}

static cohort_row *new_row(rows *r)
{
    if (r->n == r->cap) {
        size_t cap = r->cap ? 2 * r->cap : 64;
        cohort_row *grown = realloc(r->v, cap * sizeof *grown);
        if (!grown)
            return NULL;
        r->v = grown;
        r->cap = cap;
    }
    cohort_row *row = &r->v[r->n++];
    memset(row, 0, sizeof *row);
    row->rem_minutes = row->scorable_minutes = row->age = NAN;
    for (int i = 0; i < RT_IX_COUNT; i++)
        row->value[i] = row->automatic[i] = NAN;
    row->warnings = -1;
    return row;
}

/* The codes of a result's reservations joined by ';', "unknown" when the
 * result carries no list (remtone-night/1). */
static void reservation_codes(json_t *list, char *dst, size_t cap)
{
    if (!json_is_array(list)) {
        rt_copy_string(dst, cap, "unknown");
        return;
    }
    dst[0] = '\0';
    size_t used = 0;
    for (size_t i = 0; i < json_array_size(list); i++) {
        const char *code = json_string_value(json_object_get(json_array_get(list, i), "code"));
        if (!code)
            continue;
        int n = snprintf(dst + used, cap - used, "%s%s", used ? ";" : "", code);
        if (n < 0 || (size_t)n >= cap - used) {
            dst[used] = '\0'; /* whole codes only */
            break;
        }
        used += (size_t)n;
    }
}

/* The strings of a JSON array joined by " | " into *out (NULL when there are
 * none); the caller frees it. */
static rt_status join_texts(json_t *list, char **out, rt_error *err)
{
    *out = NULL;
    size_t len = 0, n = json_is_array(list) ? json_array_size(list) : 0;
    for (size_t i = 0; i < n; i++)
        if (json_is_string(json_array_get(list, i)))
            len += json_string_length(json_array_get(list, i)) + 3;
    if (len == 0)
        return RT_OK;
    char *text = rt_calloc(len + 1, 1);
    if (!text)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu bytes of warnings", len);
    size_t used = 0;
    for (size_t i = 0; i < n; i++) {
        const char *w = json_string_value(json_array_get(list, i));
        if (!w)
            continue;
        used += (size_t)snprintf(text + used, len + 1 - used, "%s%s", used ? " | " : "", w);
    }
    *out = text;
    return RT_OK;
}

static double number_or_nan(json_t *v) { return json_is_number(v) ? json_number_value(v) : NAN; }

/* The group, subject, visit, age and sex a key or an error record gives
 * ("", NaN, 0 when not: a record of an older remtone may lack them). */
static void copy_label(cohort_row *row, json_t *from)
{
    const char *g = json_string_value(json_object_get(from, "group"));
    const char *s = json_string_value(json_object_get(from, "subject"));
    const char *v = json_string_value(json_object_get(from, "visit"));
    const char *sex = json_string_value(json_object_get(from, "sex"));
    rt_copy_string(row->group, sizeof row->group, g ? g : "");
    rt_copy_string(row->subject, sizeof row->subject, s ? s : "");
    rt_copy_string(row->visit, sizeof row->visit, v ? v : "");
    row->age = number_or_nan(json_object_get(from, "age"));
    row->sex = sex && (strcmp(sex, "F") == 0 || strcmp(sex, "M") == 0) ? sex[0] : 0;
}

bool cohort_result_usable(json_t *root)
{
    const char *schema = json_string_value(json_object_get(root, "schema"));
    return schema && (strcmp(schema, "remtone-night/1") == 0 ||
                      strcmp(schema, "remtone-night/2") == 0 ||
                      strcmp(schema, "remtone-night/3") == 0 ||
                      strcmp(schema, "remtone-night/4") == 0) &&
           json_is_object(json_object_get(root, "rem")) &&
           json_is_object(json_object_get(root, "review")) &&
           json_is_object(json_object_get(root, "indices"));
}

/* A night's file read with jansson into *root: NULL with RT_OK when it cannot be
 * opened or is not JSON (je says why), RT_ERR_NOMEM when jansson or the C
 * library ran out of memory reading it -- a file read short of memory must not
 * pass for a missing or malformed one, which would drop or fail the night. */
static rt_status load_json(const char *path, json_t **root, json_error_t *je, rt_error *err)
{
    errno = 0;
    *root = json_load_file(path, 0, je);
    if (!*root && (json_error_code(je) == json_error_out_of_memory || errno == ENOMEM))
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory reading it", path);
    return RT_OK;
}

static rt_status read_result(const char *dir, const char *id, cohort_row *row, bool *complete,
                             rt_error *err)
{
    char path[COHORT_PATH_MAX];
    cohort_night_path(path, sizeof path, dir, id, ".key");
    json_error_t je;
    json_t *key, *root;
    rt_status st = load_json(path, &key, &je, err);
    *complete = key != NULL;
    if (!key)
        return st;
    copy_label(row, key);
    json_decref(key);
    cohort_night_path(path, sizeof path, dir, id, ".json");
    if ((st = load_json(path, &root, &je, err)) != RT_OK)
        return st;
    if (!root)
        return rt_fail(err, RT_ERR_STAGING, "%s line %d: not valid JSON: %s", path, je.line, je.text);
    const char *schema = json_string_value(json_object_get(root, "schema"));
    json_t *rem = json_object_get(root, "rem"), *review = json_object_get(root, "review");
    json_t *indices = json_object_get(root, "indices");
    /* remtone-night/1 results (before reservations) are still read; their
     * reservations are unknown, not none */
    bool v1 = schema && strcmp(schema, "remtone-night/1") == 0;
    if (!cohort_result_usable(root)) {
        json_decref(root);
        return rt_fail(err, RT_ERR_STAGING, "%s: not a remtone-night/4 (or /3, /2, /1) result", path);
    }
    rt_copy_string(row->id, sizeof row->id, id);
    row->flagged = json_is_true(json_object_get(review, "flagged"));
    const char *level = json_string_value(json_object_get(review, "level"));
    rt_copy_string(row->level, sizeof row->level, level ? level : "");
    reservation_codes(v1 ? NULL : json_object_get(root, "reservations"), row->reservations,
                      sizeof row->reservations);
    row->rem_minutes = number_or_nan(json_object_get(rem, "minutes"));
    row->scorable_minutes = number_or_nan(json_object_get(rem, "scorable_minutes"));
    /* a corrected night (remtone-night/3) keeps remtone's own values apart */
    json_t *corr = json_object_get(root, "corrections");
    row->corrected = json_is_true(json_object_get(corr, "present"));
    json_t *automatic = json_object_get(json_object_get(corr, "automatic"), "indices");
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const char *ix = rt_index_rules()[i].id;
        row->value[i] = number_or_nan(json_object_get(json_object_get(indices, ix), "value"));
        row->automatic[i] = row->corrected ? number_or_nan(json_object_get(
                                                 json_object_get(automatic, ix), "value"))
                                           : row->value[i];
    }
    json_t *warnings = json_object_get(root, "warnings");
    row->warnings = json_is_array(warnings) ? (long)json_array_size(warnings) : 0;
    st = join_texts(warnings, &row->warning_texts, err);
    json_decref(root);
    cohort_night_path(path, sizeof path, dir, id, ".html");
    row->page = access(path, F_OK) == 0;
    return st;
}

static rt_status read_failure(const char *dir, const char *id, cohort_row *row, rt_error *err)
{
    char path[COHORT_PATH_MAX];
    cohort_night_path(path, sizeof path, dir, id, ".error.json");
    json_error_t je;
    json_t *root;
    rt_status st = load_json(path, &root, &je, err);
    if (st != RT_OK)
        return st;
    if (!root)
        return rt_fail(err, RT_ERR_STAGING, "%s line %d: not valid JSON: %s", path, je.line, je.text);
    rt_copy_string(row->id, sizeof row->id, id);
    const char *msg = json_string_value(json_object_get(root, "message"));
    copy_label(row, root);
    rt_copy_string(row->error, sizeof row->error, msg ? msg : "failed");
    rt_copy_string(row->level, sizeof row->level, "failed");
    row->failed = true;
    json_decref(root);
    return RT_OK;
}

static int by_id(const void *a, const void *b)
{
    return strcmp(((const cohort_row *)a)->id, ((const cohort_row *)b)->id);
}

static rt_status read_nights(const char *dir, rows *r, rt_cohort_merge_summary *s, rt_error *err)
{
    DIR *d = opendir(dir);
    if (!d)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot open: %s (no cohort "
                       "results here)", dir, strerror(errno));
    struct dirent *de;
    rt_status st = RT_OK;
    while (st == RT_OK && (de = readdir(d)) != NULL) {
        const char *name = de->d_name;
        bool failure = ends_with(name, ".error.json");
        if (!failure && !ends_with(name, ".json"))
            continue;
        char id[RT_COHORT_ID_MAX + 16];
        size_t n = strlen(name) - strlen(failure ? ".error.json" : ".json");
        if (n >= sizeof id)
            continue;
        memcpy(id, name, n);
        id[n] = '\0';
        if (!rt_cohort_id_is_safe(id))
            continue;
        cohort_row *row = new_row(r);
        if (!row) {
            st = rt_fail(err, RT_ERR_NOMEM, "out of memory");
            break;
        }
        if (failure) {
            /* a result written after the failure supersedes it */
            char other[COHORT_PATH_MAX];
            cohort_night_path(other, sizeof other, dir, id, ".key");
            if (access(other, F_OK) == 0) {
                r->n--;
                continue;
            }
            st = read_failure(dir, id, row, err);
            s->failed += st == RT_OK;
            continue;
        }
        bool complete = false;
        st = read_result(dir, id, row, &complete, err);
        if (st == RT_OK && !complete) {
            r->n--;
            s->incomplete++;
        } else if (st == RT_OK) {
            s->scored++;
        }
    }
    closedir(d);
    if (st == RT_OK && r->n > 1)
        qsort(r->v, r->n, sizeof *r->v, by_id);
    s->nights = r->n;
    return st;
}

/* ---- writing ---- */

void cohort_put_number(FILE *f, double v)
{
    if (isfinite(v))
        fprintf(f, "%.10g", v);
}

static rt_status write_table(const char *path, const rows *r, rt_error *err)
{
    rt_output o;
    rt_status st = rt_output_begin(&o, path, 1, err);
    if (st != RT_OK)
        return st;
    FILE *f = o.file;
    fputs("id,group,subject,visit,flagged,level,reservations,rem_minutes,scorable_minutes", f);
    for (int i = 0; i < RT_IX_COUNT; i++)
        fprintf(f, ",%s", rt_index_rules()[i].id);
    fputs(",corrected", f);
    for (int i = 0; i < RT_IX_COUNT; i++)
        fprintf(f, ",automatic:%s", rt_index_rules()[i].id);
    /* age and sex last, so that readers of the columns before them keep working */
    fputs(",warnings,warning_texts,error,age,sex\n", f);
    int no_memory = 0; /* text fields go through rt_csv_put_field (src/common/text.h) */
    for (size_t k = 0; k < r->n && !no_memory; k++) {
        const cohort_row *row = &r->v[k];
        no_memory |= rt_csv_put_field(f, row->id);
        fputc(',', f);
        no_memory |= rt_csv_put_field(f, row->group);
        fputc(',', f);
        no_memory |= rt_csv_put_field(f, row->subject);
        fputc(',', f);
        no_memory |= rt_csv_put_field(f, row->visit);
        fprintf(f, ",%s,%s,", row->failed ? "" : row->flagged ? "true" : "false", row->level);
        no_memory |= rt_csv_put_field(f, row->reservations);
        fputc(',', f);
        cohort_put_number(f, row->rem_minutes);
        fputc(',', f);
        cohort_put_number(f, row->scorable_minutes);
        for (int i = 0; i < RT_IX_COUNT; i++) {
            fputc(',', f);
            cohort_put_number(f, row->value[i]);
        }
        fprintf(f, ",%s", row->failed ? "" : row->corrected ? "true" : "false");
        for (int i = 0; i < RT_IX_COUNT; i++) {
            fputc(',', f);
            cohort_put_number(f, row->automatic[i]);
        }
        fputc(',', f);
        if (row->warnings >= 0)
            fprintf(f, "%ld", row->warnings);
        fputc(',', f);
        no_memory |= rt_csv_put_field(f, row->warning_texts ? row->warning_texts : "");
        fputc(',', f);
        no_memory |= rt_csv_put_field(f, row->error);
        fputc(',', f);
        cohort_put_number(f, row->age);
        fputc(',', f);
        char sex[2] = {row->sex, '\0'};
        no_memory |= rt_csv_put_field(f, sex);
        fputc('\n', f);
    }
    return rt_output_finish(&o, no_memory, "the cohort table", err);
}

/* The nights of a group: the scored ones, or all with failed ones. */
static size_t group_size(const rows *r, const char *group, bool scored_only)
{
    size_t n = 0;
    for (size_t k = 0; k < r->n; k++)
        n += strcmp(r->v[k].group, group) == 0 && !(scored_only && r->v[k].failed);
    return n;
}

/* Whether both calibration groups have a scored night. A group the user named
 * (groups_given) that no night of the table has is an error, found before
 * anything is written, so a mistyped name cannot replace an earlier
 * calibration; a default group without nights only means no calibration. */
static rt_status check_groups(const rows *r, const rt_cohort_options *o, bool *both,
                              rt_error *err)
{
    const char *names[2] = {o->positive, o->negative};
    const char *which[2] = {"positive", "negative"};
    *both = true;
    for (int g = 0; g < 2; g++) {
        if (group_size(r, names[g], true) > 0)
            continue;
        *both = false;
        if (!o->groups_given || group_size(r, names[g], false) > 0)
            continue;
        char present[512] = "";
        size_t used = 0;
        for (size_t k = 0; k < r->n && used + 1 < sizeof present; k++) {
            bool seen = false;
            for (size_t j = 0; j < k && !seen; j++)
                seen = strcmp(r->v[j].group, r->v[k].group) == 0;
            if (!seen)
                used += (size_t)snprintf(present + used, sizeof present - used, "%s\"%s\"",
                                         used ? ", " : "", r->v[k].group);
        }
        if (used >= sizeof present)
            rt_copy_string(present + sizeof present - 5, 5, "...");
        return rt_fail(err, RT_ERR_STAGING,
                       "%s/nights: no night is in the %s group \"%s\" (the groups present: %s); "
                       "nothing was written",
                       o->out_dir, which[g], names[g], used ? present : "none");
    }
    return RT_OK;
}

/* The published cutoffs and those in force (the run's --cutoffs) beside
 * which the calibration tabulates sensitivity and specificity. */
static rt_status calibration_cutoffs(const rt_cohort_options *o, cohort_calibration *cal,
                                     rt_error *err)
{
    rt_cutoffs published, in_force;
    rt_cutoffs_published(&published);
    in_force = published;
    rt_status st = o->cutoffs_path ? rt_cutoffs_load(&in_force, o->cutoffs_path, err) : RT_OK;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        cal->published[i] = published.has[i] ? published.value[i] : NAN;
        cal->in_force[i] = in_force.has[i] ? in_force.value[i] : NAN;
    }
    return st;
}

rt_status cohort_calibrate(const cohort_row *table, size_t n_rows, const rt_cohort_options *o,
                           const cohort_stratum *only, cohort_calibration *cal, rt_error *err)
{
    for (int i = 0; i < RT_IX_COUNT; i++) {
        cal->sens_published[i] = cal->spec_published[i] = NAN;
        cal->sens_in_force[i] = cal->spec_in_force[i] = NAN;
        cal->roc[i].auc = cal->roc[i].auc_var = cal->roc[i].youden_cutoff = NAN;
    }
    cal->positives = cal->negatives = 0;
    if (!cal->computed)
        return RT_OK;
    double *values = rt_calloc(n_rows + 1, sizeof *values);
    bool *positive = rt_calloc(n_rows + 1, sizeof *positive);
    if (!values || !positive) {
        free(values);
        free(positive);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    }
    rt_status st = RT_OK;
    for (int i = 0; i < RT_IX_COUNT && st == RT_OK; i++) {
        const rt_index_rule *rule = &rt_index_rules()[i];
        size_t n = 0;
        for (size_t k = 0; k < n_rows; k++) {
            const cohort_row *row = &table[k];
            bool pos = strcmp(row->group, o->positive) == 0;
            if (row->failed || (!pos && strcmp(row->group, o->negative) != 0))
                continue; /* other groups are tabulated, not used to calibrate */
            if (only && !cohort_in_stratum(only, row))
                continue;
            if (i == 0) {
                cal->positives += pos;
                cal->negatives += !pos;
            }
            values[n] = o->calibrate_corrected ? row->value[i] : row->automatic[i];
            positive[n++] = pos;
        }
        st = rt_roc_compute(values, positive, n, rule->lower_is_worse, &cal->roc[i], err);
        rt_roc_at_cutoff(values, positive, n, rule->lower_is_worse, cal->published[i],
                         &cal->sens_published[i], &cal->spec_published[i]);
        rt_roc_at_cutoff(values, positive, n, rule->lower_is_worse, cal->in_force[i],
                         &cal->sens_in_force[i], &cal->spec_in_force[i]);
    }
    free(values);
    free(positive);
    return st;
}

static rt_status write_calibration(const char *path, const cohort_calibration *cal, rt_error *err)
{
    rt_output o;
    rt_status st = rt_output_begin(&o, path, 1, err);
    if (st != RT_OK)
        return st;
    FILE *f = o.file;
    fputs("index,auc,auc_low,auc_high,youden_cutoff,sensitivity_at_published,"
          "specificity_at_published,published_cutoff,abnormal,n_positive,n_negative,auc_se,"
          "youden_j,sensitivity_at_youden,specificity_at_youden,cutoff_in_force,"
          "sensitivity_at_in_force,specificity_at_in_force\n", f);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_roc *c = &cal->roc[i];
        const double cols[] = {c->auc, c->auc_low, c->auc_high, c->youden_cutoff,
                               cal->sens_published[i], cal->spec_published[i], cal->published[i]};
        fputs(rt_index_rules()[i].id, f);
        for (size_t k = 0; k < sizeof cols / sizeof cols[0]; k++) {
            fputc(',', f);
            cohort_put_number(f, cols[k]);
        }
        fprintf(f, ",%s,%zu,%zu,", rt_index_rules()[i].lower_is_worse ? "below" : "at-or-above",
                c->n_pos, c->n_neg);
        const double rest[] = {sqrt(c->auc_var), c->youden_j, c->youden_sens, c->youden_spec,
                               cal->in_force[i], cal->sens_in_force[i], cal->spec_in_force[i]};
        for (size_t k = 0; k < sizeof rest / sizeof rest[0]; k++) {
            if (k)
                fputc(',', f);
            cohort_put_number(f, rest[k]);
        }
        fputc('\n', f);
    }
    return rt_output_commit(&o, err);
}

/* The format rt_cutoffs_load reads; indices without a Youden cutoff are left
 * out and so keep their published cutoff. Without any (one group, too few
 * nights) there is no file -- rt_cutoffs_load refuses one listing no index,
 * and every file remtone writes must be one it reads -- and the commit
 * removes an earlier merge's file, calibrated on other results. */
static rt_status write_calibrated_cutoffs(const char *path, const cohort_calibration *cal,
                                          size_t *calibrated_indices, rt_error *err)
{
    *calibrated_indices = 0;
    for (int i = 0; i < RT_IX_COUNT; i++)
        *calibrated_indices += isfinite(cal->roc[i].youden_cutoff) != 0;
    if (*calibrated_indices == 0)
        return RT_OK;
    rt_output o;
    rt_status st = rt_output_begin(&o, path, 1, err);
    if (st != RT_OK)
        return st;
    fputs("index,cutoff,unit\n", o.file);
    for (int i = 0; i < RT_IX_COUNT; i++)
        if (isfinite(cal->roc[i].youden_cutoff))
            fprintf(o.file, "%s,%.10g,%s\n", rt_index_rules()[i].id, cal->roc[i].youden_cutoff,
                    rt_index_rules()[i].unit);
    return rt_output_commit(&o, err);
}

/* Whether path names the same file as other (NULL: no). */
static bool same_file(const char *path, const char *other)
{
    struct stat a, b;
    return other && stat(path, &a) == 0 && stat(other, &b) == 0 && a.st_dev == b.st_dev &&
           a.st_ino == b.st_ino;
}

/* A file's path in OUT or in the staging folder: the folder's and a name of
 * at most 255 bytes. */
enum { STAGED_PATH_MAX = COHORT_PATH_MAX + 320 };

/* Each stratum's cutoff file (calibrated-cutoffs-TAG.csv; none when no index
 * of it has a Youden cutoff) and calibration-strata.csv (none without strata),
 * in the staging folder. */
static rt_status write_strata_files(const char *stage, const cohort_calibration *overall,
                                    cohort_strata *strata, const rt_cohort_options *o,
                                    rt_cohort_merge_summary *s, rt_error *err)
{
    char path[STAGED_PATH_MAX];
    rt_status st = RT_OK;
    for (size_t k = 0; k < strata->n && st == RT_OK; k++) {
        cohort_stratum *t = &strata->v[k];
        if (t->sum.unknown)
            continue;
        snprintf(path, sizeof path, "%s/calibrated-cutoffs-%s.csv", stage, t->tag);
        st = write_calibrated_cutoffs(path, &t->cal, &t->sum.calibrated_indices, err);
        if (t->sum.calibrated_indices > 0)
            snprintf(t->sum.cutoffs_file, sizeof t->sum.cutoffs_file,
                     "calibrated-cutoffs-%s.csv", t->tag);
    }
    snprintf(path, sizeof path, "%s/calibration-strata.csv", stage);
    if (st == RT_OK && strata->n > 0)
        st = cohort_write_strata(path, overall, strata, o, err);
    for (size_t k = 0; k < strata->n && k < RT_COHORT_STRATA_MAX; k++)
        s->strata[s->n_strata++] = strata->v[k].sum;
    return st;
}

/* ---- the files appear together ----
 * A merge writes every file into a staging folder OUT/.merge-XXXXXX first and
 * moves them into OUT only when all are written, so a merge that fails (out of
 * memory, a full disk) leaves OUT as it was: never a new cohort.csv beside an
 * earlier calibration. Moving them (rename) and removing an earlier merge's
 * calibration files allocate nothing. A merge killed before the end leaves at
 * worst the staging folder. */

/* The files of OUT a merge writes; those of the calibration (`calibration`
 * set) are removed when this merge did not write them: they would describe
 * other results. subjects.csv is written when the nights name subjects. */
static const struct {
    const char *name;
    bool calibration;
} MERGE_FILES[] = {
    {"cohort.csv", false},          {"subjects.csv", false},
    {"calibration.csv", true},      {"calibrated-cutoffs.csv", true},
    {"calibration-strata.csv", true}, {"cohort.html", false},
};

typedef struct names {
    char (*v)[256];
    size_t n, cap;
} names;

/* The calibrated-cutoffs-*.csv of OUT that this merge did not write (an earlier
 * merge's strata: other edges, a stratum that lost a group), to be removed
 * with the commit; the run's own --cutoffs file is never one. */
static rt_status stale_strata_files(const char *out_dir, const cohort_strata *strata,
                                    const rt_cohort_options *o, names *stale, rt_error *err)
{
    DIR *d = opendir(out_dir);
    if (!d)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot open: %s", out_dir,
                       strerror(errno));
    rt_status st = RT_OK;
    struct dirent *de;
    char path[STAGED_PATH_MAX];
    while (st == RT_OK && (de = readdir(d)) != NULL) {
        const char *name = de->d_name;
        if (strncmp(name, "calibrated-cutoffs-", 19) != 0 || !ends_with(name, ".csv") ||
            strlen(name) >= sizeof stale->v[0])
            continue;
        bool current = false;
        for (size_t k = 0; k < strata->n && !current; k++)
            current = strcmp(strata->v[k].sum.cutoffs_file, name) == 0;
        snprintf(path, sizeof path, "%s/%s", out_dir, name);
        if (current || same_file(path, o->cutoffs_path))
            continue;
        if (stale->n == stale->cap) {
            size_t cap = stale->cap ? 2 * stale->cap : 8;
            void *grown = realloc(stale->v, cap * sizeof stale->v[0]);
            if (!grown) {
                st = rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", out_dir);
                break;
            }
            stale->v = grown;
            stale->cap = cap;
        }
        rt_copy_string(stale->v[stale->n++], sizeof stale->v[0], name);
    }
    closedir(d);
    return st;
}

/* Moves the file `name` of the staging folder into OUT when there is one;
 * otherwise removes OUT's file when `remove_old` (ENOENT is no error). */
static rt_status move_or_remove(const char *stage, const char *out_dir, const char *name,
                                bool remove_old, rt_error *err)
{
    char from[STAGED_PATH_MAX], to[STAGED_PATH_MAX];
    snprintf(from, sizeof from, "%s/%s", stage, name);
    snprintf(to, sizeof to, "%s/%s", out_dir, name);
    if (rename(from, to) == 0)
        return RT_OK;
    if (errno != ENOENT)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot write output: %s", to,
                       strerror(errno));
    if (remove_old && unlink(to) != 0 && errno != ENOENT)
        return rt_fail(err, RT_ERR_IO, "%s: cannot remove the previous calibration: %s", to,
                       strerror(errno));
    return RT_OK;
}

/* Every file a merge writes, by name in the staging folder: the fixed ones
 * and each stratum's cutoff file. */
static size_t staged_names(const cohort_strata *strata, const char **out, size_t cap)
{
    size_t n = 0;
    for (size_t k = 0; k < sizeof MERGE_FILES / sizeof MERGE_FILES[0] && n < cap; k++)
        out[n++] = MERGE_FILES[k].name;
    for (size_t k = 0; k < strata->n && n < cap; k++)
        if (strata->v[k].sum.cutoffs_file[0])
            out[n++] = strata->v[k].sum.cutoffs_file;
    return n;
}

/* After a failure: the staging folder and what was written into it go. */
static void drop_stage(const char *stage, const cohort_strata *strata)
{
    const char *list[sizeof MERGE_FILES / sizeof MERGE_FILES[0] + 2 * RT_COHORT_STRATA_MAX];
    size_t n = staged_names(strata, list, sizeof list / sizeof list[0]);
    char path[STAGED_PATH_MAX];
    for (size_t k = 0; k < n; k++) {
        snprintf(path, sizeof path, "%s/%s", stage, list[k]);
        unlink(path);
    }
    rmdir(stage);
}

/* Moves every staged file into OUT, removes the calibration files this merge
 * did not write, and the staging folder. */
static rt_status commit_stage(const char *stage, const char *out_dir, const cohort_strata *strata,
                              const names *stale, rt_error *err)
{
    rt_status st = RT_OK;
    for (size_t k = 0; k < sizeof MERGE_FILES / sizeof MERGE_FILES[0] && st == RT_OK; k++)
        st = move_or_remove(stage, out_dir, MERGE_FILES[k].name, MERGE_FILES[k].calibration, err);
    for (size_t k = 0; k < strata->n && st == RT_OK; k++)
        if (strata->v[k].sum.cutoffs_file[0])
            st = move_or_remove(stage, out_dir, strata->v[k].sum.cutoffs_file, false, err);
    for (size_t k = 0; k < stale->n && st == RT_OK; k++)
        st = move_or_remove(stage, out_dir, stale->v[k], true, err);
    if (st != RT_OK)
        return st;
    if (rmdir(stage) != 0)
        return rt_fail(err, RT_ERR_IO, "%s: cannot remove the merge's staging folder: %s", stage,
                       strerror(errno));
    return RT_OK;
}

rt_status rt_cohort_merge(const rt_cohort_options *o, rt_cohort_merge_summary *summary,
                          rt_error *err)
{
    rt_cohort_merge_summary s;
    memset(&s, 0, sizeof s);
    if (!o->out_dir || !o->out_dir[0])
        return rt_fail(err, RT_ERR_USAGE, "cohort merge: no output folder given");
    if (strlen(o->out_dir) > COHORT_PATH_MAX - RT_COHORT_ID_MAX - 64)
        return rt_fail(err, RT_ERR_IO, "%.80s...: cannot write output: the folder's path is too "
                       "long (%zu bytes, at most %d)", o->out_dir, strlen(o->out_dir),
                       COHORT_PATH_MAX - RT_COHORT_ID_MAX - 64);
    const char *positive = o->positive ? o->positive : "case";
    const char *negative = o->negative ? o->negative : "control";
    if (strcmp(positive, negative) == 0)
        return rt_fail(err, RT_ERR_USAGE, "cohort: the positive and negative groups are both '%s'",
                       positive);
    rt_status st = cohort_check_age_edges(o, err);
    if (st != RT_OK)
        return st;
    rt_cohort_options opts = *o;
    opts.positive = positive;
    opts.negative = negative;
    char dir[COHORT_PATH_MAX], path[STAGED_PATH_MAX];
    snprintf(dir, sizeof dir, "%s/nights", o->out_dir);
    rows r = {NULL, 0, 0}, by_subject = {NULL, 0, 0};
    cohort_subjects subjects;
    memset(&subjects, 0, sizeof subjects);
    cohort_strata strata = {NULL, 0};
    cohort_calibration *cal = rt_calloc(1, sizeof *cal);
    st = cal ? read_nights(dir, &r, &s, err) : rt_fail(err, RT_ERR_NOMEM, "out of memory");
    /* everything that can fail on the inputs runs before the first file is
     * replaced: the groups, the subjects, the cutoff file, the calibration */
    if (st == RT_OK)
        st = check_groups(&r, &opts, &cal->computed, err);
    if (st == RT_OK)
        st = cohort_subjects_build(r.v, r.n, &subjects, err);
    if (st == RT_OK && o->per_subject)
        st = cohort_subject_rows(r.v, r.n, &subjects, o->out_dir, &by_subject.v, &by_subject.n,
                                 err);
    const rows *used = o->per_subject ? &by_subject : &r;
    if (st == RT_OK)
        st = calibration_cutoffs(&opts, cal, err);
    if (st == RT_OK)
        st = cohort_calibrate(used->v, used->n, &opts, NULL, cal, err);
    if (st == RT_OK)
        st = cohort_stratify(used->v, used->n, &opts, cal, &strata, err);
    if (cal) {
        s.positives = cal->positives;
        s.negatives = cal->negatives;
    }
    /* every file into the staging folder, then all into OUT at once */
    char stage[COHORT_PATH_MAX];
    snprintf(stage, sizeof stage, "%s/.merge-XXXXXX", o->out_dir);
    bool staged = false;
    if (st == RT_OK) {
        staged = mkdtemp(stage) != NULL;
        if (!staged)
            st = rt_fail(err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot write output: %s",
                         stage, strerror(errno));
    }
    if (st == RT_OK) {
        snprintf(path, sizeof path, "%s/cohort.csv", stage);
        st = write_table(path, &r, err);
    }
    if (st == RT_OK && subjects.n > 0) {
        snprintf(path, sizeof path, "%s/subjects.csv", stage);
        st = cohort_write_subjects(path, &subjects, err);
    }
    if (st == RT_OK && cal->computed) {
        snprintf(path, sizeof path, "%s/calibration.csv", stage);
        st = write_calibration(path, cal, err);
    }
    if (st == RT_OK && cal->computed) {
        snprintf(path, sizeof path, "%s/calibrated-cutoffs.csv", stage);
        st = write_calibrated_cutoffs(path, cal, &s.calibrated_indices, err);
    }
    if (st == RT_OK)
        st = write_strata_files(stage, cal, &strata, &opts, &s, err);
    if (st == RT_OK) {
        snprintf(path, sizeof path, "%s/cohort.html", stage);
        st = cohort_write_html(path, r.v, r.n, &subjects, cal, &strata, &opts, err);
    }
    names stale = {NULL, 0, 0};
    if (st == RT_OK)
        st = stale_strata_files(o->out_dir, &strata, &opts, &stale, err);
    if (st == RT_OK)
        st = commit_stage(stage, o->out_dir, &strata, &stale, err);
    if (st != RT_OK && staged)
        drop_stage(stage, &strata); /* what was not moved yet */
    free(stale.v);
    s.calibrated = cal && cal->computed;
    s.subjects = subjects.n;
    if (cal)
        for (int i = 0; i < RT_IX_COUNT; i++)
            rt_roc_free(&cal->roc[i]);
    free(cal);
    cohort_strata_free(&strata);
    cohort_subjects_free(&subjects);
    free(by_subject.v);
    for (size_t k = 0; k < r.n; k++)
        free(r.v[k].warning_texts);
    free(r.v);
    if (summary)
        *summary = s;
    return st;
}
