/* Scoring one night in two passes over the REM bouts (docs/scoring.md):
 *   pass 1 conditions every bout of every EMG role (condition.c) and keeps
 *          each scorable second's level;
 *   then   the atonic background of each role is fitted to the whole night's
 *          REM (background.c), so activity of any length cannot raise it;
 *   pass 2 conditions each bout again and labels its mini-epochs: phasic
 *          bursts and tonic shares against that background, quality marks,
 *          the REM Atonia Index counts.
 * The indices and the review level are computed from the labels in
 * indices.c. Each pass is a list of items (one stretch of one role, or the
 * beats of one bout) that worker threads share (common/parallel.c); an item
 * writes only its own results and its own bout's and role's labels, and the
 * results are gathered in the order of the sequential loop, so the night does
 * not depend on the number of threads. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "background.h"
#include "condition.h"
#include "detect.h"
#include "exclusions.h"
#include "internal.h"
#include "night_internal.h"
#include "parallel.h"
#include "quality/quality.h"
#include "rai.h"



static bool is_emg(rt_role r) { return r != RT_ROLE_ECG; }
static bool is_nrem(unsigned char s) { return s == RT_STAGE_N1 || s == RT_STAGE_N2 || s == RT_STAGE_N3; }

/* The rule sets' bursts: AASM, SINBAR, Montreal. */
#define BURST_RULES 3

/* What one worker thread owns: conditioners with a band-pass of its own (a
 * filter keeps scratch buffers), the stretch buffers and the per-second
 * arrays of the bout it labels. Worker 0 uses the night's own conditioners. */
typedef struct worker_ctx {
    rt_conditioner cond[RT_ROLE_COUNT];
    bool copied[RT_ROLE_COUNT]; /* cond[r] is this worker's copy, closed with it */
    rt_stretch st;
    rt_beats_work beats;     /* the beats' read and detector buffers */
    rt_record_keep *keep;    /* data records kept between this worker's reads */
    double *bg;              /* background per second of the current bout */
    size_t *tonic;           /* samples at the tonic level, per second of the bout */
    size_t *above;           /* samples above the AASM chin level, per second */
    size_t bg_cap;
    rt_span *spans[BURST_RULES]; /* each rule's bursts in the current bout */
    size_t span_cap;
} worker_ctx;

/* A quality mark's REM minutes, added to its channel's total in the merge. */
typedef struct marked_minutes {
    rt_quality_reason reason;
    double minutes;
} marked_minutes;

/* What one item found. Items write only here and into the mini-epochs,
 * epochs and exclusion seconds of their own bout and role; the merge adds the
 * rest to the night in the sequential order (bout, then role, then rule), so
 * sums and lists come out the same for any number of threads. */
typedef struct item_out {
    rt_level_point *points;  /* NREM runs and pass 1: each scorable second's level */
    size_t n_points;
    rt_quality_mark *marks;  /* pass 1: the stretch's quality marks, which pass 2 reuses */
    size_t n_marks;
    double *medians;         /* NREM runs of the chin: each unmarked epoch's median envelope */
    size_t n_medians;
    rt_burst *bursts;        /* pass 2 */
    size_t n_bursts, burst_cap;
    marked_minutes *marked;  /* pass 2: the quality marks, in order */
    size_t n_marked, marked_cap;
    size_t vetoed;           /* pass 2: SINBAR bursts refused at QRS complexes */
    bool ecg_found, ecg_removed;
    rt_rai_counts rai;       /* pass 2, chin */
    size_t montreal_windows, montreal_tonic; /* pass 2, chin */
} item_out;

typedef enum item_kind {
    ITEM_NREM,   /* a run of NREM epochs of one role: levels (drift) and the chin's reference */
    ITEM_BEATS,  /* the heart beats of one REM bout */
    ITEM_LEVELS, /* pass 1: one bout of one role */
    ITEM_LABELS  /* pass 2: one bout of one role */
} item_kind;

typedef struct item {
    item_kind kind;
    rt_role role;
    size_t piece;            /* REM items: the piece of a bout */
    size_t first_epoch;      /* ITEM_NREM: the run */
    size_t epochs;
    bool alone;              /* ITEM_NREM: no other role reads this run */
} item;

/* One job of the pool: items, their place in the sequential order, their
 * cost (seconds conditioned) and their results. */
typedef struct item_list {
    item *items;
    size_t *rank;
    double *cost;
    item_out *outs;
    size_t n, cap;
} item_list;

/* A REM bout is conditioned in pieces of whole minutes so that memory does
 * not grow with its length: each piece conditions its core with up to
 * PIECE_CONTEXT_S of the bout on either side (and the conditioning's own
 * padding beyond), and keeps only what lies in its core. Every label of a
 * mini-epoch, epoch or second depends on the conditioned signal within
 * montreal_burst_max_s + merge gap (bursts), 30 s (the REM Atonia Index
 * floor) or one Montreal window of it, all inside the context, so a piece
 * labels its core as the whole bout would (docs/scoring.md, "Long bouts").
 * A bout short enough is one piece whose core is the whole bout. */
#define PIECE_CONTEXT_S 60

typedef struct piece {
    size_t bout;
    bout_span view;          /* the stretch conditioned: core and context, inside the bout */
    size_t core_a, core_b;   /* the seconds of the view this piece labels */
    bool first, last;        /* the bout's first and last piece */
} piece;

/* Whether a time t_s (seconds from the view's start) is the piece's to
 * report: in its core, or before (after) it for the bout's first (last) piece. */
static bool piece_owns(const piece *pc, double t_s)
{
    return (pc->first || t_s >= (double)pc->core_a) && (pc->last || t_s < (double)pc->core_b);
}

/* What both passes share: the conditioners, the beats of each piece, the
 * workers and the per-second levels gathered for the background fit. */
typedef struct pass_ctx {
    rt_recording *rec;
    const rt_role_map *roles;
    const rt_timeline *tl;
    rt_night *night;
    scoring_state *ss;
    bout_span *bouts;
    rt_conditioner cond[RT_ROLE_COUNT];
    bool cond_open[RT_ROLE_COUNT];
    piece *pieces;
    size_t n_pieces;
    double block_s;          /* a piece's core at most, seconds; 0: the default */
    size_t nrem_run_epochs;  /* NREM runs: at most this many epochs (a piece's view at most) */
    rt_qrs_beats *beats;     /* per piece, over its view */
    int *beats_source;       /* per piece */
    worker_ctx *workers;
    unsigned n_workers;
    const item_list *job;    /* the job the pool is running */
    const item_list *levels; /* pass 1's items, in the order of pass 2's: their marks */
    rt_level_point *points[RT_ROLE_COUNT]; /* pass 1: scorable REM seconds */
    size_t n_points[RT_ROLE_COUNT];
    size_t *bout_first_point[RT_ROLE_COUNT]; /* per bout: its first entry in points, */
                                             /* and (at n_bouts) the end */
    rt_level_point *nrem_points[RT_ROLE_COUNT]; /* NREM seconds (drift) */
    size_t n_nrem_points[RT_ROLE_COUNT];
    rt_atonic_model model[RT_ROLE_COUNT];
} pass_ctx;

static double abs_tonic_env_uv(const rt_score_params *p)
{
    /* a sine wave's peak-to-peak amplitude is pi times its rectified mean, so
     * a scorer's "10 uV" read peak-to-peak off the trace is an envelope of
     * 10 / pi = 3.2 uV (docs/scoring.md, "Tonic activity") */
    return p->tonic_abs_p2p_uv / RT_PI;
}

/* Marks every mini-epoch of a grid that a burst overlaps. */
static void mark_minis(rt_mini *minis, size_t n_minis, double mini_s, double t0, double rate,
                       const rt_span *s, double bout_t0, rt_role role, unsigned label)
{
    double a = bout_t0 + s->start / rate, b = bout_t0 + s->end / rate;
    /* minis of this bout start at t0 and are contiguous */
    if (b <= t0)
        return;
    size_t first = a <= t0 ? 0 : (size_t)floor((a - t0) / mini_s);
    for (size_t k = first; k < n_minis; k++) {
        double ms = t0 + (double)k * mini_s;
        if (ms >= b)
            break;
        if (ms + mini_s > a)
            minis[k].labels[role] |= (unsigned char)label;
    }
}

/* Grows *p (elements of size bytes) to hold one more than *n. */
static rt_status room_for_one(void **p, size_t *cap, size_t n, size_t size, rt_error *err)
{
    if (n < *cap)
        return RT_OK;
    size_t ncap = *cap ? 2 * *cap : 64;
    void *q = realloc(*p, ncap * size);
    if (!q)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the labels of a bout");
    *p = q;
    *cap = ncap;
    return RT_OK;
}

static rt_status add_burst(item_out *o, rt_role role, double t0, double rate, const rt_span *s,
                           unsigned rules, rt_error *err)
{
    rt_status st = room_for_one((void **)&o->bursts, &o->burst_cap, o->n_bursts,
                                sizeof *o->bursts, err);
    if (st != RT_OK)
        return st;
    rt_burst *b = &o->bursts[o->n_bursts++];
    b->role = role;
    b->onset_s = t0 + s->start / rate;
    b->duration_s = (s->end - s->start) / rate;
    b->peak_ratio = s->ratio;
    b->rules = rules;
    return RT_OK;
}

/* Each rule's bursts on the conditioned bout (rules sharing an amplitude
 * share one scan), marked on the grids the rule applies to, rule by rule. */
static rt_status detect_rules(const pass_ctx *c, worker_ctx *w, item_out *o, rt_role role,
                              const piece *pc, const rt_burst_rule *rules,
                              const unsigned *labels, rt_error *err)
{
    rt_night *night = c->night;
    const bout_span *bout = &pc->view;
    size_t ca = pc->core_a, cb = pc->core_b;
    const rt_stretch *st = &w->st;
    double rate = st->rate_hz;
    size_t merge = (size_t)llround(night->params.burst_merge_gap_s * rate);
    rt_burst_signal sig = {st->env, st->rect_cum, st->n, w->bg, st->starts, st->seconds, rate};
    size_t found[BURST_RULES];
    rt_find_bursts_rules(&sig, rules, BURST_RULES, merge < 1 ? 1 : merge, w->spans, w->span_cap,
                         found, st->scratch);
    for (int r = 0; r < BURST_RULES; r++) {
        unsigned label = labels[r];
        for (size_t i = 0; i < found[r] && i < w->span_cap; i++) {
            const rt_span *s = &w->spans[r][i];
            double a = s->start / rate, b = s->end / rate;
            if (rt_stretch_marked(st, a, b))
                continue; /* not scorable there: the mini-epochs are left out anyway */
            bool own = piece_owns(pc, a);
            if (st->n_qrs && rt_qrs_overlap(st->qrs, st->n_qrs, a, b) >= 0.5) {
                o->vetoed += own && label == RT_LABEL_SINBAR_PHASIC;
                continue; /* an ECG complex, not muscle */
            }
            /* the core's mini-epochs, by every burst seen (one of a
             * neighbouring core may reach into this one) */
            if (label == RT_LABEL_MONTREAL_PHASIC)
                mark_minis(night->minis2 + bout->mini2_first + ca / 2, (cb - ca) / 2, 2.0,
                           bout->t0 + (double)ca, rate, s, bout->t0, role, label);
            else
                mark_minis(night->minis3 + bout->mini3_first + ca / 3, (cb - ca) / 3, 3.0,
                           bout->t0 + (double)ca, rate, s, bout->t0, role, label);
            if (!own)
                continue; /* listed by the piece whose core holds its onset */
            rt_status stt = add_burst(o, role, bout->t0, rate, s, label, err);
            if (stt != RT_OK)
                return stt;
        }
    }
    return RT_OK;
}

/* Samples of seconds [a, b) of the bout at the SINBAR/Montreal tonic level
 * (at least tonic_k x background, or above the absolute level), from the
 * counts of each second. */
static size_t tonic_samples(const worker_ctx *w, size_t a, size_t b)
{
    size_t sum = 0;
    for (size_t j = a; j < b; j++)
        sum += w->tonic[j];
    return sum;
}

static double stretch_median(const rt_stretch *st, size_t a, size_t b, double *scratch)
{
    size_t len = 0;
    for (size_t i = a; i < b; i += 4)
        scratch[len++] = st->env[i];
    return len ? rt_quantile(scratch, len, 0.5) : 0.0;
}

/* Tonic shares and audit levels on the 3-s grid and the epochs of a bout. */
static void label_tonic(const pass_ctx *c, worker_ctx *w, item_out *o, rt_role role,
                        const piece *pc)
{
    rt_night *night = c->night;
    const rt_score_params *p = &night->params;
    const rt_stretch *st = &w->st;
    const bout_span *bout = &pc->view;
    size_t seconds = st->seconds;
    rt_count_tonic_blocks(st->env, w->bg, st->starts, seconds, p->tonic_k, abs_tonic_env_uv(p),
                          w->tonic);
    for (size_t k = pc->core_a / 3; k < pc->core_b / 3; k++) {
        rt_mini *m = &night->minis3[bout->mini3_first + k];
        size_t a = st->starts[3 * k], b = st->starts[3 * k + 3];
        size_t tonic = tonic_samples(w, 3 * k, 3 * k + 3);
        if (b > a && 2 * tonic > b - a)
            m->labels[role] |= RT_LABEL_SINBAR_TONIC;
        if (m->labels[role] & (RT_LABEL_SINBAR_TONIC | RT_LABEL_SINBAR_PHASIC))
            m->labels[role] |= RT_LABEL_SINBAR_ANY;
        m->envelope_uv[role] = (float)stretch_median(st, a, b, st->scratch);
        m->background_uv[role] = (float)w->bg[3 * k + 1];
    }
    if (role != RT_ROLE_CHIN)
        return;
    double aasm_level = p->aasm_nrem_margin * night->nrem_reference_uv;
    bool aasm = isfinite(night->nrem_reference_uv);
    if (aasm)
        rt_count_tonic_blocks(st->env, w->bg, st->starts, seconds, 0.0, aasm_level, w->above);
    for (size_t e = pc->core_a / 30; e < pc->core_b / 30; e++) {
        rt_epoch_result *er = &night->epochs[bout->epoch_first + e];
        size_t a = st->starts[RT_EPOCH_WHOLE_S * e], b = st->starts[RT_EPOCH_WHOLE_S * e + RT_EPOCH_WHOLE_S];
        size_t tonic = tonic_samples(w, RT_EPOCH_WHOLE_S * e, RT_EPOCH_WHOLE_S * e + RT_EPOCH_WHOLE_S);
        er->tonic_share = b > a ? (double)tonic / (double)(b - a) : 0.0;
        er->sinbar_tonic = 2 * tonic > b - a;
        if (aasm) {
            /* "greater than the minimum NREM amplitude" for at least 50 % (AASM),
             * "greater" meaning by the margin a scorer sees */
            size_t above = 0;
            for (size_t j = RT_EPOCH_WHOLE_S * e; j < RT_EPOCH_WHOLE_S * e + RT_EPOCH_WHOLE_S; j++)
                above += w->above[j];
            er->aasm_tonic = 2 * above >= b - a;
        }
    }
    /* Montreal tonic: 20-s windows tiled from the bout start; the remainder is
     * dropped. A window is counted by the piece whose core holds its start;
     * it is left out when it touches an excluding event or a quality mark of
     * the chin (the marks of this stretch: the neighbouring core's seconds
     * may be marked in the masks by another thread at any time). */
    size_t win = (size_t)llround(p->montreal_epoch_s);
    size_t base = bout->epoch_first * RT_EPOCH_WHOLE_S;
    size_t off = (size_t)llround(bout->t0 - c->bouts[pc->bout].t0); /* view from bout start */
    size_t s0 = (pc->core_a + off + win - 1) / win * win - off;
    const unsigned quality = RT_EXCLUDED_BY_QUALITY(RT_QUALITY_CLIPPING) |
                             RT_EXCLUDED_BY_QUALITY(RT_QUALITY_FLAT) |
                             RT_EXCLUDED_BY_QUALITY(RT_QUALITY_POP);
    for (; s0 < pc->core_b && s0 + win <= seconds; s0 += win) {
        if ((rt_exclusions_of(c->ss->masks, RT_ROLE_CHIN, base + s0, win) & ~quality) ||
            rt_stretch_marked(st, (double)s0, (double)(s0 + win)))
            continue; /* a window touching an excluding event leaves the count */
        size_t a = st->starts[s0], b = st->starts[s0 + win];
        o->montreal_windows++;
        o->montreal_tonic += 2 * tonic_samples(w, s0, s0 + win) > b - a;
    }
}

static rt_status count_rai(const pass_ctx *c, const worker_ctx *w, item_out *o,
                           const piece *pc, rt_error *err)
{
    const bout_span *bout = &pc->view;
    size_t seconds = w->st.seconds;
    double *floored = rt_calloc(seconds ? seconds : 1, sizeof *floored);
    bool *skip = rt_calloc(seconds ? seconds : 1, sizeof *skip);
    if (!floored || !skip) {
        free(floored);
        free(skip);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the REM Atonia Index");
    }
    /* the floor is taken over every second of the bout; excluded seconds are
     * then left out of the counts (as for the mini-epoch indices) */
    rt_rai_remove_floor(w->st.rect_mean_uv, seconds, 60, floored);
    size_t base = bout->epoch_first * RT_EPOCH_WHOLE_S;
    for (size_t j = pc->core_a; j < pc->core_b; j++)
        skip[j] = rt_exclusions_of(c->ss->masks, RT_ROLE_CHIN, base + j, 1) != 0;
    rt_rai_count(floored + pc->core_a, pc->core_b - pc->core_a, skip + pc->core_a, &o->rai);
    free(floored);
    free(skip);
    return RT_OK;
}

/* Leaves out the mini-epochs, seconds and minutes a quality mark covers, for
 * this role. */
static rt_status apply_marks(const pass_ctx *c, const worker_ctx *w, item_out *o, rt_role role,
                             const piece *pc, rt_error *err)
{
    rt_night *night = c->night;
    const rt_stretch *st = &w->st;
    const bout_span *bout = &pc->view;
    size_t base = bout->epoch_first * RT_EPOCH_WHOLE_S;
    for (size_t k = 0; k < st->n_marks; k++) {
        const rt_quality_mark *m = &st->marks[k];
        size_t a = (size_t)floor(m->start_s), b = (size_t)ceil(m->end_s);
        if (b > pc->core_b)
            b = pc->core_b;
        if (a < pc->core_a)
            a = pc->core_a;
        if (a >= b)
            continue;
        unsigned bit = RT_EXCLUDED_BY_QUALITY(m->reason);
        rt_status s = rt_exclusions_mark_role(c->ss->masks, role, base + a, b - a, bit, err);
        if (s == RT_OK)
            s = room_for_one((void **)&o->marked, &o->marked_cap, o->n_marked, sizeof *o->marked,
                             err);
        if (s != RT_OK)
            return s;
        double from = fmax(m->start_s, (double)pc->core_a), to = fmin(m->end_s, (double)pc->core_b);
        o->marked[o->n_marked++] = (marked_minutes){m->reason, (to - from) / 60.0};
        for (size_t i = a / 3; i * 3 < b; i++) {
            rt_mini *mi = &night->minis3[bout->mini3_first + i];
            mi->labels[role] |= RT_LABEL_EXCLUDED;
            if (role == RT_ROLE_CHIN)
                mi->excluded_by |= bit;
        }
        for (size_t i = a / 2; i * 2 < b; i++)
            night->minis2[bout->mini2_first + i].labels[role] |= RT_LABEL_EXCLUDED;
    }
    return RT_OK;
}

/* The per-second background of the current bout from the role's model, and
 * room for the bursts. */
static rt_status bout_background(const pass_ctx *c, worker_ctx *w, rt_role role,
                                 const bout_span *bout, rt_error *err)
{
    size_t seconds = w->st.seconds;
    if (seconds + 1 > w->bg_cap) {
        double *bg = realloc(w->bg, (seconds + 1) * sizeof *bg);
        if (bg)
            w->bg = bg;
        size_t *tonic = bg ? realloc(w->tonic, (seconds + 1) * sizeof *tonic) : NULL;
        if (tonic)
            w->tonic = tonic;
        size_t *above = tonic ? realloc(w->above, (seconds + 1) * sizeof *above) : NULL;
        if (!above)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu seconds", seconds);
        w->above = above;
        w->bg_cap = seconds + 1;
    }
    for (size_t j = 0; j < seconds; j++)
        w->bg[j] = rt_night_background_uv(c->night, role, bout->t0 + (double)j + 0.5);
    w->bg[seconds] = seconds ? w->bg[seconds - 1] : NAN;
    size_t need = 10 * seconds + 16; /* bursts are 0.1 s apart at the least */
    if (need > w->span_cap) {
        for (int r = 0; r < BURST_RULES; r++) {
            rt_span *sp = realloc(w->spans[r], need * sizeof *sp);
            if (!sp) {
                w->span_cap = 0; /* the others may have grown: size them again next time */
                return rt_fail(err, RT_ERR_NOMEM, "out of memory for bursts");
            }
            w->spans[r] = sp;
        }
        w->span_cap = need;
    }
    return RT_OK;
}

/* Appends the level of every unmarked second [from, to) of the conditioned
 * stretch to *pts (growing it). */
static rt_status append_levels(const rt_stretch *st, size_t from, size_t to, rt_level_point **pts,
                               size_t *n, rt_error *err)
{
    rt_level_point *p = realloc(*pts, (*n + (to - from) + 1) * sizeof *p);
    if (!p)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the per-second levels");
    *pts = p;
    for (size_t j = from; j < to; j++) {
        if (rt_stretch_marked(st, (double)j, (double)j + 1.0))
            continue; /* a loose lead or clipping is not the muscle's level */
        p[*n].t_s = st->t0_s + (double)j + 0.5;
        p[*n].level_uv = st->level_uv[j];
        (*n)++;
    }
    return RT_OK;
}

/* Pass 1 for one role of one bout: the level of every scorable second, and
 * the quality marks (pass 2 reads the same stretch: they are kept). */
static rt_status collect_levels(const pass_ctx *c, worker_ctx *w, item_out *o, const item *it,
                                rt_error *err)
{
    const piece *pc = &c->pieces[it->piece];
    const rt_stretch_request req = {RT_STRETCH_LEVELS, NULL, 0};
    rt_status st = rt_condition_stretch_for(&w->cond[it->role], pc->view.t0,
                                            pc->view.n_epochs * RT_EPOCH_WHOLE_S, &c->beats[it->piece], &req,
                                            &w->st, err);
    if (st == RT_OK)
        st = append_levels(&w->st, pc->core_a, pc->core_b, &o->points, &o->n_points, err);
    if (st != RT_OK)
        return st;
    o->marks = rt_calloc(w->st.n_marks + 1, sizeof *o->marks);
    if (!o->marks)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for quality marks");
    if (w->st.n_marks)
        memcpy(o->marks, w->st.marks, w->st.n_marks * sizeof *o->marks);
    o->n_marks = w->st.n_marks;
    return RT_OK;
}

/* Pass 2 for one role of one bout: quality, bursts, tonic, RAI. */
static rt_status label_role_bout(const pass_ctx *c, worker_ctx *w, item_out *o, const item *it,
                                 const item_out *pass1, rt_error *err)
{
    const rt_score_params *p = &c->night->params;
    rt_role role = it->role;
    const piece *pc = &c->pieces[it->piece];
    const bout_span *bout = &pc->view;
    size_t seconds = bout->n_epochs * RT_EPOCH_WHOLE_S;
    const rt_stretch_request req = {RT_STRETCH_SUMS, pass1->marks, pass1->n_marks};
    rt_status st = rt_condition_stretch_for(&w->cond[role], bout->t0, seconds,
                                            &c->beats[it->piece], &req, &w->st, err);
    if (st == RT_OK)
        st = apply_marks(c, w, o, role, pc, err);
    if (st == RT_OK)
        st = bout_background(c, w, role, bout, err);
    if (st != RT_OK)
        return st;
    o->ecg_found = w->st.ecg.found;
    o->ecg_removed = w->st.ecg.removed;
    double tol = p->burst_duration_tolerance_s;
    size_t win = w->cond[role].envelope_window;
    const rt_burst_rule rules[BURST_RULES] = {
        {p->aasm_burst_k, p->burst_min_s, p->burst_max_s, tol, win},
        {p->sinbar_burst_k, p->burst_min_s, p->burst_max_s, tol, win},
        {p->montreal_burst_k, p->burst_min_s, p->montreal_burst_max_s, tol, win}};
    static const unsigned labels[BURST_RULES] = {RT_LABEL_AASM_PHASIC, RT_LABEL_SINBAR_PHASIC,
                                                 RT_LABEL_MONTREAL_PHASIC};
    st = detect_rules(c, w, o, role, pc, rules, labels, err);
    if (st != RT_OK)
        return st;
    label_tonic(c, w, o, role, pc);
    return role == RT_ROLE_CHIN ? count_rai(c, w, o, pc, err) : RT_OK;
}

/* Limb NREM runs read for the drift: one run in NREM_DRIFT_STRIDE (10 minutes
 * of every hour or so of NREM is plenty for a line through the night). */
#define NREM_DRIFT_STRIDE 6
/* NREM is read in runs of at most this many epochs. */
#define NREM_RUN_EPOCHS 20

/* One NREM run of one role, on the same conditioning path as REM: the
 * per-second levels (the drift of the role's background) and, for the chin,
 * the median envelope of each unmarked epoch, from which the AASM tonic
 * reference is taken. */
static rt_status nrem_run(const pass_ctx *c, worker_ctx *w, item_out *o, const item *it,
                          rt_error *err)
{
    rt_stretch *st = &w->st;
    const rt_stretch_request req = {RT_STRETCH_LEVELS, NULL, 0};
    /* a run no other role reads is read straight through a small buffer:
     * keeping all its records would only copy them once more */
    st->keep = it->alone ? NULL : w->keep;
    rt_status s = rt_condition_stretch_for(&w->cond[it->role],
                                           (double)it->first_epoch * c->tl->epoch_s,
                                           it->epochs * RT_EPOCH_WHOLE_S, NULL, &req, st, err);
    st->keep = w->keep;
    if (s == RT_OK)
        s = append_levels(st, 0, st->seconds, &o->points, &o->n_points, err);
    if (s != RT_OK || it->role != RT_ROLE_CHIN)
        return s;
    o->medians = rt_calloc(it->epochs, sizeof *o->medians);
    if (!o->medians)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu NREM epochs", it->epochs);
    for (size_t k = 0; k < it->epochs; k++) {
        double e0 = (double)(k * RT_EPOCH_WHOLE_S);
        if (rt_stretch_marked(st, e0, e0 + RT_EPOCH_S))
            continue; /* a loose lead or clipping would bend the reference */
        o->medians[o->n_medians++] = stretch_median(st, st->starts[k * RT_EPOCH_WHOLE_S],
                                                    st->starts[k * RT_EPOCH_WHOLE_S + RT_EPOCH_WHOLE_S], st->scratch);
    }
    return RT_OK;
}

static rt_status run_item(void *ctx, unsigned worker, size_t i, rt_error *err)
{
    const pass_ctx *c = ctx;
    const item *it = &c->job->items[i];
    item_out *o = &c->job->outs[i];
    worker_ctx *w = &c->workers[worker];
    switch (it->kind) {
    case ITEM_NREM:
        return nrem_run(c, w, o, it, err);
    case ITEM_BEATS: {
        const bout_span *b = &c->pieces[it->piece].view;
        return rt_condition_beats_with(c->rec, c->roles, b->t0, b->n_epochs * RT_EPOCH_WHOLE_S, &w->beats,
                                       &c->beats[it->piece], &c->beats_source[it->piece], err);
    }
    case ITEM_LEVELS:
        return collect_levels(c, w, o, it, err);
    case ITEM_LABELS: /* pass 1's item of this bout and role has the same index */
        return label_role_bout(c, w, o, it, &c->levels->outs[i], err);
    }
    return rt_fail(err, RT_ERR_INTERNAL, "night.c: unknown item kind %d", (int)it->kind);
}

/* ---- The jobs --------------------------------------------------------- */

static rt_status add_item(item_list *l, item it, size_t rank, double cost, rt_error *err)
{
    if (l->n == l->cap) {
        size_t ncap = l->cap ? 2 * l->cap : 64;
        item *items = realloc(l->items, ncap * sizeof *items);
        if (items)
            l->items = items;
        size_t *ranks = items ? realloc(l->rank, ncap * sizeof *ranks) : NULL;
        if (ranks)
            l->rank = ranks;
        double *costs = ranks ? realloc(l->cost, ncap * sizeof *costs) : NULL;
        if (!costs)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for the scoring jobs");
        l->cost = costs;
        l->cap = ncap;
    }
    l->items[l->n] = it;
    l->rank[l->n] = rank;
    l->cost[l->n] = cost;
    l->n++;
    return RT_OK;
}

static void item_list_free(item_list *l)
{
    for (size_t i = 0; l->outs && i < l->n; i++) {
        free(l->outs[i].points);
        free(l->outs[i].marks);
        free(l->outs[i].medians);
        free(l->outs[i].bursts);
        free(l->outs[i].marked);
    }
    free(l->outs);
    free(l->items);
    free(l->rank);
    free(l->cost);
    memset(l, 0, sizeof *l);
}

/* Runs every item of l on the workers; the lowest-ranked failure so far is
 * kept in *f. */
static rt_status run_job(pass_ctx *c, item_list *l, rt_parallel_failure *f)
{
    if (!l->outs && !(l->outs = rt_calloc(l->n, sizeof *l->outs))) {
        f->rank = 0;
        return rt_fail(&f->error, RT_ERR_NOMEM, "out of memory for the scoring jobs");
    }
    c->job = l;
    rt_parallel_job job = {l->n, l->rank, l->cost, run_item, c};
    rt_status st = rt_parallel_run(&job, c->n_workers, f);
    c->job = NULL;
    return st;
}

/* The place of each item in the sequential loop: the NREM runs (run, then
 * role), then piece by piece its beats and each role's pass 1, then piece by
 * piece each role's pass 2. Only the order of ranks matters. */
static size_t rank_levels(size_t n_nrem, size_t pi, int role)
{
    return n_nrem + pi * (RT_ROLE_COUNT + 1) + (role < 0 ? 0 : 1 + (size_t)role);
}

static size_t rank_labels(size_t n_nrem, size_t n_pieces, size_t pi, int role)
{
    return rank_levels(n_nrem, n_pieces, -1) + pi * RT_ROLE_COUNT + (size_t)role;
}

/* Whether role r reads the chunk-th NREM run: the chin every run, an open
 * limb every NREM_DRIFT_STRIDE-th. */
static bool reads_nrem_run(const pass_ctx *c, int r, size_t chunk)
{
    return c->cond_open[r] && (r == RT_ROLE_CHIN || chunk % NREM_DRIFT_STRIDE == 0);
}

/* The NREM runs (at most NREM_RUN_EPOCHS epochs each) of every open role: the
 * chin's every run, the limbs' every NREM_DRIFT_STRIDE-th. */
static rt_status nrem_items(const pass_ctx *c, item_list *l, rt_error *err)
{
    const rt_timeline *tl = c->tl;
    size_t e = 0, chunk = 0;
    rt_status st = RT_OK;
    while (e < tl->n_epochs && st == RT_OK) {
        if (!is_nrem(tl->stages[e])) {
            e++;
            continue;
        }
        size_t run = 0;
        while (e + run < tl->n_epochs && is_nrem(tl->stages[e + run]) && run < c->nrem_run_epochs)
            run++;
        size_t readers = 0;
        for (int r = 0; r < RT_ROLE_COUNT; r++)
            readers += reads_nrem_run(c, r, chunk);
        for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++) {
            if (!reads_nrem_run(c, r, chunk))
                continue;
            item it = {ITEM_NREM, (rt_role)r, 0, e, run, readers == 1};
            st = add_item(l, it, l->n, (double)run * RT_EPOCH_S, err);
        }
        e += run;
        chunk++;
    }
    return st;
}

/* Detecting beats costs about as much as conditioning two or three channels. */
#define BEATS_COST 2.5

static rt_status bout_items(const pass_ctx *c, item_list *beats, item_list *levels,
                            item_list *labels, size_t n_nrem, rt_error *err)
{
    size_t n_pieces = c->n_pieces;
    rt_status st = RT_OK;
    for (size_t b = 0; b < n_pieces && st == RT_OK; b++) {
        double seconds = (double)c->pieces[b].view.n_epochs * RT_EPOCH_S;
        item it = {ITEM_BEATS, RT_ROLE_ECG, b, 0, c->pieces[b].view.n_epochs, false};
        st = add_item(beats, it, rank_levels(n_nrem, b, -1), BEATS_COST * seconds, err);
        for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++) {
            if (!c->cond_open[r])
                continue;
            it.role = (rt_role)r;
            it.kind = ITEM_LEVELS;
            st = add_item(levels, it, rank_levels(n_nrem, b, r), seconds, err);
            it.kind = ITEM_LABELS;
            if (st == RT_OK)
                st = add_item(labels, it, rank_labels(n_nrem, n_pieces, b, r), seconds, err);
        }
    }
    return st;
}

/* Appends the items' levels to each role's list, in item order; with
 * pieces, each bout's first and end entry. */
static rt_status gather_levels(const item_list *l, const piece *pieces, rt_level_point **pts,
                               size_t *n, size_t **first_point, rt_error *err)
{
    for (size_t i = 0; i < l->n; i++) {
        const item *it = &l->items[i];
        item_out *o = &l->outs[i];
        rt_role r = it->role;
        const piece *pc = first_point ? &pieces[it->piece] : NULL;
        if (pc && pc->first)
            first_point[r][pc->bout] = n[r];
        rt_level_point *p = realloc(pts[r], (n[r] + o->n_points + 1) * sizeof *p);
        if (!p)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for the per-second levels");
        pts[r] = p;
        if (o->n_points)
            memcpy(p + n[r], o->points, o->n_points * sizeof *p);
        n[r] += o->n_points;
        if (pc)
            first_point[r][pc->bout + 1] = n[r];
        free(o->points);
        o->points = NULL;
    }
    return RT_OK;
}

/* The AASM tonic reference: a low quantile of the median envelope of each
 * unmarked NREM epoch of the chin ("the minimum amplitude in NREM"). */
static rt_status nrem_reference(const pass_ctx *c, const item_list *l, double *ref, rt_error *err)
{
    *ref = NAN;
    size_t count = 0;
    for (size_t i = 0; i < l->n; i++)
        count += l->outs[i].n_medians;
    if (count == 0)
        return RT_OK;
    double *medians = rt_calloc(count, sizeof *medians);
    if (!medians)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu NREM epochs", count);
    size_t m = 0;
    for (size_t i = 0; i < l->n; i++)
        for (size_t k = 0; k < l->outs[i].n_medians; k++)
            medians[m++] = l->outs[i].medians[k];
    *ref = rt_quantile(medians, m, c->night->params.aasm_nrem_quantile);
    free(medians);
    return RT_OK;
}

/* The beats of a piece that lie in what it owns (all of them when the bout
 * is one piece). */
static size_t owned_beats(const piece *pc, const rt_qrs_beats *beats)
{
    size_t n = 0;
    for (size_t i = 0; i < beats->n; i++)
        n += piece_owns(pc, beats->r_s[i] - pc->view.t0);
    return n;
}

/* The order of a bout's bursts: role, then rule (their label bits rise in
 * the order the rules are run), then onset. */
static int cmp_burst(const void *pa, const void *pb)
{
    const rt_burst *a = pa, *b = pb;
    if (a->role != b->role)
        return a->role < b->role ? -1 : 1;
    if (a->rules != b->rules)
        return a->rules < b->rules ? -1 : 1;
    return (a->onset_s > b->onset_s) - (a->onset_s < b->onset_s);
}

/* Adds pass 2's counts, marks and bursts to the night, piece by piece, role by
 * role, rule by rule: the order of the sequential loop. */
static rt_status gather_labels(pass_ctx *c, const item_list *l, rt_error *err)
{
    rt_night *night = c->night;
    scoring_state *ss = c->ss;
    size_t bout_begin = night->n_bursts;
    int last_role = -1; /* the last role of each piece's items */
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (c->cond_open[r])
            last_role = r;
    for (size_t i = 0; i < l->n; i++) {
        const item *it = &l->items[i];
        const item_out *o = &l->outs[i];
        rt_channel_quality *q = &night->channel[it->role].quality;
        for (size_t k = 0; k < o->n_marked; k++)
            q->unscorable_min[o->marked[k].reason] += o->marked[k].minutes;
        q->ecg_source = c->beats_source[it->piece] ? c->beats_source[it->piece] : q->ecg_source;
        if (it->role == RT_ROLE_CHIN)
            q->beats += owned_beats(&c->pieces[it->piece], &c->beats[it->piece]);
        q->ecg_found |= o->ecg_found;
        q->ecg_removed |= o->ecg_removed;
        q->bursts_vetoed += o->vetoed;
        ss->montreal_windows += o->montreal_windows;
        ss->montreal_tonic += o->montreal_tonic;
        ss->rai.at_most_1 += o->rai.at_most_1;
        ss->rai.from_1_to_2 += o->rai.from_1_to_2;
        ss->rai.total += o->rai.total;
        if (ss->per_bout) { /* the same counts per bout, for the REM periods */
            bout_counts *bc = &ss->per_bout[c->pieces[it->piece].bout];
            bc->montreal_windows += o->montreal_windows;
            bc->montreal_tonic += o->montreal_tonic;
            bc->rai.at_most_1 += o->rai.at_most_1;
            bc->rai.from_1_to_2 += o->rai.from_1_to_2;
            bc->rai.total += o->rai.total;
        }
        if (night->n_bursts + o->n_bursts > ss->burst_cap) {
            size_t ncap = ss->burst_cap ? ss->burst_cap : 256;
            while (ncap < night->n_bursts + o->n_bursts)
                ncap *= 2;
            rt_burst *nb = realloc(night->bursts, ncap * sizeof *nb);
            if (!nb)
                return rt_fail(err, RT_ERR_NOMEM, "out of memory for bursts");
            night->bursts = nb;
            ss->burst_cap = ncap;
        }
        if (o->n_bursts)
            memcpy(night->bursts + night->n_bursts, o->bursts, o->n_bursts * sizeof *o->bursts);
        night->n_bursts += o->n_bursts;
        /* a bout's pieces come one after another: when the last is in, its
         * bursts take the order of a bout scored whole */
        const piece *pc = &c->pieces[it->piece];
        if (pc->last && it->role == last_role) {
            if (!pc->first)
                qsort(night->bursts + bout_begin, night->n_bursts - bout_begin,
                      sizeof *night->bursts, cmp_burst);
            bout_begin = night->n_bursts;
        }
    }
    return RT_OK;
}


/* REM bouts and the mini-epoch grids laid over them. */
static rt_status lay_out_rem(rt_night *night, const rt_timeline *tl, bout_span **bouts_out,
                             rt_error *err)
{
    size_t rem = 0, bouts = 0;
    for (size_t e = 0; e < tl->n_epochs; e++) {
        if (tl->stages[e] != RT_STAGE_R)
            continue;
        rem++;
        bouts += (e == 0 || tl->stages[e - 1] != RT_STAGE_R);
    }
    night->rem_epochs = rem;
    night->n_bouts = bouts;
    night->epochs = rt_calloc(rem, sizeof *night->epochs);
    night->minis3 = rt_calloc(rem * RT_MINIS3_PER_EPOCH, sizeof *night->minis3);
    night->minis2 = rt_calloc(rem * RT_MINIS2_PER_EPOCH, sizeof *night->minis2);
    bout_span *b = rt_calloc(bouts, sizeof *b);
    if (!night->epochs || !night->minis3 || !night->minis2 || !b) {
        free(b);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM epochs", rem);
    }
    night->n_epochs = rem;
    night->n_minis3 = rem * RT_MINIS3_PER_EPOCH;
    night->n_minis2 = rem * RT_MINIS2_PER_EPOCH;
    size_t k = 0, bi = 0;
    for (size_t e = 0; e < tl->n_epochs; e++) {
        if (tl->stages[e] != RT_STAGE_R)
            continue;
        if (e == 0 || tl->stages[e - 1] != RT_STAGE_R) {
            b[bi].t0 = (double)e * tl->epoch_s;
            b[bi].epoch_first = k;
            b[bi].mini3_first = k * RT_MINIS3_PER_EPOCH;
            b[bi].mini2_first = k * RT_MINIS2_PER_EPOCH;
            bi++;
        }
        b[bi - 1].n_epochs++;
        rt_epoch_result *er = &night->epochs[k];
        er->epoch = e;
        er->onset_s = (double)e * tl->epoch_s;
        er->bout = bi - 1;
        for (int m = 0; m < RT_MINIS3_PER_EPOCH; m++) {
            rt_mini *mi = &night->minis3[k * RT_MINIS3_PER_EPOCH + (size_t)m];
            mi->epoch = e;
            mi->index = m;
            mi->onset_s = er->onset_s + 3.0 * m;
        }
        for (int m = 0; m < RT_MINIS2_PER_EPOCH; m++) {
            rt_mini *mi = &night->minis2[k * RT_MINIS2_PER_EPOCH + (size_t)m];
            mi->epoch = e;
            mi->index = m;
            mi->onset_s = er->onset_s + 2.0 * m;
        }
        k++;
    }
    *bouts_out = b;
    return RT_OK;
}

/* Every mini-epoch whose seconds an excluding event touches is left out, for
 * the channels the event concerns. */
static void mark_exclusions(rt_night *night, const rt_exclusion_masks *m)
{
    struct grid { rt_mini *minis; size_t n; size_t len_s; } grids[2] = {
        {night->minis3, night->n_minis3, 3}, {night->minis2, night->n_minis2, 2}};
    for (int g = 0; g < 2; g++) {
        for (size_t i = 0; i < grids[g].n; i++) {
            rt_mini *mi = &grids[g].minis[i];
            size_t first = i * grids[g].len_s; /* minis are contiguous REM seconds */
            for (int r = 0; r < RT_ROLE_COUNT; r++) {
                unsigned bits = rt_exclusions_of(m, (rt_role)r, first, grids[g].len_s);
                if (!bits)
                    continue;
                mi->labels[r] |= RT_LABEL_EXCLUDED;
                if (r == RT_ROLE_CHIN)
                    mi->excluded_by |= bits;
            }
        }
    }
}

static void mark_absent(rt_night *night, rt_role role)
{
    for (size_t i = 0; i < night->n_minis3; i++)
        night->minis3[i].labels[role] = RT_LABEL_ABSENT;
    for (size_t i = 0; i < night->n_minis2; i++)
        night->minis2[i].labels[role] = RT_LABEL_ABSENT;
}

static void check_prefilter(rt_night *night, const rt_recording *rec, const rt_role_source *src,
                            rt_channel_quality *q)
{
    rt_channel_check check;
    rt_quality_check_channel(rt_recording_channel(rec, src->channel), night->params.band_low_hz,
                             night->params.band_high_hz, &check);
    q->hp_above_band = check.hp_above_band;
    q->lp_below_band = check.lp_below_band;
    q->notch_at_source = check.notch_at_source;
    if (check.hp_above_band || check.lp_below_band)
        rt_night_warn(night, "%s: the recording's own filters (%s) narrow the %g-%g Hz band: "
                      "amplitudes are not comparable with published values", src->label,
                      rt_recording_channel(rec, src->channel)->prefilter,
                      night->params.band_low_hz, night->params.band_high_hz);
}

/* An EMG role given on the command line (--chin ECG) whose channel reads as
 * an ECG lead: scored as asked, with a warning, since ECG scored as chin EMG
 * would count every heartbeat as a burst. */
static void check_ecg_label(rt_night *night, const rt_recording *rec, rt_role role,
                            const rt_role_source *src)
{
    if (src->detected)
        return;
    const int sides[2] = {src->channel, src->reference};
    for (int k = 0; k < 2; k++) {
        if (sides[k] < 0)
            continue;
        const rt_channel_info *ch = rt_recording_channel(rec, sides[k]);
        if (rt_role_detect(ch->label, ch->transducer) == RT_ROLE_ECG) {
            rt_night_warn(night, "%s was given channel %s, whose label reads as an ECG lead: "
                          "scored as asked; check the --%s option", rt_role_name(role), ch->label,
                          rt_role_name(role));
            return;
        }
    }
}

/* The conditioners of the EMG roles, with the mains probe on the first REM bout. */
static rt_status open_channels(pass_ctx *c, rt_error *err)
{
    rt_night *night = c->night;
    const rt_score_params *p = &night->params;
    const bout_span *first = night->n_bouts ? &c->bouts[0] : NULL;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const rt_role_source *src = &c->roles->role[r];
        rt_channel_result *cr = &night->channel[r];
        if (!is_emg((rt_role)r) || src->channel < 0)
            continue;
        cr->present = true;
        rt_copy_string(cr->label, sizeof cr->label, src->label);
        cr->rate_hz = src->rate_hz;
        check_prefilter(night, c->rec, src, &cr->quality);
        check_ecg_label(night, c->rec, (rt_role)r, src);
        rt_status st = rt_conditioner_open(c->rec, src, p, first ? first->t0 : 0.0,
                                           first ? (double)first->n_epochs * RT_EPOCH_S : 0.0,
                                           &c->cond[r], err);
        if (st != RT_OK)
            return st;
        c->cond_open[r] = true;
        const rt_mains *mains = &c->cond[r].mains;
        rt_channel_quality *q = &cr->quality;
        q->line_db = -99.0;
        q->low_edge_db = q->high_edge_db = NAN;
        if (first) {
            rt_quality_band_edges(mains, q);
            if (mains->present) {
                q->line_hz = mains->line_hz;
                q->line_db = mains->line_db;
                q->notches = mains->n_notches;
            }
        }
        if (q->spectrum_narrow)
            rt_night_warn(night, "%s: its spectrum falls off inside the %g-%g Hz band (%.0f dB at "
                          "10-15 Hz, %.0f dB at 75-95 Hz against 25-45 Hz): it was filtered "
                          "narrower when recorded", src->label, p->band_low_hz, p->band_high_hz,
                          q->low_edge_db, q->high_edge_db);
        cr->band_high_hz = rt_bandpass_high_hz(c->cond[r].bp);
        if (src->rate_hz < p->min_rate_hz) {
            cr->low_rate = true;
            rt_night_warn(night, "%s (%s) is sampled at %g Hz, below the %g Hz minimum for EMG "
                          "(AASM): scored, but bursts may be missed", rt_role_name((rt_role)r),
                          src->label, src->rate_hz, p->min_rate_hz);
        }
        if (cr->band_high_hz < p->band_high_hz - 1e-9)
            rt_night_warn(night, "%s: low-pass corner lowered to %g Hz (below Nyquist at %g Hz)",
                          src->label, cr->band_high_hz, src->rate_hz);
    }
    return RT_OK;
}

/* The workers: as many as threads asked for and items to share, each with
 * copies of the open conditioners (worker 0 uses the night's own). */
static rt_status open_workers(pass_ctx *c, unsigned threads, size_t most_items, rt_error *err)
{
    if (threads > most_items)
        threads = most_items ? (unsigned)most_items : 1;
    c->workers = rt_calloc(threads, sizeof *c->workers);
    if (!c->workers)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %u workers", threads);
    c->n_workers = threads;
    for (unsigned w = 0; w < threads; w++) {
        worker_ctx *wk = &c->workers[w];
        rt_status made = rt_record_keep_new(&wk->keep, err);
        if (made != RT_OK)
            return made;
        wk->st.keep = wk->beats.keep = wk->keep;
        for (int r = 0; r < RT_ROLE_COUNT; r++) {
            if (!c->cond_open[r])
                continue;
            if (w == 0) {
                wk->cond[r] = c->cond[r];
                continue;
            }
            rt_status st = rt_conditioner_copy(&c->cond[r], &wk->cond[r], err);
            if (st != RT_OK)
                return st;
            wk->copied[r] = true;
        }
    }
    return RT_OK;
}

/* The atonic background of each role, fitted to its pass-1 levels of the
 * whole night and the NREM drift, and each bout's lift over it. */
static rt_status fit_backgrounds(pass_ctx *c, rt_error *err)
{
    rt_night *night = c->night;
    rt_status st = RT_OK;
    for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++) {
        if (!c->cond_open[r])
            continue;
        const rt_atonic_model *m = &c->model[r];
        st = rt_atonic_fit(c->points[r], c->n_points[r], c->nrem_points[r], c->n_nrem_points[r],
                           &night->params, &c->model[r], err);
        rt_channel_result *cr = &night->channel[r];
        cr->atonic_valid = m->valid;
        cr->atonic_uv = m->level_uv;
        cr->atonic_floor_uv = m->floor_uv;
        cr->atonic_ref_s = m->ref_s;
        cr->atonic_drift_per_h = m->drift_per_s * 3600.0;
        cr->atonic_minutes = m->minutes;
        double *scratch = rt_calloc(c->n_points[r] + 1, sizeof *scratch);
        if (st == RT_OK && !scratch)
            st = rt_fail(err, RT_ERR_NOMEM, "out of memory for the bout backgrounds");
        for (size_t b = 0; b < night->n_bouts && st == RT_OK; b++) {
            size_t first = c->bout_first_point[r][b], end = c->bout_first_point[r][b + 1];
            night->bout_lift[b * RT_ROLE_COUNT + (size_t)r] =
                rt_atonic_bout_lift(m, c->points[r] + first, end - first, &night->params, scratch);
        }
        free(scratch);
    }
    return st;
}

static void pass_ctx_free(pass_ctx *c)
{
    for (unsigned w = 0; c->workers && w < c->n_workers; w++) {
        worker_ctx *wk = &c->workers[w];
        for (int r = 0; r < RT_ROLE_COUNT; r++)
            if (wk->copied[r])
                rt_conditioner_close(&wk->cond[r]);
        rt_stretch_free(&wk->st);
        rt_beats_work_free(&wk->beats);
        rt_record_keep_free(wk->keep);
        free(wk->bg);
        free(wk->tonic);
        free(wk->above);
        for (int r = 0; r < BURST_RULES; r++)
            free(wk->spans[r]);
    }
    free(c->workers);
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        rt_conditioner_close(&c->cond[r]);
        free(c->points[r]);
        free(c->nrem_points[r]);
        free(c->bout_first_point[r]);
    }
    if (c->beats)
        for (size_t b = 0; b < c->n_pieces; b++)
            rt_qrs_beats_free(&c->beats[b]);
    free(c->beats);
    free(c->beats_source);
    free(c->pieces);
}

size_t rt_bout_piece(size_t len_s, size_t core_s, size_t j, size_t view[2], size_t own[2])
{
    size_t k = len_s <= core_s + 2 * PIECE_CONTEXT_S ? 1 : (len_s + core_s - 1) / core_s;
    size_t a = k == 1 ? 0 : j * core_s, e = j + 1 >= k ? len_s : a + core_s;
    own[0] = a;
    own[1] = e;
    /* a and e are whole minutes (or the bout's end): so is the view */
    view[0] = a > PIECE_CONTEXT_S ? a - PIECE_CONTEXT_S : 0;
    view[1] = e + PIECE_CONTEXT_S < len_s ? e + PIECE_CONTEXT_S : len_s;
    return k;
}

/* The pieces of every bout: bouts no longer than a core and two contexts
 * whole, longer ones in cores of whole minutes. */
static rt_status plan_pieces(pass_ctx *c, rt_error *err)
{
    rt_night *night = c->night;
    double fastest = 0.0;
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (c->roles->role[r].channel >= 0 && (c->cond_open[r] || r == RT_ROLE_ECG))
            fastest = fmax(fastest, c->roles->role[r].rate_hz);
    double core_s = c->block_s > 0.0 ? c->block_s
                                     : fastest > 0.0 ? RT_NIGHT_BLOCK_SAMPLES / fastest : 0.0;
    size_t core = core_s < 1e9 ? (size_t)(core_s / 60.0) * 60 : (size_t)1e9;
    if (core < 60)
        core = 60;
    /* an NREM run is read whole: no longer than a piece's view */
    c->nrem_run_epochs = (core + 2 * PIECE_CONTEXT_S) / 30;
    if (c->nrem_run_epochs > NREM_RUN_EPOCHS)
        c->nrem_run_epochs = NREM_RUN_EPOCHS;
    night->block_s = core;
    size_t n = 0, view[2], own[2];
    for (size_t b = 0; b < night->n_bouts; b++)
        n += rt_bout_piece(c->bouts[b].n_epochs * RT_EPOCH_WHOLE_S, core, 0, view, own);
    c->pieces = rt_calloc(n + 1, sizeof *c->pieces);
    if (!c->pieces)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM blocks", n);
    c->n_pieces = n;
    piece *pc = c->pieces;
    for (size_t b = 0; b < night->n_bouts; b++) {
        const bout_span *bout = &c->bouts[b];
        size_t len = bout->n_epochs * RT_EPOCH_WHOLE_S;
        size_t k = rt_bout_piece(len, core, 0, view, own);
        for (size_t j = 0; j < k; j++, pc++) {
            rt_bout_piece(len, core, j, view, own);
            size_t va = view[0], ve = view[1];
            pc->bout = b;
            pc->view = (bout_span){bout->t0 + (double)va, (ve - va) / 30,
                                   bout->epoch_first + va / 30, bout->mini3_first + va / 3,
                                   bout->mini2_first + va / 2};
            pc->core_a = own[0] - va;
            pc->core_b = own[1] - va;
            pc->first = j == 0;
            pc->last = j + 1 == k;
        }
    }
    return RT_OK;
}

/* Room for what the passes gather over the night. */
static rt_status reserve_night(pass_ctx *c, rt_error *err)
{
    rt_night *night = c->night;
    size_t n_bouts = night->n_bouts;
    night->bout_lift = rt_calloc(n_bouts * RT_ROLE_COUNT + 1, sizeof *night->bout_lift);
    c->beats = rt_calloc(c->n_pieces + 1, sizeof *c->beats);
    c->beats_source = rt_calloc(c->n_pieces + 1, sizeof *c->beats_source);
    bool ok = night->bout_lift && c->beats && c->beats_source;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        c->bout_first_point[r] = rt_calloc(n_bouts + 1, sizeof *c->bout_first_point[r]);
        ok = ok && c->bout_first_point[r];
    }
    if (!ok)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM bouts", n_bouts);
    /* pass 2 marks each role's own seconds from several threads */
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        rt_status st = c->cond_open[r] ? rt_exclusions_reserve_role(c->ss->masks, (rt_role)r, err)
                                       : RT_OK;
        if (st != RT_OK)
            return st;
    }
    return RT_OK;
}

/* The NREM runs and pass 1 over every bout, the background fit, then pass 2.
 * Items run on the workers in any order; their results are gathered in the
 * sequential order, so the night is the same for any number of threads. */
static rt_status score_passes(pass_ctx *c, unsigned threads, rt_error *err)
{
    rt_night *night = c->night;
    rt_status st = open_channels(c, err);
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (is_emg((rt_role)r) && !night->channel[r].present)
            mark_absent(night, (rt_role)r);
    item_list nrem_beats, levels, labels;
    memset(&nrem_beats, 0, sizeof nrem_beats);
    memset(&levels, 0, sizeof levels);
    memset(&labels, 0, sizeof labels);
    if (st == RT_OK)
        st = plan_pieces(c, err);
    if (st == RT_OK)
        st = reserve_night(c, err);
    if (st == RT_OK)
        st = nrem_items(c, &nrem_beats, err);
    size_t n_nrem = nrem_beats.n;
    if (st == RT_OK)
        st = bout_items(c, &nrem_beats, &levels, &labels, n_nrem, err);
    size_t most = nrem_beats.n > levels.n ? nrem_beats.n : levels.n;
    if (st == RT_OK)
        st = open_workers(c, threads, most > labels.n ? most : labels.n, err);
    rt_parallel_failure f;
    rt_parallel_failure_init(&f);
    if (st == RT_OK) {
        /* the beats of a bout are ready before its pass 1 starts */
        run_job(c, &nrem_beats, &f);
        for (unsigned w = 0; w < c->n_workers; w++)
            rt_beats_work_free(&c->workers[w].beats); /* no more beats to find */
        run_job(c, &levels, &f);
        st = f.rank == SIZE_MAX ? RT_OK : f.error.status;
        if (st != RT_OK && err)
            *err = f.error;
    }
    item_list nrem = nrem_beats;
    nrem.n = n_nrem; /* the NREM items come first */
    if (st == RT_OK)
        st = gather_levels(&nrem, NULL, c->nrem_points, c->n_nrem_points, NULL, err);
    if (st == RT_OK)
        st = nrem_reference(c, &nrem, &night->nrem_reference_uv, err);
    if (st == RT_OK)
        st = gather_levels(&levels, c->pieces, c->points, c->n_points, c->bout_first_point, err);
    item_list_free(&nrem_beats);
    if (st == RT_OK)
        st = fit_backgrounds(c, err);
    c->levels = &levels;
    if (st == RT_OK && run_job(c, &labels, &f) != RT_OK) {
        st = f.error.status;
        if (err)
            *err = f.error;
    }
    if (st == RT_OK)
        st = gather_labels(c, &labels, err);
    c->levels = NULL;
    item_list_free(&levels);
    item_list_free(&labels);
    return st;
}

static rt_status score_night(rt_recording *rec, const rt_role_map *roles,
                             const rt_timeline *tl, const rt_score_params *params,
                             const rt_cutoffs *cutoffs, int threads, rt_night **out,
                             rt_error *err)
{
    return rt_night_score_blocks(rec, roles, tl, params, cutoffs, threads, 0.0, out, err);
}

rt_status rt_night_score_blocks(rt_recording *rec, const rt_role_map *roles,
                                const rt_timeline *tl, const rt_score_params *params,
                                const rt_cutoffs *cutoffs, int threads, double block_s,
                                rt_night **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_night_score: no place for the result");
    *out = NULL;
    if (!(block_s >= 0.0) || !isfinite(block_s))
        return rt_fail(err, RT_ERR_USAGE, "rt_night_score: block length %g s must be 0 (the "
                       "default) or more", block_s);
    if (!rec || !roles || !tl)
        return rt_fail(err, RT_ERR_USAGE, "rt_night_score: a recording, roles and a timeline are "
                                          "needed");
    if (threads < 0)
        return rt_fail(err, RT_ERR_USAGE, "scoring threads must be 0 (the cores available) or "
                       "more, got %d", threads);
    if (fabs(tl->epoch_s - RT_EPOCH_S) > 1e-9) {
        const char *at = rt_timeline_staging_place(tl);
        return rt_fail(err, RT_ERR_STAGING, "%s: the staging has %g-s epochs; scoring needs 30-s "
                       "epochs (AASM Manual)", at[0] ? at : "staging", tl->epoch_s);
    }
    rt_night *night = rt_calloc(1, sizeof *night);
    if (!night)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    if (params)
        night->params = *params;
    else
        rt_score_params_default(&night->params);
    rt_status st = rt_score_params_check(&night->params, err);
    if (st != RT_OK) {
        free(night);
        return st;
    }
    if (cutoffs)
        night->cutoffs = *cutoffs;
    else
        rt_cutoffs_published(&night->cutoffs);
    rt_copy_string(night->recording_path, sizeof night->recording_path, rt_recording_path(rec));
    night->recording_s = rt_recording_duration_s(rec);
    night->start = rt_recording_start(rec);
    night->nrem_reference_uv = NAN;
    st = rt_night_staging_summarise(night, tl, err);
    if (st != RT_OK) {
        rt_night_free(night);
        return st;
    }
    rt_night_sleep_context(night, tl);

    scoring_state ss;
    memset(&ss, 0, sizeof ss);
    pass_ctx c;
    memset(&c, 0, sizeof c);
    night->roles = *roles;
    c.rec = rec;
    c.roles = roles;
    c.tl = tl;
    c.night = night;
    c.ss = &ss;
    c.block_s = block_s;
    rt_exclusion_masks masks;
    memset(&masks, 0, sizeof masks);
    st = lay_out_rem(night, tl, &c.bouts, err);
    if (st == RT_OK)
        st = rt_night_periods_lay_out(night, tl, c.bouts, err);
    if (st == RT_OK && !(ss.per_bout = rt_calloc(night->n_bouts + 1, sizeof *ss.per_bout)))
        st = rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu REM bouts", night->n_bouts);
    if (st == RT_OK)
        st = rt_exclusions_build(tl, &night->params, c.bouts, night->n_bouts, night->rem_epochs,
                                 &masks, err);
    if (st == RT_OK) {
        mark_exclusions(night, &masks);
        rt_exclusions_rates(tl, c.bouts, night->n_bouts,
                            (double)night->rem_epochs * tl->epoch_s / 3600.0, &night->exclusions);
        ss.masks = &masks;
        st = score_passes(&c, threads ? (unsigned)threads : (unsigned)rt_cores_available(), err);
    }
    pass_ctx_free(&c);
    rt_exclusions_free(&masks);
    free(c.bouts);
    if (st == RT_OK)
        st = rt_night_summarise(night, &ss, err);
    free(ss.per_bout);
    if (st == RT_OK)
        rt_night_agreement(night, tl);
    if (st != RT_OK) {
        rt_night_free(night);
        return st;
    }
    *out = night;
    return RT_OK;
}

/* Every message names a file (README.md: messages name the file and the
 * place): a failure deep in the scorer ("out of memory for 317441 samples")
 * gets the recording's path in front; staging messages name their own file. */
rt_status rt_night_score_threads(rt_recording *rec, const rt_role_map *roles,
                                 const rt_timeline *tl, const rt_score_params *params,
                                 const rt_cutoffs *cutoffs, int threads, rt_night **out,
                                 rt_error *err)
{
    rt_status st = score_night(rec, roles, tl, params, cutoffs, threads, out, err);
    const char *path = rec ? rt_recording_path(rec) : NULL;
    if (st != RT_OK && st != RT_ERR_STAGING && err && path &&
        strncmp(err->message, path, strlen(path)) != 0) {
        char inner[sizeof err->message];
        memcpy(inner, err->message, sizeof inner);
        rt_fail(err, st, "%s: %s", path, inner);
    }
    return st;
}

rt_status rt_night_score(rt_recording *rec, const rt_role_map *roles, const rt_timeline *tl,
                         const rt_score_params *params, const rt_cutoffs *cutoffs,
                         rt_night **out, rt_error *err)
{
    return rt_night_score_threads(rec, roles, tl, params, cutoffs, 1, out, err);
}

double rt_night_background_uv(const rt_night *night, rt_role role, double t_s)
{
    if (!night || (int)role < 0 || role >= RT_ROLE_COUNT || !night->channel[role].present ||
        !night->channel[role].atonic_valid || !night->bout_lift)
        return NAN;
    const rt_channel_result *cr = &night->channel[role];
    /* the REM epoch holding t_s gives the bout (epochs are in time order) */
    size_t lo = 0, hi = night->n_epochs;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (night->epochs[mid].onset_s + RT_EPOCH_S <= t_s)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (lo == night->n_epochs || night->epochs[lo].onset_s > t_s)
        return NAN; /* not in scored REM */
    double lift = night->bout_lift[night->epochs[lo].bout * RT_ROLE_COUNT + (size_t)role];
    return cr->atonic_floor_uv * lift *
           exp(cr->atonic_drift_per_h * (t_s - cr->atonic_ref_s) / 3600.0);
}

void rt_night_free(rt_night *night)
{
    if (!night)
        return;
    free(night->epochs);
    free(night->minis3);
    free(night->minis2);
    free(night->bursts);
    free(night->bout_lift);
    free(night->staging.gaps);
    free(night->periods);
    rt_night_corrections_free(night->corrections);
    free(night);
}
