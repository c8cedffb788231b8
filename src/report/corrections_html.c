/* The review page's "Corrections" section (docs/review-report.md,
 * docs/corrections.md): for a corrected night, who corrected it, the
 * decisions counted, each index automatic beside corrected with what the
 * decisions added, removed and left out, and remtone's agreement with the
 * reviewer. Its own file and function, so the page's other sections are
 * untouched by it; nothing is written for a night not corrected. */
#include <math.h>
#include <stdio.h>

#include "report_internal.h"
#include "svg.h"
#include "remtone/corrections.h"

static void cell(rt_page *p, const char *text)
{
    rt_page_element(p, "td", NULL, text);
}

static void header(rt_page *p, const char *const *names, size_t n)
{
    rt_page_start(p, "tr");
    for (size_t i = 0; i < n; i++)
        rt_page_element(p, "th", NULL, names[i]);
    rt_page_end_html(p);
}

static void index_rows(rt_page *p, const rt_night *n, const rt_night_corrections *c)
{
    const rt_index_rule *rules = rt_index_rules();
    static const char *const HEAD[] = {"index", "automatic", "corrected", "added", "removed",
                                       "left out"};
    rt_page_start(p, "table");
    header(p, HEAD, sizeof HEAD / sizeof HEAD[0]);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        char a[32], b[32], k[3][24];
        const rt_index_change *ch = &c->change[i];
        rt_report_value_text(&rules[i], c->automatic[i].value, a, sizeof a);
        rt_report_value_text(&rules[i], n->index[i].value, b, sizeof b);
        size_t v[3] = {ch->added, ch->removed, ch->left_out};
        for (int j = 0; j < 3; j++)
            snprintf(k[j], sizeof k[j], ch->reached ? "%zu" : "-", v[j]);
        rt_page_start(p, "tr");
        cell(p, rules[i].id);
        cell(p, a);
        cell(p, b);
        for (int j = 0; j < 3; j++)
            cell(p, k[j]);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
}

static void agreement_rows(rt_page *p, const rt_agreement *ag)
{
    static const char *const TYPES[RT_AGREE_TYPES] = {"phasic", "tonic", "any"};
    static const char *const HEAD[] = {"channel", "type", "mini-epochs", "agreement", "kappa",
                                       "reviewer marked", "remtone marked"};
    rt_page_start(p, "table");
    header(p, HEAD, sizeof HEAD / sizeof HEAD[0]);
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        for (int t = 0; t < RT_AGREE_TYPES; t++) {
            const rt_agreement_cell *x = &ag->cell[r][t];
            if (x->n == 0)
                continue;
            char n[24], pct[24], kap[24], man[24], aut[24];
            snprintf(n, sizeof n, "%zu", x->n);
            snprintf(pct, sizeof pct, "%.1f %%", x->percent);
            if (isfinite(x->kappa))
                snprintf(kap, sizeof kap, "%.2f", x->kappa);
            else
                snprintf(kap, sizeof kap, "undefined");
            snprintf(man, sizeof man, "%.1f %%", x->manual_pct);
            snprintf(aut, sizeof aut, "%.1f %%", x->auto_pct);
            rt_page_start(p, "tr");
            cell(p, rt_role_name((rt_role)r));
            cell(p, TYPES[t]);
            cell(p, n);
            cell(p, pct);
            cell(p, kap);
            cell(p, man);
            cell(p, aut);
            rt_page_end_html(p);
        }
    rt_page_end_html(p);
}

void rt_corrections_write_html(rt_page *p, const rt_night *night)
{
    const rt_night_corrections *c = night ? night->corrections : NULL;
    if (!c)
        return;
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "corrections");
    rt_page_element(p, "h2", NULL, "Corrections");
    rt_page_start(p, "p");
    rt_page_textf(p, "Reviewed by %s (%s): %zu confirmed, %zu rejected, %zu added, %zu excluded "
                     "(%zu mini-epochs left out). The indices and the review level of this page "
                     "are the corrected ones; remtone's automatic level was \"%s\".",
                  c->reviewers, rt_report_basename(c->path), c->counts[RT_DECISION_CONFIRM],
                  c->counts[RT_DECISION_REJECT], c->counts[RT_DECISION_ADD],
                  c->counts[RT_DECISION_EXCLUDE], c->minis_left_out,
                  rt_report_level_plain(c->automatic_level));
    rt_page_end_html(p);
    index_rows(p, night, c);
    rt_page_element(p, "p", "muted",
                    "Added and removed: units (3-s or 2-s mini-epochs, 30-s epochs) that count in "
                    "the index after the decisions and did not before, or the reverse; left out: "
                    "units the reviewer's exclusions took out. \"-\": an index the decisions on "
                    "3-s mini-epochs do not reach (docs/corrections.md).");
    if (c->agreement.present) {
        rt_page_element(p, "h3", NULL, "remtone against the reviewer (decided mini-epochs)");
        agreement_rows(p, &c->agreement);
        rt_page_element(p, "p", "muted",
                        "Cohen's kappa (Cohen 1960) over the 3-s mini-epochs the reviewer "
                        "confirmed, rejected or added on; 1 is perfect agreement, 0 no better "
                        "than chance.");
    }
    rt_page_end_html(p);
}
