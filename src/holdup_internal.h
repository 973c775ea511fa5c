/*
 * holdup_internal.h — the column-holdup compensation a log gets, shared by the evidence
 * builder (evidence_physics.c) and the drift and balance checks (runlog_drift.c), so both
 * see the same compensated distillate; not installed.
 */
#ifndef STAGECAL_HOLDUP_INTERNAL_H
#define STAGECAL_HOLDUP_INTERNAL_H

#include "stagecal/column.h"
#include "stagecal/holdup.h"
#include "stagecal/runlog.h"

/* want: a stagecal_holdup_comp or HOLDUP_WANT_AUTO (STAGES when the column file states a
 * holdup, else LAG when a run's start-up gives a time constant, else NONE). */
#define HOLDUP_WANT_AUTO (-1)

typedef struct {
    stagecal_holdup_comp kind;  /* the compensation applied */
    stagecal_holdup_tau *tau;   /* one per run: the distillate's time constant */
    stagecal_holdup_tau pooled; /* over the runs */
    stagecal_holdup_est *est;   /* per run when STAGES ran without a stated holdup: the holdup
                                   from the run's start-up (NULL otherwise) */
    double *run_h;   /* per run (STAGES): the column holdup its compensation used [mol] */
    double *run_u;   /* per run (STAGES): that holdup's relative standard uncertainty */
    double drum_mol; /* the reflux drum's holdup (STAGES) [mol] */
} holdup_resolved;

/* The compensated distillate of every row (xd; NAN where a row is still settling), the extra
 * variance of its compensation (u2, may be NULL) and what was used (out; free with
 * holdup_resolved_free). ENOMEM, or the compensation's status. */
int holdup_resolve(const stagecal_runlog *log, const stagecal_column *col, int want,
                   holdup_resolved *out, double *xd, double *u2, stagecal_error *err);
void holdup_resolved_free(holdup_resolved *h);

/* The light component on the column stages and in the drum [mol] of a column at (xD, xB,
 * reflux; INFINITY: total reflux) under the pseudo-steady holdup model (stagecal_holdup_invert):
 * the liquids stepped down the holdup-corrected operating line from the logged xD to the pot,
 * holdup_mol/(N − 1) on each of the N − 1 column stages (the last one fractional), plus
 * drum_mol·xD. ENOCONV when the line pinches, EINVAL outside the domain. */
int holdup_column_light(const stagecal_vle *vle, double xd, double xb, double reflux,
                        const stagecal_holdup_state *st, double *light_mol);

/* dxD/dt at row i of the stretch [s, e) at one reflux set point [1/s], as the compensation
 * takes it (a local quadratic over the rows within params->slope_half_s each side, at least
 * half_window; params NULL: the defaults); NAN when not available. *se: its standard error
 * (u_xd a floor under the residual scatter). */
double holdup_row_slope(const stagecal_runlog *log, size_t s, size_t e, size_t i,
                        const stagecal_holdup_params *params, double u_xd, double *se);

#endif
