/*
 * stagecal/stages.h — McCabe–Thiele stepping for a batch rectifier, both ways.
 *
 * Conventions (docs/methods.md, "Stage counting"): stages are numbered from the top, the pot is the
 * last, ideal, stage; "stages" counts the pot, "column stages" = stages − 1. Constant molar
 * overflow: y(n+1) = (L/V)·x(n) + (1 − L/V)·xD, L/V = R/(R+1); total reflux is R = INFINITY (L/V =
 * 1). Total condenser: y1 = xD. Each column stage may carry a Murphree vapour efficiency E_MV in
 * (0, 1]; the pot is ideal. Fractional stages are defined from the pot up (docs/methods.md, "Stage
 * counting") and equal Fenske / Smoker exactly for constant α and E_MV = 1, which is how such
 * inversions are computed (closed_form).
 */
#ifndef STAGECAL_STAGES_H
#define STAGECAL_STAGES_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Per-sample outcome of an inversion (a result, not an error). */
typedef enum {
    STAGECAL_STAGES_OK = 0,    /* stages computed */
    STAGECAL_STAGES_PINCH,     /* xB cannot be reached with any number of stages */
    STAGECAL_STAGES_AZEOTROPE, /* an azeotrope lies between xB and xD */
    STAGECAL_STAGES_INVALID    /* input outside its domain (reason says which) */
} stagecal_stages_status;

/* "ok", "pinch", "azeotrope", "invalid". */
const char *stagecal_stages_status_name(int status);

/* Tunables (GSL "Arbitrary Constants"). */
typedef struct {
    size_t max_stages;      /* cap on whole steps before declaring a pinch (default 10000) */
    double top_tol;         /* x_target ≤ xD + top_tol counts as stages = 1 (1e-12) */
    int want_sensitivities; /* fill the ∂stages/∂… fields: 1 tangent-linear (carried along the
                               inversion, exact for the closed form), 2 central finite
                               differences of the inversion (six more inversions); 0 none */
    /* Added after the first three; callers that start from the defaults need not care. */
    double x_epsabs;          /* absolute tolerance [mol/mol] of the E_MV < 1 pseudo-equilibrium
                                 solve (GSL Brent, bracketed); default 1e-15 */
    size_t max_iter;          /* iteration cap of that solve (default 200) */
    size_t pinch_scan_after;  /* after this many whole steps the operating line is checked against
                                 the equilibrium curve on a grid between x_target and the current
                                 liquid, so a pinch is reported early (default 200) */
    size_t pinch_scan_points; /* points of that grid (default 256) */
    double fd_rel_step;       /* relative finite-difference step of want_sensitivities = 2, applied
                                 to min(x, 1 − x) for compositions and to R (default
                                 cbrt(DBL_EPSILON) ≈ 6.06e-6, the usual optimum for central
                                 differences) */
    int closed_form;          /* 1 (default): constant α at E_MV = 1 is inverted with Smoker's
                                 closed form (Fenske at total reflux), which equals stepping under
                                 the fractional-stage rule; 0: always step */
} stagecal_stages_params;

stagecal_stages_params stagecal_stages_default_params(void);

typedef struct {
    int status;           /* stagecal_stages_status */
    double stages;        /* equilibrium stages incl. the pot (≥ 1); 0 unless ok */
    double column_stages; /* stages − 1; 0 unless ok */
    double lv;            /* L/V used (1 at total reflux) */
    double
        x_target; /* liquid leaving the lowest column stage (docs/methods.md, "Stage counting") */
    double dstages_dxd; /* sensitivities (0 unless ok and requested): the derivatives of */
    double dstages_dxb; /* the count (tangent-linear; or finite differences, one-sided */
    double dstages_dr;  /* where a neighbour leaves the domain, see want_sensitivities);
                           ∂/∂R = 0 at total reflux */
    char reason[160];   /* why, when status is not ok; "" otherwise */
} stagecal_stages_result;

/* One point of a stage profile: the liquid leaving stage `stage` and the vapour
 * leaving it (on the (pseudo-)equilibrium curve). */
typedef struct {
    double stage; /* 1, 2, …; the partial stage's end point carries its fractional position */
    double x;     /* liquid mole fraction */
    double y;     /* vapour mole fraction */
} stagecal_stage_point;

/* Inversion: (xD, xB, R, E_MV) → stages. Returns STAGECAL_OK whenever res is filled,
 * even for pinch/azeotrope/invalid (see res->status and res->reason); an error code
 * only for a failed inner solve (ENOCONV) or a NULL argument (EINVAL). params may be
 * NULL (defaults). Never leaves NaN or ±inf in res. */
int stagecal_stages_invert(const stagecal_vle *vle, double xd, double xb, double reflux,
                           double murphree, const stagecal_stages_params *params,
                           stagecal_stages_result *res, stagecal_error *err);

/* Inversion of n rows at one E_MV and one params: row i is (xd[i], xb[i], reflux[i]) and res[i]
 * is exactly what stagecal_stages_invert gives for it (the same doubles and texts); faster per
 * row for constant α at E_MV = 1, where the closed form takes the rows several at a time, and
 * for a table model (TABLE, or an activity model's table) at E_MV = 1 with
 * want_sensitivities = 1, where rows are stepped side by side.
 * Returns STAGECAL_OK when every row's stagecal_stages_invert would, else the first such error
 * (err holds that row's message); every row is inverted either way. */
int stagecal_stages_invert_many(const stagecal_vle *vle, size_t n, const double *xd,
                                const double *xb, const double *reflux, double murphree,
                                const stagecal_stages_params *params, stagecal_stages_result *res,
                                stagecal_error *err);

/* Forward stepping: (xD, R, stages ≥ 1, E_MV) → xB and the profile. profile may be
 * NULL; otherwise up to cap points are written (ceil(stages) entries: whole column
 * stages, the partial stage's end point when stages is not whole, then the pot) and
 * *len receives the full count. *status receives ok / pinch / azeotrope / invalid
 * (invalid: R = 0; azeotrope: one at or below xD; pinch: a step made no progress); when
 * it is not ok, *len = 0, *xb is the last liquid composition reached on a pinch (the
 * pinch composition to rounding) and 0 otherwise, and err (if given) carries the reason with code
 * STAGECAL_OK. The fractional part of stages − 1 is stepped with the closed-form
 * inverse of Smoker's equation written with α_loc of that step (Smoker 1938, "Analytic
 * determination of plates in fractionating columns", Trans. AIChE 34, citation from memory), so the
 * result round-trips with stagecal_stages_invert. Profile points: stage = 1, 2, … for
 * whole column stages (y on the (pseudo-)equilibrium curve), stage = stages − 1 for the
 * partial stage's end point (x_target), stage = stages for the pot (xB, y*(xB)).
 * Errors: EINVAL (stages < 1 or above max_stages, xD, R or E_MV outside its domain, a
 * NULL pointer), ENOCONV / EINTERNAL (an inner solve failed). */
int stagecal_stages_step(const stagecal_vle *vle, double xd, double reflux, double stages,
                         double murphree, const stagecal_stages_params *params, double *xb,
                         stagecal_stage_point *profile, size_t cap, size_t *len, int *status,
                         stagecal_error *err);

/* Closed forms for constant α (Fenske 1932, "Fractionation of straight-run Pennsylvania gasoline",
 * Ind. Eng. Chem. 24; Smoker 1938; both citations from memory). Return EINVAL outside their domain
 * (e.g. xB at or below the pinch for Smoker). Stages include the pot. */
int stagecal_fenske(double alpha, double xd, double xb, double *stages, stagecal_error *err);
int stagecal_smoker(double alpha, double reflux, double xd, double xb, double *stages,
                    stagecal_error *err);
/* Minimum reflux ratio for separating xD from a pot at xB with a general model
 * (the operating line touches the equilibrium curve, tangent pinches included):
 * L/V_min = max over x in [xB, xD) of (xD − y*(x))/(xD − x), found by a scan and GSL
 * Brent minimisation; *rmin = 0 when the pot vapour alone reaches xD. EINVAL when an
 * azeotrope lies at or below xD or the compositions are outside 0 < xB < xD < x_max. */
int stagecal_min_reflux(const stagecal_vle *vle, double xd, double xb, double *rmin,
                        stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif
