/*
 * stagecal/calibrate.h — the main job: production run logs in, a correlation of
 * effective stages against reflux ratio R and vapour load F out, with honest
 * uncertainty, as a model file (include/stagecal/model.h).
 *
 * Chain: column file → run logs (validation findings) → quasi-steady windows and
 * per-sample inversion (include/stagecal/runlog.h) → one piece of evidence per
 * window (include/stagecal/evidence.h: means with an autocorrelation-aware standard
 * error, the window's stage count) → two fits of the same correlation form:
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

#include "stagecal/censor.h"
#include "stagecal/column.h"
#include "stagecal/error.h"
#include "stagecal/evidence.h"
#include "stagecal/form.h"
#include "stagecal/model.h"
#include "stagecal/regress.h"
#include "stagecal/runlog.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- composition-space fit --------------------------------------------------------------- */

/* Fits form to the windows in composition space (see above) on the least-squares driver
 * of regress.h (src/regress_composition.c): params' tolerances, central finite-difference
 * Jacobian (each residual needs a forward step), the Gauss–Newton polish.
 * theta0 (form->p values) starts the search — normally the stage-space estimate.
 * On success result holds θ, se, CIs, covariance (scaled by s² of the standardised
 * log-odds residuals, dof = n − p), rss, stop reason, the envelope, and in stage space
 * σ = sigma_obs with its sigma_dof (windows with stage counts − p). No band grid.
 * Windows whose xB is at or below the pinch for every θ still count (they pull θ up).
 * EINVAL (NULL, level outside (0, 1)), EDATA when fewer windows than parameters + 1 or
 * a parameter is not identifiable; ENOCONV when the solver fails. params may be NULL. */
int stagecal_fit_composition(const stagecal_vle *vle, double murphree, const stagecal_evidence *ev,
                             size_t nev, const stagecal_form *form, const double *theta0,
                             const stagecal_regress_params *params, stagecal_regress_result *result,
                             stagecal_error *err);

/* ---- do the runs differ beyond the windows' errors? ------------------------------------ */

/* Wald's variance-component test of a run-to-run offset of the stage count (Wald, A. 1947,
 * "A note on regression analysis", Ann. Math. Stat. 18, 586–589; Seely, J. F. &
 * El-Bassiouni, Y. 1983, "Applying Wald's variance component test", Ann. Stat. 11, 197–201 —
 * both from memory): the windows' stage counts y_i = N(R_i, F_i; θ) + δ_run(i) + e_i,
 * e_i ~ N(0, c·se_i²) with c unknown, H0: var δ = 0. The stage-space fit is linearised at θ̂
 * (its standardised Jacobian J, rows ∇N/se_i) and the runs' offsets are added as fixed effects
 * (Z_ik = 1/se_i for the windows of run k): F = [(RSS0 − RSS1)/dof1] / [RSS1/dof2] with RSS0
 * the standardised residuals' sum of squares off J's span, RSS1 off [J Z]'s, dof1 = rank[J Z] −
 * rank J, dof2 = n − rank[J Z]. It is the one-way analysis of variance of the standardised
 * residuals by run with the fitted curve's parameters taken out of both sums; exact F for a
 * linear form with normal errors, and free of a common factor c in the stated errors (it
 * cancels in the ratio). Not tested (tested 0, why says so) with fewer than 3 runs, when no
 * run has two windows, or when dof1 or dof2 is 0. */
typedef struct {
    int tested;     /* 1: f, dof1, dof2, p hold; 0: why */
    char why[160];  /* why not tested ("" when tested) */
    size_t windows; /* windows with a stage count */
    size_t runs;    /* runs they come from */
    double f;       /* the F ratio (NAN when not tested) */
    double dof1;    /* between runs, after the curve */
    double dof2;    /* within runs, after the curve */
    double p;       /* P(F(dof1, dof2) > f), gsl_cdf_fdist_Q */
} stagecal_run_test;

/* The level below which the calibration says the runs differ (a warning unless the fit's
 * covariance clusters by run). */
#define STAGECAL_RUN_TEST_ALPHA 0.05

/* The test above on n windows: r (INFINITY allowed), f_load (NULL when the form has no load),
 * stages and their se (> 0), run (any labels), form and θ̂ (the stage-space fit's). EINVAL on
 * bad arguments or a form undefined at a window; ENOMEM. A case the test cannot take is
 * STAGECAL_OK with out->tested 0. */
int stagecal_run_test_fit(const stagecal_form *form, const double *theta, const double *r,
                          const double *f_load, const double *stages, const double *se,
                          const size_t *run, size_t n, stagecal_run_test *out, stagecal_error *err);

/* ---- the whole chain --------------------------------------------------------------------- */

typedef enum {
    STAGECAL_CAL_AUTO = 0,    /* composition space, unless it fails (then stage space) */
    STAGECAL_CAL_STAGE,       /* stage space only */
    STAGECAL_CAL_COMPOSITION, /* composition space only */
    STAGECAL_CAL_CENSORED     /* the censored likelihood (stagecal/censor.h) only */
} stagecal_cal_method;

typedef struct {
    const char *form;                  /* form name, or "auto" (rank by AICc in stage space) */
    stagecal_cal_method method;        /* AUTO: composition space, stage space when that
                                          fails (a warning says when censored readings that
                                          matter were left out: CENSORED takes them) */
    double level;                      /* confidence level (0.95) */
    double murphree;                   /* E_MV of the column stages (1) */
    stagecal_evidence_params evidence; /* windows: carried samples, min_ok, pooling */
    size_t bootstrap;                  /* stage-space bootstrap resamples (0) */
    unsigned long seed;                /* bootstrap seed (1) */
    stagecal_boot_kind boot_kind;      /* bootstrap resampling: CASE (default), RESIDUAL or
                                          RUN (whole runs: the windows of a drawn run
                                          together; fewer than 4 runs with stage counts: CASE
                                          and a warning) */
    size_t threads;                    /* threads working beside the calling one on the rows'
                                          inversions, the runs' drift checks and the
                                          bootstrap's refits (0: the calling thread alone);
                                          the results do not depend on it */
    stagecal_robust_kind robust;       /* stage-space robust reweighting (NONE) */
    stagecal_cov_kind cov_kind;        /* covariance of both fits: HC2_BM (default: the HC2
                                          sandwich, the windows' stated errors being right
                                          only in proportion within a reflux ratio, with
                                          Student t at each contrast's Bell–McCaffrey dof;
                                          the model file carries the design), HC3, MODEL or
                                          CR2_RUN (clustered by the windows' runs, both fits;
                                          fewer than 4 runs with windows: HC2_BM and a
                                          warning) */
    int allow_undetermined;            /* 1: a fit whose evidence does not determine a
                                          parameter is kept, the model carries a warning
                                          that names it (default 0: refused, EDATA) */
    int keep_flagged;                  /* 1: runs flagged for a gross closure error or analyser
                                          drift stay in the fit (default 0: left out, and the
                                          calibration lists them with the reason) */
    double hetp_r;                     /* reference reflux ratio for HETP (NAN: largest fitted) */
    double hetp_f;                     /* reference F for HETP (NAN: mean fitted) */
    stagecal_runlog_params read;
    stagecal_runlog_analysis_params analysis;
    int stream;    /* 1: stagecal_calibrate reads the logs twice, run by
                      run, and holds a batch of runs and one summary per
                      window instead of every row (memory no longer grows
                      with the log; the same results). Standard input and
                      other files that cannot be read twice, the STAGES
                      compensation without a stated holdup and the QUAD
                      noise options hold the log instead (calibration.
                      streamed says which). Default 0: held */
    FILE *samples; /* with stream: each sample's results, as
                      stagecal_runlog_write_csv writes them, go here while
                      the runs stream by (NULL: not written) */
    /* progress callback (may be NULL): stage name and fraction done in [0, 1] */
    void (*progress)(void *ctx, const char *stage, double done);
    void *progress_ctx;
} stagecal_calibrate_params;

stagecal_calibrate_params stagecal_calibrate_default_params(void);

/* A run flagged for a gross error or analyser drift (runlog.h closure), left out of the fit
 * or kept (keep_flagged). */
typedef struct {
    size_t run;       /* run index in the log */
    size_t windows;   /* its quasi-steady windows */
    int left_out;     /* 1: its windows are not in the fit */
    char reason[240]; /* "gross error: closure −7.21 % ± 0.80 %; drift: pot analyser (xB) …" */
} stagecal_flagged_run;

/* What a run's rows gave (to say why a calibration found no evidence). */
typedef struct {
    size_t warm;    /* rows within the filters' warm-up */
    size_t steady;  /* rows in quasi-steady stretches */
    size_t longest; /* the longest such stretch [rows] */
} stagecal_cal_run_rows;

typedef struct {
    const stagecal_column *column;   /* the column the chain ran on */
    const stagecal_runlog *log;      /* all rows of all logs; when streamed, the runs and files
                                        but no rows (n counts them, the row arrays are NULL) */
    int streamed;                    /* 1: the logs were streamed (params.stream): res holds the
                                        windows, closures and counts but no per-sample arrays
                                        (res.n 0), the samples went to params.samples; and
                                        evidence.cens is empty when no reading is censored and
                                        the method is not CENSORED (nothing takes it then) */
    stagecal_cal_run_rows *run_rows; /* one per run (after the inversion) */
    stagecal_findings *findings;     /* validation findings (stagecal_calibrate; NULL from
                                        stagecal_calibrate_data, whose caller validated) */
    stagecal_runlog_result res;      /* per-sample results, windows, closures (streamed: no
                                        per-sample results) */
    stagecal_evidence_set evidence;  /* one entry per usable window */
    stagecal_flagged_run *flagged;   /* runs flagged for a gross error or drift */
    size_t nflagged;
    size_t nev_stage; /* windows used by the stage-space fit */
    int stage_status; /* STAGECAL_OK, why the stage-space fit failed, or −1 (not run) */
    char stage_message[STAGECAL_ERROR_TEXT];
    stagecal_regress_result stage_fit;
    int comp_status; /* STAGECAL_OK, why the composition fit failed, or −1 (not run) */
    char comp_message[STAGECAL_ERROR_TEXT];
    stagecal_regress_result comp_fit;
    int cens_status; /* STAGECAL_OK, why the censored-likelihood fit failed, or −1 (not run) */
    char cens_message[STAGECAL_ERROR_TEXT];
    stagecal_censored_fit cens;         /* that fit (on evidence.cens), stages 1 to 200 */
    stagecal_regress_result cens_fit;   /* the same as the printers take it: θ̂, the profile
                                           ends in ci_low/ci_high (NAN for an end the evidence
                                           does not bound), se from the observed information
                                           (NAN when one-sided), dof = readings − p − windows */
    int cens_fallback;                  /* 1: 'auto' chose a form with more parameters than a
                                           one-sided answer carries; constant was fitted */
    double cens_r, cens_f;              /* the reference condition of cens_at (the HETP's) */
    stagecal_censored_interval cens_at; /* stages there (profile likelihood) */
    stagecal_regress_rank_row rank[STAGECAL_REGRESS_MAXRANK]; /* --form auto */
    size_t nrank;
    stagecal_run_test run_test; /* do the runs differ beyond the windows' errors? On the
                                   stage-space fit's windows and θ̂ (not tested when that fit
                                   failed); a warning when p < 0.05 and the fit's covariance
                                   is not CR2_RUN (docs/calibration.md §4) */
    stagecal_model_method used; /* which fit the model carries */
    stagecal_model model;       /* ready to write */
    stagecal_column own_column; /* inputs read by stagecal_calibrate (column, log point */
    stagecal_runlog *own_log;   /* here then); unused by stagecal_calibrate_data */
} stagecal_calibration;

/* Runs the chain on a loaded column and run log (read, and validated, by the caller:
 * findings are not looked at). column_path names the column file in the model's inputs
 * with its SHA-256 (NULL: the column is not listed); the logs are listed by
 * log->files and log->sha256. col and log are borrowed and must outlive cal. On success
 * cal is filled and cal->model is complete (not yet written). Errors: EDATA (no usable
 * window, or no fit succeeded), EINVAL, ENOMEM. cal must be freed with
 * stagecal_calibration_free in every case. */
int stagecal_calibrate_data(const stagecal_column *col, const char *column_path,
                            const stagecal_runlog *log, const stagecal_calibrate_params *params,
                            stagecal_calibration *cal, stagecal_error *err);

/* Reads column_path and the nlogs run logs, stops on validation errors, then runs
 * stagecal_calibrate_data. Errors: ENOINPUT (a file missing), EDATA (validation errors:
 * cal->findings lists them; or as stagecal_calibrate_data), ENOMEM. cal must be freed
 * with stagecal_calibration_free in every case. */
int stagecal_calibrate(const char *column_path, const char *const *logs, size_t nlogs,
                       const stagecal_calibrate_params *params, stagecal_calibration *cal,
                       stagecal_error *err);
void stagecal_calibration_free(stagecal_calibration *cal); /* NULL ok */

/* The fit the model carries (stage_fit, comp_fit or cens_fit, by cal->used). */
const stagecal_regress_result *stagecal_calibration_fit(const stagecal_calibration *cal);

#ifdef __cplusplus
}
#endif
#endif
