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
 * variance of its compensation (u2, may be NULL; with gs, its part common to the run and the
 * slope sensitivity gs: holdup_compensate_split) and what was used (out; free with
 * holdup_resolved_free). ENOMEM, or the compensation's status. */
int holdup_resolve(const stagecal_runlog *log, const stagecal_column *col, int want,
                   const stagecal_holdup_tau *pooled, holdup_resolved *out, double *xd, double *u2,
                   double *gs, stagecal_error *err);
/* With pooled non-NULL, holdup_resolve takes it as the time constant pooled over the runs
 * instead of pooling this log's (a log read run by run: calibrate's streaming pools the runs'
 * own in a first pass, so each run gets the bits the whole log gives it). Without a stated
 * holdup, STAGES pools the runs' holdups too: that needs the whole log (calibrate holds it). */

/* *pooled: the inverse-variance weighted mean of the nruns tau[k] that are ok (pooled->ok = 0
 * when none), as stagecal_holdup_estimate pools them (the same doubles, summed in run order). */
void holdup_pool_tau(const stagecal_holdup_tau *tau, size_t nruns, stagecal_holdup_tau *pooled);
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

/* The pieces of the compensation (src/holdup.c) that its second-order refinement
 * (src/holdup_refine.c) shares. */

/* Stages stepped from xd down to the pot at xb on the line y(j+1) = m·x(j) + (1 − m)·xd + g_j,
 * g_j = g0 + gs·Σ_(k≤j) s_k (beyond the ns given, the last one): whole steps and a log-odds
 * fraction of the crossing step, the pot included. sum_x (may be NULL): the column liquids
 * summed (the crossing step's by its fraction). xs (may be NULL): the liquid of every step made,
 * the crossing one included (at most xs_cap; *n_xs how many). ENOCONV on a pinch. */
int holdup_count_corrected(const stagecal_vle *vle, double xd, double xb, double m, double g0,
                           double gs, const double *s, size_t ns, double *count, double *sum_x,
                           double *xs, size_t xs_cap, size_t *n_xs);
/* ∂x_j/∂xD of the plain line's liquids (y = m·x + (1 − m)·xd) for the ceil(n_guess) + 1 whole
 * steps from xd (at most 200: s holds 200), by central differences; *ns how many. ENOCONV when
 * a step fails. */
int holdup_sensitivities(const stagecal_vle *vle, double xd, double xb, double m, double n_guess,
                         double *s, size_t *ns);
/* Slope at t[c] of the least-squares quadratic through the finite (t[j], x[j]), j in [a, b];
 * NAN with fewer than 3. *se its standard error (u a floor under the residual scatter); *value
 * (may be NULL; set when the slope is) the quadratic's value at t[c]. */
double holdup_local_slope(const double *t, const double *x, size_t a, size_t b, size_t c, double u,
                          double *se, double *value);
/* The rows [a, b] of the stretch [s, e) the local quadratic at row i takes: those within half_s
 * of it, at least min_side each side where the stretch has them. */
void holdup_row_range(const stagecal_runlog *log, size_t s, size_t e, size_t i, double half_s,
                      size_t min_side, size_t *a, size_t *b);
/* The xD whose plain count (counted as holdup_count_corrected counts) is n, bracketed between
 * y*(xb) and the model's largest x, by GSL's Brent solver. */
int holdup_steady_xd_of_count(const stagecal_vle *vle, double xd, double xb, double reflux,
                              double n, double *xd_ss, stagecal_error *err);

/* The pseudo-steady test of the STAGES compensation over the stretch [s, e) of one reflux set
 * point (src/holdup_refine.c; docs/methods.md, "Column holdup"): the compensated rows (xd_ss
 * finite) before the first and after the last one where the second-order term (the profile's
 * own derivatives, on the smoothed compositions) moves the steady xD by at most
 * par->quasi_tol_u·u_xd are left out (xd_ss NAN, u2 0; u2 may be NULL); all of them when no row
 * agrees. Nothing is tested when quasi_tol_u or u_xd is not positive. ENOMEM only. */
int holdup_refine_stretch(const stagecal_runlog *log, size_t s, size_t e, const stagecal_vle *vle,
                          double holdup_mol, double drum_mol, const stagecal_holdup_params *par,
                          double u_xd, double *xd_ss, double *u2, double *gs);

/* stagecal_holdup_compensate with the STAGES variance split by how its errors are shared:
 * gs NULL: u2 is the row's whole compensation variance, as there; gs given: u2 is the part
 * common to the run's rows (the holdup's, Δ²·u_rel²; LAG's (se(τ)·dxD/dt)² whole), and gs[i] =
 * Δ/(dxD/dt), the shift per unit slope (0 where not compensated by STAGES), whose error is
 * local in time (holdup_window_slope_var). */
int holdup_compensate_split(const stagecal_runlog *log, const stagecal_holdup_model *hm,
                            const stagecal_holdup_params *params, double *xd_ss, double *u2_extra,
                            double *gs, stagecal_error *err);

/* Weights w[k − a], k in [a, b], with Σ w·x = holdup_local_slope's slope at t[c]; x NULL:
 * every point, else those with x and t finite (the others weigh 0). 0 when fewer than 3 points
 * or singular. */
int holdup_slope_weights(const double *t, const double *x, size_t a, size_t b, size_t c, double *w);

/* The variance of the mean over rows [first, last] (divided by all of them, as the window's
 * mean compensation variance) of gs[i]·(the slope error of row i) at the analyser's noise u_xd:
 * each row's dxD/dt is a weighted sum of the readings (the default local quadratics of the
 * compensation, stretch by stretch), so the mean is u_xd²·Σ_k c_k² with c_k the summed weights
 * of reading k. The slopes' errors of neighbouring rows share readings and those a local
 * quadratic's slope gives cancel over a long window (its weights sum to 0), so this is far
 * below the rows' mean (gs·se(dxD/dt))². ENOMEM only. */
int holdup_window_slope_var(const stagecal_runlog *log, size_t first, size_t last, const double *gs,
                            double u_xd, double *var);

#endif
