/*
 * batch_internal.h — the batch workspace and the functions the batch*.c files share;
 * not installed. batch.c drives (alloc/init/iterate/test/run), batch_law.c evaluates
 * the stage law and steps the column, batch_solve.c holds the inner root solves (xD,
 * and R under a constant-distillate policy), batch_event.c the events, rows and cuts.
 */
#ifndef STAGECAL_BATCH_INTERNAL_H
#define STAGECAL_BATCH_INTERNAL_H

#include <gsl/gsl_odeiv2.h>
#include <gsl/gsl_roots.h>

#include "stagecal/batch.h"

/* The pot and receiver state: W/W0, W·xB/W0, D_cut/W0, D_cut·x̄_cut/W0 and the receiver's
 * Σ D·(xD − xD,0)²/W0 with xD,0 its first xD (its smearing); the dynamic model appends the column
 * stages' liquids and the drum's. */
#define NSTATE 5
#define DYN_MAXSTAGES 60 /* whole column stages of the dynamic model */
#define NSTATE_MAX (NSTATE + DYN_MAXSTAGES + 1)
#define MAXAZ 8

enum { EV_TARGET = 0, EV_SWITCH, EV_CEILING, EV_EMPTY, EV_TIME, EV_STARTUP, NEV };

struct stagecal_batch_workspace {
    stagecal_batch_problem pb;
    stagecal_batch_column col;
    stagecal_batch_params par;
    gsl_odeiv2_system sys;    /* the pot balances (params = this workspace) */
    gsl_odeiv2_driver *drv;   /* GSL driver: owns step, control and evolve */
    gsl_root_fsolver *root_x; /* inner solves (xD, L/V) */
    gsl_root_fsolver *root_h; /* event location on the step length */
    double az[MAXAZ];         /* azeotropes of the vle, ascending */
    size_t n_az;
    double tau;           /* current τ */
    double h;             /* suggested next step in τ */
    double u[NSTATE_MAX]; /* current state */
    double light_done;    /* light in finished cuts / W0 */
    double total_done;    /* distillate in finished cuts / W0 */
    double cut_tau0;      /* τ at which the current cut started */
    size_t cut;           /* current cut */
    size_t sched;         /* current schedule entry */
    int ceiling_hit;      /* constant distillate: R has reached reflux_max */
    int done;             /* batch ended */
    double next_out;      /* τ of the next output row (INFINITY if none) */
    double tau_max;       /* τ of params.t_max_s */
    double xd_last;       /* last xD solved (warm start of the bracket) */
    double lv_last;       /* last L/V of the constant-distillate solve (warm start) */
    size_t n_rhs;
    int clamped;
    int fail_code;       /* error raised inside a GSL callback */
    stagecal_error fail; /* its message */
    double cut_xd0;      /* xD when the current receiver was put on */
    /* the dynamic model (batch_dynamic.c); dyn = 0: quasi-steady */
    int dyn;
    stagecal_batch_dynamics dy;
    size_t dim;         /* state dimension (NSTATE quasi-steady) */
    size_t nw;          /* whole column stages */
    double hs, hd;      /* holdup per whole stage and in the drum, over W0 */
    int startup;        /* 1 during the total-reflux start-up */
    size_t n_remaps;    /* changes of nw */
    double tau_startup; /* τ of the first draw */
    double xd_startup;  /* xD at the first draw */
    int r_seen;         /* a production row has set the reflux range */
};

/* batch_law.c */

/* Forward stepping through the column's callback, or stagecal_stages_step. One stage
 * is the pot alone: xB = x*(xD) whatever R. */
int batch_col_step(const stagecal_batch_column *col, double xd, double r, double n, double *xb,
                   stagecal_error *err);

/* Stages of the column's law at r, clamped to ≥ 1 (*clamped set, may be NULL). */
int batch_law_stages(const stagecal_batch_column *col, double r, double *n, unsigned *outside,
                     int *clamped, stagecal_error *err);

/* batch_solve.c */

/* Runs Brent on f over [lo, hi] (f(lo) < 0 < f(hi) checked by the caller). */
int batch_brent(gsl_root_fsolver *s, gsl_function *f, double lo, double hi, double epsabs,
                size_t max_iter, double *x, int *code, stagecal_error *err, const char *what);

/* xD reached at pot composition xb, reflux r and n stages; xd_last (may be NULL) is
 * the warm start of the bracket and receives the solution. */
int batch_solve_xd(const stagecal_batch_column *col, const stagecal_batch_params *par,
                   gsl_root_fsolver *s, const double *az, size_t n_az, double xb, double r,
                   double n, double *xd_last, double *xd, stagecal_error *err);

/* R, xD, stages and envelope flags at pot composition xb under the current policy. */
int batch_policy_state(stagecal_batch_workspace *w, double xb, double *r, double *xd, double *n,
                       unsigned *outside, stagecal_error *err);

/* batch_event.c */

/* g of event `ev` at (tau, u); > 0 before, ≤ 0 at and after. INFINITY when the event
 * is not armed. */
int batch_event_g(stagecal_batch_workspace *w, int ev, double tau, const double *u, double *g,
                  stagecal_error *err);

/* The next τ at which a time-based event falls (bounds the step so it is hit exactly). */
double batch_next_time_event(const stagecal_batch_workspace *w);

/* One Runge–Kutta step of length h from (tau0, u0) into u; a GSL status. */
int batch_step_from(stagecal_batch_workspace *w, double tau0, const double *u0, double h,
                    double *u);

/* Locates the crossing of event ev inside the step from (tau0, u0) of length *h (on
 * entry), by Brent on the step length; *h receives the upper end of the final bracket. */
int batch_locate_event(stagecal_batch_workspace *w, int ev, double tau0, const double *u0,
                       double *h, stagecal_error *err);

/* Appends the row of the current state to res. ENOMEM. */
int batch_push_row(stagecal_batch_workspace *w, stagecal_batch_result *res, stagecal_error *err);

/* Fires event ev at the current state (row already pushed). */
void batch_fire(stagecal_batch_workspace *w, stagecal_batch_result *res, int ev);

/* Fires every event already due at the current state (g ≤ 0), earliest index first;
 * each firing consumes the event (next cut, next entry, flag) or ends the batch. */
int batch_fire_due(stagecal_batch_workspace *w, stagecal_batch_result *res, int pushed,
                   stagecal_error *err);

/* batch_dynamic.c */

/* Checks params->dynamics and sets the dynamic model up in w (after the quasi-steady
 * allocation): the msbdf driver replaces the Runge–Kutta one. EINVAL, ENOMEM. */
int batch_dyn_setup(stagecal_batch_workspace *w, stagecal_error *err);
/* The starting state: column and drum full of charge liquid, the rest in the pot. */
int batch_dyn_start(stagecal_batch_workspace *w, stagecal_error *err);
/* The distillate mole fraction of state u. */
int batch_dyn_xd(stagecal_batch_workspace *w, const double *u, double *xd, stagecal_error *err);
/* Light component on the column stages and in the drum, over W0. */
double batch_dyn_column_light(const stagecal_batch_workspace *w, const double *u);
/* R, stages and envelope flags of the policy at pot composition xb (the structure of the
 * column follows the stage law at the policy's R, also during the start-up). */
int batch_dyn_policy(stagecal_batch_workspace *w, double xb, double *r, double *n,
                     unsigned *outside, stagecal_error *err);
/* g of the end of the start-up (> 0 before). */
int batch_dyn_startup_g(stagecal_batch_workspace *w, double tau, const double *u, double *g,
                        stagecal_error *err);
/* After an accepted step or an event: a new whole-stage count of the law is taken up
 * (the profile mapped onto the new stages, the light difference to the pot). */
int batch_dyn_restructure(stagecal_batch_workspace *w, stagecal_error *err);
/* Integrates from (tau0, u0) over h into u with the driver (event location). */
int batch_dyn_step_from(stagecal_batch_workspace *w, double tau0, const double *u0, double h,
                        double *u);

#endif
