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

/* Flags steady samples and builds the windows from the per-sample stages (after
 * the inversion filled res->status/stages/u_stages). ENOMEM. */
int runlog_windows(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   stagecal_error *err);

#endif
