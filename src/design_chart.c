/*
 * design_chart.c — the numbers behind the chart of a proposal (where to run the next
 * tests): the fitted curve with its band before and after the proposed tests, the tests
 * and the conditions of interest on it. The chart itself is drawn by the charts library
 * (plot_design.c, stagecal_plot_design) from these plain numbers.
 */
#include <math.h>
#include <string.h>

#include "design_internal.h"
#include "internal.h"
#include "stagecal/design.h"

static double fitted(const stagecal_model *m, double r, double f)
{
    stagecal_model_point pt;
    return stagecal_model_eval(m, r, f, 0, &pt, NULL) == STAGECAL_OK ? pt.stages : NAN;
}

int stagecal_design_chart_curves(const stagecal_model *m, const stagecal_design_problem *pb,
                                 const stagecal_design_result *res, const stagecal_design_at *at,
                                 size_t n_at, stagecal_design_curves *c, stagecal_error *err)
{
    if (!m || !pb || !res || !at || !c || n_at == 0 || n_at > STAGECAL_DESIGN_CURVE_MAXAT ||
        res->k > STAGECAL_DESIGN_MAXK)
        return error_set(err, STAGECAL_EINVAL,
                         "design chart: missing model, proposal or conditions (expected 1 to %d "
                         "conditions of interest and at most %d tests)",
                         STAGECAL_DESIGN_CURVE_MAXAT, STAGECAL_DESIGN_MAXK);
    memset(c, 0, sizeof *c);
    c->n = STAGECAL_DESIGN_CURVE_N;
    c->f_load = m->form.uses_load ? at[0].f_load : NAN;
    c->env_lo = isfinite(m->r_min) ? m->r_min : NAN;
    c->env_hi = isfinite(m->r_max) ? m->r_max : NAN;
    c->level = pb->level;
    c->column_id = m->column_id;
    double lo = INFINITY, hi = -INFINITY, f = c->f_load;
    if (isfinite(res->r_lo) && res->r_lo > 0) /* 0: no search (stagecal_design_evaluate) */
        lo = res->r_lo;
    if (isfinite(res->r_hi))
        hi = res->r_hi;
    else if (isfinite(m->r_max))
        hi = m->r_max;
    for (size_t j = 0; j < n_at; j++) {
        if (!isfinite(at[j].r)) {
            c->skipped_at++;
            continue;
        }
        lo = fmin(lo, at[j].r), hi = fmax(hi, at[j].r);
        c->at_r[c->n_at] = at[j].r;
        c->at_stages[c->n_at++] = at[j].stages;
    }
    for (size_t t = 0; t < res->k; t++) {
        if (!isfinite(res->tests[t].r)) {
            c->skipped_tests++;
            continue;
        }
        lo = fmin(lo, res->tests[t].r), hi = fmax(hi, res->tests[t].r);
        c->test_r[c->n_tests] = res->tests[t].r;
        c->test_stages[c->n_tests++] = fitted(m, res->tests[t].r, f);
    }
    if (!isfinite(lo) || !isfinite(hi))
        return error_set(err, STAGECAL_EINVAL,
                         "design chart: nothing at a finite reflux ratio to draw (every "
                         "condition and test at total reflux)");
    if (!(hi > lo)) /* one reflux ratio: a span of ±10 % around it */
        hi = lo * 1.1 + 0.1, lo = lo * 0.9;
    for (size_t i = 0; i < c->n; i++) {
        double v0, v1, r = lo + (hi - lo) * (double)i / (double)(c->n - 1);
        int d0, d1, rc;
        c->r[i] = r;
        c->stages[i] = fitted(m, r, f);
        if ((rc = stagecal_design_variance(pb, NULL, 0, r, f, &v0, &d0, err)) ||
            (rc = stagecal_design_variance(pb, res->tests, res->k, r, f, &v1, &d1, err))) {
            if (rc != STAGECAL_EINVAL) /* a form undefined at r: a gap in the curves */
                return rc;
            c->stages[i] = c->now_lo[i] = c->now_hi[i] = c->after_lo[i] = c->after_hi[i] = NAN;
            continue;
        }
        /* t at this R's dof, as stagecal_design_at's (the model file's band before) */
        double y = c->stages[i], g[STAGECAL_FORM_MAXP], k0, k1;
        if ((rc = design_grad(pb, r, f, g, err)))
            return rc;
        design_dof(pb, g, res->k, &k0, &k1);
        double t0 = design_tquant(pb->level, k0), t1 = design_tquant(pb->level, k1);
        c->now_lo[i] = d0 ? y - t0 * sqrt(v0) : NAN;
        c->now_hi[i] = d0 ? y + t0 * sqrt(v0) : NAN;
        c->after_lo[i] = d1 ? y - t1 * sqrt(v1) : NAN;
        c->after_hi[i] = d1 ? y + t1 * sqrt(v1) : NAN;
    }
    if (err)
        stagecal_error_clear(err);
    return STAGECAL_OK;
}
