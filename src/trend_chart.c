/*
 * trend_chart.c — self-starting EWMA and CUSUM charts on Q statistics, and the CUSUM's
 * run lengths by a Markov chain (include/stagecal/chart.h).
 *
 * Workload: a chart holds tens to hundreds of points; each costs a t CDF and a normal
 * quantile. The ARL chain is an m×m LU solve (m ≈ 200), built on demand.
 */
#include "stagecal/chart.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <math.h>
#include <string.h>

#include "internal.h"

stagecal_chart_params stagecal_chart_default_params(void)
{
    stagecal_chart_params p = {0.2, 2.962, 0.5, 5.0};
    return p;
}

static int check_params(const stagecal_chart_params *par, stagecal_error *err)
{
    if (!(par->lambda > 0 && par->lambda <= 1 && isfinite(par->L) && par->L > 0))
        return error_set(
            err, STAGECAL_EINVAL,
            "EWMA design lambda %g, L %g is invalid (expected lambda in (0, 1], L > 0)",
            par->lambda, par->L);
    if (!(isfinite(par->k) && par->k >= 0 && isfinite(par->h) && par->h > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "CUSUM design k %g, h %g is invalid (expected k >= 0, h > 0)", par->k,
                         par->h);
    return STAGECAL_OK;
}

/* Normal score of a t statistic, from the nearer tail so that extreme T keep their
 * size. */
static double normal_score(double t, double dof)
{
    if (t < 0)
        return gsl_cdf_ugaussian_Pinv(gsl_cdf_tdist_P(t, dof));
    return gsl_cdf_ugaussian_Qinv(gsl_cdf_tdist_Q(t, dof));
}

int stagecal_chart_selfstart(const stagecal_trend_point *pts, size_t n,
                             const stagecal_chart_params *par, stagecal_chart_point *out,
                             size_t *n_alarms, stagecal_error *err)
{
    int rc;
    size_t na = 0;
    if (n_alarms)
        *n_alarms = 0;
    if ((rc = check_params(par, err)))
        return rc;
    for (size_t i = 0; i < n; i++)
        if (!(isfinite(pts[i].value) && isfinite(pts[i].se) && pts[i].se > 0))
            return error_set(err, STAGECAL_EINVAL,
                             "point %zu: value %g, se %g (expected finite, se > 0)", i + 1,
                             pts[i].value, pts[i].se);
    double limit = par->L * sqrt(par->lambda / (2 - par->lambda));
    /* running weighted sums: Σw, Σw·x and the weighted sum of squares about the mean
     * (Welford's update with weights, West 1979, CACM 22, 532–535) */
    double sw = 0, mean = 0, ss = 0, e = 0, chi = 0, clo = 0;
    for (size_t i = 0; i < n; i++) {
        stagecal_chart_point *o = &out[i];
        memset(o, 0, sizeof *o);
        double w = 1.0 / (pts[i].se * pts[i].se), x = pts[i].value;
        o->t_stat = NAN;
        o->q = NAN;
        if (i >= 2) {
            double dof = (double)i - 1; /* i points before, one mean: i − 1 dof */
            double phi = ss / dof;
            double s = sqrt(phi * (pts[i].se * pts[i].se + 1.0 / sw));
            o->started = 1;
            o->dof = dof;
            o->t_stat = s > 0 ? (x - mean) / s : 0;
            o->q = normal_score(o->t_stat, dof);
            e = par->lambda * o->q + (1 - par->lambda) * e;
            chi = fmax(0, chi + o->q - par->k);
            clo = fmax(0, clo - o->q - par->k);
            o->ewma_alarm = e < -limit ? -1 : e > limit ? 1 : 0;
            o->cusum_alarm = clo > par->h ? -1 : chi > par->h ? 1 : 0;
            na += o->ewma_alarm != 0 || o->cusum_alarm != 0;
        }
        o->ewma = e;
        o->cusum_hi = chi;
        o->cusum_lo = clo;
        double d = x - mean;
        sw += w;
        mean += w / sw * d;
        ss += w * d * (x - mean);
    }
    if (n_alarms)
        *n_alarms = na;
    return STAGECAL_OK;
}

/* One-sided upper CUSUM's ARL from 0 for X ~ N(shift, 1): states 0..m−1 at i·w,
 * w = 2h/(2m − 1); state 0 holds the atom at zero (Brook & Evans 1972). */
static int cusum_one(double k, double h, double shift, size_t m, double *arl, stagecal_error *err)
{
    double w = 2 * h / (2.0 * (double)m - 1);
    gsl_matrix *a = gsl_matrix_alloc(m, m);
    gsl_permutation *perm = gsl_permutation_alloc(m);
    gsl_vector *ones = gsl_vector_alloc(m), *x = gsl_vector_alloc(m);
    int rc = STAGECAL_OK;
    if (!a || !perm || !ones || !x) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory for a %zu-state chain", m);
        goto done;
    }
    for (size_t i = 0; i < m; i++) {
        double c = (double)i * w;
        for (size_t j = 0; j < m; j++) {
            double hi = (double)j * w + 0.5 * w - c + k - shift;
            double p;
            if (j == 0) {
                p = gsl_cdf_ugaussian_P(hi);
            } else {
                double lo = hi - w;
                p = lo > 0 ? gsl_cdf_ugaussian_Q(lo) - gsl_cdf_ugaussian_Q(hi)
                           : gsl_cdf_ugaussian_P(hi) - gsl_cdf_ugaussian_P(lo);
            }
            gsl_matrix_set(a, i, j, (i == j ? 1.0 : 0.0) - p);
        }
    }
    gsl_vector_set_all(ones, 1.0);
    int signum, g = gsl_linalg_LU_decomp(a, perm, &signum);
    if (g == GSL_SUCCESS)
        g = gsl_linalg_LU_solve(a, perm, ones, x);
    if (g != GSL_SUCCESS)
        rc = error_set(err, STAGECAL_EINTERNAL, "CUSUM ARL solve failed: %s", gsl_strerror(g));
    else
        *arl = gsl_vector_get(x, 0);
done:
    gsl_vector_free(x);
    gsl_vector_free(ones);
    gsl_permutation_free(perm);
    gsl_matrix_free(a);
    return rc;
}

int stagecal_chart_cusum_arl(double k, double h, double shift, size_t m_states, double *arl,
                             stagecal_error *err)
{
    if (!(isfinite(k) && k >= 0 && isfinite(h) && h > 0 && isfinite(shift)))
        return error_set(err, STAGECAL_EINVAL,
                         "CUSUM k %g, h %g, shift %g are invalid (expected k >= 0, h > 0)", k, h,
                         shift);
    if (m_states < 11 || m_states % 2 == 0 || m_states > 2001)
        return error_set(err, STAGECAL_EINVAL,
                         "Markov chain size %zu is invalid (expected an odd number in [11, 2001])",
                         m_states);
    double up, down;
    int rc = cusum_one(k, h, shift, m_states, &up, err);
    if (rc == STAGECAL_OK)
        rc = cusum_one(k, h, -shift, m_states, &down, err);
    if (rc == STAGECAL_OK)
        *arl = 1.0 / (1.0 / up + 1.0 / down);
    return rc;
}
