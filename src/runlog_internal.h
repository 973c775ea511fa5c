/*
 * runlog_internal.h — helpers shared by the runlog_*.c files; not installed.
 */
#ifndef STAGECAL_RUNLOG_INTERNAL_H
#define STAGECAL_RUNLOG_INTERNAL_H

#include "stagecal/runlog.h"

/* Frees the arrays of res and zeroes it. */
void result_free_members(stagecal_runlog_result *res);

/* Flags steady samples and builds the windows from the per-sample stages (after
 * the inversion filled res->status/stages/u_stages). reinvert(ctx, row) is called
 * for samples of a finite-R window in which no distillate was drawn, so the
 * caller can count them at total reflux; it may be NULL. ENOMEM. */
int runlog_windows(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   int (*reinvert)(void *ctx, size_t i), void *ctx, stagecal_error *err);

#endif
