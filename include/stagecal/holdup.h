/*
 * stagecal/holdup.h — the column's liquid holdup delays the distillate: the logged xD
 * trails the composition the column would give at steady state with the same pot. This
 * module estimates the delay per run and compensates it.
 *
 * Response. A first-order lag with time constant τ, identified from the run's
 * total-reflux start-up (the pot does not move, so the distillate's rise is the column's
 * own response): xD(t) = a − b·exp(−(t − t0)/τ), fitted by least squares (τ by GSL Brent
 * minimisation of the profile sum of squares over ln τ; a, b linear), with the standard
 * error of τ from s²·(JᵀJ)⁻¹. Compensation inverts the lag:
 *     xD,ss(t) ≈ xD(t) + τ·dxD/dt,
 * the derivative from a local quadratic in time over the neighbouring samples of the same
 * production stretch (one reflux ratio); the uncertainty of τ adds (se(τ)·dxD/dt)² to the
 * variance of each compensated reading. The first-order lag is the leading term of the
 * column's slowest mode (Distefano, G. P. (1968), "Mathematical modeling and numerical
 * integration of multicomponent batch distillation equations", AIChE J. 14, 190–199, from
 * memory, for the stage-by-stage model it approximates). Method and measured effect:
 * docs/methods.md, "Column holdup".
 */
#ifndef STAGECAL_HOLDUP_H
#define STAGECAL_HOLDUP_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/runlog.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Which transient sets a run's time constant. */
typedef enum {
    STAGECAL_HOLDUP_AUTO = 0, /* the start-up when it gives one, else the production transient */
    STAGECAL_HOLDUP_STARTUP,  /* the total-reflux start-up only */
    STAGECAL_HOLDUP_TRANSIENT /* the first production stretch only */
} stagecal_holdup_source;

typedef struct {
    size_t min_rows;               /* fewest rows for a fit (5) */
    double min_rise_u;             /* the transient's amplitude must exceed this many u(xD) (or
                                      residual sds) (5) */
    size_t half_window;            /* fewest samples each side of the local quadratic for
                                      dxD/dt (2) */
    size_t grid;                   /* points of the ln τ scan before Brent (60) */
    double transient_max_s;        /* production rows fitted after the start-up [s] (4 h) */
    stagecal_holdup_source source; /* AUTO */
    double settle_factor; /* STAGES: rows closer than settle_factor·(holdup + drum)·(R + 1)/V to
                             the start of their stretch are still settling: xd_ss NAN (2) */
    double slope_half_s;  /* the local quadratic for dxD/dt takes the rows within this time
                             each side [s] (1800; at least half_window rows each side) */
    double quasi_tol_u;   /* STAGES: a compensated row is pseudo-steady when the second-order
                             term of the compensation (the profile's own time derivatives) moves
                             its steady xD by at most quasi_tol_u·u(xD); other rows are left out
                             like settling rows (0.1; ≤ 0: no test) (docs/methods.md, "Column
                             holdup") */
} stagecal_holdup_params;

stagecal_holdup_params stagecal_holdup_default_params(void);

/* The time constant of one run (or pooled). */
typedef struct stagecal_holdup_tau {
    int ok;           /* 1: tau_s and se_tau_s are estimates */
    double tau_s;     /* time constant [s] (0 unless ok) */
    double se_tau_s;  /* its standard error [s] */
    double xd_inf;    /* the start-up's asymptote a [-] */
    double rise;      /* b: asymptote minus the fitted start [-] */
    size_t n;         /* rows fitted */
    char reason[120]; /* why not ok ("" when ok) */
} stagecal_holdup_tau;

/* Fits the first-order rise xD = a − b·exp(−(t − t0)/τ) to n samples of a total-reflux
 * start-up (t_s [s] increasing, xd); u_xd > 0 is the analyser's stated standard uncertainty,
 * a floor under the residual variance (0: not stated). Fills out (ok = 0 with a reason
 * when the rise is too small, or when the best τ lies at the edge of [Δt/20, 2·span]).
 * EINVAL for NULL arguments, ENOMEM. */
int stagecal_holdup_fit_startup(const double *t_s, const double *xd, size_t n, double u_xd,
                                const stagecal_holdup_params *params, stagecal_holdup_tau *out,
                                stagecal_error *err);
/* The same for a production stretch that starts from a settled column (the end of the
 * start-up, or of a stretch at another R): the lag's response to a target that moves as a
 * quadratic in time, x(s) = Σ_(k≤2) c_k·r_k(s) + A·exp(−s/τ), with r_k the first-order
 * lag's response to s^k (docs/methods.md). The fit should start at the last row before the
 * step. */
int stagecal_holdup_fit_transient(const double *t_s, const double *xd, size_t n, double u_xd,
                                  const stagecal_holdup_params *params, stagecal_holdup_tau *out,
                                  stagecal_error *err);

/* Per run (tau has log->nruns entries): the start-up fit on the rows from the run's start
 * while R is total reflux, and the transient fit on the last start-up row and up to
 * transient_max_s of the first production stretch after it; tau[k] is the one params.source
 * picks; startup and transient (may be NULL) receive both. *pooled: the inverse-variance
 * weighted mean of the tau[k] that are ok (pooled->ok = 0 when none). ENOMEM, EINVAL. */
int stagecal_holdup_estimate(const stagecal_runlog *log, double u_xd,
                             const stagecal_holdup_params *params, stagecal_holdup_tau *tau,
                             stagecal_holdup_tau *startup, stagecal_holdup_tau *transient,
                             stagecal_holdup_tau *pooled, stagecal_error *err);

/* ---- the holdup from the start-up (holdup_estimate.c) ------------------------------------ */

typedef struct stagecal_holdup_est {
    int ok;               /* 1: holdup_mol and se_holdup_mol are estimates */
    double stages;        /* the stage count (incl. the pot) the estimate assumed */
    double holdup_mol;    /* liquid on the column stages [mol] */
    double se_holdup_mol; /* its standard error from se(τ) (the stage count taken as known) */
    char reason[120];     /* why not ok */
} stagecal_holdup_est;

/* The column's liquid holdup from a run's total-reflux start-up: su is the start-up fit of
 * the n rows at times t_s; x0 the liquid the column starts with (the pot's composition at
 * the first row), xb the pot during the start-up, stages the stage count incl. the pot
 * (e.g. the total-reflux inversion of su->xd_inf), v_mol_s the boil-up. A reference
 * start-up of the stage-by-stage model (constant molar overflow, equal holdup on the
 * column stages, no drum, the column full of liquid at x0 when the boil-up starts) is
 * fitted on the same times; the holdup is the one whose fitted τ equals su->tau_s
 * (time scales as holdup/V). ok = 0 with a reason when su is not ok or a reference fails.
 * EINVAL, ENOMEM. */
int stagecal_holdup_from_startup(const stagecal_vle *vle, const double *t_s, size_t n, double x0,
                                 double xb, double stages, double v_mol_s,
                                 const stagecal_holdup_tau *su,
                                 const stagecal_holdup_params *params, stagecal_holdup_est *out,
                                 stagecal_error *err);

/* ---- the pseudo-steady holdup correction ------------------------------------------------
 *
 * Summing the stage balances of a column with liquid holdup h per stage and h_d in the
 * reflux drum from the top down to stage j gives the operating line of a column whose
 * profile moves (constant molar overflow, total condenser):
 *     V·y(j+1) = L·x(j) + D·xD + h_d·dxD/dt + h·Σ_(k≤j) dx_k/dt,   y1 = xD + (h_d/V)·dxD/dt.
 * In a slowly moving batch the profile stays on its steady family (the same stages from a
 * moving xD), so dx_k/dt = (∂x_k/∂xD)·dxD/dt with the sensitivities of the plain stepping.
 * stagecal_holdup_invert steps that line (whole steps on the model's y* inverse, a log-odds
 * fraction for the crossing step) and returns the plain count plus the difference between
 * the corrected and the plain count stepped that same way, so it is the plain count exactly
 * when the holdup or dxD/dt is 0. The holdup per stage is holdup_mol/(N − 1) at the count
 * being computed (a fixed point). */
typedef struct {
    double holdup_mol; /* liquid on the column stages [mol] */
    double drum_mol;   /* liquid in the reflux drum [mol] */
    double v_mol_s;    /* boil-up [mol/s] */
    double dxd_dt;     /* slope of the logged distillate [1/s] */
} stagecal_holdup_state;

/* Stages at (xD, xB, R) with the holdup of st; plain is the plain inversion's count (≥ 1),
 * or 0 when it had none (a pinch of the plain line: the corrected count stands alone,
 * started from 10 stages). EINVAL for arguments outside their domain (R = INFINITY returns
 * plain: at total reflux the pot does not move); ENOCONV when the corrected line pinches or
 * leaves the model's domain. */
int stagecal_holdup_invert(const stagecal_vle *vle, double xd, double xb, double reflux,
                           double plain, const stagecal_holdup_state *st, double *stages,
                           stagecal_error *err);

/* The steady-equivalent distillate: the xD whose plain count at xB and R equals the count
 * of stagecal_holdup_invert, found by GSL Brent on the plain inversion. Both fits take it as
 * if the column were steady. Errors as stagecal_holdup_invert; EINVAL when the plain
 * inversion is neither ok nor a pinch. */
int stagecal_holdup_steady_xd(const stagecal_vle *vle, double xd, double xb, double reflux,
                              const stagecal_holdup_state *st, double *xd_ss, stagecal_error *err);

/* ---- compensation of a whole log ------------------------------------------------------- */

typedef enum {
    STAGECAL_HOLDUP_COMP_NONE = 0, /* the logged xD */
    STAGECAL_HOLDUP_COMP_LAG,      /* first-order lag: xD + τ·dxD/dt, τ of the run (or pooled) */
    STAGECAL_HOLDUP_COMP_STAGES    /* holdup on the stages: stagecal_holdup_steady_xd */
} stagecal_holdup_comp;

typedef struct {
    stagecal_holdup_comp kind;
    const stagecal_holdup_tau *tau;     /* LAG: one per run of the log (may be NULL: pooled only) */
    stagecal_holdup_tau pooled;         /* LAG: used where a run's own τ is not ok */
    const stagecal_vle *vle;            /* STAGES: the column's equilibrium */
    double holdup_mol, drum_mol;        /* STAGES: column and drum holdup [mol] */
    const stagecal_holdup_tau *startup; /* LAG, STAGES: each run's start-up fit (may be NULL) */
    double u_xd;                        /* the distillate analyser's standard uncertainty */
    double u_rel; /* STAGES: relative standard uncertainty of the correction (the holdup's and
                     the pseudo-steady model's) */
    const double *run_holdup_mol; /* STAGES: per run (may be NULL); a finite entry replaces
                                     holdup_mol for that run */
    const double *run_u_rel;      /* STAGES: per run with run_holdup_mol, replaces u_rel */
} stagecal_holdup_model;

/* Compensated distillate, one value per row of log (xd_ss), and the extra variance of the
 * compensation (u2_extra, may be NULL): LAG (se(τ)·dxD/dt)²; STAGES Δ²·(u_rel² +
 * (se(dxD/dt)/dxD/dt)²) with Δ = xd_ss − xD (the shift is linear in both to first order),
 * se(dxD/dt) from the local quadratic's residuals (u_xd a floor). That is one row's variance: the
 * slope's errors of neighbouring rows largely cancel in a mean over rows, so calibration takes
 * only the u_rel part as common to a window's rows and the slope's part as that of the window's
 * mean (docs/methods.md, "Column holdup"). A run's total-reflux start-up is
 * the column's own transient, not a steady state: with a compensation (LAG or STAGES) its rows are
 * still settling (xd_ss NAN) until settle_factor·τ·ln(|b|/(0.1·u_xd)) after its first row, τ and b
 * of the run's start-up fit (when it is ok; u_xd 0: 10⁻³·|b| for 0.1·u_xd), so the fitted rise has
 * decayed below a tenth of the analyser's uncertainty with the margin settle_factor for the slower
 * modes. Otherwise only rows at a finite logged R are changed: dxD/dt comes from a local quadratic
 * over the rows within slope_half_s each side (at least half_window) within the same stretch of one
 * logged R; STAGES also needs the row's V. Rows where something is missing or a solve fails keep
 * the logged xD. STAGES with quasi_tol_u > 0 and u_xd > 0 also leaves out (NAN) the rows of a
 * stretch before the first and after the last row where the column is pseudo-steady (the
 * second-order term of the compensation within quasi_tol_u·u_xd; src/holdup_refine.c): the free
 * response after a reflux change, the tail near a pinch. ENOMEM, EINVAL. */
int stagecal_holdup_compensate(const stagecal_runlog *log, const stagecal_holdup_model *hm,
                               const stagecal_holdup_params *params, double *xd_ss,
                               double *u2_extra, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif
