/*
 * scatter.c — the scatter of one new window's stage count about the fitted curve as a
 * function of R (include/stagecal/scatter.h): ln se of the windows by least squares on a
 * polynomial in λ = R/(R + 1) (gsl_multifit_linear), shifted by ln s, s² the windows'
 * standardised residual variance on m − p degrees of freedom.
 *
 * Workload: the windows of one calibration (tens to a few hundred); a 3-column fit.
 */
#include "stagecal/scatter.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

static double poly(const stagecal_scatter *s, double lv)
{
    double v = 0;
    for (size_t k = s->n; k-- > 0;)
        v = v * lv + s->c[k];
    return v;
}

/* λ of r clamped to the function's fitted range. */
static double lv_in_range(const stagecal_scatter *s, double r)
{
    return fmin(fmax(lv_of(r), s->lv_lo), s->lv_hi);
}

double stagecal_scatter_sd(const stagecal_scatter *s, double r)
{
    if (!s || s->n == 0 || isnan(r))
        return NAN;
    return exp(poly(s, lv_in_range(s, r)));
}

double stagecal_scatter_dof(const stagecal_scatter *s, double r)
{
    if (!s || s->n == 0 || isnan(r))
        return NAN;
    double lv = lv_in_range(s, r), g[STAGECAL_SCATTER_MAXC], v = 0;
    for (size_t k = 0; k < s->n; k++)
        g[k] = k == 0 ? 1.0 : g[k - 1] * lv;
    for (size_t i = 0; i < s->n; i++)
        for (size_t k = 0; k < s->n; k++)
            v += g[i] * s->cov[i * s->n + k] * g[k];
    return v > 0 ? 1.0 / (2.0 * v) : NAN;
}

double stagecal_scatter_process_factor(const stagecal_scatter *s, double w2)
{
    if (!s || s->n == 0 || !(s->var_ratio > 0) || !isfinite(s->var_ratio) || !(w2 > 0) ||
        !isfinite(w2))
        return NAN;
    return sqrt(fmax(0.0, w2 - 1.0 / s->var_ratio));
}

int stagecal_scatter_check(const stagecal_scatter *s, stagecal_error *err)
{
    if (!s || s->n > STAGECAL_SCATTER_MAXC)
        return error_set(err, STAGECAL_EINVAL, "scatter: %zu coefficients (expected 0 to %d)",
                         s ? s->n : 0, STAGECAL_SCATTER_MAXC);
    if (s->n == 0)
        return STAGECAL_OK;
    for (size_t k = 0; k < s->n; k++)
        if (!isfinite(s->c[k]))
            return error_set(err, STAGECAL_EINVAL,
                             "scatter: coefficient %zu is %g (expected "
                             "a finite number)",
                             k, s->c[k]);
    if (!(s->lv_lo >= 0 && s->lv_lo <= s->lv_hi && s->lv_hi <= 1))
        return error_set(err, STAGECAL_EINVAL,
                         "scatter: range [%g, %g] of R/(R+1) (expected 0 <= low <= high <= 1)",
                         s->lv_lo, s->lv_hi);
    for (size_t i = 0; i < s->n; i++)
        for (size_t k = 0; k < s->n; k++) {
            double a = s->cov[i * s->n + k], b = s->cov[k * s->n + i];
            if (!isfinite(a) || (i == k && a < 0) || fabs(a - b) > 1e-12 * (fabs(a) + fabs(b)))
                return error_set(err, STAGECAL_EINVAL,
                                 "scatter: covariance [%zu][%zu] = %g (expected a finite "
                                 "symmetric matrix with a non-negative diagonal)",
                                 i, k, a);
        }
    if (!(s->var_ratio >= 0) || !isfinite(s->var_ratio))
        return error_set(err, STAGECAL_EINVAL,
                         "scatter: var_ratio %g (expected a finite number >= 0; 0: not known)",
                         s->var_ratio);
    /* a polynomial of degree ≤ 2 on a closed interval is largest and smallest at the ends
     * or at its vertex */
    double at[3] = {s->lv_lo, s->lv_hi, s->lv_lo};
    if (s->n == 3 && s->c[2] != 0) {
        double v = -s->c[1] / (2 * s->c[2]);
        if (v > s->lv_lo && v < s->lv_hi)
            at[2] = v;
    }
    for (int i = 0; i < 3; i++) {
        double sd = exp(poly(s, at[i]));
        if (!(isfinite(sd) && sd > 0))
            return error_set(err, STAGECAL_EINVAL,
                             "scatter: sigma at R/(R+1) = %g is %g (expected a finite positive "
                             "number)",
                             at[i], sd);
    }
    return STAGECAL_OK;
}

/* ln se on the polynomial of degree nc − 1 in λ − mid: coefficients b, their covariance
 * and the residual sum of squares. 0, or −1 when the least squares fail. */
static int lse_fit(const double *lv, const double *lse, size_t m, size_t nc, double mid, double *b,
                   double *cov_b, double *rss)
{
    gsl_matrix *x = gsl_matrix_alloc(m, nc), *cov = gsl_matrix_alloc(nc, nc);
    gsl_vector *c = gsl_vector_alloc(nc);
    gsl_multifit_linear_workspace *w = gsl_multifit_linear_alloc(m, nc);
    int rc = -1;
    if (x && cov && c && w) {
        for (size_t i = 0; i < m; i++)
            for (size_t k = 0; k < nc; k++)
                gsl_matrix_set(x, i, k, pow(lv[i] - mid, (double)k));
        gsl_vector_const_view y = gsl_vector_const_view_array(lse, m);
        if (gsl_multifit_linear(x, &y.vector, c, cov, rss, w) == GSL_SUCCESS) {
            for (size_t k = 0; k < nc; k++) {
                b[k] = gsl_vector_get(c, k);
                for (size_t j = 0; j < nc; j++)
                    cov_b[k * nc + j] = gsl_matrix_get(cov, k, j);
            }
            rc = 0;
        }
    }
    gsl_multifit_linear_free(w);
    gsl_vector_free(c);
    gsl_matrix_free(cov);
    gsl_matrix_free(x);
    return rc;
}

int stagecal_scatter_fit(const stagecal_evidence *ev, size_t n, const stagecal_form *form,
                         const double *theta, stagecal_scatter *out, stagecal_error *err)
{
    return stagecal_scatter_fit_se(ev, n, NULL, form, theta, out, err);
}

int stagecal_scatter_window_se(const stagecal_vle *vle, double murphree,
                               const stagecal_evidence *ev, size_t n, const double *u_xd,
                               const double *u_xb, double *se, stagecal_error *err)
{
    if (!vle || !se || (n > 0 && !ev))
        return error_set(err, STAGECAL_EINVAL, "scatter window errors: NULL argument");
    /* per window: the quadratic's statistics (q), the straight line's (l) on the same
     * carried samples, and the copy whose count is redone (c) */
    stagecal_evidence *q = malloc((n ? n : 1) * 3 * sizeof *q), *l = q ? q + n : NULL,
                      *c = q ? q + 2 * n : NULL;
    if (!q)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for %zu windows", n);
    /* the quadratic: pass 0 each window's own ρ, pass 1 ρ pooled per analyser by lag pairs;
     * the straight line: each window's own ρ, then stagecal_evidence_pool_rho (the builder's) */
    double rho[2] = {NAN, NAN};
    for (int pass = 0; pass < 2; pass++) {
        double w[2] = {0, 0}, r[2] = {0, 0};
        for (size_t i = 0; i < n; i++) {
            double mean;
            q[i] = l[i] = ev[i];
            q[i].stages_ok = 0;
            if (ev[i].m < 3 || !ev[i].s_t || !ev[i].s_xd || !ev[i].s_xb ||
                stagecal_evidence_mean_quad(ev[i].s_t, ev[i].s_xd, ev[i].m, u_xd ? u_xd[i] : 0,
                                            rho[0], &mean, &q[i].u_xd, &q[i].rho_xd, &q[i].m_xd,
                                            NULL) != STAGECAL_OK ||
                stagecal_evidence_mean_quad(ev[i].s_t, ev[i].s_xb, ev[i].m, u_xb ? u_xb[i] : 0,
                                            rho[1], &mean, &q[i].u_xb, &q[i].rho_xb, &q[i].m_xb,
                                            NULL) != STAGECAL_OK ||
                stagecal_evidence_mean_rho(ev[i].s_t, ev[i].s_xd, ev[i].m, u_xd ? u_xd[i] : 0,
                                           &mean, &l[i].u_xd, &l[i].rho_xd, &l[i].m_xd,
                                           NULL) != STAGECAL_OK ||
                stagecal_evidence_mean_rho(ev[i].s_t, ev[i].s_xb, ev[i].m, u_xb ? u_xb[i] : 0,
                                           &mean, &l[i].u_xb, &l[i].rho_xb, &l[i].m_xb,
                                           NULL) != STAGECAL_OK) {
                l[i].m_xd = l[i].m_xb = 0; /* out of the pooling */
                continue;
            }
            q[i].stages_ok = 1;
            w[0] += q[i].m_xd >= 2 ? (double)(q[i].m_xd - 1) : 0.0;
            r[0] += q[i].m_xd >= 2 ? (double)(q[i].m_xd - 1) * q[i].rho_xd : 0.0;
            w[1] += q[i].m_xb >= 2 ? (double)(q[i].m_xb - 1) : 0.0;
            r[1] += q[i].m_xb >= 2 ? (double)(q[i].m_xb - 1) * q[i].rho_xb : 0.0;
        }
        for (int a = 0; a < 2; a++)
            rho[a] = w[a] > 0 ? r[a] / w[a] : NAN;
    }
    stagecal_evidence_pool_rho(l, n);
    for (size_t i = 0; i < n; i++) {
        se[i] = ev[i].se_stages;
        if (!q[i].stages_ok || !ev[i].stages_ok || !(l[i].u_xd > 0) || !(l[i].u_xb > 0))
            continue;
        /* the window's own errors (with whatever the builder added to them) times what the
         * quadratic takes out of the straight line's on the same samples */
        double fd = q[i].u_xd / l[i].u_xd, fb = q[i].u_xb / l[i].u_xb;
        if (!(fd > 0 && isfinite(fd) && fb > 0 && isfinite(fb)))
            continue;
        c[i] = ev[i];
        c[i].u_xd *= fd;
        c[i].u_xb *= fb;
        c[i].se_sxd *= fd;
        c[i].se_sxb *= fb;
        if (stagecal_evidence_stages(vle, murphree, &c[i], NULL) == STAGECAL_OK && c[i].stages_ok &&
            c[i].se_stages > 0 && isfinite(c[i].se_stages))
            se[i] = c[i].se_stages;
    }
    free(q);
    return STAGECAL_OK;
}

int stagecal_scatter_fit_se(const stagecal_evidence *ev, size_t n, const double *se,
                            const stagecal_form *form, const double *theta, stagecal_scatter *out,
                            stagecal_error *err)
{
    if (!form || !theta || !out || (n > 0 && !ev))
        return error_set(err, STAGECAL_EINVAL, "scatter fit: NULL argument");
    memset(out, 0, sizeof *out);
    size_t cap = n ? n : 1;
    double *lv = malloc(cap * 3 * sizeof *lv), *lse = lv + cap, *res = lse + cap;
    if (!lv)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for %zu windows", n);
    size_t m = 0;
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < n; i++) {
        double v, sei = se ? se[i] : ev[i].se_stages;
        if (!ev[i].stages_ok || !isfinite(ev[i].stages) || !(sei > 0) || !isfinite(sei) ||
            stagecal_form_eval(form, theta, ev[i].r, ev[i].f_load, &v, NULL) != STAGECAL_OK)
            continue;
        res[m] = ev[i].stages - v;
        lv[m] = lv_of(ev[i].r);
        lse[m] = log(sei);
        lo = fmin(lo, lv[m]);
        hi = fmax(hi, lv[m]);
        m++;
    }
    if (m < 3 || m <= form->p) {
        free(lv);
        return STAGECAL_OK; /* too few windows to say: one σ for every R */
    }
    /* distinct λ (to 1e-9: windows at one set point) bound the degree */
    size_t distinct = 0;
    for (size_t i = 0; i < m; i++) {
        size_t j = 0;
        while (j < i && fabs(lv[j] - lv[i]) > 1e-9)
            j++;
        distinct += j == i;
    }
    size_t dmax = m >= 8 && distinct >= 3 ? 2 : m >= 4 && distinct >= 2 ? 1 : 0;
    /* the degree by the Bayesian information criterion m·ln(RSS/m) + (d + 1)·ln m
     * (Schwarz 1978, "Estimating the dimension of a model", Ann. Stat. 6, 461–464): a
     * curved shape only where the windows' standard errors show one */
    double mid = 0.5 * (lo + hi), b[STAGECAL_SCATTER_MAXC] = {0},
           cb[STAGECAL_SCATTER_MAXC * STAGECAL_SCATTER_MAXC] = {0}, best = INFINITY;
    size_t nc = 0;
    for (size_t d = 0; d <= dmax; d++) {
        double bd[STAGECAL_SCATTER_MAXC], cd[STAGECAL_SCATTER_MAXC * STAGECAL_SCATTER_MAXC], rss;
        if (lse_fit(lv, lse, m, d + 1, mid, bd, cd, &rss) != 0) {
            free(lv);
            return error_set(err, STAGECAL_EDATA, "scatter fit: least squares failed");
        }
        double bic =
            (double)m * log(fmax(rss, 1e-300) / (double)m) + (double)(d + 1) * log((double)m);
        if (bic < best - 1e-12) {
            best = bic;
            nc = d + 1;
            memcpy(b, bd, sizeof bd);
            memcpy(cb, cd, sizeof cd);
        }
    }
    /* the scale from the residuals about that shape: s² = Σ r_i²/se(λ_i)² / (m − p), so
     * σ(R)² = s²·se(λ)² estimates the variance of a new window's count at λ whatever the
     * spread of the windows' own se about the shape */
    double zz = 0, kk = 0;
    for (size_t i = 0; i < m; i++) {
        double u = lv[i] - mid, sh = b[0] + (nc > 1 ? b[1] * u : 0) + (nc > 2 ? b[2] * u * u : 0);
        zz += res[i] * res[i] * exp(-2 * sh);
        kk += exp(2 * (lse[i] - sh)) / (double)m; /* the stated variance over the shape's */
    }
    free(lv);
    if (!(zz > 0))
        return STAGECAL_OK; /* the curve through every count: no scatter to describe */
    /* b0 + b1 (λ − mid) + b2 (λ − mid)² in powers of λ, plus ln s */
    double b1 = nc > 1 ? b[1] : 0, b2 = nc > 2 ? b[2] : 0;
    out->c[0] = b[0] - b1 * mid + b2 * mid * mid + 0.5 * log(zz / (double)(m - form->p));
    out->c[1] = b1 - 2 * b2 * mid;
    out->c[2] = b2;
    out->n = nc;
    /* s² over the windows' mean stated variance relative to the shape, k = mean se_i²/se(λ_i)²
     * (the shape is a fit of ln se: its square is below the windows' mean se², by k) */
    out->var_ratio = kk > 0 ? zz / (double)(m - form->p) / kk : 0.0;
    /* Cov(c) = T Cov(b) Tᵀ with T the map above (gsl's covariance is (XᵀX)⁻¹ times the
     * residual variance RSS/(m − nc), m > nc here); Var(ln s) of a variance on m − p dof is
     * 1/(2(m − p)) (delta method on a scaled χ², common practice, no source) */
    double t[3][3] = {{1, -mid, mid * mid}, {0, 1, -2 * mid}, {0, 0, 1}};
    for (size_t i = 0; i < nc; i++)
        for (size_t k = 0; k < nc; k++) {
            double e = 0;
            for (size_t a = 0; a < nc; a++)
                for (size_t q = 0; q < nc; q++)
                    e += t[i][a] * cb[a * nc + q] * t[k][q];
            out->cov[i * nc + k] = e;
        }
    out->cov[0] += 1.0 / (2.0 * (double)(m - form->p));
    out->lv_lo = lo;
    out->lv_hi = hi;
    if (stagecal_scatter_check(out, NULL) != STAGECAL_OK)
        memset(out, 0, sizeof *out); /* e.g. σ overflowing: keep one σ for every R */
    return STAGECAL_OK;
}
