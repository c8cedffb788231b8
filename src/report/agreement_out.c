/* Agreement with a manual scoring, as JSON and as text, for the night
 * writers. The numbers are rounded as the indices are (two decimals for
 * percentages, three for kappa): stable text, honest precision. */
#include <math.h>
#include <stdio.h>

#include "remtone/roles.h"
#include "report_internal.h"

static const char *const type_names[RT_AGREE_TYPES] = {"phasic", "tonic", "any"};

static json_t *rounded(double v, int decimals)
{
    if (!isfinite(v))
        return json_null();
    double scale = pow(10.0, decimals);
    return json_real(round(v * scale) / scale);
}

static json_t *cell_json(const rt_agreement_cell *c)
{
    bool ok = true;
    json_t *o = json_object();
    rt_json_set(o, "n", json_integer((json_int_t)c->n), &ok);
    rt_json_set(o, "both", json_integer((json_int_t)c->both), &ok);
    rt_json_set(o, "manual_only", json_integer((json_int_t)c->manual_only), &ok);
    rt_json_set(o, "auto_only", json_integer((json_int_t)c->auto_only), &ok);
    rt_json_set(o, "neither", json_integer((json_int_t)c->neither), &ok);
    rt_json_set(o, "percent", rounded(c->percent, 2), &ok);
    rt_json_set(o, "kappa", rounded(c->kappa, 3), &ok);
    rt_json_set(o, "manual_pct", rounded(c->manual_pct, 2), &ok);
    rt_json_set(o, "auto_pct", rounded(c->auto_pct, 2), &ok);
    return rt_json_done(o, ok);
}

json_t *rt_agreement_json(const rt_agreement *a)
{
    bool ok = true;
    json_t *o = json_object();
    rt_json_set(o, "present", json_boolean(a && a->present), &ok);
    if (!a || !a->present)
        return rt_json_done(o, ok);
    rt_json_set(o, "scorer", rt_json_text(a->scorer), &ok);
    rt_json_set(o, "unit", json_string("3-s mini-epoch"), &ok);
    json_t *roles = json_object();
    for (int r = 0; r < RT_ROLE_COUNT && ok; r++) {
        if (a->cell[r][RT_AGREE_ANY].n == 0)
            continue;
        json_t *x = json_object();
        for (int t = 0; t < RT_AGREE_TYPES; t++)
            rt_json_set(x, type_names[t], cell_json(&a->cell[r][t]), &ok);
        rt_json_set(roles, rt_role_name((rt_role)r), rt_json_done(x, ok), &ok);
    }
    rt_json_set(o, "roles", rt_json_done(roles, ok), &ok);
    return rt_json_done(o, ok);
}

static void field(char *buf, size_t cap, double v, const char *fmt)
{
    if (isfinite(v))
        snprintf(buf, cap, fmt, v);
    else
        snprintf(buf, cap, "-");
}

void rt_agreement_write_text(const rt_agreement *a, FILE *out)
{
    if (!a || !a->present || !out)
        return;
    char title[300];
    snprintf(title, sizeof title, "Agreement with the manual scoring%s%s (3-s mini-epochs both "
             "scored)", a->scorer[0] ? " by " : "", a->scorer);
    rt_agreement_write_text_titled(a, title, out);
}

void rt_agreement_write_text_titled(const rt_agreement *a, const char *title, FILE *out)
{
    if (!a || !a->present || !out)
        return;
    fprintf(out, "%s:\n", title);
    fprintf(out, "  %-10s %-7s %6s %8s %7s %8s %8s\n", "role", "type", "minis", "agree", "kappa",
            "manual", "remtone");
    int rows = 0;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        for (int t = 0; t < RT_AGREE_TYPES; t++) {
            const rt_agreement_cell *c = &a->cell[r][t];
            if (c->n == 0)
                continue;
            char pct[16], kap[16], man[16], aut[16];
            field(pct, sizeof pct, c->percent, "%.1f %%");
            field(kap, sizeof kap, c->kappa, "%.2f");
            field(man, sizeof man, c->manual_pct, "%.1f %%");
            field(aut, sizeof aut, c->auto_pct, "%.1f %%");
            fprintf(out, "  %-10s %-7s %6zu %8s %7s %8s %8s\n", rt_role_name((rt_role)r),
                    type_names[t], c->n, pct, kap, man, aut);
            rows++;
        }
    }
    if (rows == 0)
        fprintf(out, "  no manual mini-epoch falls on a REM mini-epoch remtone scored\n");
}
