/*
 * evidence.c — the unit of evidence (see stagecal/evidence.h): a window's
 * autocorrelation-aware means, its stage count and standard error, the builder that
 * turns a run log's windows into evidence, and the regression points.
 *
 * Logged samples minutes apart are strongly autocorrelated, so a window's N samples
 * carry far fewer than N independent pieces of information. The window mean's standard
 * error uses the effective sample size of an AR(1) process, n_eff = n·(1 − ρ1)/(1 + ρ1),
 * ρ1 the lag-1 autocorrelation of the detrended series (Wilks, Statistical Methods in the
 * Atmospheric Sciences, 3rd ed. 2011, eq. 5.12; also Bayley & Hammersley 1946 — citations
 * from memory; the means, their statistics and the pooling are in evidence_mean.c). ρ1 is
 * pooled per analyser over the windows (stagecal_evidence_pool_rho):
 * with each window's own ρ1 the 95 % intervals covered 0.937–0.940, pooled 0.947–0.949
 * (20 000 synthetic calibrations, tests/tool_coverage.c, docs/calibration.md §5).
 *
 * The stage count of a window is the mean of the inversions of locally smoothed
 * compositions at the carried sample times, not the mean of the per-sample counts: the
 * latter is biased by the count's curvature in xB for noisy samples near a pinch, and
 * its standard error (independent samples) is a lower bound (docs/calibration.md §3).
 *
 * The window statistics (the smoother as a matrix, its residuals' moments, the pooled
 * lag-1 autocorrelation) are in evidence_stats.c.
 */
#include "stagecal/evidence.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "evidence_internal.h"
#include "holdup_internal.h"
#include "internal.h"
#include "parallel.h"
#include "stagecal/stages.h"

/* The local quadratic smoother of evidence_stats.c applied to y, one local fit at a time with
 * GSL's multifit (SVD): the stage count's own numerics, kept as they were so that a
 * calibration's numbers do not move with the statistics' matrix form (which agrees to
 * rounding). Returns 0, or −1 when GSL fails. */
static int smooth_quadratic(const double *t, const double *y, size_t n, double *out)
{
    size_t k = n < SMOOTH_POINTS ? n : SMOOTH_POINTS;
    gsl_matrix *x = gsl_matrix_alloc(k, 3), *cov = gsl_matrix_alloc(3, 3);
    gsl_vector *c = gsl_vector_alloc(3);
    gsl_multifit_linear_workspace *w = gsl_multifit_linear_alloc(k, 3);
    int rc = (x && cov && c && w) ? 0 : -1;
    for (size_t j = 0; j < n && rc == 0; j++) {
        size_t lo = j >= k / 2 ? j - k / 2 : 0;
        if (lo + k > n)
            lo = n - k;
        double tb = t[j], ts = 0, chisq;
        for (size_t i = lo; i < lo + k; i++)
            ts = fmax(ts, fabs(t[i] - tb));
        if (!(ts > 0))
            ts = 1;
        for (size_t i = 0; i < k; i++) {
            double u = (t[lo + i] - tb) / ts;
            gsl_matrix_set(x, i, 0, 1);
            gsl_matrix_set(x, i, 1, u);
            gsl_matrix_set(x, i, 2, u * u);
        }
        gsl_vector_const_view yv = gsl_vector_const_view_array(y + lo, k);
        if (gsl_multifit_linear(x, &yv.vector, c, cov, &chisq, w) != GSL_SUCCESS)
            rc = -1;
        else
            out[j] = gsl_vector_get(c, 0); /* the quadratic at u = 0, i.e. at t[j] */
    }
    gsl_multifit_linear_free(w);
    gsl_vector_free(c);
    gsl_matrix_free(cov);
    gsl_matrix_free(x);
    return rc;
}

/* The inversion under the window's conditions (physics.h), or the plain one. */
static int window_invert(const stagecal_vle *vle, double murphree, const stagecal_evidence *ev,
                         double xd, double xb, const stagecal_stages_params *sp,
                         stagecal_stages_result *res, stagecal_error *err)
{
    if (ev->cond)
        return stagecal_physics_invert(ev->cond, xd, xb, murphree, sp, res, err);
    return stagecal_stages_invert(vle, xd, xb, ev->r, murphree, sp, res, err);
}

int stagecal_evidence_stages(const stagecal_vle *vle, double murphree, stagecal_evidence *ev,
                             stagecal_error *err)
{
    stagecal_stages_params sp = stagecal_stages_default_params();
    stagecal_stages_result res;
    int rc;
    sp.want_sensitivities = 1;
    ev->stages_ok = 0;
    ev->stages = 0;
    ev->se_stages = 0;
    if (!(ev->xd > 0 && ev->xd < 1 && ev->xb > 0 && ev->xb < ev->xd))
        return STAGECAL_OK;
    if ((rc = window_invert(vle, murphree, ev, ev->xd, ev->xb, &sp, &res, err)))
        return rc;
    if (res.status != STAGECAL_STAGES_OK)
        return STAGECAL_OK;
    /* the standard errors of what is inverted: the smoothed compositions' mean when the
     * window statistics were built from the smoother, else the plain means' */
    double a = res.dstages_dxd * (ev->se_sxd > 0 ? ev->se_sxd : ev->u_xd);
    double b = res.dstages_dxb * (ev->se_sxb > 0 ? ev->se_sxb : ev->u_xb);
    double c = isfinite(ev->r) ? res.dstages_dr * ev->u_r : 0.0; /* u(R) of the set point */
    double value = res.stages;
    if (ev->m >= 3 && ev->s_t && ev->s_xd && ev->s_xb) {
        /* follow the drift: invert the smoothed trends at every sample time */
        double sd[EV_MAX_SMOOTH], sb[EV_MAX_SMOOTH], sum = 0;
        size_t m = ev->m < EV_MAX_SMOOTH ? ev->m : EV_MAX_SMOOTH;
        if (smooth_quadratic(ev->s_t, ev->s_xd, m, sd) ||
            smooth_quadratic(ev->s_t, ev->s_xb, m, sb))
            return error_set(err, STAGECAL_EINTERNAL, "window trend fit failed");
        sp.want_sensitivities = 0;
        for (size_t j = 0; j < m; j++) {
            if (!(sd[j] > 0 && sd[j] < 1 && sb[j] > 0 && sb[j] < sd[j]))
                return STAGECAL_OK;
            if ((rc = window_invert(vle, murphree, ev, sd[j], sb[j], &sp, &res, err)))
                return rc;
            if (res.status != STAGECAL_STAGES_OK)
                return STAGECAL_OK;
            sum += res.stages;
        }
        value = sum / (double)m;
    }
    ev->stages = value;
    ev->se_stages = sqrt(a * a + b * b + c * c);
    ev->stages_ok = ev->se_stages > 0 && isfinite(ev->se_stages);
    return STAGECAL_OK;
}

size_t stagecal_evidence_points(const stagecal_evidence *ev, size_t nev, double *buf,
                                stagecal_regress_data *data)
{
    size_t n = 0;
    int any_load = 1;
    for (size_t i = 0; i < nev; i++) {
        if (!ev[i].stages_ok) /* stages_ok implies a finite se > 0 */
            continue;
        buf[n] = ev[i].r;
        buf[nev + n] = ev[i].has_load ? ev[i].f_load : 0;
        buf[2 * nev + n] = ev[i].stages;
        buf[3 * nev + n] = ev[i].se_stages;
        any_load &= ev[i].has_load;
        n++;
    }
    data->n = n;
    data->r = buf;
    data->f_load = any_load ? buf + nev : NULL;
    data->stages = buf + 2 * nev;
    data->sigma = buf + 3 * nev;
    return n;
}

/* ---- the evidence of a run log ------------------------------------------------------ */

/* Largest max_samples: the stage count smooths at most 64 samples. */
#define EV_MAX_SAMPLES 64

stagecal_evidence_params stagecal_evidence_default_params(void)
{
    /* one initializer: a member added later starts as 0/NULL, never as stack garbage
     * (skip_run once did, and invert read through it; found by the fuzz corpus replay) */
    return (stagecal_evidence_params){.max_samples = 24,
                                      .min_ok = 3,
                                      .noise = STAGECAL_EVIDENCE_NOISE_LINE_POOLED,
                                      .holdup = STAGECAL_EVIDENCE_HOLDUP_AUTO,
                                      .physics = 1,
                                      .tobit_means = 1};
}

void stagecal_evidence_set_free(stagecal_evidence_set *set)
{
    if (!set)
        return;
    evidence_physics_free(set);
    free(set->ev);
    free(set->samples);
    free(set->rows);
    free(set->cens);
    free(set->cens_samples);
    free(set->cens_flags);
    memset(set, 0, sizeof *set);
}

const stagecal_evidence *stagecal_evidence_find(const stagecal_evidence_set *set, size_t k)
{
    for (size_t i = 0; set && i < set->n; i++)
        if (set->ev[i].window == k)
            return &set->ev[i];
    return NULL;
}

/* Keeps up to cap of the window's len samples with finite xd and xb and 0 < xb < xd < 1,
 * evenly spread over the finite ones, in s_t/s_xd/s_xb; returns how many. */
static size_t thin_samples(const double *t, const double *xd, const double *xb, size_t len,
                           size_t cap, double *s_t, double *s_xd, double *s_xb)
{
    size_t nfin = 0, ms = 0;
    for (size_t j = 0; j < len; j++)
        nfin += isfinite(xd[j]) && isfinite(xb[j]);
    for (size_t j = 0, kf = 0; j < len && ms < cap; j++) {
        if (!(isfinite(xd[j]) && isfinite(xb[j])))
            continue;
        /* keep the k-th finite sample when it is the next of an even spread */
        if ((nfin <= cap || kf * cap / nfin == ms) && xb[j] > 0 && xd[j] < 1 && xb[j] < xd[j]) {
            s_t[ms] = t[j];
            s_xd[ms] = xd[j];
            s_xb[ms] = xb[j];
            ms++;
        }
        kf++;
    }
    return ms;
}

/* Window w's means, load and carried samples into e; 1 when the window is evidence (at
 * least 3 finite compositions of each analyser). t, xd, xb, f are scratch of the
 * window's length; s_* receive the carried samples. */
static int window_summary(const stagecal_runlog *log, const double *xd_src,
                          const stagecal_runlog_result *res, const stagecal_uncertainty *u,
                          size_t k, size_t cap, double *t, double *xd, double *xb, double *f,
                          double *s, const double *quad_rho, int tobit_q, double *tb,
                          signed char *dir, stagecal_evidence *e)
{
    const stagecal_runlog_window *w = &res->windows[k];
    size_t len = w->last - w->first + 1, nok = 0, nf = 0, ncd = 0, ncb = 0;
    double fsum = 0;
    for (size_t j = 0; j < len; j++) {
        size_t i = w->first + j;
        int outlier = (res->flags[i] & STAGECAL_SAMPLE_OUTLIER) != 0;
        ncd += log->xd_cens[i] != STAGECAL_CENSOR_NONE;
        ncb += log->xb_cens[i] != STAGECAL_CENSOR_NONE;
        t[j] = log->t_s[i];
        /* a censored reading is not a value: left out here; the Tobit trend below takes
         * censored xD readings as censored observations (docs/runlog.md); xD is the
         * holdup-compensated one (evidence_physics.c) */
        xd[j] = outlier || log->xd_cens[i] ? NAN : xd_src[i];
        xb[j] = outlier || log->xb_cens[i] ? NAN : log->xb[i];
        f[j] = res->f_factor[i];
        if (!outlier && res->status[i] == STAGECAL_STAGES_OK)
            nok++;
        if (isfinite(f[j])) {
            fsum += f[j];
            nf++;
        }
    }
    /* censored xD readings as censored observations (tb non-NULL): the Tobit trend of the
     * window (the straight line, or the quadratic of QUAD_POOLED) completes the series with
     * their conditional expectations, so the mean below is the trend's level; the carried
     * samples are the trend itself. Kept only when the trend stays inside (0, 1); otherwise
     * (e.g. nearly every reading at the bound) the censored readings stay left out. */
    int tobit = 0;
    double ratio = 1;
    if (tb && ncd > 0) {
        double *yr = tb, *trend = tb + len, *yc = xd;
        size_t nc = 0;
        for (size_t j = 0; j < len; j++) {
            size_t i = w->first + j;
            int c = log->xd_cens[i];
            int use = !(res->flags[i] & STAGECAL_SAMPLE_OUTLIER) && isfinite(xd_src[i]);
            yr[j] = use ? (c ? log->xd[i] : xd_src[i]) : NAN;
            dir[j] = (signed char)(!use || !c ? 0 : c == STAGECAL_CENSOR_ABOVE ? 1 : -1);
            nc += dir[j] != 0;
        }
        if (nc > 0 && stagecal_evidence_tobit(t, yr, dir, len, tobit_q, tb + 2 * len, trend, &ratio,
                                              NULL) == STAGECAL_OK) {
            tobit = 1;
            for (size_t j = 0; j < len; j++)
                tobit &= !isfinite(trend[j]) || (trend[j] > 0 && trend[j] < 1);
        }
        if (tobit)
            for (size_t j = 0; j < len; j++)
                yc[j] = tb[2 * len + j];
    }
    memset(e, 0, sizeof *e);
    e->xd_tobit = tobit;
    e->window = k;
    e->run = w->run;
    e->first = w->first;
    e->last = w->last;
    e->n_samples = len;
    e->n_ok = nok;
    e->n_cens_xd = ncd;
    e->n_cens_xb = ncb;
    e->total_reflux = w->total_reflux;
    e->r = w->total_reflux ? INFINITY : w->r_mean; /* the set point (runlog_setpoint.c) */
    e->u_r = w->total_reflux ? 0.0 : w->u_r;
    e->t_mid_s = 0.5 * (log->t_s[w->first] + log->t_s[w->last]);
    e->t_first_s = log->t_s[w->first];
    e->t_last_s = log->t_s[w->last];
    if (nf * 2 >= len && nf > 0) {
        e->has_load = 1;
        e->f_load = fsum / (double)nf;
    }
    if (quad_rho) { /* STAGECAL_EVIDENCE_NOISE_QUAD_POOLED: ρ given (pooled) or NAN (own) */
        int a = stagecal_evidence_mean_quad(t, xd, len, u->xd, quad_rho[0], &e->xd, &e->u_xd,
                                            &e->rho_xd, &e->m_xd, NULL);
        int b = a ? a
                  : stagecal_evidence_mean_quad(t, xb, len, u->xb, quad_rho[1], &e->xb, &e->u_xb,
                                                &e->rho_xb, &e->m_xb, NULL);
        if (a == STAGECAL_ENOMEM || b == STAGECAL_ENOMEM)
            return -1;
        if (a || b)
            return 0;
    } else if (stagecal_evidence_mean_rho(t, xd, len, u->xd, &e->xd, &e->u_xd, &e->rho_xd, &e->m_xd,
                                          NULL) != STAGECAL_OK ||
               stagecal_evidence_mean_rho(t, xb, len, u->xb, &e->xb, &e->u_xb, &e->rho_xb, &e->m_xb,
                                          NULL) != STAGECAL_OK)
        return 0; /* too few usable compositions: not evidence */
    if (tobit) {
        e->u_xd *= sqrt(ratio); /* the information the censoring costs */
        for (size_t j = 0; j < len; j++)
            xd[j] = tb[len + j];
    }
    e->s_t = s;
    e->s_xd = s + cap;
    e->s_xb = s + 2 * cap;
    e->m = thin_samples(t, xd, xb, len, cap, s, s + cap, s + 2 * cap);
    return 1;
}

/* The smaller of an estimated σ and a stated u, either of which may be 0 (not known). */
static double noise_cap(double sd, double stated)
{
    return stated > 0 && !(sd > 0 && sd < stated) ? stated : sd;
}

/* What each entry takes from the rows (set->rows, EV_ROWS numbers an entry): the summed extra
 * variance of the holdup compensation, the variance of the window mean's slope error
 * (holdup_window_slope_var), the mean logged pressure and reflux temperature (NAN: none). */
enum { ROW_U2 = 0, ROW_VS, ROW_P, ROW_T, EV_ROWS };

struct rows_job {
    const stagecal_runlog *log;
    const stagecal_column *col;
    stagecal_evidence_set *set;
    const double *u2, *gs; /* the compensation's variance and gain per row */
};

/* Entry k's numbers from the rows (set->rows alone: parallel.h). */
static int window_rows(void *ctx, size_t k, size_t worker, stagecal_error *err)
{
    const struct rows_job *j = ctx;
    const stagecal_runlog *log = j->log;
    const stagecal_evidence *e = &j->set->ev[k];
    double *a = j->set->rows + EV_ROWS * k, u2m = 0, vs = 0, ps = 0, ts = 0;
    size_t np = 0, nt = 0;
    (void)worker;
    for (size_t i = e->first; i <= e->last; i++)
        u2m += isfinite(j->u2[i]) ? j->u2[i] : 0;
    if (holdup_window_slope_var(log, e->first, e->last, j->gs, j->col->u.xd, &vs) != STAGECAL_OK)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t i = e->first; i <= e->last; i++) {
        if (log->p_pa && isfinite(log->p_pa[i]))
            ps += log->p_pa[i], np++;
        if (log->t_reflux_k && isfinite(log->t_reflux_k[i]))
            ts += log->t_reflux_k[i], nt++;
    }
    a[ROW_U2] = u2m;
    a[ROW_VS] = vs;
    a[ROW_P] = np ? ps / (double)np : NAN;
    a[ROW_T] = nt ? ts / (double)nt : NAN;
    return STAGECAL_OK;
}

struct window_job {
    const stagecal_column *col;
    double murphree;
    const stagecal_evidence_params *par;
    stagecal_evidence_set *set;
};

/* Window k's error of xD with the compensation's, and its stage count (set->ev[k] alone, so
 * the windows can share threads: parallel.h). */
static int window_count(void *ctx, size_t k, size_t worker, stagecal_error *err)
{
    const struct window_job *j = ctx;
    stagecal_evidence *e = &j->set->ev[k];
    const double *a = j->set->rows + EV_ROWS * k;
    (void)worker;
    /* the holdup's (or the time constant's) uncertainty is common to the window: add its
     * mean variance; the slope noise's error is local in time, so its part is that of the
     * window's mean (holdup_window_slope_var; as a common error it had stated the R = 3
     * windows' xD error about twice too large on the holdup study: docs/methods.md) */
    e->u_xd = sqrt(e->u_xd * e->u_xd + a[ROW_U2] / (double)(e->last - e->first + 1) + a[ROW_VS]);
    int rc = stagecal_evidence_stages(j->col->system.vle, j->murphree, e, err);
    if (rc != STAGECAL_OK)
        return rc;
    if (e->n_ok < j->par->min_ok)
        e->stages_ok = 0; /* too few samples of the window invert on their own */
    return STAGECAL_OK;
}

/* params checked, defaults filled in. */
static int check_params(const stagecal_evidence_params *params, stagecal_evidence_params *par,
                        stagecal_error *err)
{
    *par = params ? *params : stagecal_evidence_default_params();
    if (par->max_samples < 1 || par->max_samples > EV_MAX_SAMPLES)
        return error_set(err, STAGECAL_EINVAL, "evidence: max_samples %zu (expected 1 to %d)",
                         par->max_samples, EV_MAX_SAMPLES);
    return STAGECAL_OK;
}

int evidence_build_windows(const stagecal_runlog *log, const stagecal_runlog_result *res,
                           const stagecal_column *col, const stagecal_evidence_params *params,
                           int cens, stagecal_evidence_set *set, stagecal_error *err)
{
    stagecal_evidence_params par;
    memset(set, 0, sizeof *set);
    if (!log || !res || !col || !col->system.vle)
        return error_set(err, STAGECAL_EINVAL,
                         "evidence: needs a run log, its analysis and a "
                         "column with an equilibrium model");
    int rc = check_params(params, &par, err);
    if (rc != STAGECAL_OK)
        return rc;
    size_t nw = res->nwindows, maxlen = 0, cap = par.max_samples;
    for (size_t k = 0; k < nw; k++) {
        size_t len = res->windows[k].last - res->windows[k].first + 1;
        maxlen = len > maxlen ? len : maxlen;
    }
    set->ev = calloc(nw ? nw : 1, sizeof *set->ev);
    set->samples = malloc((nw ? nw : 1) * 3 * cap * sizeof *set->samples);
    set->rows = malloc((nw ? nw : 1) * EV_ROWS * sizeof *set->rows);
    double *buf = malloc((maxlen ? maxlen : 1) * 7 * sizeof *buf);
    signed char *dir = malloc(maxlen ? maxlen : 1);
    double *xd_src = malloc((log->n ? log->n : 1) * 3 * sizeof *xd_src);
    double *u2 = xd_src ? xd_src + log->n : NULL, *gs = xd_src ? xd_src + 2 * log->n : NULL;
    if (!set->ev || !buf || !set->samples || !set->rows || !xd_src || !dir) {
        free(buf), free(xd_src), free(dir);
        stagecal_evidence_set_free(set);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    rc = evidence_holdup(log, col, &par, set, xd_src, u2, gs, err);
    /* QUAD_POOLED: each window's own ρ first, then again at ρ pooled per analyser over the
     * windows (weighted by lag pairs, as stagecal_evidence_pool_rho), which also sets σ² =
     * RSS/A(ρ) at the pooled ρ */
    int quad = par.noise == STAGECAL_EVIDENCE_NOISE_QUAD_POOLED ||
               par.noise == STAGECAL_EVIDENCE_NOISE_QUAD_STATS;
    int tobit_q = par.noise == STAGECAL_EVIDENCE_NOISE_QUAD_POOLED ? 3 : 2;
    double qrho[2] = {NAN, NAN};
    for (int pass = 0; pass < 1 + quad && rc == STAGECAL_OK; pass++) {
        set->n = 0;
        for (size_t k = 0; k < nw && rc == STAGECAL_OK; k++) {
            if (par.skip_run && par.skip_run[res->windows[k].run])
                continue;
            int ok = window_summary(
                log, xd_src, res, &col->u, k, cap, buf, buf + maxlen, buf + 2 * maxlen,
                buf + 3 * maxlen, set->samples + 3 * cap * set->n, quad ? qrho : NULL, tobit_q,
                par.tobit_means ? buf + 4 * maxlen : NULL, dir, &set->ev[set->n]);
            if (ok < 0)
                rc = error_set(err, STAGECAL_ENOMEM, "out of memory (window means)");
            set->n += ok > 0;
        }
        double w[2] = {0, 0}, r[2] = {0, 0};
        for (size_t k = 0; k < set->n; k++) {
            const stagecal_evidence *e = &set->ev[k];
            w[0] += e->m_xd >= 2 ? (double)(e->m_xd - 1) : 0.0;
            r[0] += e->m_xd >= 2 ? (double)(e->m_xd - 1) * e->rho_xd : 0.0;
            w[1] += e->m_xb >= 2 ? (double)(e->m_xb - 1) : 0.0;
            r[1] += e->m_xb >= 2 ? (double)(e->m_xb - 1) * e->rho_xb : 0.0;
        }
        for (int a = 0; a < 2; a++)
            qrho[a] = w[a] > 0 ? r[a] / w[a] : NAN;
    }
    free(buf), free(dir);
    if (rc == STAGECAL_OK) {
        struct rows_job j = {log, col, set, u2, gs};
        rc = parallel_for(set->n, par.threads, window_rows, &j, err);
    }
    if (rc == STAGECAL_OK && cens)
        rc = evidence_collect_cens(log, xd_src, res, cap, set, err);
    free(xd_src);
    return rc;
}

int evidence_build_finish(const stagecal_column *col, double murphree,
                          const stagecal_evidence_params *params, stagecal_evidence_set *set,
                          stagecal_error *err)
{
    stagecal_evidence_params par;
    int rc = check_params(params, &par, err);
    if (rc == STAGECAL_OK && par.physics)
        rc = evidence_conditions(col, set, set->rows + ROW_P, set->rows + ROW_T, EV_ROWS, err);
    if (rc != STAGECAL_OK)
        return rc;
    /* One ρ per analyser for all windows (docs/calibration.md §3), then the stage counts,
     * which propagate the standard errors. */
    if (par.noise == STAGECAL_EVIDENCE_NOISE_LINE_POOLED)
        stagecal_evidence_pool_rho(set->ev, set->n);
    for (size_t k = 0; k < set->n; k++) {
        stagecal_evidence *e = &set->ev[k];
        /* n_eff of the pot analyser series: how many independent samples the window holds */
        e->n_eff = fmax(1.0, (double)e->m_xb * (1 - e->rho_xb) / (1 + e->rho_xb));
    }
    rc = par.noise == STAGECAL_EVIDENCE_NOISE_SMOOTHER
             ? stagecal_evidence_window_stats(set->ev, set->n, col->u.xd, col->u.xb, err)
             : stagecal_evidence_noise_sd(set->ev, set->n, err);
    /* the reading noise for the composition fit's convexity correction: the smaller of the
     * estimate and the analyser's stated uncertainty (the estimate's failure is upward: with
     * strongly correlated noise the pooled ρ can sit at its bound and σ then comes out several
     * times too large) */
    for (size_t k = 0; k < set->n; k++) {
        stagecal_evidence *e = &set->ev[k];
        e->sd_xd = noise_cap(e->sd_xd, stagecal_runlog_u_xd(col, e->xd));
        e->sd_xb = noise_cap(e->sd_xb, stagecal_runlog_u_xb(col, e->xb));
    }
    if (rc == STAGECAL_OK) {
        struct window_job j = {col, murphree, &par, set};
        rc = parallel_for(set->n, par.threads, window_count, &j, err);
    }
    if (rc == STAGECAL_OK)
        evidence_fill_cens(set);
    return rc;
}

int stagecal_evidence_build(const stagecal_runlog *log, const stagecal_runlog_result *res,
                            const stagecal_column *col, double murphree,
                            const stagecal_evidence_params *params, stagecal_evidence_set *set,
                            stagecal_error *err)
{
    int rc = evidence_build_windows(log, res, col, params, 1, set, err);
    return rc == STAGECAL_OK ? evidence_build_finish(col, murphree, params, set, err) : rc;
}

/* *dst grown to hold n entries of size sz (*cap entries now; doubling). -1 on failure. */
static int grow(void *dst, size_t *cap, size_t n, size_t sz)
{
    void **d = dst;
    if (n <= *cap && *d)
        return 0;
    size_t c = *cap ? *cap : 64;
    while (c < n)
        c *= 2;
    void *p = realloc(*d, c * sz);
    if (!p)
        return -1;
    *d = p;
    *cap = c;
    return 0;
}

int evidence_set_append(stagecal_evidence_set *dst, evidence_caps *caps,
                        const stagecal_evidence_set *src, size_t cap, size_t run,
                        size_t window_base, size_t row_base, stagecal_error *err)
{
    size_t n = dst->n + src->n, nc = dst->ncens + src->ncens, nr = dst->nruns + src->nruns;
    if (grow(&dst->ev, &caps->ev, n, sizeof *dst->ev) ||
        grow(&dst->samples, &caps->samples, 3 * cap * n, sizeof *dst->samples) ||
        grow(&dst->rows, &caps->rows, EV_ROWS * n, sizeof *dst->rows) ||
        grow(&dst->cens, &caps->cens, nc, sizeof *dst->cens) ||
        grow(&dst->cens_samples, &caps->cens_samples, 3 * cap * nc, sizeof *dst->cens_samples) ||
        grow(&dst->cens_flags, &caps->cens_flags, cap * nc, 1) ||
        grow(&dst->tau, &caps->tau, nr, sizeof *dst->tau))
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    stagecal_evidence *e = dst->ev + dst->n, *c = dst->cens + dst->ncens;
    memcpy(e, src->ev, src->n * sizeof *e);
    memcpy(c, src->cens, src->ncens * sizeof *c);
    for (size_t i = 0; i < src->n + src->ncens; i++) {
        stagecal_evidence *x = i < src->n ? &e[i] : &c[i - src->n];
        x->window += window_base;
        x->run = run;
        x->first += row_base;
        x->last += row_base;
        x->s_t = x->s_xd = x->s_xb = NULL; /* (evidence_set_point) */
        x->s_cens = NULL;
    }
    if (src->n) {
        memcpy(dst->samples + 3 * cap * dst->n, src->samples, 3 * cap * src->n * sizeof(double));
        memcpy(dst->rows + EV_ROWS * dst->n, src->rows, EV_ROWS * src->n * sizeof(double));
    }
    if (src->ncens) {
        memcpy(dst->cens_samples + 3 * cap * dst->ncens, src->cens_samples,
               3 * cap * src->ncens * sizeof(double));
        memcpy(dst->cens_flags + cap * dst->ncens, src->cens_flags, cap * src->ncens);
    }
    if (src->nruns)
        memcpy(dst->tau + dst->nruns, src->tau, src->nruns * sizeof *dst->tau);
    dst->n = n;
    dst->ncens = nc;
    dst->nruns = nr;
    dst->n_settling += src->n_settling;
    dst->holdup_kind = src->holdup_kind;
    return STAGECAL_OK;
}

int evidence_set_point(stagecal_evidence_set *set, size_t cap, stagecal_error *err)
{
    /* the storage the empty set's entries would have had */
    if ((!set->ev && !(set->ev = calloc(1, sizeof *set->ev))) ||
        (!set->samples && !(set->samples = malloc(3 * cap * sizeof *set->samples))) ||
        (!set->rows && !(set->rows = malloc(EV_ROWS * sizeof *set->rows))) ||
        (!set->tau && !(set->tau = calloc(1, sizeof *set->tau))))
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t i = 0; i < set->n; i++) {
        stagecal_evidence *e = &set->ev[i];
        e->s_t = set->samples + 3 * cap * i;
        e->s_xd = e->s_t + cap;
        e->s_xb = e->s_t + 2 * cap;
    }
    for (size_t i = 0; i < set->ncens; i++) {
        stagecal_evidence *e = &set->cens[i];
        e->s_t = set->cens_samples + 3 * cap * i;
        e->s_xd = e->s_t + cap;
        e->s_xb = e->s_t + 2 * cap;
        e->s_cens = set->cens_flags + cap * i;
    }
    return STAGECAL_OK;
}

/* σ in stage space (what a planner's prediction band needs): the scatter of the windows
 * with stage counts about the curve, with its degrees of freedom m − p (0, 0 when m ≤ p). */
void evidence_stage_scatter(const stagecal_evidence *ev, size_t n, const stagecal_form *form,
                            const double *theta, double *sigma, double *dof)
{
    double ss = 0;
    size_t m = 0;
    for (size_t i = 0; i < n; i++) {
        double v;
        if (!ev[i].stages_ok ||
            stagecal_form_eval(form, theta, ev[i].r, ev[i].f_load, &v, NULL) != STAGECAL_OK)
            continue;
        ss += (ev[i].stages - v) * (ev[i].stages - v);
        m++;
    }
    *dof = m > form->p ? (double)(m - form->p) : 0;
    *sigma = *dof > 0 ? sqrt(ss / *dof) : 0;
}
