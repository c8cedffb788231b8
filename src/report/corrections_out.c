/* A corrected night's corrections as JSON and as text (docs/corrections.md):
 * the file, the reviewers, the decisions counted by kind, the automatic
 * result beside the corrected one (which the night's indices and level
 * already are), what changed per index, and the agreement between remtone
 * and the reviewer on the decided mini-epochs. */
#include <math.h>
#include <stdio.h>

#include "report_internal.h"
#include "remtone/corrections.h"

static json_t *number(double v, int decimals)
{
    if (!isfinite(v))
        return json_null();
    double s = pow(10.0, decimals);
    return json_real(round(v * s) / s);
}

static int decimals_of(const rt_index_rule *rule) { return rule->unit[0] == '%' ? 2 : 4; }

static json_t *changes_json(const rt_night *night, const rt_night_corrections *c)
{
    const rt_index_rule *rules = rt_index_rules();
    bool ok = true;
    json_t *o = json_object();
    for (int i = 0; i < RT_IX_COUNT && ok; i++) {
        const rt_index_change *ch = &c->change[i];
        json_t *x = json_object();
        rt_json_set(x, "automatic", number(c->automatic[i].value, decimals_of(&rules[i])), &ok);
        rt_json_set(x, "corrected", number(night->index[i].value, decimals_of(&rules[i])), &ok);
        rt_json_set(x, "reached", json_boolean(ch->reached), &ok);
        rt_json_set(x, "added", json_integer((json_int_t)ch->added), &ok);
        rt_json_set(x, "removed", json_integer((json_int_t)ch->removed), &ok);
        rt_json_set(x, "left_out", json_integer((json_int_t)ch->left_out), &ok);
        rt_json_set(o, rules[i].id, rt_json_done(x, ok), &ok);
    }
    return rt_json_done(o, ok);
}

json_t *rt_corrections_json(const rt_night *night)
{
    bool ok = true;
    json_t *o = json_object();
    const rt_night_corrections *c = night ? night->corrections : NULL;
    rt_json_set(o, "present", json_boolean(c != NULL), &ok);
    if (!c)
        return rt_json_done(o, ok);
    rt_json_set(o, "file", rt_json_text(c->path), &ok);
    rt_json_set(o, "reviewers", rt_json_text(c->reviewers), &ok);
    json_t *counts = json_object();
    for (int k = 0; k < RT_DECISION_KINDS; k++)
        rt_json_set(counts, rt_decision_kind_name((rt_decision_kind)k),
                    json_integer((json_int_t)c->counts[k]), &ok);
    rt_json_set(o, "decisions", rt_json_done(counts, ok), &ok);
    rt_json_set(o, "minis_left_out", json_integer((json_int_t)c->minis_left_out), &ok);
    json_t *reasons = json_array();
    for (size_t i = 0; i < c->automatic_n_reasons && ok; i++)
        rt_json_push(reasons, rt_json_text(c->automatic_reasons[i]), &ok);
    json_t *automatic = json_object();
    rt_json_set(automatic, "level", json_string(rt_review_level_name(c->automatic_level)), &ok);
    rt_json_set(automatic, "reasons", rt_json_done(reasons, ok), &ok);
    rt_json_set(automatic, "indices", rt_indices_json(night, c->automatic), &ok);
    rt_json_set(o, "automatic", rt_json_done(automatic, ok), &ok);
    rt_json_set(o, "changes", changes_json(night, c), &ok);
    rt_json_set(o, "agreement", rt_agreement_json(&c->agreement), &ok);
    return rt_json_done(o, ok);
}

void rt_corrections_write_text(const rt_night *night, FILE *out)
{
    const rt_night_corrections *c = night ? night->corrections : NULL;
    if (!c || !out)
        return;
    const rt_index_rule *rules = rt_index_rules();
    fprintf(out, "\nCorrected by %s (%s): %zu confirmed, %zu rejected, %zu added, %zu excluded "
            "(%zu mini-epochs left out)\n", c->reviewers, rt_report_basename(c->path),
            c->counts[RT_DECISION_CONFIRM], c->counts[RT_DECISION_REJECT],
            c->counts[RT_DECISION_ADD], c->counts[RT_DECISION_EXCLUDE], c->minis_left_out);
    fprintf(out, "The indices and the level above are the corrected ones. Automatic level: %s\n",
            rt_review_level_name(c->automatic_level));
    fprintf(out, "  %-34s %10s %10s %7s %7s %8s\n", "index", "automatic", "corrected", "added",
            "removed", "left out");
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_change *ch = &c->change[i];
        char a[32], b[32];
        rt_report_value_text(&rules[i], c->automatic[i].value, a, sizeof a);
        rt_report_value_text(&rules[i], night->index[i].value, b, sizeof b);
        if (ch->reached)
            fprintf(out, "  %-34s %10s %10s %7zu %7zu %8zu\n", rules[i].id, a, b, ch->added,
                    ch->removed, ch->left_out);
        else
            fprintf(out, "  %-34s %10s %10s %7s %7s %8s\n", rules[i].id, a, b, "-", "-", "-");
    }
    rt_agreement_write_text_titled(&c->agreement,
                                   "Agreement of remtone with the reviewer (decided 3-s "
                                   "mini-epochs; \"manual\" is the reviewer)", out);
}
