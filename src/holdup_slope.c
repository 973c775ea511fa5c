/*
 * holdup_slope.c — dxD/dt by local quadratics over time for the holdup compensation
 * (src/holdup.c, src/holdup_refine.c), and the variance its slope noise gives a window's mean
 * (src/holdup_internal.h; docs/methods.md, "Column holdup").
 *
 * Workload: one 3×3 least-squares solve per row and local quadratic; a window's slope variance
 * is one weight vector per row (tens of rows each) accumulated into one sum.
 */
#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_linalg.h>

#include "holdup_internal.h"
#include "internal.h"
#include "runlog_internal.h"

/* Slope at t[c] of the least-squares quadratic through (t[j], x[j]), j in [a, b] with finite
 * values; NAN when fewer than 3 such points or the fit is singular. *se: its standard error
 * from σ²·[(AᵀA)⁻¹]₁₁, σ the residual standard deviation (n − 3 degrees of freedom) with the
 * analyser's u as a floor (u alone when n = 3). */
double holdup_local_slope(const double *t, const double *x, size_t a, size_t b, size_t c, double u,
                          double *se, double *value)
{
    double s[5] = {0}, r[3] = {0}, scale = 0;
    size_t m = 0;
    *se = NAN;
    for (size_t j = a; j <= b; j++)
        if (isfinite(x[j]) && isfinite(t[j]))
            scale = fmax(scale, fabs(t[j] - t[c])), m++;
    if (m < 3 || !(scale > 0))
        return NAN;
    for (size_t j = a; j <= b; j++) {
        if (!isfinite(x[j]) || !isfinite(t[j]))
            continue;
        double v = (t[j] - t[c]) / scale, p = 1;
        for (int k = 0; k < 5; k++, p *= v)
            s[k] += p;
        r[0] += x[j], r[1] += x[j] * v, r[2] += x[j] * v * v;
    }
    double a3[9] = {s[0], s[1], s[2], s[1], s[2], s[3], s[2], s[3], s[4]}, inv[9];
    gsl_matrix_view mv = gsl_matrix_view_array(a3, 3, 3), iv = gsl_matrix_view_array(inv, 3, 3);
    gsl_vector_view rv = gsl_vector_view_array(r, 3);
    double cbuf[3];
    gsl_vector_view cv = gsl_vector_view_array(cbuf, 3);
    gsl_permutation *perm = gsl_permutation_alloc(3);
    int sign;
    double slope = NAN;
    if (perm && gsl_linalg_LU_decomp(&mv.matrix, perm, &sign) == GSL_SUCCESS &&
        fabs(gsl_linalg_LU_det(&mv.matrix, sign)) > 1e-12 &&
        gsl_linalg_LU_solve(&mv.matrix, perm, &rv.vector, &cv.vector) == GSL_SUCCESS &&
        gsl_linalg_LU_invert(&mv.matrix, perm, &iv.matrix) == GSL_SUCCESS) {
        slope = cbuf[1] / scale;
        if (value)
            *value = cbuf[0];
        double rss = 0;
        for (size_t j = a; j <= b; j++) {
            if (!isfinite(x[j]) || !isfinite(t[j]))
                continue;
            double v = (t[j] - t[c]) / scale, e = x[j] - (cbuf[0] + cbuf[1] * v + cbuf[2] * v * v);
            rss += e * e;
        }
        double s2 = m > 3 ? rss / (double)(m - 3) : 0;
        s2 = fmax(s2, u * u);
        *se = sqrt(s2 * fmax(inv[4], 0)) / scale;
    }
    gsl_permutation_free(perm);
    return slope;
}

void holdup_row_range(const stagecal_runlog *log, size_t s, size_t e, size_t i, double half_s,
                      size_t min_side, size_t *a, size_t *b)
{
    *a = i, *b = i;
    while (*a > s && (i - *a < min_side || log->t_s[i] - log->t_s[*a - 1] <= half_s))
        (*a)--;
    while (*b + 1 < e && (*b - i < min_side || log->t_s[*b + 1] - log->t_s[i] <= half_s))
        (*b)++;
}

/* Weights w[k − a], k in [a, b], with Σ w·x = the slope at t[c] of the least-squares quadratic
 * through the points (t[k], x[k]) (holdup_local_slope's); x NULL: every point, else those with x
 * and t finite (the others weigh 0). 0 when fewer than 3 or singular. */
int holdup_slope_weights(const double *t, const double *x, size_t a, size_t b, size_t c, double *w)
{
    double sm[5] = {0}, scale = 0;
    size_t m = 0;
    for (size_t k = a; k <= b; k++)
        if (!x || (isfinite(x[k]) && isfinite(t[k])))
            scale = fmax(scale, fabs(t[k] - t[c])), m++;
    if (m < 3 || !(scale > 0))
        return 0;
    for (size_t k = a; k <= b; k++) {
        if (x && !(isfinite(x[k]) && isfinite(t[k])))
            continue;
        double v = (t[k] - t[c]) / scale, q = 1;
        for (int j = 0; j < 5; j++, q *= v)
            sm[j] += q;
    }
    double m3[9] = {sm[0], sm[1], sm[2], sm[1], sm[2], sm[3], sm[2], sm[3], sm[4]}, inv[9];
    gsl_matrix_view mv = gsl_matrix_view_array(m3, 3, 3), iv = gsl_matrix_view_array(inv, 3, 3);
    gsl_permutation *perm = gsl_permutation_alloc(3);
    int sign, ok = perm && gsl_linalg_LU_decomp(&mv.matrix, perm, &sign) == GSL_SUCCESS &&
                   fabs(gsl_linalg_LU_det(&mv.matrix, sign)) > 1e-12 &&
                   gsl_linalg_LU_invert(&mv.matrix, perm, &iv.matrix) == GSL_SUCCESS;
    gsl_permutation_free(perm);
    if (!ok)
        return 0;
    for (size_t k = a; k <= b; k++) {
        double v = (t[k] - t[c]) / scale;
        w[k - a] = x && !(isfinite(x[k]) && isfinite(t[k]))
                       ? 0.0
                       : (inv[3] + inv[4] * v + inv[5] * v * v) / scale;
    }
    return 1;
}

/* The rows [s, e) of the stretch at one reflux set point of one run that holds row i. */
static void stretch_of(const stagecal_runlog *log, size_t i, size_t *s, size_t *e)
{
    size_t lo = 0, hi = log->n;
    for (size_t k = 0; k < log->nruns; k++)
        if (i >= log->runs[k].first && i < log->runs[k].first + log->runs[k].n)
            lo = log->runs[k].first, hi = lo + log->runs[k].n;
    double r = runlog_rset(log, i);
    *s = i, *e = i + 1;
    while (*s > lo && runlog_rset(log, *s - 1) == r)
        (*s)--;
    while (*e < hi && runlog_rset(log, *e) == r)
        (*e)++;
}

int holdup_window_slope_var(const stagecal_runlog *log, size_t first, size_t last, const double *gs,
                            double u_xd, double *var)
{
    *var = 0;
    if (!gs || !(u_xd > 0) || last < first || last >= log->n)
        return STAGECAL_OK;
    stagecal_holdup_params par = stagecal_holdup_default_params();
    size_t half = par.half_window < 1 ? 1 : par.half_window, s = 0, e = 0;
    double n = (double)(last - first + 1);
    /* Every row a local quadratic reaches lies in the stretches of the window's rows, so in
     * [span0, span1): the first row's stretch start to the last row's stretch end. Arrays of
     * that span, not of the whole log (one window of a year's log used to clear 5·10⁵ doubles). */
    size_t span0, span1, tmp;
    stretch_of(log, first, &span0, &tmp);
    stretch_of(log, last, &tmp, &span1);
    size_t span = span1 - span0;
    double *coef = calloc(span, sizeof *coef), *w = malloc(span * sizeof *w);
    if (!coef || !w) {
        free(coef), free(w);
        return STAGECAL_ENOMEM;
    }
    size_t lo = span1, hi = 0;
    for (size_t i = first; i <= last; i++) {
        if (!isfinite(gs[i]) || gs[i] == 0)
            continue;
        if (i < s || i >= e)
            stretch_of(log, i, &s, &e);
        size_t a, b;
        holdup_row_range(log, s, e, i, par.slope_half_s, half, &a, &b);
        if (!holdup_slope_weights(log->t_s, log->xd, a, b, i, w))
            continue;
        for (size_t k = a; k <= b; k++)
            coef[k - span0] += gs[i] * w[k - a] / n;
        lo = a < lo ? a : lo, hi = b > hi ? b : hi;
    }
    double ss = 0;
    for (size_t k = lo; k <= hi && k < span1; k++)
        ss += coef[k - span0] * coef[k - span0];
    *var = u_xd * u_xd * ss;
    free(coef), free(w);
    return STAGECAL_OK;
}
