/*
 * stagecal/calibrate.h — the main job: production run logs in, a correlation of
 * effective stages against reflux ratio R and vapour load F out, with honest
 * uncertainty, as a model file (include/stagecal/model.h).
 *
 * Chain: column file → run logs (validation findings) → quasi-steady windows and
 * per-sample inversion (include/stagecal/runlog.h) → one piece of evidence per
 * window (means with an autocorrelation-aware standard error) → two fits of the
 * same correlation form:
 *   stage space:        window-mean stages regressed on (R, F) (regress.h), weights
 *                       1/se², covariance scaled by the residual variance;
 *   composition space:  the form's parameters chosen so that forward stepping with
 *                       stages(R, F; θ) from each logged xD of a window predicts the
 *                       xB logged with it, the log-odds residuals averaged per window and weighted
 * by the effective variance of the log-odds (measurement uncertainties of xB and, through the
 * step's sensitivity, of xD) — usable right up to a pinch, where stage counts are huge or undefined
 * but the compositions are perfectly good data. Methods and sources: docs/methods.md.
 */
#ifndef STAGECAL_CALIBRATE_H
#define STAGECAL_CALIBRATE_H

#include <stddef.h>

#include "stagecal/column.h"
#include "stagecal/error.h"
#include "stagecal/form.h"
#include "stagecal/model.h"
#include "stagecal/regress.h"
#include "stagecal/runlog.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- one piece of evidence ---------------------------------------------------------- */

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

/* A quasi-steady window summarised: the unit of evidence. */
typedef struct {
    size_t run;         /* run index in the log */
    size_t first, last; /* row range, inclusive */
    size_t n_samples;   /* rows in the window */
    size_t n_ok;        /* rows with an ok stage count */
    double n_eff;       /* effective sample size of the stage series */
    int total_reflux;   /* 1: R = inf (or no distillate) throughout */
    double r;           /* median reflux ratio [-] (INFINITY at total reflux) */
    int has_load;       /* F below is known */
    double f_load;      /* mean F-factor [Pa^0.5] */
    double xd, xb;      /* mean distillate and pot mole fractions [-] */
    double u_xd, u_xb;  /* their standard errors [-] */
    double rho_xd;      /* lag-1 autocorrelation in u_xd's n_eff (the window's own, or pooled) */
    double rho_xb;      /* the same for u_xb */
    size_t m_xd, m_xb;  /* finite samples behind xd and xb (0: u_xd/u_xb were not built here) */
    int stages_ok;      /* the stage count below exists (inversion of the means is ok) */
    double stages;      /* effective stages incl. the pot at the mean compositions [-] */
    double se_stages;   /* its standard error [-] */
    double t_mid_s;     /* mid time of the window [s] */
    size_t m;           /* samples carried below (0: use the means only) */
    const double *s_t;  /* m sample times [s], m compositions xD and xB of the window, */
    const double *s_xd; /* evenly thinned, outliers left out (storage owned by whoever */
    const double *s_xb; /* built the evidence) */
} stagecal_evidence;

/* Pools the lag-1 autocorrelation over a calibration's windows, per analyser: replaces
 * each window's rho_xd (rho_xb) by the mean of all windows' values weighted by their
 * lag pairs (m − 1), and rescales u_xd (u_xb) to the n_eff of that ρ. Why: one window's
 * ρ̂ from tens of samples scatters widely, and the weights of the fits inherit that
 * scatter; with a pooled ρ̂ the 95 % intervals cover at their nominal rate (the coverage
 * study in docs/calibration.md §5). It assumes one analyser and one sampling interval per
 * series across the windows. Windows with m_xd (m_xb) = 0 are left alone. Call before
 * stagecal_evidence_stages, which propagates u_xd and u_xb. */
void stagecal_evidence_pool_rho(stagecal_evidence *ev, size_t nev);

/* Stage count of a window. With samples (ev->m ≥ 3, at most 64 used): local quadratics in
 * time (9 samples each) smooth the window's xD and xB, the fitted compositions are inverted at
 * every sample time and the counts averaged — this follows a drifting pot (a batch is never quite
 * steady) without the curvature bias of inverting plain means, and without the bias that the
 * count's curvature in xB gives noisy single samples near a pinch or at a lean pot.
 * Without samples: the inversion of the means. The standard error propagates u_xd,
 * u_xb through the sensitivities at the means (first order, independent analysers).
 * Sets stages_ok (0 when any inversion's status is not ok). Returns an error only when
 * an inner solve fails. */
int stagecal_evidence_stages(const stagecal_vle *vle, double murphree, stagecal_evidence *ev,
                             stagecal_error *err);

/* The windows with a stage count as regression points (R, F, stages, sigma = se):
 * fills data with arrays laid out in buf, which must hold 4·nev doubles and outlive
 * data; f_load is NULL unless every such window has a load. Returns the number of
 * points. */
size_t stagecal_evidence_points(const stagecal_evidence *ev, size_t nev, double *buf,
                                stagecal_regress_data *data);

/* ---- composition-space fit --------------------------------------------------------------- */

/* Fits form to the windows in composition space (see above) with GSL's trust-region
 * solver (finite-difference Jacobian, since each residual needs a forward step).
 * theta0 (form->p values) starts the search — normally the stage-space estimate.
 * On success result holds θ, se, CIs, covariance (scaled by s²), σ (of the
 * standardised log-odds residuals), dof, rss, stop reason; the band grid is
 * evaluated in stage space with that covariance. Windows whose xB is at or below
 * the pinch for every θ still count (they pull θ up). EDATA when fewer windows than
 * parameters + 1; ENOCONV when the solver fails. */
int stagecal_fit_composition(const stagecal_vle *vle, double murphree, const stagecal_evidence *ev,
                             size_t nev, const stagecal_form *form, const double *theta0,
                             const stagecal_regress_params *params, stagecal_regress_result *result,
                             stagecal_error *err);

/* ---- the whole chain --------------------------------------------------------------------- */

typedef enum {
    STAGECAL_CAL_AUTO = 0,   /* composition space, unless it fails (then stage space) */
    STAGECAL_CAL_STAGE,      /* stage space only */
    STAGECAL_CAL_COMPOSITION /* composition space only */
} stagecal_cal_method;

typedef struct {
    const char *form;            /* form name, or "auto" (rank by AICc in stage space) */
    stagecal_cal_method method;  /* AUTO */
    double level;                /* confidence level (0.95) */
    double murphree;             /* E_MV of the column stages (1) */
    size_t min_ok;               /* window needs this many ok samples for stage space (3) */
    size_t bootstrap;            /* stage-space bootstrap resamples (0) */
    unsigned long seed;          /* bootstrap seed (1) */
    stagecal_robust_kind robust; /* stage-space robust reweighting (NONE) */
    double hetp_r;               /* reference reflux ratio for HETP (NAN: largest fitted) */
    double hetp_f;               /* reference F for HETP (NAN: mean fitted) */
    stagecal_runlog_params read;
    stagecal_runlog_analysis_params analysis;
    /* progress callback (may be NULL): stage name and fraction done in [0, 1] */
    void (*progress)(void *ctx, const char *stage, double done);
    void *progress_ctx;
} stagecal_calibrate_params;

stagecal_calibrate_params stagecal_calibrate_default_params(void);

typedef struct {
    stagecal_column column;      /* the column file, loaded */
    stagecal_runlog *log;        /* all rows of all logs */
    stagecal_findings *findings; /* validation findings */
    stagecal_runlog_result res;  /* per-sample results, windows, closures */
    stagecal_evidence *ev;       /* nev windows */
    size_t nev;
    size_t nev_stage; /* windows used by the stage-space fit */
    int stage_status; /* STAGECAL_OK, why the stage-space fit failed, or −1 (not run) */
    char stage_message[STAGECAL_ERROR_TEXT];
    stagecal_regress_result stage_fit;
    int comp_status; /* STAGECAL_OK, why the composition fit failed, or −1 (not run) */
    char comp_message[STAGECAL_ERROR_TEXT];
    stagecal_regress_result comp_fit;
    stagecal_regress_rank_row rank[STAGECAL_REGRESS_MAXRANK]; /* --form auto */
    size_t nrank;
    stagecal_model_method used; /* which fit the model carries */
    stagecal_model model;       /* ready to write */
    double *samples;            /* storage of the evidence's thinned samples */
} stagecal_calibration;

/* Runs the chain on column_path and nlogs run logs. On success cal is filled and
 * cal->model is complete (not yet written). Errors: ENOINPUT (a file missing),
 * EDATA (validation errors: cal->findings lists them; or no usable window, or no fit
 * succeeded), ENOMEM. cal must be freed with stagecal_calibration_free in every case. */
int stagecal_calibrate(const char *column_path, const char *const *logs, size_t nlogs,
                       const stagecal_calibrate_params *params, stagecal_calibration *cal,
                       stagecal_error *err);
void stagecal_calibration_free(stagecal_calibration *cal); /* NULL ok */

#ifdef __cplusplus
}
#endif
#endif
