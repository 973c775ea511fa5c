/*
 * stagecal/evidence.h — the unit of evidence: a quasi-steady window of a run log
 * summarised as means of xD and xB with autocorrelation-aware standard errors, its
 * reflux ratio and vapour load, and ITS STAGE COUNT WITH ITS STANDARD ERROR.
 *
 * This is the only definition of a window's numbers. `invert` on run logs, the
 * calibration's fits, `calibrate --points-out` and the HTML report all read them from
 * here, so one window has one stage count everywhere. Methods and sources:
 * docs/calibration.md §3.
 *
 * Declarations are grouped as in src/evidence*.c: the window statistics (mean,
 * autocorrelation, pooling), the stage count, the builder that turns a run log's
 * windows into evidence, and the points a stage-space fit takes.
 */
#ifndef STAGECAL_EVIDENCE_H
#define STAGECAL_EVIDENCE_H

#include <stddef.h>

#include "stagecal/column.h"
#include "stagecal/error.h"
#include "stagecal/holdup.h"
#include "stagecal/physics.h"
#include "stagecal/regress.h"
#include "stagecal/runlog.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- one window --------------------------------------------------------------------- */

/* Bits of a carried sample's censoring flags (s_cens below): the reading is a bound, not
 * a value — the analyser reported "below its limit" or "above its range". */
enum {
    STAGECAL_EVIDENCE_XD_BELOW = 1u << 0, /* true xD ≤ s_xd[j] */
    STAGECAL_EVIDENCE_XD_ABOVE = 1u << 1, /* true xD ≥ s_xd[j] */
    STAGECAL_EVIDENCE_XB_BELOW = 1u << 2, /* true xB ≤ s_xb[j] */
    STAGECAL_EVIDENCE_XB_ABOVE = 1u << 3  /* true xB ≥ s_xb[j] */
};

/* A quasi-steady window summarised: the unit of evidence. */
typedef struct {
    size_t window;      /* index into the run log result's windows (builder; 0 otherwise) */
    size_t run;         /* run index in the log: windows of one run share its errors (a
                           cluster for run-clustered standard errors) */
    size_t first, last; /* row range, inclusive */
    size_t n_samples;   /* rows in the window */
    size_t n_ok;        /* rows with an ok per-sample stage count */
    size_t n_cens_xd;   /* rows whose xD reading is censored (a bound: "<v", ">v", or at the
                           physical limit): taken as censored observations when xd_tobit,
                           else left out of the means and the carried samples, so a window
                           with many says its xD is known only from one side */
    size_t n_cens_xb;   /* the same for xB */
    int xd_tobit;       /* 1: the window's censored xD readings were taken as censored
                           observations (stagecal_evidence_tobit): xd and u_xd are the Tobit
                           trend's level and error, and the carried s_xd are that trend at the
                           carried times (smoothed values, not readings) */
    double n_eff;       /* effective sample size of the pot analyser series */
    int total_reflux;   /* 1: R = inf (or no distillate) throughout */
    double r;           /* reflux ratio [-]: the window's set point, the mean of a measured R
                           (runlog.h, stagecal_runlog_setpoints; INFINITY at total reflux) */
    double u_r;         /* its standard uncertainty [-] (0: exact, or total reflux); the stage
                           count's standard error and the composition fit's weights carry it */
    int has_load;       /* F below is known */
    double f_load;      /* mean F-factor [Pa^0.5] */
    double xd, xb;      /* mean distillate and pot mole fractions [-] */
    double u_xd, u_xb;  /* their standard errors [-] */
    double rho_xd;      /* lag-1 autocorrelation in u_xd's n_eff (the window's own, or pooled) */
    double rho_xb;      /* the same for u_xb */
    size_t m_xd, m_xb;  /* finite samples behind xd and xb (0: u_xd/u_xb were not built here) */
    double se_sxd;      /* standard error of the mean of the smoothed xD at the carried
                           sample times (stagecal_evidence_window_stats; 0: not built, u_xd
                           stands in) */
    double se_sxb;      /* the same for xB */
    double sd_xd;       /* standard deviation of one xD reading's noise: the residuals of the
                           local smoother, pooled over the windows (stagecal_evidence_noise_sd;
                           0: not known). The composition fit's convexity correction uses it */
    double sd_xb;       /* the same for xB */
    int stages_ok;      /* the stage count below exists */
    double stages;      /* effective stages incl. the pot [-] */
    double se_stages;   /* its standard error [-] */
    double t_mid_s;     /* mid time of the window [s] */
    double t_first_s;   /* time of its first row [s] (builder; 0 otherwise) */
    double t_last_s;    /* time of its last row [s] (builder; 0 otherwise) */
    size_t m;           /* samples carried below (0: use the means only) */
    const double *s_t;  /* m sample times [s], m compositions xD and xB of the window, */
    const double *s_xd; /* evenly thinned, outliers left out (storage owned by whoever */
    const double *s_xb; /* built the evidence) */
    const stagecal_physics_cond *cond; /* the window's conditions: its logged pressure, internal
                                          reflux, pseudo-moles (physics.h); NULL: the plain
                                          model at the logged R */
    const unsigned char *s_cens;       /* m censoring flags (STAGECAL_EVIDENCE_*) for an estimator
                                          that takes censored readings as censored observations
                                          (a Tobit-type likelihood); NULL from the builder, which
                                          carries no censored reading (see n_cens_xd) */
} stagecal_evidence;

/* ---- window statistics (evidence_mean.c, evidence_stats.c) ------------------------- */

/* Mean of a slowly varying, autocorrelated series with its standard error.
 * The series is detrended by a straight line in time (a batch pot drifts); the
 * lag-1 autocorrelation ρ of the residuals gives the effective sample size
 * n_eff = n·(1 − ρ)/(1 + ρ) (AR(1) approximation, ρ clipped to [0, 0.99]); the
 * standard error is max(s, u_floor)/√n_eff with s the residual standard deviation
 * and u_floor a stated per-sample measurement uncertainty (0 = none). Samples with
 * non-finite y are skipped. EINVAL when fewer than 3 finite samples. */
int stagecal_evidence_mean(const double *t, const double *y, size_t n, double u_floor, double *mean,
                           double *se, double *n_eff, stagecal_error *err);
/* The same, also giving the window's own ρ (clipped as above) and the number m of finite
 * samples behind the mean, which stagecal_evidence_pool_rho needs. */
int stagecal_evidence_mean_rho(const double *t, const double *y, size_t n, double u_floor,
                               double *mean, double *se, double *rho, size_t *m,
                               stagecal_error *err);

/* The same window mean with the trend taken out by a quadratic in time (a straight line below
 * 5 samples or when the times do not determine a quadratic): a batch pot's trajectory curves
 * within a window, and a straight line leaves the curvature in the residuals, where it reads as
 * noise and autocorrelation by a different amount in each window. The residuals' lag-1
 * autocorrelation and sum of squares are taken at their AR(1) expectations for this detrend
 * (E[eᵀQe] = σ²·tr(QMΣ(ρ)M), M the detrend's residual maker, Σ_ij = ρ^|i−j| in sample order):
 * ρ solves B(ρ)/A(ρ) = the observed lag-1 autocorrelation (a ratio of expectations) in
 * [0, 0.99], σ² = RSS/A(ρ), and se = max(σ, u_floor)·√(1ᵀΣ(ρ)1)/m — the plain estimates are
 * biased low in short series, and more so after a quadratic (at m = 60, ρ = 0.7 the plain
 * n_eff form states the error of the mean 25 % low). rho_in finite: that ρ is used instead of
 * the window's own (a ρ pooled over windows). *rho: the ρ used. EINVAL (fewer than 3 finite
 * samples), ENOMEM. */
int stagecal_evidence_mean_quad(const double *t, const double *y, size_t n, double u_floor,
                                double rho_in, double *mean, double *se, double *rho, size_t *m,
                                stagecal_error *err);

/* A window's trend with censored readings as censored observations: the Tobit maximum-
 * likelihood fit (Tobin 1958, Econometrica 26(1):24-36) of y_i = Σ_j β_j p_j(t_i) + e_i, e_i
 * independent N(0, σ²), p_j orthogonal polynomials in time of q = 1..3 terms (level, straight
 * line, quadratic; fewer when the times do not determine them), by the EM iteration of Schmee &
 * Hahn 1979 (Technometrics 21(4):417-432): a censored reading is replaced by its conditional
 * expectation μ_i + d·σ·φ(w)/Q(w), w = d·(L_i − μ_i)/σ, and the trend refitted, σ² including the
 * conditional variances, to convergence. dir[i]: 0 y[i] is a value, +1 a lower bound (the true
 * reading ≥ y[i], e.g. an analyser clipped at its top), −1 an upper bound. Non-finite y or t:
 * skipped. yc (n): the completed series (values, and the conditional expectations of censored
 * readings; its plain mean is the trend's level β₀); trend (n): the fitted trend at each time
 * (NAN where skipped); var_ratio: the variance of β₀ from the observed information (central
 * second differences of the log-likelihood in (β, log σ)) over σ²/m, the variance of the level
 * had no reading been censored (≥ 1): the information the censoring costs. EINVAL (q),
 * EDATA (fewer than max(3, q + 1) uncensored readings — all at a bound give only a bound —,
 * no convergence, or an information that is not positive definite), ENOMEM. */
int stagecal_evidence_tobit(const double *t, const double *y, const signed char *dir, size_t n,
                            size_t q, double *yc, double *trend, double *var_ratio,
                            stagecal_error *err);

/* Pools the lag-1 autocorrelation over windows, per analyser: replaces each window's
 * rho_xd (rho_xb) by the mean of all windows' values weighted by their lag pairs (m − 1),
 * and rescales u_xd (u_xb) to the n_eff of that ρ. Why: one window's ρ̂ from tens of
 * samples scatters widely, and the weights of the fits inherit that scatter; with a pooled
 * ρ̂ the 95 % intervals cover at their nominal rate (docs/calibration.md §5). It assumes
 * one analyser and one sampling interval per series across the windows. Windows with
 * m_xd (m_xb) = 0 are left alone. Call before stagecal_evidence_stages. */
void stagecal_evidence_pool_rho(stagecal_evidence *ev, size_t nev);

/* Window statistics that match the estimator (an option of the builder): for each analyser,
 * the residuals r = (I − S)y of the same local quadratic smoother S that gives the stage
 * count (stagecal_evidence_stages), on the carried samples (at most 64) of every window with
 * at least 6 of them. Noise model: stationary, standard deviation σ, correlation ρ^(|t_i − t_j|/Δ)
 * between samples at any times (an exponential, i.e. continuous-time AR(1), correlation — valid for
 * irregular sampling; Δ the mean sampling interval). ρ is pooled per analyser over the windows by
 * the moment equation Σ_k Σ_j r_j r_{j+1} = Σ_k v_k·B_k(ρ)/A_k(ρ), with v_k = Σ_j r_j², A_k =
 * tr((I−S)R(I−S)ᵀ) and B_k its first superdiagonal sum (the smoother's own effect on the residuals
 * is in A and B); then one σ² = Σ_k v_k / Σ_k A_k(ρ) per analyser, floored at the stated u (pooled
 * like ρ: it assumes one analyser with one noise level across the windows). Sets u_xd, u_xb
 * (standard errors of the carried samples' plain means, which the composition fit uses), se_sxd,
 * se_sxb (of the means of the smoothed values, which the stage count uses), rho_xd, rho_xb
 * and n_eff. Windows with fewer samples keep what they had. ENOMEM, EINTERNAL. */
int stagecal_evidence_window_stats(stagecal_evidence *ev, size_t nev, double u_xd, double u_xb,
                                   stagecal_error *err);
/* The per-reading noise of each analyser by the same moment equations, without touching the
 * standard errors: sets sd_xd and sd_xb (σ, not floored at a stated u) of every window that
 * carries samples, whatever the noise option (stagecal_evidence_window_stats sets them too).
 * Leaves them 0 when no window has 6 carried samples. ENOMEM, EINTERNAL. */
int stagecal_evidence_noise_sd(stagecal_evidence *ev, size_t nev, stagecal_error *err);

/* Stage count of a window. With samples (ev->m ≥ 3, at most 64 used): local quadratics in
 * time (9 samples each) smooth the window's xD and xB, the fitted compositions are inverted at
 * every sample time and the counts averaged — this follows a drifting pot without the
 * curvature bias of inverting plain means, and without the bias that the count's curvature
 * in xB gives noisy single samples near a pinch or at a lean pot. Without samples: the
 * inversion of the means. The standard error propagates u_xd, u_xb through the
 * sensitivities at the means (first order, independent analysers) — se_sxd, se_sxb when set,
 * else u_xd, u_xb — and u_r through ∂stages/∂R. Sets stages_ok (0 when
 * any inversion's status is not ok). Returns an error only when an inner solve fails. */
int stagecal_evidence_stages(const stagecal_vle *vle, double murphree, stagecal_evidence *ev,
                             stagecal_error *err);

/* ---- the evidence of a run log (evidence.c) ------------------------------------------ */

/* How the builder sets the windows' standard errors. */
typedef enum {
    STAGECAL_EVIDENCE_NOISE_LINE_POOLED = 0, /* straight-line detrend, ρ pooled
                                                (stagecal_evidence_mean_rho, _pool_rho) */
    STAGECAL_EVIDENCE_NOISE_LINE_OWN,        /* straight-line detrend, each window's own ρ */
    STAGECAL_EVIDENCE_NOISE_SMOOTHER,        /* stagecal_evidence_window_stats (see there why
                                                it is not the default yet) */
    STAGECAL_EVIDENCE_NOISE_QUAD_POOLED,     /* quadratic detrend, ρ from the AR(1) moments of its
                                                residuals, pooled over the windows per analyser
                                                (stagecal_evidence_mean_quad; docs/calibration.md
                                                §5 says why it is not the default) */
    STAGECAL_EVIDENCE_NOISE_QUAD_STATS       /* QUAD_POOLED's statistics, but the Tobit trend of a
                                                window with censored xD stays the straight line
                                                (tobit_means), so only the errors change */
} stagecal_evidence_noise;

typedef struct {
    size_t max_samples; /* samples a window carries into its stage count and the composition
                           fit, evenly thinned (logged samples are autocorrelated, so more
                           add little but cost); 1..64, default 24 */
    size_t min_ok;      /* a window has a stage count only when at least this many of its
                           samples invert on their own (default 3) */
    stagecal_evidence_noise noise; /* window statistics (default LINE_POOLED) */
    int holdup;                    /* distillate compensation for column holdup (holdup.h): a
                                      stagecal_holdup_comp, or STAGECAL_EVIDENCE_HOLDUP_AUTO (default): STAGES
                                      when the column file states a holdup, else LAG when a run's start-up
                                      gives a time constant, else NONE */
    int physics;     /* 1: windows get their conditions (logged pressure, subcooled reflux,
                        unequal latent heats; physics.h) (default 1) */
    int tobit_means; /* 1 (default): a window with censored xD readings and at least 3 values
                        takes them as censored observations (stagecal_evidence_tobit;
                        docs/calibration.md §5c); 0: they are left out of the means (which then
                        read low at an analyser clipped at its top) */
    const unsigned char *skip_run; /* one per run of the log, non-zero: that run's windows are
                                      left out (a run flagged for a gross error or drift;
                                      calibrate.h); NULL (default): none */
    size_t threads; /* threads beside the calling one for the windows' stage counts (the
                       evidence does not depend on it); 0 (default) */
    const stagecal_holdup_tau *holdup_pooled; /* the start-up time constant pooled over the runs
                                                 of a log given in parts (as the analysis
                                                 params'); NULL (default): this log's */
} stagecal_evidence_params;

#define STAGECAL_EVIDENCE_HOLDUP_AUTO (-1)

stagecal_evidence_params stagecal_evidence_default_params(void);

/* The evidence of a run log: one entry per run-log window with at least 3 finite
 * compositions of each analyser (ev[i].window says which), in window order. */
typedef struct {
    stagecal_evidence *ev; /* n windows */
    size_t n;
    double *samples; /* storage of the carried samples */
    double *rows;    /* what each entry's stage count and conditions take from the log's rows
                        (internal: src/evidence.c) */
    /* physics and holdup (src/evidence_physics.c) */
    stagecal_physics *phys;       /* the models the windows' conditions point into */
    stagecal_physics_cond *conds; /* n conditions (NULL when params.physics is 0) */
    int holdup_kind;              /* the stagecal_holdup_comp applied */
    stagecal_holdup_tau *tau;     /* one per run of the log: the distillate's time constant */
    size_t nruns;
    stagecal_holdup_tau tau_pooled; /* over the runs */
    size_t n_settling;              /* rows left out as still settling after a reflux change */
    /* the windows for a censored likelihood (stagecal/censor.h): every run-log window with at least
     * 3 rows that carry both readings — values or censored — even when its censored xD
     * readings leave too few values for the evidence above; its rows' readings (censored ones
     * at their limits, flagged in s_cens; outliers left out; evenly thinned to max_samples)
     * in s_t/s_xd/s_xb/s_cens; r, f_load, run, cond from the evidence entry of the same
     * window where there is one (else the plain model at the window's median R); no means,
     * no stage count */
    stagecal_evidence *cens;
    size_t ncens;
    double *cens_samples;
    unsigned char *cens_flags;
    struct stagecal_holdup_est *holdup_est; /* per run when STAGES ran without a stated holdup: the
                                        holdup from the run's start-up (NULL otherwise) */
} stagecal_evidence_set;

/* Builds the evidence of every window of res (after stagecal_runlog_analyse and
 * stagecal_runlog_invert on log): means without the outlier-flagged samples, ρ pooled
 * (params.pool_rho), stage counts with col's equilibrium model and u(·) at murphree.
 * params may be NULL. Allocates set (free with stagecal_evidence_set_free, also after a
 * failure). EINVAL (no column model, bad params), ENOMEM, or an inner solve's status. */
int stagecal_evidence_build(const stagecal_runlog *log, const stagecal_runlog_result *res,
                            const stagecal_column *col, double murphree,
                            const stagecal_evidence_params *params, stagecal_evidence_set *set,
                            stagecal_error *err);
void stagecal_evidence_set_free(stagecal_evidence_set *set); /* NULL ok */

/* The evidence of run-log window k, or NULL when that window has too few compositions. */
const stagecal_evidence *stagecal_evidence_find(const stagecal_evidence_set *set, size_t k);

/* The windows with a stage count as regression points (R, F, stages, sigma = se):
 * fills data with arrays laid out in buf, which must hold 4·nev doubles and outlive
 * data; f_load is NULL unless every such window has a load. Returns the number of
 * points. */
size_t stagecal_evidence_points(const stagecal_evidence *ev, size_t nev, double *buf,
                                stagecal_regress_data *data);

#ifdef __cplusplus
}
#endif
#endif
