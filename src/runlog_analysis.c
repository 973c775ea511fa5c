/*
 * runlog_analysis.c — what a run log says about itself, before and after the
 * stage inversion: the Rayleigh pot balance per run (closure error, gross errors,
 * analyser drift, reconciled xB) and the quasi-steady windows.
 *
 * Pot balance (Rayleigh; column holdup neglected). The light holdup
 * h = W·xB + ∫ xD d(−W) is conserved: h_k = W_k·xB_k + I_k with I_k the
 * trapezoid integral of xD over the holdup removed up to sample k. The closure
 * error of a run is (h_0 − h_n)/h_0. The reconciled pot composition is
 * xB_rec,k = (Ĥ − I_k)/W_k, Ĥ the median of the h_k: anchoring at the first
 * sample alone would carry that sample's noise, amplified by W_0/W_k, into every
 * reconciled value. e_k = xB_k − xB_rec,k is white noise when W, xD and xB agree;
 * a gross error makes single e_k large. An xB analyser reading xB + d·t adds
 * W_k·d·t_k to h_k, so d is the slope of a weighted straight-line fit of h_k on
 * W_k·t_k (GSL gsl_fit_wlinear). See docs/methods.md.
 *
 * Quasi-steady windows. Cao & Rhinehart's ratio of variances (Cao & Rhinehart 1995, "An efficient
 * method for on-line identification of steady state", J. Process Control 5) needs a signal that is
 * stationary at steady state. In a batch run xD and xB are not: they fall as the pot is depleted,
 * and the statistic would call a whole run transient. It is therefore applied to (a) the per-sample
 * effective stages, which are stationary while the column is quasi-steady and move during start-up
 * and after reflux changes, and (b) the balance residual e_k (xB with the batch trend removed).
 * A change of the reflux set point (log->r_set, runlog_setpoint.c: a measured R that scatters
 * within its noise keeps its set point) starts a transient outright. Hysteresis: steady after every
 * signal's R < r_enter, transient again when any R > r_leave.
 */
#include "stagecal/runlog.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_fit.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "stagecal/stages.h"
#include "runlog_internal.h"

stagecal_runlog_analysis_params stagecal_runlog_analysis_default_params(void)
{
    return (stagecal_runlog_analysis_params){.lambda1 = 0.2,
                                             .lambda2 = 0.1,
                                             .lambda3 = 0.1,
                                             .r_enter = 1.44,
                                             .r_leave = 2.5,
                                             .warmup = 15,
                                             .min_window = 6,
                                             .warmup_s = 0,
                                             .min_window_s = 0,
                                             .gross_sigmas = 3.0,
                                             .drift_t = 4.0,
                                             .drift_u = 2.0,
                                             .outlier_sigmas = 4.0,
                                             .no_distillate_t = 2.0,
                                             .drift_sign_z = 3.0,
                                             .boilup_sigmas = 3.0,
                                             .holdup = -1};
}

/* The R-statistic filters from sample `from` on, with the state (xf, prev, v2, d2) after
 * the samples before it; r[i − 1] receives the statistic after sample i, a missing sample
 * repeats the last value. */
static void rstat_from(const double *x, size_t from, size_t n, double l1, double l2, double l3,
                       double floor_var, double xf, double prev, double v2, double d2, double last,
                       double *r)
{
    for (size_t i = from; i < n; i++) {
        if (isnan(x[i])) {
            r[i - 1] = last;
            continue;
        }
        double dv = x[i] - xf;
        v2 = l2 * dv * dv + (1.0 - l2) * v2;
        xf = l1 * x[i] + (1.0 - l1) * xf;
        double dd = x[i] - prev;
        d2 = l3 * dd * dd + (1.0 - l3) * d2;
        prev = x[i];
        double num = (2.0 - l1) * v2 + 2.0 * floor_var, den = d2 + 2.0 * floor_var;
        /* 0/0 (a constant signal without a floor) carries no evidence of change */
        last = den > 0 ? num / den : (num > 0 ? 1e300 : 1.0);
        r[i - 1] = last;
    }
}

int stagecal_runlog_rstat(const double *x, size_t n, double l1, double l2, double l3,
                          double floor_var, double *r, stagecal_error *err)
{
    if (!(l1 > 0 && l1 <= 1 && l2 > 0 && l2 <= 1 && l3 > 0 && l3 <= 1) || !(floor_var >= 0))
        return error_set(err, STAGECAL_EINVAL,
                         "filter factors must lie in (0, 1] and the floor be >= 0");
    if (n < 2)
        return error_set(err, STAGECAL_EINVAL, "the R-statistic needs at least 2 samples");
    size_t i = 0;
    while (i < n && isnan(x[i])) /* start at the first present sample */
        r[i > 0 ? i - 1 : 0] = 1.0, i++;
    if (i >= n)
        return STAGECAL_OK;
    rstat_from(x, i + 1, n, l1, l2, l3, floor_var, x[i], x[i], 0.0, 0.0, 1.0, r);
    return STAGECAL_OK;
}

/* 1 when rstat_restart at sample w restarts (its state needs at least two successive pairs
 * among the len samples before w, the last of them present); it reads x[0..w) only. */
static int restart_possible(const double *x, size_t w, size_t len)
{
    if (w < 2 || len < 3 || isnan(x[w - 1]))
        return 0;
    size_t np = 0;
    for (size_t i = w - (len < w ? len : w) + 1; i < w; i++)
        np += !isnan(x[i]) && !isnan(x[i - 1]);
    return np >= 2;
}

/* Restarts the R-statistic of a run's signal x[0..n) at the end of the warm-up (sample w),
 * with the filter state estimated from the last len warm-up samples instead of carried
 * through the whole warm-up: the mean as the filtered value, their variance about it
 * (× 2/(2 − λ1), its steady-state expectation relative to σ²) as v², the mean squared
 * difference of successive samples as δ². A stretch still moving at the end of the
 * warm-up reads as moving at once (its variance about the mean exceeds half the squared
 * differences); a settled one reads R ≈ 1 at once instead of after the filters forget the
 * start-up ramp, which takes about ln(ramp²/σ²)/λ2 samples — five hours of a ten-hour
 * batch logged every 10 minutes (the demo's first batches of February 2025 had no window).
 * Leaves r as it is when fewer than 2 successive pairs of the len samples are present. */
static void rstat_restart(const double *x, size_t n, size_t w, size_t len,
                          const stagecal_runlog_analysis_params *par, double floor_var, double *r)
{
    if (w < 2 || w >= n || len < 3)
        return;
    size_t a = w - (len < w ? len : w), k = 0, np = 0;
    double mean = 0, prev = NAN, ss = 0, dd = 0;
    for (size_t i = a; i < w; i++) {
        if (isnan(x[i])) {
            prev = NAN;
            continue;
        }
        k++;
        double dm = x[i] - mean;
        mean += dm / (double)k;
        ss += dm * (x[i] - mean); /* Welford */
        if (!isnan(prev)) {
            dd += (x[i] - prev) * (x[i] - prev);
            np++;
        }
        prev = x[i];
    }
    if (np < 2 || isnan(prev))
        return;
    double l1 = par->lambda1, v2 = 2.0 / (2.0 - l1) * ss / (double)(k - 1), d2 = dd / (double)np;
    double num = (2.0 - l1) * v2 + 2.0 * floor_var, den = d2 + 2.0 * floor_var;
    r[w - 1] = den > 0 ? num / den : (num > 0 ? 1e300 : 1.0);
    rstat_from(x, w, n, l1, par->lambda2, par->lambda3, floor_var, mean, prev, v2, d2, r[w - 1], r);
}

void result_free_members(stagecal_runlog_result *res)
{
    free(res->flags);
    free(res->window);
    free(res->xb_rec);
    free(res->status);
    free(res->note);
    free(res->stages);
    free(res->u_stages);
    free(res->lv);
    free(res->f_factor);
    free(res->dn_dxd);
    free(res->dn_dxb);
    free(res->windows);
    free(res->closures);
    memset(res, 0, sizeof *res);
}

void stagecal_runlog_result_free(stagecal_runlog_result *res)
{
    if (res)
        result_free_members(res);
}

/* Closure, reconciliation, outliers and drift of one run. */
static int close_run(const stagecal_runlog *log, const stagecal_column *col, size_t k,
                     const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                     double *h, double *e, double *t_h, size_t *idx)
{
    const stagecal_runlog_run *run = &log->runs[k];
    stagecal_runlog_closure *c = &res->closures[k];
    double uw = col ? col->u.w_mol : 0, uxd = col ? col->u.xd : 0, uxb = col ? col->u.xb : 0;
    memset(c, 0, sizeof *c);
    c->run = k;
    runlog_drift_clear(c);
    runlog_boilup(log, col, par, res, k);
    /* u(W): stated, else the load-cell noise estimated from the run's W (e is scratch here) */
    c->u_w_estimated = !(uw > 0);
    if (!(uw > 0))
        uw = runlog_noise_sd(log->w_mol + run->first, run->n, e);
    c->u_w_mol = uw;
    size_t m = 0;
    double integral = 0.0;
    for (size_t i = run->first; i < run->first + run->n; i++) {
        res->xb_rec[i] = NAN;
        if (!(isfinite(log->w_mol[i]) && isfinite(log->xd[i]) && isfinite(log->xb[i])))
            continue;
        if (m > 0) {
            size_t j = idx[m - 1];
            integral += 0.5 * (log->xd[i] + log->xd[j]) * (log->w_mol[j] - log->w_mol[i]);
        }
        idx[m] = i;
        h[m] = log->w_mol[i] * log->xb[i] + integral +
               runlog_holdup_light(col, log->xd[i], log->xb[i]);
        t_h[m] = log->t_s[i] / 3600.0;
        m++;
    }
    c->n_used = m;
    if (m < 3 || !(h[0] > 0))
        return STAGECAL_OK;
    c->closure = (h[0] - h[m - 1]) / h[0];
    /* First-order propagation through h_0 − h_n (independent errors). */
    double var = 0.0;
    for (size_t a = 0; a < m; a++) {
        size_t i = idx[a];
        double xdp = a > 0 ? log->xd[idx[a - 1]] : log->xd[i];
        double xdn = a + 1 < m ? log->xd[idx[a + 1]] : log->xd[i];
        double wp = a > 0 ? log->w_mol[idx[a - 1]] : log->w_mol[i];
        double wn = a + 1 < m ? log->w_mol[idx[a + 1]] : log->w_mol[i];
        double dw = 0.5 * (xdp - xdn); /* interior: ∂(h0 − hn)/∂W_a */
        if (a == 0)
            dw = log->xb[i] - 0.5 * (log->xd[i] + xdn);
        else if (a == m - 1)
            dw = -log->xb[i] + 0.5 * (log->xd[i] + xdp);
        double dxd = -0.5 * (wp - wn);
        double dxb = a == 0 ? log->w_mol[i] : (a == m - 1 ? -log->w_mol[i] : 0.0);
        var += dw * dw * uw * uw + dxd * dxd * uxd * uxd + dxb * dxb * uxb * uxb;
    }
    c->u_closure = sqrt(var) / h[0];
    c->gross = c->u_closure > 0 && fabs(c->closure) > par->gross_sigmas * c->u_closure;

    /* Anchor: median of the conserved holdup (robust to single bad samples). */
    memcpy(e, h, m * sizeof *e);
    double anchor = runlog_median(e, m);
    for (size_t a = 0; a < m; a++) {
        size_t i = idx[a];
        double integ = h[a] - log->w_mol[i] * log->xb[i];
        res->xb_rec[i] = (anchor - integ) / log->w_mol[i];
        e[a] = log->xb[i] - res->xb_rec[i];
    }
    /* Noise scale of xB: the stated u(xB), else a MAD scale of the residuals. */
    double s = uxb;
    if (!(s > 0)) {
        double *tmp = h; /* h is no longer needed */
        for (size_t a = 0; a < m; a++)
            tmp[a] = fabs(e[a]);
        s = 1.4826 * runlog_median(tmp, m);
    }
    if (!(s > 0))
        return STAGECAL_OK; /* a noiseless, perfectly closing run: nothing to flag */
    /* Drift: an analyser reading xB + d·t adds W_k·d·t_k to h_k, so fit h = H + d·W·t
     * (weights 1/(W·s)²; the covariance is scaled up by χ²/dof when the scatter exceeds
     * the stated noise). Two passes: fit, flag samples off the fit by more than
     * outlier_sigmas·s (gross errors), refit without them. */
    double *x = malloc(m * sizeof *x), *y = malloc(m * sizeof *y), *wt = malloc(m * sizeof *wt);
    if (!x || !y || !wt) {
        free(x), free(y), free(wt);
        return STAGECAL_ENOMEM;
    }
    /* With a stated u(xB), a sample's scale also holds the load-cell noise: an error δ in
     * W_k moves h_k by δ·(xB_k − xD_k) (first order), i.e. xB by δ·(xB_k − xD_k)/W_k. (The
     * MAD scale of the residuals already holds it.) sk[a] is that scale. */
    double *sk = malloc(m * sizeof *sk);
    if (!sk) {
        free(x), free(y), free(wt);
        return STAGECAL_ENOMEM;
    }
    for (size_t a = 0; a < m; a++) {
        size_t i = idx[a];
        double w = log->w_mol[i];
        double integ = anchor - res->xb_rec[i] * w;           /* I_k, recovered */
        x[a] = w * (log->t_s[i] - log->t_s[idx[0]]) / 3600.0; /* t from the run's start */
        y[a] = w * log->xb[i] + integ;                        /* h_k */
        double sw = uxb > 0 ? uw * (log->xd[i] - log->xb[i]) / w : 0.0;
        sk[a] = sqrt(s * s + sw * sw);
        wt[a] = 1.0 / (w * sk[a] * w * sk[a]);
    }
    double c0, c1, cov00, cov01, cov11, chisq;
    size_t q = m;
    for (int pass = 0; pass < 2; pass++) {
        if (q < 3 || gsl_fit_wlinear(x, 1, wt, 1, y, 1, q, &c0, &c1, &cov00, &cov01, &cov11,
                                     &chisq) != GSL_SUCCESS) {
            q = 0;
            break;
        }
        if (pass == 1)
            break;
        size_t kept = 0;
        for (size_t a = 0; a < m; a++) {
            size_t i = idx[a];
            double w = log->w_mol[i];
            if (fabs(y[a] - c0 - c1 * x[a]) / w > par->outlier_sigmas * sk[a]) {
                res->flags[i] |= STAGECAL_SAMPLE_OUTLIER;
                c->n_outliers++;
                continue;
            }
            x[kept] = x[a], y[kept] = y[a], wt[kept] = wt[a];
            kept++;
        }
        if (kept == q) /* no outlier: the refit is the same fit of the same numbers */
            break;
        q = kept;
    }
    if (q >= 3 && isfinite(c1) && isfinite(cov11)) {
        double scale = chisq / (double)(q - 2);
        if (scale > 1)
            cov11 *= scale;
        double span = (log->t_s[idx[m - 1]] - log->t_s[idx[0]]) / 3600.0;
        c->drift_per_h = c1;
        c->u_drift_per_h = sqrt(cov11);
        int big = uxb > 0 ? fabs(c1) * span > par->drift_u * uxb : 1;
        c->drift = c->u_drift_per_h > 0 && fabs(c1) > par->drift_t * c->u_drift_per_h && big;
        /* the balance alone cannot tell the analysers apart (runlog_drift.c does, with the
         * stage counts, after the inversion) */
        c->drift_analyser = c->drift ? STAGECAL_DRIFT_UNATTRIBUTED : STAGECAL_DRIFT_NONE;
    }
    free(x), free(y), free(wt), free(sk);
    return STAGECAL_OK;
}

static void *alloc_n(size_t n, size_t size)
{
    return calloc(n ? n : 1, size);
}

int stagecal_runlog_analyse(const stagecal_runlog *log, const stagecal_column *col,
                            const stagecal_runlog_analysis_params *params,
                            stagecal_runlog_result *res, stagecal_error *err)
{
    stagecal_runlog_analysis_params par =
        params ? *params : stagecal_runlog_analysis_default_params();
    memset(res, 0, sizeof *res);
    size_t n = log->n;
    res->n = n;
    res->nruns = log->nruns;
    res->flags = alloc_n(n, 1);
    res->window = alloc_n(n, sizeof *res->window);
    res->xb_rec = alloc_n(n, sizeof(double));
    res->status = alloc_n(n, 1);
    res->note = alloc_n(n, 1);
    res->stages = alloc_n(n, sizeof(double));
    res->u_stages = alloc_n(n, sizeof(double));
    res->lv = alloc_n(n, sizeof(double));
    res->f_factor = alloc_n(n, sizeof(double));
    res->dn_dxd = alloc_n(n, sizeof(double));
    res->dn_dxb = alloc_n(n, sizeof(double));
    res->closures = alloc_n(log->nruns, sizeof *res->closures);
    size_t maxrun = 0;
    for (size_t k = 0; k < log->nruns; k++)
        if (log->runs[k].n > maxrun)
            maxrun = log->runs[k].n;
    double *h = alloc_n(maxrun, sizeof *h), *e = alloc_n(maxrun, sizeof *e),
           *t = alloc_n(maxrun, sizeof *t);
    size_t *idx = alloc_n(maxrun, sizeof *idx);
    if (!res->flags || !res->window || !res->xb_rec || !res->status || !res->note || !res->stages ||
        !res->u_stages || !res->lv || !res->f_factor || !res->dn_dxd || !res->dn_dxb ||
        !res->closures || !h || !e || !t || !idx) {
        free(h), free(e), free(t), free(idx);
        result_free_members(res);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    for (size_t i = 0; i < n; i++) {
        res->window[i] = -1;
        res->f_factor[i] = NAN;
    }
    int rc = STAGECAL_OK;
    for (size_t k = 0; k < log->nruns && rc == STAGECAL_OK; k++)
        rc = close_run(log, col, k, &par, res, h, e, t, idx);
    free(h), free(e), free(t), free(idx);
    if (rc != STAGECAL_OK) {
        result_free_members(res);
        return error_set(err, rc, "out of memory");
    }
    return STAGECAL_OK;
}

/* Median of a[0..n) (a is reordered): GSL's selection, linear time (runlog_median); the same
 * double as sorting and gsl_stats_median_from_sorted_data (both average the two middle values
 * when n is even), and a sort was 13 % of run-log inversion at 10^6 rows. */
static double median_inplace(double *a, size_t n)
{
    return runlog_median(a, n);
}

void runlog_mark_no_distillate(const stagecal_runlog *log,
                               const stagecal_runlog_analysis_params *par,
                               stagecal_runlog_result *res, double *t, double *w)
{
    for (size_t k = 0; k < log->nruns; k++) {
        const stagecal_runlog_run *run = &log->runs[k];
        size_t i = run->first, end = run->first + run->n, warmup, min_window;
        runlog_run_samples(log, par, k, t, &warmup, &min_window);
        while (i < end) {
            size_t j = i + 1;
            while (j < end && runlog_rset(log, j) == runlog_rset(log, i))
                j++;
            if (isfinite(runlog_rset(log, i)) && j - i >= min_window) {
                size_t nn = 0;
                for (size_t a = i; a < j; a++)
                    if (isfinite(log->w_mol[a]) && isfinite(log->t_s[a])) {
                        t[nn] = log->t_s[a];
                        w[nn] = log->w_mol[a];
                        nn++;
                    }
                double c0, c1, c00, c01, c11, ss;
                /* the holdup does not fall: slope within no_distillate_t standard errors of
                 * zero (an exactly constant W has c11 = 0 and c1 = 0) */
                if (nn >= 3 &&
                    gsl_fit_linear(t, 1, w, 1, nn, &c0, &c1, &c00, &c01, &c11, &ss) ==
                        GSL_SUCCESS &&
                    fabs(c1) <= par->no_distillate_t * sqrt(c11))
                    for (size_t a = i; a < j; a++)
                        res->flags[a] |= STAGECAL_SAMPLE_TOTAL_REFLUX;
            }
            i = j;
        }
    }
}

/* Median spacing of run k's finite times [s] (0 when it has fewer than 2); tmp holds the
 * run's length. */
static double run_spacing(const stagecal_runlog *log, size_t k, double *tmp)
{
    const stagecal_runlog_run *run = &log->runs[k];
    size_t q = 0;
    for (size_t i = run->first + 1; i < run->first + run->n; i++) {
        double d = log->t_s[i] - log->t_s[i - 1];
        if (isfinite(d) && d > 0)
            tmp[q++] = d;
    }
    return q ? median_inplace(tmp, q) : 0.0;
}

/* ceil(span/dt) samples, at most n + 1. */
static size_t samples_in(double span_s, double dt, size_t n)
{
    double k = ceil(span_s / dt - 1e-9);
    return k < (double)n + 1 ? (size_t)k : n + 1;
}

void runlog_run_samples(const stagecal_runlog *log, const stagecal_runlog_analysis_params *par,
                        size_t k, double *tmp, size_t *warmup, size_t *min_window)
{
    size_t n = log->runs[k].n;
    double dt = par->warmup_s > 0 || par->min_window_s > 0 ? run_spacing(log, k, tmp) : 0.0;
    /* the sample defaults, capped for short runs: a warm-up of a third of the run and a
     * window of an eighth (at least 4 samples) still leave a short batch a window
     * (common practice, no source) */
    size_t w = par->warmup < n / 3 ? par->warmup : n / 3;
    size_t m = par->min_window < n / 8 ? par->min_window : n / 8;
    if (m < 4)
        m = par->min_window < 4 ? par->min_window : 4;
    /* (a duration over a run's spacing can exceed every size_t, e.g. 1 h over spacings of
     * 1e-300 s: converting that is undefined; a warm-up or window longer than the run is the
     * run's length plus one, which leaves it as long as any longer one would) */
    if (par->warmup_s > 0 && dt > 0)
        w = samples_in(par->warmup_s, dt, n);
    if (par->min_window_s > 0 && dt > 0) {
        m = samples_in(par->min_window_s, dt, n);
        m = m < 3 ? 3 : m;
    }
    *warmup = w;
    *min_window = m;
}

/* 1 when run row i (from the run's first row f) starts a new reflux set point: its set point
 * differs from the last one logged before it (rows without an R, whose set point is NaN, are
 * passed over, so a missing reading is not a change). */
static int setpoint_changes(const stagecal_runlog *log, size_t f, size_t i)
{
    double rs = runlog_rset(log, f + i);
    if (isnan(rs))
        return 0;
    for (size_t j = i; j-- > 0;) {
        double rp = runlog_rset(log, f + j);
        if (!isnan(rp))
            return !(rs == rp);
    }
    return 0;
}

/* The sample at which the R-statistic restarts after a change of the reflux set point at
 * sample c: a warm-up after it, as after the start of the run (the column's response to the
 * change — a holdup's lag — is waited out as the start-up's is), unless the warm-up's own
 * restart already takes its state from a window length of samples after the change (a change
 * early in the start-up). A restart a window length after the change (6 samples) was tried:
 * on the invented demo scenario's logs, whose distillate follows a 20-min lag, it read the
 * stage count at high R low (median z -0.26 against -0.15 at R = 5 over 200 data sets,
 * docs/calibration.md §5). */
static size_t restart_after(size_t c, size_t warmup, size_t min_window)
{
    return c + min_window > warmup ? c + warmup : warmup;
}

/* Restarts the R-statistic r of the run's signal x[0..m) after every change of the reflux set
 * point (changes[i] = setpoint_changes at sample i; restart_after), as at the end of the warm-up
 * (rstat_restart), in order, each restart recomputing r from its sample on. Carried through the
 * change, the filters kept the old set point's level: the statistic fell below r_enter only once
 * the lagging filtered value caught up with the new level, and sooner where the noise of the latest
 * samples pointed back towards the old one, so a window's first samples were chosen by the sign of
 * their noise (measured: docs/calibration.md §5b). */
static void rstat_restart_changes(const unsigned char *changes, const double *x, size_t m,
                                  size_t warmup, size_t min_window,
                                  const stagecal_runlog_analysis_params *par, double floor_var,
                                  double *r)
{
    /* each restart runs only up to the next one that takes place (a log whose R changes at
     * every row would otherwise cost a pass over the rest of the run per row) */
    size_t pending = 0;
    for (size_t i = 1; i < m; i++) {
        size_t p = restart_after(i, warmup, min_window);
        if (!changes[i] || !(p > warmup && p < m) || !restart_possible(x, p, min_window))
            continue;
        if (pending)
            rstat_restart(x, p, pending, min_window, par, floor_var, r);
        pending = p;
    }
    if (pending)
        rstat_restart(x, m, pending, min_window, par, floor_var, r);
}

int runlog_windows(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   stagecal_error *err)
{
    size_t maxrun = 0;
    for (size_t k = 0; k < log->nruns; k++)
        if (log->runs[k].n > maxrun)
            maxrun = log->runs[k].n;
    double *sig = alloc_n(maxrun, sizeof *sig), *ra = alloc_n(maxrun, sizeof *ra),
           *rb = alloc_n(maxrun, sizeof *rb), *tmp = alloc_n(maxrun, sizeof *tmp);
    unsigned char *chg = alloc_n(maxrun, sizeof *chg); /* the run's set-point changes */
    if (!sig || !ra || !rb || !tmp || !chg) {
        free(sig), free(ra), free(rb), free(tmp), free(chg);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    free(res->windows);
    res->windows = NULL;
    res->nwindows = 0;
    size_t wcap = 0;
    double uxb = col ? col->u.xb : 0;
    int rc = STAGECAL_OK;
    for (size_t k = 0; k < log->nruns && rc == STAGECAL_OK; k++) {
        const stagecal_runlog_run *run = &log->runs[k];
        size_t f = run->first, m = run->n, warmup, min_window;
        if (m < 2)
            continue;
        runlog_run_samples(log, par, k, tmp, &warmup, &min_window);
        for (size_t i = 0; i < m; i++)
            chg[i] = (unsigned char)setpoint_changes(log, f, i);
        /* (a) stages: floor = median u(stages)² of the run */
        size_t q = 0;
        for (size_t i = 0; i < m; i++) {
            int ok = res->status[f + i] == 0;
            sig[i] = ok ? res->stages[f + i] : NAN;
            if (ok)
                tmp[q++] = res->u_stages[f + i];
        }
        double us = q ? median_inplace(tmp, q) : 0.0;
        stagecal_runlog_rstat(sig, m, par->lambda1, par->lambda2, par->lambda3, us * us + 1e-12, ra,
                              NULL);
        rstat_restart(sig, m, warmup, min_window, par, us * us + 1e-12, ra);
        rstat_restart_changes(chg, sig, m, warmup, min_window, par, us * us + 1e-12, ra);
        /* (b) balance residual of xB */
        for (size_t i = 0; i < m; i++)
            sig[i] = isnan(res->xb_rec[f + i]) || (res->flags[f + i] & STAGECAL_SAMPLE_OUTLIER)
                         ? NAN
                         : log->xb[f + i] - res->xb_rec[f + i];
        stagecal_runlog_rstat(sig, m, par->lambda1, par->lambda2, par->lambda3, uxb * uxb + 1e-12,
                              rb, NULL);
        rstat_restart(sig, m, warmup, min_window, par, uxb * uxb + 1e-12, rb);
        rstat_restart_changes(chg, sig, m, warmup, min_window, par, uxb * uxb + 1e-12, rb);
        int steady = 0;
        size_t settled = warmup; /* the first sample that may be steady */
        for (size_t i = 0; i < m; i++) {
            size_t row = f + i;
            double rmax = i == 0 ? HUGE_VAL : fmax(ra[i - 1], rb[i - 1]);
            double rs = runlog_rset(log, row), rp = i > 0 ? runlog_rset(log, row - 1) : rs;
            int reflux_change = i > 0 && !(rs == rp) && !(isnan(rs) && isnan(rp));
            if (chg[i])
                settled = restart_after(i, warmup, min_window);
            if (i < warmup) {
                res->flags[row] |= STAGECAL_SAMPLE_WARMUP;
                steady = 0;
            } else if (reflux_change || i < settled ||
                       res->status[row] == STAGECAL_STAGES_INVALID) {
                /* A sample at a pinch does not end a window: near a lean pot the analyser
                 * noise alone decides which samples pinch, and dropping them would select
                 * the windows by the sign of the noise (a bias in the fit). */
                steady = 0;
            } else if (steady && rmax > par->r_leave) {
                steady = 0;
            } else if (!steady && rmax < par->r_enter) {
                steady = 1;
            }
            if (steady)
                res->flags[row] |= STAGECAL_SAMPLE_STEADY;
            if (isinf(log->r[row]))
                res->flags[row] |= STAGECAL_SAMPLE_TOTAL_REFLUX;
        }
        /* Windows: maximal stretches of steady samples with the same reflux. */
        size_t i = 0;
        while (i < m) {
            size_t row = f + i;
            if (!(res->flags[row] & STAGECAL_SAMPLE_STEADY)) {
                i++;
                continue;
            }
            size_t j = i + 1;
            while (j < m && (res->flags[f + j] & STAGECAL_SAMPLE_STEADY) &&
                   runlog_rset(log, f + j) == runlog_rset(log, row))
                j++;
            if (j - i >= min_window) {
                if (res->nwindows == wcap) {
                    size_t nc = wcap ? 2 * wcap : 64;
                    stagecal_runlog_window *nw = realloc(res->windows, nc * sizeof *nw);
                    if (!nw) {
                        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
                        break;
                    }
                    res->windows = nw;
                    wcap = nc;
                }
                stagecal_runlog_window *w = &res->windows[res->nwindows];
                memset(w, 0, sizeof *w);
                w->run = k;
                w->first = row;
                w->last = f + j - 1;
                for (size_t a = 0; a < j - i; a++)
                    tmp[a] = log->r[row + a];
                w->r_median = median_inplace(tmp, j - i);
                w->r_mean = runlog_rset(log, row); /* the set point (runlog_setpoint.c) */
                w->u_r = log->u_r_set ? log->u_r_set[row] : 0.0;
                /* R = inf, or no distillate (runlog_mark_no_distillate) */
                w->total_reflux =
                    isinf(w->r_median) || (res->flags[row] & STAGECAL_SAMPLE_TOTAL_REFLUX) != 0;
                /* the window's stage count is the evidence module's (evidence.h) */
                for (size_t a = 0; a < j - i; a++) {
                    res->window[row + a] = (int32_t)res->nwindows;
                    if (res->status[row + a] == 0)
                        w->n_ok++;
                }
                res->nwindows++;
            }
            i = j;
        }
    }
    free(sig), free(ra), free(rb), free(tmp), free(chg);
    return rc;
}
