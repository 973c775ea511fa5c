/*
 * stagecal/physics.h — the physics a plain McCabe–Thiele inversion leaves out, each
 * optional and each reducing to the plain model when its inputs are absent:
 *
 *   logged pressure   every row's equilibrium at its logged top pressure P, the pot's
 *                     at P + pressure_drop_pa (models with Antoine sets: IDEAL and the
 *                     activity models; the others have no pressure dependence);
 *   subcooled reflux  the internal reflux ratio
 *                         R_int = R·(1 + cp_L·(T_bubble(xD) − T_reflux)/λ)
 *                     (Wankat, P. C. (2012), Separation Process Engineering, 3rd ed.,
 *                     Prentice Hall, ch. 4, from memory), which replaces R in the
 *                     operating line: L/V = R_int/(R_int + 1);
 *   unequal latent    heats: with both components' latent heats in the column file the
 *                     stepping runs in pseudo-moles (stagecal_vle_alloc_pseudo: one mole of
 *                     the light component counts as λ_light/λ_heavy), where constant molar
 *                     overflow is exact; compositions in and out are true mole fractions.
 *
 * A `stagecal_physics` object belongs to one column; it keeps the equilibrium models it
 * built for the pressures met so far (a cache), so it is NOT safe to share between
 * threads. Methods and numbers: docs/methods.md.
 */
#ifndef STAGECAL_PHYSICS_H
#define STAGECAL_PHYSICS_H

#include <stddef.h>

#include "stagecal/column.h"
#include "stagecal/error.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Internal reflux ratio of a subcooled reflux (the top stage condenses vapour to heat the
 * returning liquid to its bubble point): R_int = R·(1 + cp·dt/λ) with dt = T_bubble(xD) −
 * T_reflux [K]. dt ≤ 0 (no subcooling, or a reading above the bubble point) gives R; R =
 * INFINITY gives INFINITY. EINVAL for R < 0 or NaN, cp < 0, latent ≤ 0 or a non-finite dt. */
int stagecal_internal_reflux(double reflux, double cp_j_mol_k, double dt_k, double latent_j_mol,
                             double *r_int, stagecal_error *err);

/* A copy of an IDEAL or activity model at another pressure p_pa > 0 (same Antoine sets,
 * parameters and tunables). NULL with EINVAL for the other kinds (no pressure dependence)
 * or a bad p_pa; ENOMEM. The caller frees with stagecal_vle_free. */
stagecal_vle *stagecal_vle_at_pressure(const stagecal_vle *vle, double p_pa, stagecal_error *err);
/* 1 when the model's equilibrium depends on pressure (IDEAL and activity models). */
int stagecal_vle_has_pressure(const stagecal_vle *vle);

/* ---- conditions of one row (or one window) ---------------------------------------------- */

enum {
    STAGECAL_PHYS_PRESSURE = 1u << 0,        /* the logged pressure set the equilibrium */
    STAGECAL_PHYS_PRESSURE_UNUSED = 1u << 1, /* a pressure was logged, the model has none */
    STAGECAL_PHYS_SUBCOOLED = 1u << 2,       /* R_int differs from R */
    STAGECAL_PHYS_SUBCOOL_UNUSED = 1u << 3,  /* T_reflux logged, but no cp, λ or T_bubble */
    STAGECAL_PHYS_POT_DROP = 1u << 4,        /* the pot sits at a higher pressure */
    STAGECAL_PHYS_PSEUDO = 1u << 5           /* stepped in pseudo-moles (unequal latent heats) */
};

typedef struct {
    double p_resolution_pa; /* with p_grid_rel = 0 or exact: pressures are rounded to this
                               before a model is built (1 Pa; 0 = exact) */
    size_t cache_size;      /* models kept (32); the oldest is rebuilt when more are met */
    int exact;              /* 1: a model at a logged pressure is built on a coarse table
                               (STAGECAL_PHYSICS_EXACT_GRID nodes, ~16x faster to build) and
                               answers y*, x* and the slope by solving the model (~µs a query
                               instead of ~50 ns): for callers with a few queries per pressure
                               (the soft sensor's, runlog_soft.c); 0 (default): the dense table */
    double p_grid_rel;      /* > 0 (default STAGECAL_PHYSICS_GRID_REL): models are built only
                               on the grid P0·exp(k·p_grid_rel) around the column's pressure
                               P0; the model at a logged P has the table interpolated in ln P
                               through its four grid neighbours (cubic) (~30 µs instead of
                               ~2 ms; its T_bubble is solved at P itself). With exact the grid
                               models are coarse exact ones and the interpolated table only
                               guides the solves at P (answers as the model built at P to the
                               solver's tolerance; pressures still rounded to p_resolution_pa).
                               0: a model built at every (rounded) pressure */
} stagecal_physics_params;

/* Table nodes of a model built with params.exact (enough for its azeotrope search and the
 * brackets of its exact x*; stagecal_vle_params.grid_n). */
#define STAGECAL_PHYSICS_EXACT_GRID 129

/* Default relative spacing of the pressure grid (docs/methods.md "Logged pressure": the
 * interpolated y* is within ~1e-13 of the dense model built at P). */
#define STAGECAL_PHYSICS_GRID_REL 0.02

stagecal_physics_params stagecal_physics_default_params(void);

typedef struct stagecal_physics stagecal_physics; /* opaque, one per column */

/* Built from a loaded column (col and its model must outlive the object); params may be
 * NULL (defaults). NULL with EINVAL (no model) or ENOMEM. */
stagecal_physics *stagecal_physics_alloc(const stagecal_column *col,
                                         const stagecal_physics_params *params,
                                         stagecal_error *err);
void stagecal_physics_free(stagecal_physics *ph); /* NULL ok */

/* What the stepping of one row uses. The models point into ph (valid until ph is freed). */
typedef struct {
    const stagecal_vle *vle;     /* equilibrium of the column stages (top pressure) */
    const stagecal_vle *vle_pot; /* equilibrium of the pot (top pressure + pressure drop) */
    double p_top_pa;             /* top pressure used [Pa] (0: the model has no pressure) */
    double reflux;               /* logged (external) reflux ratio [-] */
    double r_int;                /* internal reflux ratio [-], what the operating line uses */
    double pseudo_ratio;         /* λ_light/λ_heavy when vle and vle_pot are pseudo-mole models
                                    (compositions are transformed on the way in and out); 0 none */
    unsigned flags;              /* STAGECAL_PHYS_* */
} stagecal_physics_cond;

/* Conditions at a logged top pressure p_top_pa (NaN: not logged, the column file's
 * pressure), distillate xd, logged reflux R and reflux temperature t_reflux_k (NaN: not
 * logged). Errors: EINVAL (R or xd outside its domain), ENOMEM, ENOCONV (a bubble point
 * failed). */
int stagecal_physics_cond_at(stagecal_physics *ph, double p_top_pa, double xd, double reflux,
                             double t_reflux_k, stagecal_physics_cond *cond, stagecal_error *err);

/* The column's equilibrium in true mole fractions (never the pseudo-mole twin) at a logged top
 * pressure p_top_pa (NaN or ≤ 0: the column file's pressure), of the top (pot = 0) or of the
 * pot (pot = 1: top + pressure_drop_pa). Models without pressure: the column's own. *vle points
 * into ph (valid until ph is freed). ENOMEM, ENOCONV. Used by the soft sensor (softsensor.h). */
int stagecal_physics_vle_at(stagecal_physics *ph, double p_top_pa, int pot,
                            const stagecal_vle **vle, stagecal_error *err);
/* Inversion under cond: as stagecal_stages_invert with cond->vle and R = cond->r_int, the
 * pot's vapour taken from cond->vle_pot, xD and xB in pseudo-moles when cond says so (the
 * external R is the same in pseudo-moles: reflux and distillate have one composition). res->lv is
 * the internal L/V; the sensitivities (when params ask for them) are with respect to the logged xD,
 * xB and external R (the ∂/∂xD through T_bubble(xD) in R_int is left out: ~1e-5·R per 0.01 of xD).
 */
int stagecal_physics_invert(const stagecal_physics_cond *cond, double xd, double xb,
                            double murphree, const stagecal_stages_params *params,
                            stagecal_stages_result *res, stagecal_error *err);
/* Forward stepping under cond (the inverse of stagecal_physics_invert to 1e-9): *xb, the
 * status and err as stagecal_stages_step; no profile. */
int stagecal_physics_step(const stagecal_physics_cond *cond, double xd, double stages,
                          double murphree, const stagecal_stages_params *params, double *xb,
                          int *status, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif
