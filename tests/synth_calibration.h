/*
 * synth_calibration.h — the synthetic calibration shared by tests/test_calibrate.c
 * (coverage assertion over 200 data sets) and tests/tool_coverage.c (the long coverage
 * study, docs/calibration.md §5).
 *
 * A known law, stages = a·(1 − exp(−b R)) with a = 10, b = 0.45 (a at total reflux),
 * constant α = 2, twelve windows from R = 1.2 to total reflux, analyser noise with an
 * exponential (continuous-time AR(1)) correlation, u(xD) = 0.0015, u(xB) = 0.0025. The
 * regime (struct synth_regime) sets the samples per window, the correlation per minute,
 * irregular sampling times, the distillate's purity and its analyser's noise, and a batch
 * drift: xD falls along a curve through the window
 * and xB follows it at the true stage count (the pot of a batch is never steady). The pot
 * compositions come from Smoker's closed-form inverse or Fenske at total reflux
 * (Fenske 1932; Smoker 1938; citations from memory), independently of the stepping code under test.
 * Each data set is fitted in stage space (stagecal_regress_fit) and in composition space
 * (stagecal_fit_composition, started from the stage-space estimate).
 *
 * Nothing here asserts: every library call that must not fail is reported by a
 * nonzero return, which the caller checks (cmocka in the test, exit status in the tool).
 */
#ifndef STAGECAL_SYNTH_CALIBRATION_H
#define STAGECAL_SYNTH_CALIBRATION_H

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "oracle_smoker.h"
#include "stagecal/calibrate.h"
#include "stagecal/stages.h"
#include "study_cov.h"

#define SYNTH_ALPHA 2.0
#define SYNTH_A 10.0
#define SYNTH_B 0.45
#define SYNTH_NQ 5 /* quantities: a, b, band at R = 1.5, 5, ∞ */

static const double synth_band_r[3] = {1.5, 5.0, INFINITY};
static const char *const synth_what[SYNTH_NQ] = {"a", "b", "band R=1.5", "band R=5", "band R=inf"};

/* Stationary AR(1) series of n samples: marginal sd sigma, lag-1 correlation rho. */
static inline void synth_ar1(gsl_rng *rng, double *e, size_t n, double sigma, double rho)
{
    e[0] = gsl_ran_gaussian(rng, sigma);
    for (size_t i = 1; i < n; i++)
        e[i] = rho * e[i - 1] + sqrt(1 - rho * rho) * gsl_ran_gaussian(rng, sigma);
}

/* Var of the mean of n AR(1) samples with lag-1 correlation ρ and marginal variance
 * σ²: (σ²/n)·[1 + 2 Σ_{k=1}^{n−1} (1 − k/n) ρ^k] (textbook result for a stationary
 * series, e.g. Wilks 2011 §5.2.4 — from memory). */
static inline double synth_ar1_var_mean(double sigma, double rho, size_t n)
{
    double s = 1;
    for (size_t k = 1; k < n; k++)
        s += 2 * (1 - (double)k / (double)n) * pow(rho, (double)k);
    return sigma * sigma / (double)n * s;
}

/* The saturating law: a·(1 − exp(−b r)), a at total reflux. */
static inline double synth_law(double a, double b, double r)
{
    return isinf(r) ? a : a * (1 - exp(-b * r));
}

/* True value of quantity q (0 a, 1 b, 2..4 the law at synth_band_r[q − 2]). */
static inline double synth_truth(int q)
{
    return q == 0 ? SYNTH_A : q == 1 ? SYNTH_B : synth_law(SYNTH_A, SYNTH_B, synth_band_r[q - 2]);
}

/* One fit's outcome per quantity: estimate, reported standard error, 95 % interval. */
struct synth_fit {
    int ok; /* the fit returned STAGECAL_OK */
    double est[SYNTH_NQ], se[SYNTH_NQ], lo[SYNTH_NQ], hi[SYNTH_NQ];
    double tq;   /* t quantile of the parameter intervals (mean over a and b) */
    double pdof; /* dof of the parameter intervals (mean over a and b) */
    double dof;  /* n − p */
    double s2;   /* residual variance factor s² = RSS/(n − p) */
    int pi_ok;   /* the prediction bands below were computed (composition-space fit) */
    double pi_lo[3], pi_hi[3];      /* 95 % prediction band at synth_band_r, as the model file's
                                       (σ the scatter function at R) */
    double pi1_lo[3], pi1_hi[3];    /* the same with one σ for every R (before format 4) */
    double pi_se[3], pi1_se[3];     /* their se_pred */
    double pi_sigma[3], pi_sdof[3]; /* σ of the scatter function at R and its dof (capped) */
    int pi_deg;                     /* coefficients of the scatter function (0: none) */
    double tr_res[12], tr_se[12];   /* the training windows' count − truth and stated se
                                       (NAN: no count), for the study's dump */
    int rt_tested;                  /* the runs-differ test (stagecal_run_test_fit on the
                                       stage-space fit, the windows dealt to synth_runs() runs
                                       as the clusters are) took the data set */
    double rt_p;                    /* its p (the errors are independent: H0 holds) */
};

/* The parameters' estimates and intervals, the t quantile the intervals use (half-width over
 * se: each parameter's own dof under hc2-bm, n − p otherwise) and its dof. */
static inline void synth_fill_params(const stagecal_regress_result *res, struct synth_fit *f)
{
    f->tq = f->pdof = 0;
    f->dof = res->dof;
    f->s2 = res->rss / res->dof;
    for (int i = 0; i < 2; i++) {
        f->est[i] = res->theta[i];
        f->se[i] = res->se[i];
        f->lo[i] = res->ci_low[i];
        f->hi[i] = res->ci_high[i];
        f->tq += 0.5 * (res->ci_high[i] - res->theta[i]) / res->se[i];
        f->pdof += 0.5 * res->param_dof[i];
    }
}

/* Fill f from a fit's θ, covariance and t quantile. cov_sigma is the σ argument of the
 * band (not used by the confidence band itself). Returns 0, or −1 when the band fails. */
static inline int synth_fill(const stagecal_form *form, const stagecal_regress_result *res,
                             double cov_sigma, struct synth_fit *f)
{
    f->ok = 1;
    synth_fill_params(res, f);
    for (int q = 0; q < 3; q++) {
        stagecal_band bd;
        if (stagecal_regress_band_clustered(form, res->theta, res->cov, cov_sigma, 1.0, res->dof,
                                            res->design, res->cluster, res->n, 0.95,
                                            synth_band_r[q], 0, &bd, NULL) != STAGECAL_OK)
            return -1;
        f->est[2 + q] = bd.value;
        f->se[2 + q] = bd.se_fit;
        f->lo[2 + q] = bd.ci_low;
        f->hi[2 + q] = bd.ci_high;
    }
    return 0;
}

/* How synth_one sets the window means' standard errors. */
enum synth_se_mode {
    SYNTH_SE_ESTIMATED = 0, /* as the calibration does: each window's s, the lag-1
                               autocorrelation pooled over the windows per analyser
                               (stagecal_evidence_mean_rho, stagecal_evidence_pool_rho) */
    SYNTH_SE_KNOWN,         /* the true ones (synth_ar1_var_mean): fixed weights (steady,
                               regularly sampled regimes only) */
    SYNTH_SE_PER_WINDOW,    /* each window's own ρ̂ (the calibration before pooling) */
    SYNTH_SE_SMOOTHER,      /* from the residuals of the stage count's own smoother, σ and ρ
                               pooled per analyser (stagecal_evidence_window_stats) */
    SYNTH_SE_QUAD           /* quadratic detrend with the AR(1) moments of its residuals, ρ
                               pooled per analyser (stagecal_evidence_mean_quad, as the builder's
                               STAGECAL_EVIDENCE_NOISE_QUAD_POOLED) */
};

/* A regime of the synthetic data. */
struct synth_regime {
    const char *name;
    size_t ns;     /* samples per window (≤ 64) */
    double rho;    /* noise correlation between samples one minute apart */
    int irregular; /* 1: gaps between samples exponential with mean one minute */
    double drift;  /* xD falls by this much over the window along s(1 + s)/2 (0: steady) */
    double xd_lo;  /* the windows' true distillate, uniform on [xd_lo, xd_hi] (0: the */
    double xd_hi;  /* study's original 0.90 to 0.97) */
    double u_xd;   /* the distillate analyser's noise (0: the original 0.0015) */
};

#define SYNTH_NREGIMES 8
static const struct synth_regime synth_regimes[SYNTH_NREGIMES] = {
    {"steady", 40, 0.6, 0, 0.0, 0, 0, 0},    /* the study's original regime */
    {"white", 40, 0.0, 0, 0.0, 0, 0, 0},     /* uncorrelated analyser noise */
    {"drift", 40, 0.0, 0, 0.03, 0, 0, 0},    /* a batch pot drifting on a curve, white noise */
    {"drift-ar", 40, 0.6, 0, 0.03, 0, 0, 0}, /* the same with correlated noise */
    {"irregular", 40, 0.6, 1, 0.0, 0, 0, 0}, /* samples at random times */
    {"short", 12, 0.6, 0, 0.0, 0, 0, 0},     /* short windows */
    {"long", 64, 0.6, 0, 0.0, 0, 0, 0},      /* long windows (the most a window carries) */
    /* moderate-to-high purity: 1 − xD of 0.005 to 0.015 read with a better analyser, so
     * that the reading noise is a tenth of the heavy content (the forward map's curvature
     * in xD is then strongest) */
    {"purity", 40, 0.6, 0, 0.0, 0.985, 0.995, 0.0005},
};

/* One synthetic calibration: windows at several reflux ratios, AR(1) noise on the
 * analysers, per-sample inversion, window evidence, both fits. fs/fc get ok = 0 when
 * the fit itself fails (counted by the caller). se_mode other than SYNTH_SE_ESTIMATED
 * is a diagnostic of the coverage study (tests/tool_coverage.c). Returns 0, or the
 * line of the first library call that failed where it must not. */
/* Noise with correlation rho^(Δt/60 s) at times t (an AR(1) in continuous time). */
static inline void synth_noise(gsl_rng *rng, const double *t, double *e, size_t n, double sigma,
                               double rho)
{
    e[0] = gsl_ran_gaussian(rng, sigma);
    for (size_t i = 1; i < n; i++) {
        double phi = rho > 0 ? pow(rho, (t[i] - t[i - 1]) / 60.0) : 0;
        e[i] = phi * e[i - 1] + sqrt(1 - phi * phi) * gsl_ran_gaussian(rng, sigma);
    }
}

#define SYNTH_MAXS 64     /* samples per window at most */
#define SYNTH_U_XB 0.0025 /* the pot analyser's noise */
static inline double synth_u_xd(const struct synth_regime *rg)
{
    return rg->u_xd > 0 ? rg->u_xd : 0.0015;
}

/* One window's samples at reflux ratio r: times t (s), readings xd, xb (their noise in exd,
 * exb), the distillate drawn uniformly over the regime's range and drifting along its curve,
 * the pot at the law's stage count (Smoker's closed form). Returns the window's true xD at
 * its start. */
static inline double synth_window(gsl_rng *rng, const struct synth_regime *rg, double r, double *t,
                                  double *xd, double *xb, double *exd, double *exb)
{
    const double xd_lo = rg->xd_hi > 0 ? rg->xd_lo : 0.90, xd_hi = rg->xd_hi > 0 ? rg->xd_hi : 0.97;
    const size_t NS = rg->ns;
    double xd_true = xd_lo + (xd_hi - xd_lo) * gsl_rng_uniform(rng);
    double n_true = synth_law(SYNTH_A, SYNTH_B, r);
    t[0] = 0;
    for (size_t i = 1; i < NS; i++)
        t[i] = t[i - 1] + (rg->irregular ? gsl_ran_exponential(rng, 60.0) : 60.0);
    synth_noise(rng, t, exd, NS, synth_u_xd(rg), rg->rho);
    synth_noise(rng, t, exb, NS, SYNTH_U_XB, rg->rho);
    for (size_t i = 0; i < NS; i++) {
        double s = t[i] / t[NS - 1];
        double xdt = xd_true + rg->drift * (0.5 - s * (1 + s) / 2);
        xd[i] = xdt + exd[i];
        xb[i] = oracle_smoker_xb(SYNTH_ALPHA, r, xdt, n_true) + exb[i];
    }
    return xd_true;
}

/* The stage count one new window at r reads (prediction-interval study): fresh samples,
 * the window means, the count from them as the calibration counts a window (NAN when it
 * has none, or fewer than 3 of its samples invert on their own, as synth_one leaves such
 * windows out). Returns 0, or the line of a library call that failed. */
static inline int synth_new_window(gsl_rng *rng, const stagecal_vle *vle,
                                   const struct synth_regime *rg, double r, double *count)
{
    double t[SYNTH_MAXS], xd[SYNTH_MAXS], xb[SYNTH_MAXS], exd[SYNTH_MAXS], exb[SYNTH_MAXS];
    const size_t NS = rg->ns;
    if (NS < 3 || NS > SYNTH_MAXS)
        return __LINE__;
    synth_window(rng, rg, r, t, xd, xb, exd, exb);
    stagecal_stages_params sp = stagecal_stages_default_params();
    size_t nok = 0; /* samples that invert on their own: a window needs 3 (as in synth_one) */
    for (size_t i = 0; i < NS; i++) {
        stagecal_stages_result res;
        if (stagecal_stages_invert(vle, xd[i], xb[i], r, 1.0, &sp, &res, NULL) != STAGECAL_OK)
            return __LINE__;
        nok += res.status == STAGECAL_STAGES_OK;
    }
    stagecal_evidence e;
    memset(&e, 0, sizeof e);
    e.r = r;
    e.total_reflux = isinf(r);
    e.n_samples = e.m = NS;
    if (stagecal_evidence_mean_rho(t, xd, NS, synth_u_xd(rg), &e.xd, &e.u_xd, &e.rho_xd, &e.m_xd,
                                   NULL) != STAGECAL_OK ||
        stagecal_evidence_mean_rho(t, xb, NS, SYNTH_U_XB, &e.xb, &e.u_xb, &e.rho_xb, &e.m_xb,
                                   NULL) != STAGECAL_OK)
        return __LINE__;
    e.sd_xd = synth_u_xd(rg); /* the builder caps the reading noise at the stated u */
    e.sd_xb = SYNTH_U_XB;
    e.s_t = t;
    e.s_xd = xd;
    e.s_xb = xb;
    if (stagecal_evidence_stages(vle, 1.0, &e, NULL) != STAGECAL_OK)
        return __LINE__;
    *count = e.stages_ok && nok >= 3 ? e.stages : NAN;
    return 0;
}

/* Per-window diagnostics of the study tool (tests/tool_coverage.c, "diag"): for each of the
 * 12 windows, sums over data sets of the stated standard errors² of the window means and of
 * the actual errors² of those means (mean noise, the truth known), for xD, xB and their
 * log-odds combination as the composition fit weighs it (g = ∂logit xB/∂xD at the truth,
 * Smoker's closed form). NULL: not collected. */
struct synth_diag {
    long n;
    double su_xd[12], se_xd[12], su_xb[12], se_xb[12], su_l[12], se_l[12];
};
static struct synth_diag *synth_diag_acc;
static int synth_scatter_quad; /* 1: the shape from stagecal_scatter_window_se (measured, not
                                  calibrate's) */

static inline int synth_one(gsl_rng *rng, const stagecal_vle *vle, const stagecal_form *form,
                            const struct synth_regime *rg, enum synth_se_mode se_mode,
                            struct synth_fit *fs, struct synth_fit *fc)
{
    static const double rs[] = {1.2, 1.6, 2.0, 2.5, 3.0, 4.0, 5.0, 6.5, 8.0, 10.0, 15.0, INFINITY};
    enum { NW = sizeof rs / sizeof rs[0], MAXS = SYNTH_MAXS };
    const double u_xd = synth_u_xd(rg), u_xb = SYNTH_U_XB;
    const size_t NS = rg->ns;
    stagecal_evidence ev[NW];
    static double xds[NW][MAXS], xbs[NW][MAXS], ts[NW][MAXS];
    double exd[MAXS], exb[MAXS];
    int few[NW];
    double dmx[NW], dmb[NW], dgg[NW], dlb[NW];
    stagecal_stages_params sp = stagecal_stages_default_params();
    sp.want_sensitivities = 1;
    memset(fs, 0, sizeof *fs);
    memset(fc, 0, sizeof *fc);
    if (NS < 3 || NS > MAXS)
        return __LINE__;
    for (size_t w = 0; w < NW; w++) {
        double *xd = xds[w], *xb = xbs[w], *t = ts[w];
        double xd_true = synth_window(rng, rg, rs[w], t, xd, xb, exd, exb);
        double n_true = synth_law(SYNTH_A, SYNTH_B, rs[w]);
        size_t nok = 0;
        for (size_t i = 0; i < NS; i++) {
            stagecal_stages_result res;
            if (stagecal_stages_invert(vle, xd[i], xb[i], rs[w], 1.0, &sp, &res, NULL) !=
                STAGECAL_OK)
                return __LINE__;
            nok += res.status == STAGECAL_STAGES_OK;
        }
        stagecal_evidence *e = &ev[w];
        memset(e, 0, sizeof *e);
        e->r = rs[w];
        e->total_reflux = isinf(rs[w]);
        e->n_samples = NS;
        if (se_mode == SYNTH_SE_QUAD) {
            if (stagecal_evidence_mean_quad(t, xd, NS, u_xd, NAN, &e->xd, &e->u_xd, &e->rho_xd,
                                            &e->m_xd, NULL) != STAGECAL_OK ||
                stagecal_evidence_mean_quad(t, xb, NS, u_xb, NAN, &e->xb, &e->u_xb, &e->rho_xb,
                                            &e->m_xb, NULL) != STAGECAL_OK)
                return __LINE__;
        } else if (stagecal_evidence_mean_rho(t, xd, NS, u_xd, &e->xd, &e->u_xd, &e->rho_xd,
                                              &e->m_xd, NULL) != STAGECAL_OK ||
                   stagecal_evidence_mean_rho(t, xb, NS, u_xb, &e->xb, &e->u_xb, &e->rho_xb,
                                              &e->m_xb, NULL) != STAGECAL_OK)
            return __LINE__;
        if (se_mode == SYNTH_SE_KNOWN) {
            if (rg->irregular || rg->drift > 0)
                return __LINE__; /* the closed form holds for steady, regular windows */
            e->u_xd = sqrt(synth_ar1_var_mean(u_xd, rg->rho, NS));
            e->u_xb = sqrt(synth_ar1_var_mean(u_xb, rg->rho, NS));
        }
        if (synth_diag_acc) {
            double mx = 0, mb = 0, xdm = 0, xbm = 0;
            for (size_t i = 0; i < NS; i++) {
                double si = t[i] / t[NS - 1];
                double xdt = xd_true + rg->drift * (0.5 - si * (1 + si) / 2);
                mx += exd[i] / (double)NS;
                mb += exb[i] / (double)NS;
                xdm += xdt / (double)NS;
                xbm += oracle_smoker_xb(SYNTH_ALPHA, rs[w], xdt, n_true) / (double)NS;
            }
            double h = 1e-6;
            double lp = oracle_smoker_xb(SYNTH_ALPHA, rs[w], xdm + h, n_true),
                   lm = oracle_smoker_xb(SYNTH_ALPHA, rs[w], xdm - h, n_true);
            double g = (log(lp / (1 - lp)) - log(lm / (1 - lm))) / (2 * h);
            double lb = 1 / (xbm * (1 - xbm));
            dmx[w] = mx, dmb[w] = mb, dgg[w] = g, dlb[w] = lb;
        }
        e->m = NS; /* the window's samples, as the calibration chain passes them */
        e->s_t = t;
        e->s_xd = xd;
        e->s_xb = xb;
        few[w] = nok < 3;
    }
    if (se_mode == SYNTH_SE_ESTIMATED)
        stagecal_evidence_pool_rho(ev, NW);
    if (se_mode == SYNTH_SE_QUAD) { /* again at ρ pooled by lag pairs, as the builder does */
        double rd = 0, rb = 0;
        for (size_t w = 0; w < NW; w++)
            rd += ev[w].rho_xd / (double)NW, rb += ev[w].rho_xb / (double)NW; /* equal m */
        for (size_t w = 0; w < NW; w++) {
            stagecal_evidence *e = &ev[w];
            if (stagecal_evidence_mean_quad(ts[w], xds[w], NS, u_xd, rd, &e->xd, &e->u_xd,
                                            &e->rho_xd, &e->m_xd, NULL) != STAGECAL_OK ||
                stagecal_evidence_mean_quad(ts[w], xbs[w], NS, u_xb, rb, &e->xb, &e->u_xb,
                                            &e->rho_xb, &e->m_xb, NULL) != STAGECAL_OK)
                return __LINE__;
        }
    }
    /* the reading noise for the composition fit's convexity correction, as the builder gives it */
    if (se_mode != SYNTH_SE_SMOOTHER && stagecal_evidence_noise_sd(ev, NW, NULL) != STAGECAL_OK)
        return __LINE__;
    for (size_t w = 0; w < NW; w++) { /* capped at the stated u, as the builder does */
        ev[w].sd_xd = fmin(ev[w].sd_xd > 0 ? ev[w].sd_xd : u_xd, u_xd);
        ev[w].sd_xb = fmin(ev[w].sd_xb > 0 ? ev[w].sd_xb : u_xb, u_xb);
    }
    if (se_mode == SYNTH_SE_SMOOTHER &&
        stagecal_evidence_window_stats(ev, NW, u_xd, u_xb, NULL) != STAGECAL_OK)
        return __LINE__;
    for (size_t w = 0; w < NW && synth_diag_acc; w++) {
        struct synth_diag *dg = synth_diag_acc;
        double ux = ev[w].u_xd, ub = ev[w].u_xb, mx = dmx[w], mb = dmb[w];
        dg->su_xd[w] += ux * ux;
        dg->se_xd[w] += mx * mx;
        dg->su_xb[w] += ub * ub;
        dg->se_xb[w] += mb * mb;
        dg->su_l[w] += dgg[w] * dgg[w] * ux * ux + dlb[w] * dlb[w] * ub * ub;
        dg->se_l[w] += (dgg[w] * mx - dlb[w] * mb) * (dgg[w] * mx - dlb[w] * mb);
        dg->n += w == 0;
    }
    for (size_t w = 0; w < NW; w++) {
        if (stagecal_evidence_stages(vle, 1.0, &ev[w], NULL) != STAGECAL_OK)
            return __LINE__;
        if (few[w])
            ev[w].stages_ok = 0;
        fc->tr_res[w] = ev[w].stages_ok ? ev[w].stages - synth_law(SYNTH_A, SYNTH_B, rs[w]) : NAN;
        fc->tr_se[w] = ev[w].stages_ok ? ev[w].se_stages : NAN;
    }
    /* stage space */
    double r[NW], s[NW], sg[NW];
    size_t n = 0, run_s[NW], run_c[NW], nrun = synth_runs();
    for (size_t w = 0; w < NW; w++) {
        ev[w].run = w % nrun;
        run_c[w] = ev[w].run;
        if (ev[w].stages_ok) {
            r[n] = ev[w].r;
            s[n] = ev[w].stages;
            sg[n] = ev[w].se_stages;
            run_s[n] = ev[w].run;
            n++;
        }
    }
    stagecal_regress_data d = {n, r, NULL, s, sg};
    stagecal_regress_params rp = stagecal_regress_default_params();
    rp.band_points = 0;
    rp.cov_kind = synth_cov_kind(); /* as calibrate fits */
    rp.cluster = run_s;             /* (cr2-run) the windows' runs, as calibrate's */
    stagecal_regress_result rs_fit, rc_fit;
    if (stagecal_regress_fit(&d, form, &rp, &rs_fit, NULL) != STAGECAL_OK)
        return 0;
    int rc = synth_fill(form, &rs_fit, rs_fit.sigma, fs) ? __LINE__ : 0;
    stagecal_run_test rt;
    if (rc == 0 && stagecal_run_test_fit(form, rs_fit.theta, r, NULL, s, sg, run_s, n, &rt, NULL))
        rc = __LINE__;
    fs->rt_tested = rc == 0 && rt.tested;
    fs->rt_p = rt.p;
    rp.cluster = run_c; /* the composition fit: every window */
    if (rc == 0 && stagecal_fit_composition(vle, 1.0, ev, NW, form, rs_fit.theta, &rp, &rc_fit,
                                            NULL) == STAGECAL_OK) {
        rc = synth_fill(form, &rc_fit, 1.0, fc) ? __LINE__ : 0;
        /* the prediction band as calibrate's model file gives it (src/calibrate.c and
         * stagecal_model_eval: σ the windows' scatter function at R with its own dof, capped
         * at the smaller of θ's and σ's; its shape from the windows' own stated errors, or
         * with synth_scatter_quad from stagecal_scatter_window_se),
         * and with one σ for every R (the window counts' root mean square about the curve) */
        double pdof = rc_fit.sigma_dof > 0 ? fmin(rc_fit.dof, rc_fit.sigma_dof) : rc_fit.dof;
        stagecal_scatter sc;
        double sesh[NW], fl_xd[NW], fl_xb[NW];
        for (size_t w = 0; w < NW; w++)
            fl_xd[w] = u_xd, fl_xb[w] = u_xb; /* the floors of the window means above */
        fc->pi_ok =
            rc == 0 && rc_fit.sigma > 0 &&
            (!synth_scatter_quad || stagecal_scatter_window_se(vle, 1.0, ev, NW, fl_xd, fl_xb, sesh,
                                                               NULL) == STAGECAL_OK) &&
            stagecal_scatter_fit_se(ev, NW, synth_scatter_quad ? sesh : NULL, form, rc_fit.theta,
                                    &sc, NULL) == STAGECAL_OK;
        for (int q = 0; q < 3 && fc->pi_ok; q++) {
            stagecal_band bd, b1;
            double sq = sc.n > 0 ? stagecal_scatter_sd(&sc, synth_band_r[q]) : rc_fit.sigma;
            double sdof = sc.n > 0 ? stagecal_scatter_dof(&sc, synth_band_r[q]) : pdof;
            sdof = isfinite(sdof) ? fmin(sdof, pdof) : pdof; /* as stagecal_model_eval */
            if (stagecal_regress_band_clustered(form, rc_fit.theta, rc_fit.cov, sq, 1.0, sdof,
                                                rc_fit.design, rc_fit.cluster, rc_fit.n, 0.95,
                                                synth_band_r[q], 0, &bd, NULL) != STAGECAL_OK ||
                stagecal_regress_band_clustered(form, rc_fit.theta, rc_fit.cov, rc_fit.sigma, 1.0,
                                                pdof, rc_fit.design, rc_fit.cluster, rc_fit.n, 0.95,
                                                synth_band_r[q], 0, &b1, NULL) != STAGECAL_OK) {
                fc->pi_ok = 0;
                break;
            }
            fc->pi_lo[q] = bd.pi_low;
            fc->pi_hi[q] = bd.pi_high;
            fc->pi1_lo[q] = b1.pi_low;
            fc->pi1_hi[q] = b1.pi_high;
            fc->pi_se[q] = bd.se_pred;
            fc->pi1_se[q] = b1.se_pred;
            fc->pi_sigma[q] = sq;
            fc->pi_sdof[q] = sdof;
            fc->pi_deg = (int)sc.n;
        }
        stagecal_regress_result_free(&rc_fit);
    }
    stagecal_regress_result_free(&rs_fit);
    return rc;
}

/* 1 when the fit's interval for quantity q contains the truth. */
static inline int synth_covers(const struct synth_fit *f, int q)
{
    double tv = synth_truth(q);
    return f->lo[q] <= tv && tv <= f->hi[q];
}

#endif
