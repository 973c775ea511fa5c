/*
 * trend.c — the history of a column's fits: weighted straight-line trend, EWMA control
 * chart with Markov-chain run lengths, crossing-date forecast, events file, segments.
 *
 * Workload: a column is refitted perhaps monthly, so a history has tens of points and
 * everything here is cheap; the only sizeable object is the m×m Markov-chain matrix
 * of the ARL calculation (m ≈ 200, 320 kB), built on demand.
 *
 * Numerics: the line is fitted in months about the weighted mean time, so the 2×2
 * covariance is well conditioned whatever the epoch; results are converted back to s.
 * Sources for every formula: include/stagecal/trend.h and docs/hetp-trend.md.
 */
#include "stagecal/trend.h"

#include <csv.h>
#include <errno.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_fit.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_sort.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/hetp.h"
#include "stagecal/units.h"
#include "fileio.h"
#include "internal.h"

#define MONTH STAGECAL_TREND_MONTH_S

static int check_level(double level, stagecal_error *err)
{
    if (!(level > 0 && level < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "confidence level %g is outside (0, 1) (expected e.g. 0.95)", level);
    return STAGECAL_OK;
}

static int check_points(const stagecal_trend_point *pts, size_t n, stagecal_error *err)
{
    for (size_t i = 0; i < n; i++) {
        if (!(isfinite(pts[i].t_s) && isfinite(pts[i].value)))
            return error_set(err, STAGECAL_EINVAL,
                             "point %zu: time or value is not finite (expected numbers)", i + 1);
        if (!(isfinite(pts[i].se) && pts[i].se > 0))
            return error_set(err, STAGECAL_EINVAL,
                             "point %zu: standard error %g is not positive (expected se > 0)",
                             i + 1, pts[i].se);
    }
    return STAGECAL_OK;
}

int stagecal_trend_point_from_model(const stagecal_model *m, double r, double f_load, int want_hetp,
                                    stagecal_trend_point *out, stagecal_error *err)
{
    stagecal_model_point p;
    int rc = stagecal_model_eval(m, r, f_load, 0, &p, err);
    if (rc)
        return rc;
    /* A fit is dated by the last logged sample it used (the state of the column then);
     * files from logs with relative times fall back to the time of fit. */
    const char *when = m->data_last_utc[0] ? m->data_last_utc : m->fitted_utc;
    if (stagecal_units_parse_iso8601(when, &out->t_s) != 0)
        return error_set(err, STAGECAL_EDATA,
                         "column %s: date '%s' is not a timestamp (expected "
                         "YYYY-MM-DDTHH:MM:SSZ)",
                         m->column_id, when);
    if (p.lower_only)
        return error_set(err, STAGECAL_EDATA,
                         "column %s: fit of %s gives at least %g stages at R = %g only "
                         "(one-sided: an analyser at its limit), not a point of a trend",
                         m->column_id, m->fitted_utc, p.stages, r);
    if (!(isfinite(p.se_fit) && p.se_fit > 0))
        return error_set(err, STAGECAL_EDATA,
                         "column %s: fit of %s has no positive standard error at R = %g (got "
                         "%g)",
                         m->column_id, m->fitted_utc, r, p.se_fit);
    if (!want_hetp) {
        out->value = p.stages;
        out->se = p.se_fit;
        return STAGECAL_OK;
    }
    if (!m->has_hetp)
        return error_set(err, STAGECAL_EDATA,
                         "column %s: fit of %s has no packed height (expected one for HETP)",
                         m->column_id, m->fitted_utc);
    if (!(p.column_stages > 0))
        return error_set(err, STAGECAL_EDATA,
                         "column %s: fit of %s predicts %g column stages at R = %g (expected > 0 "
                         "for an HETP)",
                         m->column_id, m->fitted_utc, p.column_stages, r);
    /* HETP and its delta-method standard error come from hetp.c, the one home of HETP */
    stagecal_hetp_stages hs = {p.column_stages, p.se_fit, p.dof_fit, p.lower_only};
    stagecal_hetp_result h;
    if ((rc = stagecal_hetp_compute(m->height_m, &hs, m->level, &h, err)) != STAGECAL_OK)
        return rc;
    out->value = h.hetp_m;
    out->se = h.se_m;
    return STAGECAL_OK;
}

const char *stagecal_trend_undetermined(double dof, double low, double high)
{
    if (!(dof >= 2))
        return "not determined: the fit has fewer than 2 degrees of freedom";
    if (!(isfinite(low) && isfinite(high)))
        return "not determined: the evidence does not bound it";
    if (low < 1)
        return "not determined: the interval reaches below 1 stage (the pot alone)";
    return NULL;
}

int stagecal_trend_fit_line(const stagecal_trend_point *pts, size_t n, double level,
                            stagecal_trend_fit *out, stagecal_error *err)
{
    int rc;
    memset(out, 0, sizeof *out);
    if (n < 3)
        return error_set(err, STAGECAL_EINVAL,
                         "%zu point(s) cannot carry a trend with an interval (expected >= 3)", n);
    if ((rc = check_points(pts, n, err)) || (rc = check_level(level, err)))
        return rc;
    double *x = malloc(3 * n * sizeof *x);
    if (!x)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for %zu trend points", n);
    double *w = x + n, *y = x + 2 * n;
    double sw = 0, swt = 0;
    for (size_t i = 0; i < n; i++) {
        w[i] = 1.0 / (pts[i].se * pts[i].se);
        sw += w[i];
        swt += w[i] * pts[i].t_s;
    }
    double t0 = swt / sw;
    double tmin = pts[0].t_s, tmax = pts[0].t_s;
    for (size_t i = 0; i < n; i++) {
        x[i] = (pts[i].t_s - t0) / MONTH;
        y[i] = pts[i].value;
        tmin = fmin(tmin, pts[i].t_s);
        tmax = fmax(tmax, pts[i].t_s);
    }
    if (!(tmax > tmin)) {
        free(x);
        return error_set(err, STAGECAL_EINVAL,
                         "all %zu points have the same time (expected fits at different dates)", n);
    }
    double c0, c1, cov00, cov01, cov11, chisq;
    int g = gsl_fit_wlinear(x, 1, w, 1, y, 1, n, &c0, &c1, &cov00, &cov01, &cov11, &chisq);
    free(x);
    if (g != GSL_SUCCESS)
        return error_set(err, STAGECAL_EINTERNAL, "weighted trend fit failed: %s", gsl_strerror(g));
    /* gsl_fit_wlinear's covariance takes the weights as exact inverse variances; the
     * scatter about the line rescales it by χ²/(n − 2) (weights known up to a common
     * factor), which with t(n − 2) gives exact intervals when the se are right up to
     * that factor. A floor at 1 was tried and rejected: coverage rose to 0.97 at a
     * nominal 0.95 (test_trend.c's simulation). */
    double dof = (double)n - 2;
    double s2 = chisq / dof;
    out->n = n;
    out->t0_s = t0;
    out->a = c0;
    out->b = c1 / MONTH;
    out->c00 = cov00 * s2;
    out->c01 = cov01 * s2 / MONTH;
    out->c11 = cov11 * s2 / (MONTH * MONTH);
    out->chisq = chisq;
    out->dof = dof;
    out->scale = sqrt(chisq / dof);
    out->level = level;
    out->t_crit = gsl_cdf_tdist_Pinv(0.5 + 0.5 * level, dof);
    double se_b = sqrt(out->c11);
    out->b_low = out->b - out->t_crit * se_b;
    out->b_high = out->b + out->t_crit * se_b;
    out->p_value = se_b > 0 ? 2.0 * gsl_cdf_tdist_Q(fabs(out->b) / se_b, dof) : 0.0;
    return STAGECAL_OK;
}

void stagecal_trend_line_eval(const stagecal_trend_fit *f, double t_s, double *value, double *se,
                              double *low, double *high)
{
    double tau = t_s - f->t0_s;
    double v = f->a + f->b * tau;
    double var = f->c00 + 2 * f->c01 * tau + f->c11 * tau * tau;
    double s = sqrt(var > 0 ? var : 0);
    if (value)
        *value = v;
    if (se)
        *se = s;
    if (low)
        *low = v - f->t_crit * s;
    if (high)
        *high = v + f->t_crit * s;
}

const char *stagecal_forecast_status_name(stagecal_forecast_status s)
{
    static const char *const names[] = {[STAGECAL_FORECAST_OK] = "ok",
                                        [STAGECAL_FORECAST_UNBOUNDED] = "unbounded",
                                        [STAGECAL_FORECAST_NOT_DECLINING] = "not-declining"};
    return NAME_OF(names, s);
}

int stagecal_trend_forecast_crossing(const stagecal_trend_fit *f, double required, double last_t_s,
                                     stagecal_trend_forecast *out, stagecal_error *err)
{
    memset(out, 0, sizeof *out);
    if (!isfinite(required))
        return error_set(err, STAGECAL_EINVAL,
                         "requirement %g is not a finite number (expected e.g. stages)", required);
    out->required = required;
    if (!(f->b < 0)) {
        out->status = STAGECAL_FORECAST_NOT_DECLINING;
        out->t_cross_s = out->low_s = out->high_s = NAN;
        return STAGECAL_OK;
    }
    /* Work in months about t0: {τ : (d + bτ)² ≤ q²(c00 + 2c01τ + c11τ²)} is the set of
     * times whose confidence band contains the requirement (Fieller). */
    double b = f->b * MONTH, c01 = f->c01 * MONTH, c11 = f->c11 * MONTH * MONTH;
    double d = f->a - required, q2 = f->t_crit * f->t_crit;
    double tau_hat = -d / b;
    out->t_cross_s = f->t0_s + tau_hat * MONTH;
    out->past = out->t_cross_s < last_t_s;
    double A = b * b - q2 * c11;
    double B = 2 * (d * b - q2 * c01);
    double C = d * d - q2 * f->c00;
    double disc = B * B - 4 * A * C;
    if (A > 0) {
        /* The estimate lies inside the set, so disc ≥ 0 up to rounding. */
        double sq = sqrt(disc > 0 ? disc : 0);
        double qq = -0.5 * (B + (B >= 0 ? sq : -sq));
        double r1 = qq / A, r2 = qq != 0 ? C / qq : r1;
        out->status = STAGECAL_FORECAST_OK;
        out->low_s = f->t0_s + fmin(r1, r2) * MONTH;
        out->high_s = f->t0_s + fmax(r1, r2) * MONTH;
        return STAGECAL_OK;
    }
    /* Slope not significant: the set is open-ended on one or both sides. */
    out->status = STAGECAL_FORECAST_UNBOUNDED;
    out->low_s = -INFINITY;
    out->high_s = INFINITY;
    if (A < 0 && disc > 0) {
        double sq = sqrt(disc);
        double r1 = (-B + sq) / (2 * A), r2 = (-B - sq) / (2 * A);
        double lo = fmin(r1, r2), hi = fmax(r1, r2);
        if (tau_hat >= hi)
            out->low_s = f->t0_s + hi * MONTH;
        else if (tau_hat <= lo)
            out->high_s = f->t0_s + lo * MONTH;
    }
    return STAGECAL_OK;
}

stagecal_trend_ewma_params stagecal_trend_ewma_default_params(void)
{
    stagecal_trend_ewma_params p = {0.2, 2.962};
    return p;
}

static int check_ewma(const stagecal_trend_ewma_params *par, stagecal_error *err)
{
    if (!(par->lambda > 0 && par->lambda <= 1))
        return error_set(err, STAGECAL_EINVAL,
                         "EWMA weight lambda %g is outside (0, 1] (expected e.g. 0.2)",
                         par->lambda);
    if (!(isfinite(par->L) && par->L > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "EWMA limit width L %g is not positive (expected e.g. 2.962)", par->L);
    return STAGECAL_OK;
}

int stagecal_trend_ewma(const stagecal_trend_point *pts, size_t n, double baseline,
                        double baseline_se, const stagecal_trend_ewma_params *par,
                        stagecal_trend_ewma_point *out, size_t *n_alarms, stagecal_error *err)
{
    int rc;
    size_t na = 0;
    if (n_alarms)
        *n_alarms = 0;
    if ((rc = check_ewma(par, err)) || (rc = check_points(pts, n, err)))
        return rc;
    if (!(isfinite(baseline) && isfinite(baseline_se) && baseline_se >= 0))
        return error_set(err, STAGECAL_EINVAL,
                         "baseline %g with standard error %g is invalid (expected finite, se >= 0)",
                         baseline, baseline_se);
    double lam = par->lambda;
    double limit = par->L * sqrt(lam / (2 - lam));
    double e = 0;
    for (size_t i = 0; i < n; i++) {
        double s = sqrt(pts[i].se * pts[i].se + baseline_se * baseline_se);
        out[i].z = (pts[i].value - baseline) / s;
        e = lam * out[i].z + (1 - lam) * e;
        out[i].ewma = e;
        out[i].limit = limit;
        out[i].alarm = e < -limit ? -1 : e > limit ? 1 : 0;
        na += out[i].alarm != 0;
    }
    if (n_alarms)
        *n_alarms = na;
    return STAGECAL_OK;
}

/* The transient part Q of the Brook–Evans chain: the in-control band of the EWMA
 * (in units of the observations' σ) cut into m cells; the statistic moves from cell i
 * to cell j when λx + (1 − λ)c_i falls into cell j, x ~ N(shift, 1). */
static int ewma_chain(const stagecal_trend_ewma_params *par, double shift, size_t m,
                      gsl_matrix **q_out, stagecal_error *err)
{
    int rc;
    if ((rc = check_ewma(par, err)))
        return rc;
    if (m < 11 || m % 2 == 0 || m > 2001)
        return error_set(err, STAGECAL_EINVAL,
                         "Markov chain size %zu is invalid (expected an odd number in [11, 2001])",
                         m);
    if (!isfinite(shift))
        return error_set(err, STAGECAL_EINVAL, "shift %g is not finite", shift);
    double lam = par->lambda;
    double h = par->L * sqrt(lam / (2 - lam));
    double w = 2 * h / (double)m;
    gsl_matrix *q = gsl_matrix_alloc(m, m);
    if (!q)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for a %zu-state chain", m);
    for (size_t i = 0; i < m; i++) {
        double ci = -h + w * ((double)i + 0.5);
        for (size_t j = 0; j < m; j++) {
            double cj = -h + w * ((double)j + 0.5);
            double hi = (cj + 0.5 * w - (1 - lam) * ci) / lam - shift;
            double lo = (cj - 0.5 * w - (1 - lam) * ci) / lam - shift;
            /* P(lo < X ≤ hi) computed from the nearer tail to keep small cells exact. */
            double p = lo > 0 ? gsl_cdf_ugaussian_Q(lo) - gsl_cdf_ugaussian_Q(hi)
                              : gsl_cdf_ugaussian_P(hi) - gsl_cdf_ugaussian_P(lo);
            gsl_matrix_set(q, i, j, p);
        }
    }
    *q_out = q;
    return STAGECAL_OK;
}

int stagecal_trend_ewma_arl(const stagecal_trend_ewma_params *par, double shift, size_t m_states,
                            double *arl, stagecal_error *err)
{
    gsl_matrix *q = NULL;
    int rc = ewma_chain(par, shift, m_states, &q, err);
    if (rc)
        return rc;
    size_t m = m_states;
    gsl_permutation *perm = gsl_permutation_alloc(m);
    gsl_vector *ones = gsl_vector_alloc(m), *x = gsl_vector_alloc(m);
    if (!perm || !ones || !x) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory for a %zu-state chain", m);
        goto done;
    }
    /* (I − Q)·ARL = 1 */
    gsl_matrix_scale(q, -1.0);
    for (size_t i = 0; i < m; i++)
        gsl_matrix_set(q, i, i, gsl_matrix_get(q, i, i) + 1.0);
    gsl_vector_set_all(ones, 1.0);
    int signum, g = gsl_linalg_LU_decomp(q, perm, &signum);
    if (g == GSL_SUCCESS)
        g = gsl_linalg_LU_solve(q, perm, ones, x);
    if (g != GSL_SUCCESS) {
        rc = error_set(err, STAGECAL_EINTERNAL, "ARL linear solve failed: %s", gsl_strerror(g));
        goto done;
    }
    *arl = gsl_vector_get(x, m / 2);
    if (!(isfinite(*arl) && *arl >= 1))
        rc = error_set(err, STAGECAL_EINTERNAL, "ARL %g is not a run length", *arl);
done:
    gsl_vector_free(x);
    gsl_vector_free(ones);
    gsl_permutation_free(perm);
    gsl_matrix_free(q);
    return rc;
}

int stagecal_trend_ewma_rl_cdf(const stagecal_trend_ewma_params *par, double shift, size_t m_states,
                               size_t k, double *prob, stagecal_error *err)
{
    gsl_matrix *q = NULL;
    int rc = ewma_chain(par, shift, m_states, &q, err);
    if (rc)
        return rc;
    size_t m = m_states;
    double *p = calloc(2 * m, sizeof *p);
    if (!p) {
        gsl_matrix_free(q);
        return error_set(err, STAGECAL_ENOMEM, "out of memory for a %zu-state chain", m);
    }
    double *pn = p + m;
    p[m / 2] = 1.0;
    for (size_t step = 0; step < k; step++) {
        for (size_t j = 0; j < m; j++) {
            double s = 0;
            for (size_t i = 0; i < m; i++)
                s += p[i] * gsl_matrix_get(q, i, j);
            pn[j] = s;
        }
        memcpy(p, pn, m * sizeof *p);
    }
    double surv = 0;
    for (size_t i = 0; i < m; i++)
        surv += p[i];
    *prob = 1.0 - surv;
    free(p);
    gsl_matrix_free(q);
    return STAGECAL_OK;
}

/* ---- events ------------------------------------------------------------------------ */

const char *stagecal_event_kind_name(stagecal_event_kind k)
{
    static const char *const names[] = {[STAGECAL_EVENT_REPACK] = "repack",
                                        [STAGECAL_EVENT_MAINTENANCE] = "maintenance",
                                        [STAGECAL_EVENT_NOTE] = "note"};
    return NAME_OF(names, k);
}

int stagecal_event_kind_parse(const char *text, stagecal_event_kind *k)
{
    static const stagecal_event_kind all[] = {STAGECAL_EVENT_REPACK, STAGECAL_EVENT_MAINTENANCE,
                                              STAGECAL_EVENT_NOTE};
    for (size_t i = 0; i < sizeof all / sizeof all[0]; i++) {
        if (strcmp(text, stagecal_event_kind_name(all[i])) == 0) {
            *k = all[i];
            return 0;
        }
    }
    return -1;
}

#define EV_FIELDS 4
#define EV_FIELD_MAX 256

/* One CSV line's fields, collected by libcsv's callbacks. */
struct ev_row {
    char field[EV_FIELDS][EV_FIELD_MAX];
    size_t nf;    /* fields seen */
    int too_long; /* a field did not fit */
    int rows;     /* rows ended */
};

static void ev_field(void *s, size_t len, void *data)
{
    struct ev_row *r = data;
    if (r->nf < EV_FIELDS) {
        if (len >= EV_FIELD_MAX) {
            r->too_long = 1;
            len = EV_FIELD_MAX - 1;
        }
        memcpy(r->field[r->nf], s, len);
        r->field[r->nf][len] = '\0';
    }
    r->nf++;
}

static void ev_row_end(int c, void *data)
{
    (void)c;
    ((struct ev_row *)data)->rows++;
}

static int parse_line(struct csv_parser *p, const char *line, size_t len, struct ev_row *r)
{
    memset(r, 0, sizeof *r);
    if (csv_parse(p, line, len, ev_field, ev_row_end, r) != len)
        return -1;
    if (csv_fini(p, ev_field, ev_row_end, r) != 0)
        return -1;
    return 0;
}

static int event_time(const char *text, double *t_s)
{
    char buf[40];
    size_t len = strlen(text);
    if (len == 10) { /* a date alone means midnight UTC */
        snprintf(buf, sizeof buf, "%sT00:00Z", text);
        text = buf;
    }
    return stagecal_units_parse_iso8601(text, t_s);
}

static int cmp_event(const void *a, const void *b)
{
    const stagecal_trend_event *x = a, *y = b;
    if (x->t_s != y->t_s)
        return x->t_s < y->t_s ? -1 : 1;
    return x->line < y->line ? -1 : x->line > y->line;
}

/* One event from a data row of path (line lineno): time, column id, kind and the note. A
 * status (EDATA naming the field). */
static int event_from_row(const struct ev_row *row, const char *path, long lineno,
                          stagecal_trend_event *e, stagecal_error *err)
{
    memset(e, 0, sizeof *e);
    e->line = lineno;
    if (event_time(row->field[0], &e->t_s) != 0)
        return error_set_at(err, STAGECAL_EDATA, path, lineno, 1,
                            "time '%s' is not a date (expected YYYY-MM-DD or ISO 8601 "
                            "YYYY-MM-DDThh:mm[:ss]Z)",
                            row->field[0]);
    if (!stagecal_convention_id_valid(row->field[1]))
        return error_set_at(err, STAGECAL_EDATA, path, lineno, 2,
                            "column '%s' is not a column id (expected %s)", row->field[1],
                            stagecal_convention_id_rule());
    /* length checked above */
    memcpy(e->column_id, row->field[1], strlen(row->field[1]) + 1);
    if (stagecal_event_kind_parse(row->field[2], &e->kind) != 0)
        return error_set_at(err, STAGECAL_EDATA, path, lineno, 3,
                            "kind '%s' is unknown (expected repack, maintenance or note)",
                            row->field[2]);
    if (row->nf == 4) {
        size_t nl = strlen(row->field[3]);
        if (nl >= sizeof e->note)
            return error_set_at(err, STAGECAL_EDATA, path, lineno, 4,
                                "note of %zu bytes is too long (expected < %zu)", nl,
                                sizeof e->note);
        memcpy(e->note, row->field[3], nl + 1);
    }
    return STAGECAL_OK;
}

int stagecal_trend_events_read(const char *path, stagecal_trend_event **events, size_t *n,
                               stagecal_error *err)
{
    *events = NULL;
    *n = 0;
    FILE *fp;
    int orc = open_bounded(path, FILEIO_CAP_EVENTS, "events file", &fp, err);
    if (orc != STAGECAL_OK)
        return orc;
    struct csv_parser p;
    if (csv_init(&p, CSV_APPEND_NULL) != 0) {
        fclose(fp);
        return error_set(err, STAGECAL_ENOMEM, "out of memory for the CSV parser");
    }
    char *line = NULL;
    size_t cap = 0, alloc = 0;
    ssize_t got;
    long lineno = 0;
    int rc = STAGECAL_OK, have_header = 0, has_note = 0;
    stagecal_trend_event *ev = NULL;
    struct ev_row row;
    while ((got = getline(&line, &cap, fp)) != -1) {
        lineno++;
        size_t len = (size_t)got;
        while (len > 0 && (line[len - 1] == '\n' || line[len - 1] == '\r'))
            line[--len] = '\0';
        size_t k = 0;
        while (k < len && (line[k] == ' ' || line[k] == '\t'))
            k++;
        if (k == len || line[k] == '#')
            continue;
        if (parse_line(&p, line, len, &row) != 0) {
            rc = error_set_at(err, STAGECAL_EDATA, path, lineno, 0, "malformed CSV: %s",
                              csv_strerror(csv_error(&p)));
            break;
        }
        if (row.nf > EV_FIELDS || row.too_long) {
            rc = error_set_at(err, STAGECAL_EDATA, path, lineno, 0,
                              "%zu fields or a field over %d bytes (expected "
                              "time,column,kind[,note])",
                              row.nf, EV_FIELD_MAX - 1);
            break;
        }
        if (!have_header) {
            if (!((row.nf == 3 || row.nf == 4) && strcmp(row.field[0], "time") == 0 &&
                  strcmp(row.field[1], "column") == 0 && strcmp(row.field[2], "kind") == 0 &&
                  (row.nf == 3 || strcmp(row.field[3], "note") == 0))) {
                rc = error_set_at(err, STAGECAL_EDATA, path, lineno, 0,
                                  "header is not 'time,column,kind[,note]'");
                break;
            }
            have_header = 1;
            has_note = row.nf == 4;
            continue;
        }
        size_t want = has_note ? 4 : 3;
        if (row.nf != want && !(has_note && row.nf == 3)) {
            rc = error_set_at(err, STAGECAL_EDATA, path, lineno, 0,
                              "%zu fields (expected %zu: time,column,kind%s)", row.nf, want,
                              has_note ? ",note" : "");
            break;
        }
        if (*n == alloc) {
            size_t na = alloc ? 2 * alloc : 8;
            stagecal_trend_event *ne = realloc(ev, na * sizeof *ne);
            if (!ne) {
                rc = error_set(err, STAGECAL_ENOMEM, "out of memory for events");
                break;
            }
            ev = ne;
            alloc = na;
        }
        if ((rc = event_from_row(&row, path, lineno, &ev[*n], err)) != STAGECAL_OK)
            break;
        (*n)++;
    }
    if (rc == STAGECAL_OK && ferror(fp))
        rc = error_set(err, STAGECAL_ENOINPUT, "cannot read '%s'", path);
    if (rc == STAGECAL_OK && !have_header)
        rc = error_set_at(err, STAGECAL_EDATA, path, 0, 0,
                          "no header (expected 'time,column,kind[,note]')");
    free(line);
    csv_free(&p);
    fclose(fp);
    if (rc != STAGECAL_OK) {
        free(ev);
        *n = 0;
        return rc;
    }
    if (*n == 0) {
        free(ev);
        return STAGECAL_OK;
    }
    qsort(ev, *n, sizeof *ev, cmp_event);
    *events = ev;
    return STAGECAL_OK;
}

/* ---- a whole history ---------------------------------------------------------------- */

stagecal_trend_params stagecal_trend_default_params(void)
{
    return (stagecal_trend_params){.level = 0.95,
                                   .required = NAN,
                                   .ewma = stagecal_trend_ewma_default_params(),
                                   .baseline_n = 3,
                                   .baseline = NAN};
}

void stagecal_trend_history_free(stagecal_trend_history *h)
{
    if (!h)
        return;
    FREE_EACH(h->points, h->order, h->segment_of, h->chart, h->segments);
    memset(h, 0, sizeof *h);
}

static int splits(const stagecal_trend_event *e, const char *column_id)
{
    return e->kind != STAGECAL_EVENT_NOTE && strcmp(e->column_id, column_id) == 0;
}

/* Segments of h's points (in time order): a splitting event of the column at t_e opens a
 * new segment holding points t >= t_e. Events sorted by time (as
 * stagecal_trend_events_read returns them) are assumed; unsorted input is handled by
 * scanning for the next event after each point. A status. */
static int split_segments(stagecal_trend_history *h, const stagecal_trend_event *events,
                          size_t n_events, const char *column_id, stagecal_error *err)
{
    size_t n = h->n;
    size_t ns = 0;
    stagecal_trend_segment *seg = h->segments;
    double seg_open = -INFINITY;
    long seg_event = -1;
    for (size_t i = 0; i < n; i++) {
        /* the latest splitting event at or before this point, later than seg_open */
        long best = -1;
        for (size_t k = 0; k < n_events; k++) {
            if (!splits(&events[k], column_id))
                continue;
            if (events[k].t_s <= h->points[i].t_s && events[k].t_s > seg_open &&
                (best < 0 || events[k].t_s > events[best].t_s))
                best = (long)k;
        }
        if (i == 0 || best >= 0) {
            if (ns == n_events + 1)
                return error_set(err, STAGECAL_EINTERNAL, "segment overflow");
            seg[ns].first = i;
            seg[ns].event = best >= 0 ? best : seg_event;
            seg[ns].start_s = best >= 0 ? events[best].t_s : h->points[i].t_s;
            seg[ns].first_alarm = -1;
            if (best >= 0)
                seg_open = events[best].t_s;
            ns++;
        }
        seg[ns - 1].n++;
        h->segment_of[i] = ns - 1;
    }
    h->n_segments = ns;
    return STAGECAL_OK;
}

/* Segment s's trend line (3 points or more), EWMA baseline (the given one for the current
 * segment, else the weighted mean of its first baseline_n points), chart and first alarm.
 * A status. */
static int segment_chart(stagecal_trend_history *h, size_t s, const stagecal_trend_params *par,
                         stagecal_error *err)
{
    stagecal_trend_segment *seg = h->segments;
    size_t ns = h->n_segments;
    int rc;
    const stagecal_trend_point *sp = h->points + seg[s].first;
    if (seg[s].n >= 3) {
        rc = stagecal_trend_fit_line(sp, seg[s].n, par->level, &seg[s].fit, err);
        if (rc == STAGECAL_EINVAL)
            rc = STAGECAL_OK; /* e.g. all points at one time: no trend, not an error */
        else if (rc)
            return rc;
        else
            seg[s].has_fit = 1;
    }
    if (s == ns - 1 && isfinite(par->baseline)) {
        seg[s].baseline = par->baseline;
        seg[s].baseline_se = 0;
    } else {
        size_t m = seg[s].n < par->baseline_n ? seg[s].n : par->baseline_n;
        double sw = 0, swy = 0;
        for (size_t i = 0; i < m; i++) {
            double w = 1.0 / (sp[i].se * sp[i].se);
            sw += w;
            swy += w * sp[i].value;
        }
        seg[s].baseline = swy / sw;
        seg[s].baseline_se = 1.0 / sqrt(sw);
    }
    rc = stagecal_trend_ewma(sp, seg[s].n, seg[s].baseline, seg[s].baseline_se, &par->ewma,
                             h->chart + seg[s].first, &seg[s].n_alarms, err);
    if (rc)
        return rc;
    for (size_t i = 0; i < seg[s].n; i++) {
        if (h->chart[seg[s].first + i].alarm) {
            seg[s].first_alarm = (long)(seg[s].first + i);
            break;
        }
    }
    return STAGECAL_OK;
}

int stagecal_trend_analyse(const stagecal_trend_point *pts, size_t n,
                           const stagecal_trend_event *events, size_t n_events,
                           const char *column_id, const stagecal_trend_params *par,
                           stagecal_trend_history *h, stagecal_error *err)
{
    int rc;
    memset(h, 0, sizeof *h);
    if (n == 0)
        return error_set(err, STAGECAL_EINVAL, "no fits in the history (expected >= 1)");
    if ((rc = check_points(pts, n, err)) || (rc = check_level(par->level, err)) ||
        (rc = check_ewma(&par->ewma, err)))
        return rc;
    if (par->baseline_n < 1)
        return error_set(err, STAGECAL_EINVAL, "baseline_n is 0 (expected >= 1 points)");
    h->points = malloc(n * sizeof *h->points);
    h->order = malloc(n * sizeof *h->order);
    h->segment_of = calloc(n, sizeof *h->segment_of);
    h->chart = calloc(n, sizeof *h->chart);
    h->segments = calloc(n_events + 1, sizeof *h->segments);
    double *t = malloc(n * sizeof *t);
    if (!h->points || !h->order || !h->segment_of || !h->chart || !h->segments || !t) {
        free(t);
        return error_set(err, STAGECAL_ENOMEM, "out of memory for a history of %zu fits", n);
    }
    h->n = n;
    for (size_t i = 0; i < n; i++)
        t[i] = pts[i].t_s;
    gsl_sort_index(h->order, t, 1, n); /* stable order is not needed: ties keep any order */
    free(t);
    for (size_t i = 0; i < n; i++)
        h->points[i] = pts[h->order[i]];

    if ((rc = split_segments(h, events, n_events, column_id, err)))
        return rc;
    size_t ns = h->n_segments;
    stagecal_trend_segment *seg = h->segments;
    for (size_t s = 0; s < ns; s++)
        if ((rc = segment_chart(h, s, par, err)))
            return rc;
    const stagecal_trend_segment *cur = &seg[ns - 1];
    if (isfinite(par->required) && cur->has_fit) {
        rc = stagecal_trend_forecast_crossing(&cur->fit, par->required, h->points[n - 1].t_s,
                                              &h->forecast, err);
        if (rc)
            return rc;
        h->has_forecast = 1;
    }
    return stagecal_trend_ewma_arl(&par->ewma, 0.0, 201, &h->arl0, err);
}
