/*
 * evidence_mean.c — a window's autocorrelation-aware mean and its standard error
 * (stagecal_evidence_mean, stagecal_evidence_mean_rho) and the pooling of the lag-1
 * autocorrelation over the windows (stagecal_evidence_pool_rho); see evidence.c and
 * stagecal/evidence.h.
 */
#include "stagecal/evidence.h"

#include <math.h>
#include <stddef.h>
#include <stdlib.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_roots.h>

#include "evidence_internal.h"
#include "internal.h"

#define RHO_MAX EVIDENCE_RHO_MAX

/* n_eff of m AR(1) samples with lag-1 autocorrelation rho, at least 1. */
static double ar1_neff(size_t m, double rho)
{
    double neff = (double)m * (1 - rho) / (1 + rho);
    return neff < 1 ? 1 : neff;
}

int stagecal_evidence_mean(const double *t, const double *y, size_t n, double u_floor, double *mean,
                           double *se, double *n_eff, stagecal_error *err)
{
    double rho;
    size_t m;
    int rc = stagecal_evidence_mean_rho(t, y, n, u_floor, mean, se, &rho, &m, err);
    if (rc == STAGECAL_OK && n_eff)
        *n_eff = ar1_neff(m, rho);
    return rc;
}

/* Number of samples with finite t and y, and their running means (the window's centre). */
static size_t finite_means(const double *t, const double *y, size_t n, double *tbar, double *ybar)
{
    size_t m = 0;
    *tbar = *ybar = 0;
    for (size_t i = 0; i < n; i++) {
        if (isfinite(y[i]) && isfinite(t[i])) {
            m++;
            *tbar += (t[i] - *tbar) / (double)m;
            *ybar += (y[i] - *ybar) / (double)m;
        }
    }
    return m;
}

int stagecal_evidence_mean_rho(const double *t, const double *y, size_t n, double u_floor,
                               double *mean, double *se, double *rho_out, size_t *m_out,
                               stagecal_error *err)
{
    double tbar, ybar;
    size_t m = finite_means(t, y, n, &tbar, &ybar);
    if (m < 3)
        return error_set(err, STAGECAL_EINVAL,
                         "window mean needs at least 3 finite samples, got %zu", m);
    /* Straight-line detrend in time (centred, so the intercept is the mean). */
    double stt = 0, sty = 0;
    for (size_t i = 0; i < n; i++) {
        if (isfinite(y[i]) && isfinite(t[i])) {
            stt += (t[i] - tbar) * (t[i] - tbar);
            sty += (t[i] - tbar) * (y[i] - ybar);
        }
    }
    double slope = stt > 0 ? sty / stt : 0.0;
    double ss = 0, sl = 0, prev = NAN;
    for (size_t i = 0; i < n; i++) {
        if (!(isfinite(y[i]) && isfinite(t[i])))
            continue;
        double e = y[i] - ybar - slope * (t[i] - tbar);
        ss += e * e;
        if (isfinite(prev))
            sl += e * prev;
        prev = e;
    }
    double rho = ss > 0 ? sl / ss : 0.0;
    if (rho < 0)
        rho = 0;
    if (rho > RHO_MAX)
        rho = RHO_MAX;
    double s = sqrt(ss / (double)(m - 2));
    if (s < u_floor)
        s = u_floor;
    *mean = ybar;
    *se = s / sqrt(ar1_neff(m, rho));
    if (rho_out)
        *rho_out = rho;
    if (m_out)
        *m_out = m;
    return STAGECAL_OK;
}

/* One analyser's series (rho, m and u point at the xD or the xB members of window k):
 * the mean ρ weighted by lag pairs, then each standard error rescaled to its n_eff. */
struct series {
    double *rho, *u;
    size_t m;
};

static struct series series_of(stagecal_evidence *e, int pot)
{
    return pot ? (struct series){&e->rho_xb, &e->u_xb, e->m_xb}
               : (struct series){&e->rho_xd, &e->u_xd, e->m_xd};
}

void stagecal_evidence_pool_rho(stagecal_evidence *ev, size_t nev)
{
    for (int pot = 0; ev && pot < 2; pot++) {
        double wsum = 0, rsum = 0;
        for (size_t k = 0; k < nev; k++) {
            struct series sr = series_of(&ev[k], pot);
            if (sr.m >= 2) {
                wsum += (double)(sr.m - 1);
                rsum += (double)(sr.m - 1) * *sr.rho;
            }
        }
        if (!(wsum > 0))
            continue;
        double pooled = rsum / wsum;
        for (size_t k = 0; k < nev; k++) {
            struct series sr = series_of(&ev[k], pot);
            if (sr.m < 2)
                continue;
            /* se = s/√n_eff: the same s with the pooled ρ's n_eff */
            *sr.u *= sqrt(ar1_neff(sr.m, *sr.rho) / ar1_neff(sr.m, pooled));
            *sr.rho = pooled;
        }
    }
}

/* ---- quadratic detrend with the AR(1) moments of its residuals ---------------------------
 * For residuals e = My of a least-squares detrend (M = I − H, H = Σ_j p_j p_jᵀ/g_j over the
 * orthogonal columns p_j, g_j = p_jᵀp_j) of noise with covariance σ²Σ(ρ), Σ_ij = ρ^|i−j| in
 * sample order, E[eᵀQe] = σ² tr(Q M Σ M) for any symmetric Q: with Q = I the residual sum of
 * squares has expectation σ²A(ρ), A = m − Σ_j p_jᵀΣp_j/g_j; with Q = L (½ on the first
 * off-diagonals, so eᵀLe = Σ e_i e_(i−1)) the lag-1 sum has σ²B(ρ),
 * B = (m − 1)ρ − 2 Σ_j (Lp_j)ᵀΣp_j/g_j + Σ_jk (p_jᵀΣp_k)(p_kᵀLp_j)/(g_j g_k). */
struct poly_moments {
    size_t m, q;
    double *p[3], *lp[3], *sp[3]; /* columns, L·columns, Σ·columns (m each) */
    double g[3], plp[3][3];       /* p_jᵀp_j, p_kᵀLp_j */
};

/* x ↦ Σ(ρ)x by the two one-sided geometric sums (O(m)); out may not alias x. */
static void ar1_apply(const double *x, size_t m, double rho, double *out)
{
    double f = 0;
    for (size_t i = 0; i < m; i++)
        out[i] = f = x[i] + rho * f;
    double b = 0;
    for (size_t i = m; i-- > 0;) {
        b = x[i] + rho * b;
        out[i] += b - x[i];
    }
}

/* 1ᵀΣ(ρ)1 = m + 2 Σ_k (m − k) ρ^k: m² times the variance factor of the mean. */
static double ar1_sum(size_t m, double rho)
{
    double v = (double)m, pk = 1;
    for (size_t k = 1; k < m; k++) {
        pk *= rho;
        v += 2.0 * (double)(m - k) * pk;
    }
    return v;
}

static double dot(const double *a, const double *b, size_t m)
{
    double s = 0;
    for (size_t i = 0; i < m; i++)
        s += a[i] * b[i];
    return s;
}

/* A(ρ) and B(ρ) (see above). */
static void poly_ab(struct poly_moments *pm, double rho, double *a, double *b)
{
    size_t m = pm->m;
    *a = (double)m;
    *b = (double)(m - 1) * rho;
    for (size_t j = 0; j < pm->q; j++) {
        ar1_apply(pm->p[j], m, rho, pm->sp[j]);
        *a -= dot(pm->p[j], pm->sp[j], m) / pm->g[j];
        *b -= 2.0 * dot(pm->lp[j], pm->sp[j], m) / pm->g[j];
    }
    for (size_t j = 0; j < pm->q; j++)
        for (size_t k = 0; k < pm->q; k++)
            *b += dot(pm->p[j], pm->sp[k], m) * pm->plp[k][j] / (pm->g[j] * pm->g[k]);
}

struct poly_root {
    struct poly_moments *pm;
    double target; /* the residuals' observed lag-1 autocorrelation */
};

/* B(ρ)/A(ρ) − observed: the lag-1 autocorrelation the residuals show in expectation at AR(1)
 * ρ (a ratio of expectations), less the observed one. */
static double poly_gap(double rho, void *par)
{
    struct poly_root *pr = par;
    double a, b;
    poly_ab(pr->pm, rho, &a, &b);
    return (a > 0 ? b / a : 0.0) - pr->target;
}

/* ρ with B(ρ)/A(ρ) = target in [0, RHO_MAX] (an end when the target lies beyond it), by
 * GSL's Brent solver. */
static double poly_solve_rho(struct poly_moments *pm, double target)
{
    struct poly_root pr = {pm, target};
    double lo = 0.0, hi = RHO_MAX;
    if (!(poly_gap(lo, &pr) < 0))
        return lo;
    if (!(poly_gap(hi, &pr) > 0))
        return hi;
    gsl_function fn = {poly_gap, &pr};
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return NAN;
    double x = 0.5 * (lo + hi);
    if (gsl_root_fsolver_set(s, &fn, lo, hi) == GSL_SUCCESS) {
        for (int it = 0; it < 100; it++) {
            if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
                break;
            x = gsl_root_fsolver_root(s);
            if (gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                       1e-10, 0) == GSL_SUCCESS)
                break;
        }
    }
    gsl_root_fsolver_free(s);
    return x;
}

int stagecal_evidence_mean_quad(const double *t, const double *y, size_t n, double u_floor,
                                double rho_in, double *mean, double *se, double *rho_out,
                                size_t *m_out, stagecal_error *err)
{
    double tbar, ybar;
    size_t m = finite_means(t, y, n, &tbar, &ybar);
    if (m < 3)
        return error_set(err, STAGECAL_EINVAL,
                         "window mean needs at least 3 finite samples, got %zu", m);
    double *buf = malloc(10 * m * sizeof *buf);
    if (!buf)
        return error_set(err, STAGECAL_ENOMEM, "out of memory (window mean)");
    struct poly_moments pm = {.m = m, .q = 2};
    double *yc = buf + 9 * m;
    for (size_t j = 0; j < 3; j++)
        pm.p[j] = buf + j * m, pm.lp[j] = buf + (3 + j) * m, pm.sp[j] = buf + (6 + j) * m;
    /* orthogonal columns on the centred time u: 1, u, u² − c0 − c1·u */
    double stt = 0, st3 = 0;
    for (size_t i = 0, k = 0; i < n; i++) {
        if (!(isfinite(y[i]) && isfinite(t[i])))
            continue;
        double u = t[i] - tbar;
        pm.p[0][k] = 1.0;
        pm.p[1][k] = u;
        yc[k++] = y[i] - ybar;
        stt += u * u;
        st3 += u * u * u;
    }
    double c0 = stt / (double)m, c1 = stt > 0 ? st3 / stt : 0.0, s22 = 0;
    for (size_t k = 0; k < m; k++) {
        double u = pm.p[1][k];
        pm.p[2][k] = u * u - c0 - c1 * u;
        s22 += pm.p[2][k] * pm.p[2][k];
    }
    /* the quadratic needs 5 samples and times that determine it; else the straight line
     * (and without a spread of times, the mean alone) */
    pm.q = stt > 0 ? (m >= 5 && s22 > 1e-12 * stt * stt / (double)m ? 3 : 2) : 1;
    for (size_t j = 0; j < pm.q; j++) {
        pm.g[j] = dot(pm.p[j], pm.p[j], m);
        for (size_t k = 0; k < m; k++)
            pm.lp[j][k] =
                0.5 * ((k > 0 ? pm.p[j][k - 1] : 0.0) + (k + 1 < m ? pm.p[j][k + 1] : 0.0));
    }
    for (size_t j = 0; j < pm.q; j++)
        for (size_t k = 0; k < pm.q; k++)
            pm.plp[j][k] = dot(pm.p[j], pm.lp[k], m);
    /* residuals (yc becomes e), their sum of squares and lag-1 sum */
    for (size_t j = 1; j < pm.q; j++) {
        double c = dot(pm.p[j], yc, m) / pm.g[j];
        for (size_t k = 0; k < m; k++)
            yc[k] -= c * pm.p[j][k];
    }
    double ss = dot(yc, yc, m), sl = 0;
    for (size_t k = 1; k < m; k++)
        sl += yc[k] * yc[k - 1];
    double rho = isfinite(rho_in)     ? fmin(fmax(rho_in, 0.0), RHO_MAX)
                 : ss > 0 && m > pm.q ? poly_solve_rho(&pm, sl / ss)
                                      : 0.0;
    double a = (double)(m - pm.q), b;
    if (isfinite(rho) && rho > 0)
        poly_ab(&pm, rho, &a, &b);
    free(buf);
    if (!isfinite(rho))
        return error_set(err, STAGECAL_ENOMEM, "out of memory (window mean's root finder)");
    double s = a > 0 ? sqrt(ss / a) : 0.0;
    if (s < u_floor)
        s = u_floor;
    *mean = ybar;
    *se = s * sqrt(ar1_sum(m, rho)) / (double)m;
    if (rho_out)
        *rho_out = rho;
    if (m_out)
        *m_out = m;
    return STAGECAL_OK;
}
