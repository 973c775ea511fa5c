/*
 * runlog_internal.h — helpers shared by the runlog_*.c files; not installed.
 */
#ifndef STAGECAL_RUNLOG_INTERNAL_H
#define STAGECAL_RUNLOG_INTERNAL_H

#include "stagecal/runlog.h"

/* Frees the arrays of res and zeroes it. */
void result_free_members(stagecal_runlog_result *res);

/* Flags STAGECAL_SAMPLE_TOTAL_REFLUX on every stretch of a run at one finite R, at
 * least par->min_window rows long, in which W does not fall (straight-line fit of W
 * on t, slope within par->no_distillate_t standard errors of 0): no distillate is
 * drawn, so the column is at total reflux whatever R says. t and w are scratch of
 * the longest run's length. */
void runlog_mark_no_distillate(const stagecal_runlog *log,
                               const stagecal_runlog_analysis_params *par,
                               stagecal_runlog_result *res, double *t, double *w);

/* Run k's warm-up and shortest window in samples from par (the time settings by the run's
 * median sample spacing, else the sample counts capped for short runs; runlog.h). tmp is
 * scratch of the run's length. */
void runlog_run_samples(const stagecal_runlog *log, const stagecal_runlog_analysis_params *par,
                        size_t k, double *tmp, size_t *warmup, size_t *min_window);

/* Flags steady samples and builds the windows from the per-sample stages (after
 * the inversion filled res->status/stages/u_stages). ENOMEM. */
int runlog_windows(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   stagecal_error *err);

/* The boil-up/reflux consistency of run k (closure fields has_boilup … boilup_mismatch);
 * rows flagged TOTAL_REFLUX are left out (runlog_drift.c). */
void runlog_boilup(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   size_t k);
/* The two drift signatures of every run and the decision (after the inversion and the
 * windows; col has an equilibrium model), and the boil-up check again without the rows
 * counted at total reflux. ENOMEM, or the holdup compensation's status. */
int runlog_drift(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                 const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                 stagecal_error *err);
/* The drift signatures of c set to "not computed" (NaN, 0). */
void runlog_drift_clear(stagecal_runlog_closure *c);

/* Grows every row array of log (×2, 4096 at first; optional signals only when present).
 * -1 on allocation failure. */
int runlog_grow_rows(stagecal_runlog *log);
/* Allocates an optional signal's array, NaN for the rows already stored; -1 on failure. */
int runlog_ensure_optional(stagecal_runlog *log, double **a);

/* Parses a decimal number (no hexadecimal; "inf" only with allow_inf); 0 or -1. */
int runlog_parse_number(const char *s, int allow_inf, double *v);

/* Parses a composition cell as logged in unit u: a number in [u->lo, u->hi], "<v" or
 * ">v". A number at u->lo or u->hi is censored there; "<lo" and ">hi" are refused.
 * Returns 0 with *v (as logged, not converted) and *censor, or -1 with why ("value '<'
 * is not a censored reading (expected ...)", without the column prefix). */
int runlog_parse_fraction(const char *s, const stagecal_unit *u, double *v, int *censor, char *why,
                          size_t why_len);

/* The range of mole fractions a reading allows: [v, v], [0, v] or [v, 1]. */
void runlog_reading_range(double v, int censor, double *lo, double *hi);

#endif
