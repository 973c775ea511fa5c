/*
 * calibrate_internal.h — what calibrate.c takes from calibrate_cens.c, calibrate_stream.c and
 * calibrate_runs.c; not installed.
 */
#ifndef STAGECAL_CALIBRATE_INTERNAL_H
#define STAGECAL_CALIBRATE_INTERNAL_H

#include "stagecal/calibrate.h"

/* The censored-likelihood fit of form on cal->evidence.cens (stagecal/censor.h), stage
 * range 1 to CAL_CENS_STAGES_MAX, started from the stage-space fit when it succeeded.
 * Fills cal->cens, cal->cens_fit and the stages at the reference condition (cal->cens_at).
 * When the evidence bounds the count from below only and form has more than one
 * parameter, the form 'auto' chose falls back to constant (*form is replaced, *fallback
 * set); a form asked for is refused (EDATA) with the reason and what would help. EDATA also
 * when the evidence bounds the count from above only or from neither side. */
int calibrate_censored(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                       stagecal_form *form, int *fallback, stagecal_error *err);
/* Completes a model that carries the censored-likelihood fit (after the common fields):
 * method, one-sided bound, covariance, σ and dof, windows and samples. */
void calibrate_censored_model(const stagecal_calibration *cal, stagecal_model *mo);

/* 1 when a window's censored readings matter, so that 'auto' fits the censored
 * likelihood: some window is evidence only through them (its values alone are fewer than
 * 3 of an analyser), or CAL_CENS_SHARE or more of an analyser's readings in some window are
 * censored. Why a share: leaving out the readings beyond a limit shifts a window's mean by
 * u·φ(c)/Φ(c) with Φ(c) the share kept — 0.11 u at a 5 % share, 0.20 u at 10 % (the mean
 * of a truncated normal; Johnson, Kotz & Balakrishnan 1994, "Continuous Univariate
 * Distributions" vol. 1, §10.1, from memory) — against a window mean's standard error of
 * ~0.3 u; below the share the other fits are kept and a warning names the readings left
 * out. */
int calibrate_censoring_matters(const stagecal_calibration *cal);

/* Runs flagged for a gross closure error or analyser drift into cal->flagged, with the reason;
 * skip[r] = 1 for those left out of the fit (calibrate.c). */
int calibrate_flag_runs(stagecal_calibration *cal, const stagecal_calibrate_params *par,
                        unsigned char *skip, stagecal_error *err);
/* The warm-up and steady rows of run r, whose rows start at row0 of res (calibrate_stream.c). */
void calibrate_run_rows(const stagecal_runlog_run *r, const stagecal_runlog_result *res,
                        size_t row0, stagecal_cal_run_rows *out);
/* 1 when par asks for streaming and the logs and settings allow it (calibrate_stream.c). */
int calibrate_stream_possible(const stagecal_column *col, const char *const *logs, size_t nlogs,
                              const stagecal_calibrate_params *par);
/* Reads the logs into cal->own_log (runs and files, no rows) and cal->findings, then streams
 * them run by run: cal->res (windows, closures, counts), cal->run_rows, cal->flagged and the
 * complete cal->evidence, as run_chain gets them from a held log. */
int calibrate_stream(stagecal_calibration *cal, const char *const *logs, size_t nlogs,
                     const stagecal_calibrate_params *par, stagecal_error *err);

/* Do the runs differ? stagecal_run_test_fit on the stage-space fit's windows and θ̂ into
 * cal->run_test (not tested when that fit failed), calibrate_runs.c. */
int calibrate_run_test(stagecal_calibration *cal, stagecal_error *err);
/* The model's warning when the runs differ (p < STAGECAL_RUN_TEST_ALPHA) and the fit's covariance
 * takes the windows as independent (not CR2_RUN; not the censored-likelihood fit). */
int calibrate_run_test_warn(stagecal_calibration *cal, stagecal_error *err);

#define CAL_CENS_SHARE 0.10
#define CAL_CENS_QUAD 0.10 /* see quadratic_check in calibrate_cens.c */
#define CAL_CENS_STAGES_MAX 200.0

#endif
