/*
 * history.c — the history fit of include/stagecal/history.h: the correlation times a
 * linear degradation per segment, weighted nonlinear least squares (GSL
 * multifit_nlinear), a moment estimate of the excess variance for the working weights,
 * and the run-clustered CR2 sandwich for every interval.
 *
 * Workload: a column's history holds tens to a few hundred windows in tens of runs and
 * a handful of segments, so the parameters number under 20 and the dense n×P Jacobian
 * is small; clusters hold 1–10 windows, so the CR2 inverse square roots are tiny
 * symmetric eigenproblems. A study refits hundreds of synthetic histories in seconds.
 */
#include "stagecal/history.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/regress.h"
#include "history_internal.h"
#include "internal.h"

#define MONTH STAGECAL_TREND_MONTH_S

stagecal_history_params stagecal_history_default_params(void)
{
    return (stagecal_history_params){
        .level = 0.95, .r_ref = NAN, .f_ref = NAN, .now_s = NAN, .required = NAN, .min_runs = 3};
}

void stagecal_history_free(stagecal_history_fit *fit)
{
    if (!fit)
        return;
    FREE_EACH(fit->segments, fit->segment_of, fit->beta, fit->cov, fit->resid);
    if (fit->work)
        FREE_EACH(fit->work->xt, fit->work->cl, fit->work);
    memset(fit, 0, sizeof *fit);
}

/* ---- the problem ------------------------------------------------------------------- */

struct prob {
    const stagecal_form *form;
    size_t n, p, P; /* windows, form parameters, all parameters */
    const double *r, *f, *y, *tau;
    const size_t *seg;
    const long *idx_m, *idx_k; /* per segment: index of m_s / k_s in β, −1 fixed/absent */
};

/* h and its gradient at window i; returns a GSL status. */
static int model_at(const struct prob *pb, const double *beta, size_t i, double *mu, double *grad)
{
    double h, g[STAGECAL_FORM_MAXP];
    if (stagecal_form_eval(pb->form, beta, pb->r[i], pb->f[i], &h, grad ? g : NULL) != 0)
        return GSL_EDOM;
    size_t s = pb->seg[i];
    double m = pb->idx_m[s] >= 0 ? beta[pb->idx_m[s]] : 1.0;
    double k = beta[pb->idx_k[s]];
    double fac = m - k * pb->tau[i];
    *mu = h * fac;
    if (grad) {
        memset(grad, 0, pb->P * sizeof *grad);
        for (size_t j = 0; j < pb->p; j++)
            grad[j] = g[j] * fac;
        if (pb->idx_m[s] >= 0)
            grad[pb->idx_m[s]] = h;
        grad[pb->idx_k[s]] = -h * pb->tau[i];
    }
    return GSL_SUCCESS;
}

static int f_fn(const gsl_vector *x, void *params, gsl_vector *f)
{
    const struct prob *pb = params;
    for (size_t i = 0; i < pb->n; i++) {
        double mu;
        if (model_at(pb, x->data, i, &mu, NULL) != GSL_SUCCESS)
            return GSL_EDOM;
        gsl_vector_set(f, i, mu - pb->y[i]);
    }
    return GSL_SUCCESS;
}

static int df_fn(const gsl_vector *x, void *params, gsl_matrix *J)
{
    const struct prob *pb = params;
    double grad[64];
    for (size_t i = 0; i < pb->n; i++) {
        double mu;
        if (model_at(pb, x->data, i, &mu, grad) != GSL_SUCCESS)
            return GSL_EDOM;
        for (size_t j = 0; j < pb->P; j++)
            gsl_matrix_set(J, i, j, grad[j]);
    }
    return GSL_SUCCESS;
}

/* Weighted fit from beta (updated in place); J gets the unweighted Jacobian at the
 * solution, res the residuals y − μ. */
static int solve(struct prob *pb, const double *w, double *beta, gsl_matrix *J, double *res,
                 stagecal_error *err)
{
    gsl_multifit_nlinear_fdf fdf = {f_fn, df_fn, NULL, pb->n, pb->P, pb, 0, 0, 0};
    gsl_multifit_nlinear_parameters fp = gsl_multifit_nlinear_default_parameters();
    gsl_multifit_nlinear_workspace *ws =
        gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &fp, pb->n, pb->P);
    if (!ws)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for the history fit");
    gsl_vector_const_view x0 = gsl_vector_const_view_array(beta, pb->P);
    gsl_vector_const_view wv = gsl_vector_const_view_array(w, pb->n);
    int info, g = gsl_multifit_nlinear_winit(&x0.vector, &wv.vector, &fdf, ws);
    if (g == GSL_SUCCESS)
        g = gsl_multifit_nlinear_driver(500, 1e-10, 1e-10, 1e-12, NULL, NULL, &info, ws);
    if (g != GSL_SUCCESS && g != GSL_EMAXITER) {
        gsl_multifit_nlinear_free(ws);
        return error_set(err, STAGECAL_ENOCONV, "history fit did not converge: %s",
                         gsl_strerror(g));
    }
    gsl_vector *x = gsl_multifit_nlinear_position(ws);
    memcpy(beta, x->data, pb->P * sizeof *beta);
    gsl_multifit_nlinear_free(ws);
    gsl_vector_view xv = gsl_vector_view_array(beta, pb->P);
    gsl_vector_view rv = gsl_vector_view_array(res, pb->n);
    if (f_fn(&xv.vector, pb, &rv.vector) != GSL_SUCCESS || df_fn(&xv.vector, pb, J) != GSL_SUCCESS)
        return error_set(err, STAGECAL_EDATA, "the correlation is undefined at the fitted values");
    for (size_t i = 0; i < pb->n; i++)
        res[i] = -res[i];
    return STAGECAL_OK;
}

/* ---- segments ---------------------------------------------------------------------- */

static int splits(const stagecal_trend_event *e, const char *column_id)
{
    return e->kind != STAGECAL_EVENT_NOTE && (!column_id || strcmp(e->column_id, column_id) == 0);
}

/* Segment of time t: the number of splitting events at or before t; *ev_out the latest
 * of them (−1 none). */
static size_t segment_of_time(double t, const stagecal_trend_event *ev, size_t nev,
                              const char *column_id, long *ev_out)
{
    size_t s = 0;
    long best = -1;
    for (size_t k = 0; k < nev; k++) {
        if (!splits(&ev[k], column_id) || ev[k].t_s > t)
            continue;
        s++;
        if (best < 0 || ev[k].t_s > ev[best].t_s)
            best = (long)k;
    }
    if (ev_out)
        *ev_out = best;
    return s;
}

static int check_inputs(const stagecal_form *form, const stagecal_history_point *pts, size_t n,
                        const stagecal_history_params *par, stagecal_error *err)
{
    if (!form || !pts || !par || n == 0)
        return error_set(err, STAGECAL_EINVAL, "history fit needs a form and >= 1 window");
    if (!(par->level > 0 && par->level < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "confidence level %g is outside (0, 1) (expected e.g. 0.95)", par->level);
    if (par->min_runs < 2)
        return error_set(err, STAGECAL_EINVAL, "min_runs %zu is below 2", par->min_runs);
    if (!(par->r_ref > 0) || (form->uses_load && !isfinite(par->f_ref)))
        return error_set(err, STAGECAL_EINVAL,
                         "the stated condition (R = %g, F = %g) is invalid (expected R > 0 or "
                         "inf, and F when the form uses the load)",
                         par->r_ref, par->f_ref);
    for (size_t i = 0; i < n; i++) {
        const stagecal_history_point *q = &pts[i];
        if (!(isfinite(q->t_s) && isfinite(q->stages) && q->stages > 0 && q->r > 0 &&
              isfinite(q->se) && q->se > 0) ||
            (form->uses_load && !isfinite(q->f_load)))
            return error_set(err, STAGECAL_EINVAL,
                             "window %zu: time %g, R %g, F %g, stages %g, se %g (expected finite "
                             "time, R > 0, stages > 0, se > 0, F when the form uses it)",
                             i + 1, q->t_s, q->r, q->f_load, q->stages, q->se);
    }
    return STAGECAL_OK;
}

static int cmp_long(const void *a, const void *b)
{
    long x = *(const long *)a, y = *(const long *)b;
    return (x > y) - (x < y);
}

/* Distinct runs among the windows with keep[i]; ids sorted into runs (n entries). */
static size_t distinct_runs(const stagecal_history_point *pts, size_t n, const int *keep,
                            long *runs)
{
    size_t m = 0, d = 0;
    for (size_t i = 0; i < n; i++)
        if (keep[i])
            runs[m++] = pts[i].run;
    qsort(runs, m, sizeof *runs, cmp_long);
    for (size_t i = 0; i < m; i++)
        if (i == 0 || runs[i] != runs[i - 1])
            runs[d++] = runs[i];
    return d;
}

static size_t run_index(const long *runs, size_t nr, long id)
{
    size_t lo = 0, hi = nr;
    while (lo < hi) {
        size_t mid = (lo + hi) / 2;
        if (runs[mid] < id)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo;
}

/* ---- estimates --------------------------------------------------------------------- */

/* value with the sandwich se along grad, t interval on its Bell–McCaffrey dof. */
static void linear_estimate(const stagecal_history_fit *fit, const double *grad, double value,
                            double dof_cap, stagecal_history_estimate *e)
{
    size_t P = fit->n_beta;
    double dof = fmin(cr2_bm_dof(fit->work, grad), dof_cap);
    double var = 0;
    for (size_t a = 0; a < P; a++)
        for (size_t b = 0; b < P; b++)
            var += grad[a] * fit->cov[a * P + b] * grad[b];
    memset(e, 0, sizeof *e);
    e->value = value;
    e->se = sqrt(var > 0 ? var : 0);
    e->dof = dof;
    double t = dof > 0 ? gsl_cdf_tdist_Pinv(0.5 + 0.5 * fit->level, dof) : INFINITY;
    e->low = dof > 0 ? value - t * e->se : -INFINITY;
    e->high = dof > 0 ? value + t * e->se : INFINITY;
    e->determined = 1;
}

static void not_fitted(stagecal_history_estimate *e, const char *why)
{
    memset(e, 0, sizeof *e);
    e->value = e->se = e->low = e->high = NAN;
    snprintf(e->reason, sizeof e->reason, "%s", why);
}

/* The segment of time t (the last segment whose origin is at or before t; 0 before all). */
static size_t segment_at(const stagecal_history_fit *fit, double t)
{
    size_t s = 0;
    for (size_t k = 1; k < fit->n_segments; k++)
        if (fit->segments[k].origin_s <= t)
            s = k;
    return s;
}

/* Index of m_s and k_s in β: stored in the segment struct's order of fitted segments. */
struct seg_idx {
    long m, k;
};

static struct seg_idx seg_index(const stagecal_history_fit *fit, size_t s)
{
    struct seg_idx x = {-1, -1};
    long next = (long)fit->form.p;
    for (size_t k = 0; k < fit->n_segments; k++) {
        if (!fit->segments[k].fitted)
            continue;
        long im = -1, ik;
        if (k != fit->ref_segment)
            im = next++;
        ik = next++;
        if (k == s) {
            x.m = im;
            x.k = ik;
        }
    }
    return x;
}

/* h and ∂h/∂θ at (r, f) into the first p entries of grad (others zeroed). */
static int form_at(const stagecal_history_fit *fit, double r, double f, double *h, double *grad,
                   stagecal_error *err)
{
    double g[STAGECAL_FORM_MAXP];
    memset(grad, 0, fit->n_beta * sizeof *grad);
    if (stagecal_form_eval(&fit->form, fit->beta, r, f, h, g) != 0)
        return error_set(err, STAGECAL_EINVAL,
                         "the correlation '%s' is undefined at R = %g, F = %g", fit->form.name, r,
                         f);
    memcpy(grad, g, fit->form.p * sizeof *g);
    return STAGECAL_OK;
}

/* Stages on segment s's line at τ months and their gradient (n_beta entries, into
 * grad); h and gh: the form and its gradient at the condition (gh n_beta long, only
 * the first p used). */
static double line_grad(const stagecal_history_fit *fit, size_t s, double tau, double h,
                        const double *gh, double *grad)
{
    struct seg_idx ix = seg_index(fit, s);
    double m = ix.m >= 0 ? fit->beta[ix.m] : 1.0, k = fit->beta[ix.k], fac = m - k * tau;
    memset(grad, 0, fit->n_beta * sizeof *grad);
    for (size_t j = 0; j < fit->form.p; j++)
        grad[j] = gh[j] * fac;
    if (ix.m >= 0)
        grad[ix.m] = h;
    grad[ix.k] = -h * tau;
    return h * fac;
}

int stagecal_history_stages_at(const stagecal_history_fit *fit, double r, double f, double t_s,
                               stagecal_history_estimate *out, stagecal_error *err)
{
    size_t s = segment_at(fit, t_s);
    const stagecal_history_segment *sg = &fit->segments[s];
    if (!sg->fitted) {
        not_fitted(out, "stages not determined: the segment of that date has too few runs to "
                        "be fitted");
        return STAGECAL_OK;
    }
    double *gh = calloc(2 * fit->n_beta, sizeof *gh), *grad = gh + fit->n_beta, h;
    if (!gh)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    int rc = form_at(fit, r, f, &h, gh, err);
    if (rc == STAGECAL_OK) {
        double v = line_grad(fit, s, (t_s - sg->origin_s) / MONTH, h, gh, grad);
        linear_estimate(fit, grad, v, (double)sg->n_runs - 1, out);
        stagecal_history_check(out, 1.0, INFINITY, "stages");
    }
    free(gh);
    return rc;
}

int stagecal_history_repack_at(const stagecal_history_fit *fit, size_t segment, double r, double f,
                               double column_offset, stagecal_history_repack *out,
                               stagecal_error *err)
{
    memset(out, 0, sizeof *out);
    if (segment == 0 || segment >= fit->n_segments)
        return error_set(err, STAGECAL_EINVAL,
                         "segment %zu did not start at an event (expected 1..%zu)", segment,
                         fit->n_segments - 1);
    const stagecal_history_segment *a = &fit->segments[segment - 1], *b = &fit->segments[segment];
    out->segment = segment;
    out->t_s = b->origin_s;
    if (!a->fitted || !b->fitted) {
        const char *why = !a->fitted ? "not determined: the segment before the event has too "
                                       "few runs to be fitted"
                                     : "not determined: the segment after the event has too "
                                       "few runs to be fitted";
        not_fitted(&out->before, why);
        not_fitted(&out->after, why);
        not_fitted(&out->change, why);
        not_fitted(&out->old_new, why);
        not_fitted(&out->log_ratio, why);
        not_fitted(&out->after_col, why);
        return STAGECAL_OK;
    }
    size_t P = fit->n_beta;
    double *gh = calloc(4 * P, sizeof *gh), *g1 = gh + P, *g2 = g1 + P, *g3 = g2 + P, h;
    if (!gh)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    int rc = form_at(fit, r, f, &h, gh, err);
    if (rc) {
        free(gh);
        return rc;
    }
    double cap = (double)(a->n_runs + b->n_runs) - 1;
    double vb = line_grad(fit, segment - 1, (out->t_s - a->origin_s) / MONTH, h, gh, g1);
    linear_estimate(fit, g1, vb, cap, &out->before);
    double va = line_grad(fit, segment, 0, h, gh, g2);
    linear_estimate(fit, g2, va, cap, &out->after);
    linear_estimate(fit, g2, va - column_offset, cap, &out->after_col);
    for (size_t j = 0; j < P; j++)
        g3[j] = g2[j] - g1[j];
    linear_estimate(fit, g3, va - vb, cap, &out->change);
    double vo = line_grad(fit, segment - 1, 0, h, gh, g1);
    linear_estimate(fit, g1, vo, cap, &out->old_new);
    /* ln(N_old − c) − ln(N_after − c): gradient g_old/(N_old − c) − g_after/(N_after − c) */
    double no = vo - column_offset, na = va - column_offset;
    if (no > 0 && na > 0) {
        for (size_t j = 0; j < P; j++)
            g3[j] = g1[j] / no - g2[j] / na;
        linear_estimate(fit, g3, log(no / na), cap, &out->log_ratio);
    } else {
        not_fitted(&out->log_ratio, "HETP ratio not determined: a side has no column stages");
    }
    free(gh);
    stagecal_history_check(&out->before, 1.0, INFINITY, "stages before");
    stagecal_history_check(&out->after, 1.0, INFINITY, "stages after");
    stagecal_history_check(&out->old_new, 1.0, INFINITY, "stages of the old bed when new");
    stagecal_history_check(&out->after_col, 0.0, INFINITY, "column stages after");
    double span = fmax(va, vb);
    stagecal_history_check(&out->change, -span, span, "change");
    return STAGECAL_OK;
}

/* What the estimates and the forecast of fitted segment s start from: the form h at the
 * stated condition and its gradient gh, a zeroed scratch vector g (both n_beta long, one
 * allocation owned by g), the segment's parameter indices, its level m (1 when fixed by
 * convention) and its loss rate k. */
struct seg_at {
    size_t P; /* n_beta */
    double *g, *gh, h, m, k;
    struct seg_idx ix;
};

static int segment_setup(stagecal_history_fit *fit, size_t s, const stagecal_history_params *par,
                         struct seg_at *a, stagecal_error *err)
{
    a->P = fit->n_beta;
    a->g = calloc(2 * a->P, sizeof *a->g);
    if (!a->g)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    a->gh = a->g + a->P;
    int rc = form_at(fit, par->r_ref, par->f_ref, &a->h, a->gh, err);
    if (rc) {
        free(a->g);
        return rc;
    }
    a->ix = seg_index(fit, s);
    a->m = a->ix.m >= 0 ? fit->beta[a->ix.m] : 1.0;
    a->k = fit->beta[a->ix.k];
    return STAGECAL_OK;
}

/* Fills the four estimates of fitted segment s at the stated condition. */
static int segment_estimates(stagecal_history_fit *fit, size_t s,
                             const stagecal_history_params *par, stagecal_error *err)
{
    stagecal_history_segment *sg = &fit->segments[s];
    struct seg_at a;
    int rc = segment_setup(fit, s, par, &a, err);
    if (rc)
        return rc;
    double dof = (double)sg->n_runs - 1;
    /* level m_s */
    memset(a.g, 0, a.P * sizeof *a.g);
    if (a.ix.m >= 0) {
        a.g[a.ix.m] = 1;
        linear_estimate(fit, a.g, a.m, dof, &sg->level);
        stagecal_history_check(&sg->level, 0, INFINITY, "level");
    } else { /* fixed by convention: exactly 1 */
        memset(&sg->level, 0, sizeof sg->level);
        sg->level.determined = 1;
        sg->level.value = sg->level.low = sg->level.high = 1.0;
        sg->level.dof = dof;
    }
    /* k_s/m_s: the loss as a fraction of the segment's own starting level */
    memset(a.g, 0, a.P * sizeof *a.g);
    a.g[a.ix.k] = 1 / a.m;
    if (a.ix.m >= 0)
        a.g[a.ix.m] = -a.k / (a.m * a.m);
    linear_estimate(fit, a.g, a.k / a.m, dof, &sg->rel_loss);
    stagecal_history_check(&sg->rel_loss, -1, 1, "relative loss rate");
    /* stages at τ = 0: h·m */
    for (size_t j = 0; j < a.P; j++)
        a.g[j] = a.gh[j] * a.m;
    if (a.ix.m >= 0)
        a.g[a.ix.m] = a.h;
    linear_estimate(fit, a.g, a.h * a.m, dof, &sg->start);
    stagecal_history_check(&sg->start, 1.0, INFINITY, "stages at the segment's start");
    /* loss h·k per month */
    for (size_t j = 0; j < a.P; j++)
        a.g[j] = a.gh[j] * a.k;
    a.g[a.ix.k] = a.h;
    linear_estimate(fit, a.g, a.h * a.k, dof, &sg->loss);
    double span = fabs(a.h * a.m);
    stagecal_history_check(&sg->loss, -span, span, "loss rate");
    free(a.g);
    return STAGECAL_OK;
}

/* The forecast of the current segment's line at the stated condition (Fieller). */
static int crossing(stagecal_history_fit *fit, const stagecal_history_params *par,
                    stagecal_error *err)
{
    size_t s = fit->current;
    const stagecal_history_segment *sg = &fit->segments[s];
    struct seg_at at;
    int rc = segment_setup(fit, s, par, &at, err);
    if (rc)
        return rc;
    size_t P = at.P;
    double *ga = at.gh, *gb = at.g, h = at.h, m = at.m, k = at.k;
    struct seg_idx ix = at.ix;
    /* A = h·m (value at τ = 0), B = h·k (loss per month): value(τ) = A − B·τ */
    for (size_t j = 0; j < fit->form.p; j++) {
        gb[j] = ga[j] * k;
        ga[j] *= m;
    }
    if (ix.m >= 0)
        ga[ix.m] = h;
    gb[ix.k] = h;
    double vaa = 0, vab = 0, vbb = 0;
    for (size_t a = 0; a < P; a++)
        for (size_t b = 0; b < P; b++) {
            double c = fit->cov[a * P + b];
            vaa += ga[a] * c * ga[b];
            vab += ga[a] * c * gb[b];
            vbb += gb[a] * c * gb[b];
        }
    /* t dof: the Bell–McCaffrey dof of the line at the estimated crossing (of the slope
     * when the line does not decline) */
    double tau_hat = h * k > 0 ? (h * m - par->required) / (h * k) : 0;
    for (size_t a = 0; a < P; a++)
        ga[a] = h * k > 0 ? ga[a] - tau_hat * gb[a] : gb[a];
    double dof = fmin(cr2_bm_dof(fit->work, ga), (double)sg->n_runs - 1);
    free(at.g);
    stagecal_trend_fit tf;
    memset(&tf, 0, sizeof tf);
    tf.n = sg->n_points;
    tf.t0_s = sg->origin_s;
    tf.a = h * m;
    tf.b = -h * k / MONTH;
    tf.c00 = vaa;
    tf.c01 = -vab / MONTH;
    tf.c11 = vbb / (MONTH * MONTH);
    tf.dof = dof;
    tf.level = fit->level;
    tf.t_crit = gsl_cdf_tdist_Pinv(0.5 + 0.5 * fit->level, tf.dof);
    rc = stagecal_trend_forecast_crossing(&tf, par->required, fit->now_s, &fit->crossing, err);
    if (rc == STAGECAL_OK)
        fit->has_crossing = 1;
    return rc;
}

/* ---- the fit ----------------------------------------------------------------------- */

/* Assigns windows to segments and decides which segments are fitted. */
static int build_segments(stagecal_history_fit *fit, const stagecal_history_point *pts, size_t n,
                          const stagecal_trend_event *ev, size_t nev, const char *column_id,
                          const stagecal_history_params *par, stagecal_error *err)
{
    double tmax = -INFINITY;
    for (size_t i = 0; i < n; i++)
        tmax = fmax(tmax, pts[i].t_s);
    fit->now_s = isfinite(par->now_s) ? par->now_s : tmax;
    fit->n_segments = segment_of_time(fmax(fit->now_s, tmax), ev, nev, column_id, NULL) + 1;
    fit->segments = calloc(fit->n_segments, sizeof *fit->segments);
    fit->segment_of = malloc(n * sizeof *fit->segment_of);
    long *runs = malloc(n * sizeof *runs);
    int *keep = malloc(n * sizeof *keep);
    if (!fit->segments || !fit->segment_of || !runs || !keep) {
        free(runs);
        free(keep);
        return error_set(err, STAGECAL_ENOMEM, "out of memory for a history of %zu windows", n);
    }
    for (size_t s = 0; s < fit->n_segments; s++) {
        fit->segments[s].event = -1;
        fit->segments[s].first_s = INFINITY;
        fit->segments[s].last_s = -INFINITY;
    }
    /* the opening event of segment s ≥ 1 is the s-th splitting event in time order */
    for (size_t k = 0; k < nev; k++) {
        if (!splits(&ev[k], column_id))
            continue;
        long e;
        size_t s = segment_of_time(ev[k].t_s, ev, nev, column_id, &e);
        if (s < fit->n_segments && fit->segments[s].event < 0) {
            fit->segments[s].event = e;
            fit->segments[s].origin_s = ev[e].t_s;
        }
    }
    for (size_t i = 0; i < n; i++) {
        size_t s = segment_of_time(pts[i].t_s, ev, nev, column_id, NULL);
        stagecal_history_segment *sg = &fit->segments[s];
        fit->segment_of[i] = s;
        sg->n_points++;
        sg->first_s = fmin(sg->first_s, pts[i].t_s);
        sg->last_s = fmax(sg->last_s, pts[i].t_s);
    }
    int any = 0;
    for (size_t s = 0; s < fit->n_segments; s++) {
        stagecal_history_segment *sg = &fit->segments[s];
        for (size_t i = 0; i < n; i++)
            keep[i] = fit->segment_of[i] == s;
        sg->n_runs = sg->n_points ? distinct_runs(pts, n, keep, runs) : 0;
        if (s == 0 && sg->event < 0)
            sg->origin_s = sg->n_points ? sg->first_s : fit->now_s;
        sg->fitted = sg->n_runs >= par->min_runs && sg->last_s > sg->first_s;
        any |= sg->fitted;
    }
    free(runs);
    free(keep);
    if (!any)
        return error_set(err, STAGECAL_EDATA,
                         "no segment of the history has %zu runs at different times (expected "
                         "several runs between events)",
                         par->min_runs);
    for (size_t s = 0; s < fit->n_segments; s++)
        if (fit->segments[s].fitted) {
            fit->ref_segment = s;
            break;
        }
    fit->current = segment_at(fit, fit->now_s);
    return STAGECAL_OK;
}

/* Starting θ: the correlation alone fitted to every fitted window (regress.h). */
static int start_theta(const stagecal_form *form, size_t m, double *r, double *f, double *y,
                       double *se, double *theta, stagecal_error *err)
{
    stagecal_regress_data d = {m, r, form->uses_load ? f : NULL, y, se};
    stagecal_regress_params rp = stagecal_regress_default_params();
    stagecal_regress_result res;
    memset(&res, 0, sizeof res);
    rp.band_points = 0;
    int rc = stagecal_regress_fit(&d, form, &rp, &res, err);
    if (rc == STAGECAL_OK)
        memcpy(theta, res.theta, form->p * sizeof *theta);
    stagecal_regress_result_free(&res);
    return rc;
}

/* What the small-sample degrees of freedom need later (history_bm_dof): the weighted
 * Jacobian of the m windows, the bread B, the windows' runs (cl, nr of them); the sandwich
 * fills wk->d. n (the history's windows) names an allocation failure. A status. */
static int keep_work(stagecal_history_fit *fit, const gsl_matrix *J, const double *w,
                     const gsl_matrix *B, const size_t *cl, size_t nr, size_t n,
                     stagecal_error *err)
{
    size_t m = J->size1, P = J->size2;
    struct cr2_work *wk = calloc(1, sizeof *wk);
    if (wk) {
        fit->work = wk;
        wk->xt = malloc((2 * m * P + P * P) * sizeof *wk->xt);
        wk->cl = malloc(m * sizeof *wk->cl);
    }
    if (!wk || !wk->xt || !wk->cl)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for a history of %zu windows", n);
    wk->m = m;
    wk->P = P;
    wk->ncl = nr;
    wk->d = wk->xt + m * P;
    wk->b = wk->d + m * P;
    memcpy(wk->cl, cl, m * sizeof *cl);
    memcpy(wk->b, B->data, P * P * sizeof *wk->b);
    for (size_t j = 0; j < m; j++)
        for (size_t a = 0; a < P; a++)
            wk->xt[j * P + a] = sqrt(w[j]) * gsl_matrix_get(J, j, a);
    return STAGECAL_OK;
}

/* Per segment its level, loss and start (or why not), then the stages now and, with a
 * requirement, when the current segment crosses it. A status. */
static int segment_results(stagecal_history_fit *fit, const stagecal_history_params *par,
                           stagecal_error *err)
{
    int rc = STAGECAL_OK;
    for (size_t s = 0; s < fit->n_segments && rc == STAGECAL_OK; s++) {
        stagecal_history_segment *sg = &fit->segments[s];
        if (sg->fitted) {
            rc = segment_estimates(fit, s, par, err);
            continue;
        }
        char why[STAGECAL_HISTORY_REASON];
        snprintf(why, sizeof why,
                 "not determined: the segment has %zu run(s)%s (at least %zu at different times "
                 "needed)",
                 sg->n_runs, sg->n_points && !(sg->last_s > sg->first_s) ? " at one time" : "",
                 par->min_runs);
        not_fitted(&sg->level, why);
        not_fitted(&sg->rel_loss, why);
        not_fitted(&sg->loss, why);
        not_fitted(&sg->start, why);
    }
    if (rc == STAGECAL_OK)
        rc = stagecal_history_stages_at(fit, par->r_ref, par->f_ref, fit->now_s, &fit->now, err);
    if (rc == STAGECAL_OK && isfinite(par->required) && fit->segments[fit->current].fitted &&
        fit->segments[fit->current].loss.dof >= 2)
        rc = crossing(fit, par, err);
    return rc;
}

int stagecal_history_fit_points(const stagecal_form *form, const stagecal_history_point *pts,
                                size_t n, const stagecal_trend_event *events, size_t n_events,
                                const char *column_id, const stagecal_history_params *par,
                                stagecal_history_fit *fit, stagecal_error *err)
{
    memset(fit, 0, sizeof *fit);
    int rc = check_inputs(form, pts, n, par, err);
    if (rc)
        return rc;
    fit->form = *form;
    fit->level = par->level;
    if ((rc = build_segments(fit, pts, n, events, n_events, column_id, par, err)))
        return rc;
    size_t p = form->p, P = p;
    long *idx_m = malloc(fit->n_segments * 2 * sizeof *idx_m), *idx_k = idx_m + fit->n_segments;
    if (!idx_m)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t s = 0; s < fit->n_segments; s++) {
        idx_m[s] = idx_k[s] = -1;
        if (!fit->segments[s].fitted)
            continue;
        if (s != fit->ref_segment)
            idx_m[s] = (long)P++;
        idx_k[s] = (long)P++;
    }
    fit->n_beta = P;
    /* the fitted windows, as arrays */
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
        m += fit->segments[fit->segment_of[i]].fitted;
    double *buf = malloc(7 * m * sizeof *buf);
    size_t *seg = malloc(2 * m * sizeof *seg), *cl = seg + m;
    long *runs = malloc(n * sizeof *runs);
    int *keep = malloc(n * sizeof *keep);
    fit->beta = calloc(P, sizeof *fit->beta);
    fit->cov = calloc(P * P, sizeof *fit->cov);
    fit->resid = malloc(n * sizeof *fit->resid);
    gsl_matrix *J = m > P ? gsl_matrix_alloc(m, P) : NULL, *B = gsl_matrix_alloc(P, P);
    if (!buf || !seg || !runs || !keep || !fit->beta || !fit->cov || !fit->resid || !B ||
        (m > P && !J)) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory for a history of %zu windows", n);
        goto done;
    }
    if (m <= P) {
        rc = error_set(err, STAGECAL_EDATA,
                       "%zu windows cannot fit %zu parameters (the correlation's and a level "
                       "and loss per segment)",
                       m, P);
        goto done;
    }
    double *r = buf, *f = r + m, *y = f + m, *se = y + m, *tau = se + m, *w = tau + m, *res = w + m;
    for (size_t i = 0; i < n; i++)
        keep[i] = fit->segments[fit->segment_of[i]].fitted;
    size_t nr = distinct_runs(pts, n, keep, runs);
    fit->n_runs = nr;
    fit->n = m;
    for (size_t i = 0, j = 0; i < n; i++) {
        if (!keep[i])
            continue;
        const stagecal_history_segment *sg = &fit->segments[fit->segment_of[i]];
        r[j] = pts[i].r;
        f[j] = pts[i].f_load;
        y[j] = pts[i].stages;
        se[j] = pts[i].se;
        tau[j] = (pts[i].t_s - sg->origin_s) / MONTH;
        seg[j] = fit->segment_of[i];
        cl[j] = run_index(runs, nr, pts[i].run);
        w[j] = 1.0 / (se[j] * se[j]);
        j++;
    }
    if ((rc = start_theta(form, m, r, f, y, se, fit->beta, err)))
        goto done;
    for (size_t s = 0; s < fit->n_segments; s++)
        if (idx_m[s] >= 0)
            fit->beta[idx_m[s]] = 1.0;
    struct prob pb = {form, m, p, P, r, f, y, tau, seg, idx_m, idx_k};
    /* pass 1: stated errors; pass 2: with the excess variance */
    if ((rc = solve(&pb, w, fit->beta, J, res, err)) || (rc = history_bread(J, w, B, err)))
        goto done;
    fit->tau2 = history_moment_tau2(J, w, res, B);
    for (size_t j = 0; j < m; j++)
        w[j] = 1.0 / (se[j] * se[j] + fit->tau2);
    if ((rc = solve(&pb, w, fit->beta, J, res, err)) || (rc = history_bread(J, w, B, err)))
        goto done;
    double q = 0;
    for (size_t j = 0; j < m; j++)
        q += w[j] * res[j] * res[j];
    fit->chi2_dof = q / (double)(m - P);
    gsl_matrix_view V = gsl_matrix_view_array(fit->cov, P, P);
    if ((rc = keep_work(fit, J, w, B, cl, nr, n, err)))
        goto done;
    gsl_matrix_view Dv = gsl_matrix_view_array(fit->work->d, m, P);
    if ((rc = cr2_sandwich(J, w, res, cl, nr, B, &V.matrix, &Dv.matrix, err)))
        goto done;
    for (size_t i = 0, j = 0; i < n; i++)
        fit->resid[i] = keep[i] ? res[j++] : NAN;
    rc = segment_results(fit, par, err);
done:
    gsl_matrix_free(B);
    if (J)
        gsl_matrix_free(J);
    free(keep);
    free(runs);
    free(seg);
    free(buf);
    free(idx_m);
    return rc;
}
