/*
 * evidence_physics.c — what the evidence builder (evidence.c) takes from the physics
 * beyond the textbook diagram: the compensated (steady-equivalent) distillate of every row
 * (column holdup, include/stagecal/holdup.h) and each window's conditions (logged pressure,
 * subcooled reflux, unequal latent heats, include/stagecal/physics.h). Methods:
 * docs/methods.md.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "evidence_internal.h"
#include "internal.h"

/* The compensation the params ask for, AUTO resolved (see evidence.h). */
static stagecal_holdup_comp holdup_kind(const stagecal_column *col, int want,
                                        const stagecal_holdup_tau *pooled)
{
    if (want != STAGECAL_EVIDENCE_HOLDUP_AUTO)
        return (stagecal_holdup_comp)want;
    if (col->holdup_column_mol > 0 || col->holdup_drum_mol > 0)
        return STAGECAL_HOLDUP_COMP_STAGES;
    return pooled->ok ? STAGECAL_HOLDUP_COMP_LAG : STAGECAL_HOLDUP_COMP_NONE;
}

/* The relative standard uncertainty of the STAGES correction: the stated holdup's (0.25
 * when the column file gives none: common practice, no source — holdups from packing or
 * tray correlations scatter by tens of per cent) and the pseudo-steady model's own, 5 %:
 * on the stage-by-stage simulator (tests/tool_holdup_coverage.c, noise-free, holdup
 * 2–6 % of the charge) the corrected window counts miss by −4 to −7 % of the
 * uncompensated error at R = 2 to 4 (docs/methods.md, "Column holdup"). */
static double holdup_u_rel(const stagecal_column *col)
{
    double u = col->holdup_u_rel > 0 ? col->holdup_u_rel : 0.25, model = 0.05;
    return sqrt(u * u + model * model);
}

int evidence_holdup(const stagecal_runlog *log, const stagecal_column *col,
                    const stagecal_evidence_params *par, stagecal_evidence_set *set, double *xd,
                    double *u2, stagecal_error *err)
{
    set->nruns = log->nruns;
    set->tau = calloc(log->nruns ? log->nruns : 1, sizeof *set->tau);
    if (!set->tau)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    stagecal_holdup_tau *su = calloc(log->nruns ? log->nruns : 1, sizeof *su);
    if (!su)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    int rc =
        stagecal_holdup_estimate(log, col->u.xd, NULL, set->tau, su, NULL, &set->tau_pooled, err);
    stagecal_holdup_model hm = {holdup_kind(col, par->holdup, &set->tau_pooled),
                                set->tau,
                                set->tau_pooled,
                                col->system.vle,
                                col->holdup_column_mol,
                                col->holdup_drum_mol,
                                su,
                                col->u.xd,
                                holdup_u_rel(col)};
    set->holdup_kind = hm.kind;
    if (rc == STAGECAL_OK)
        rc = stagecal_holdup_compensate(log, &hm, NULL, xd, u2, err);
    free(su);
    if (rc != STAGECAL_OK)
        return rc;
    set->n_settling = 0;
    for (size_t i = 0; i < log->n; i++)
        set->n_settling += isfinite(log->xd[i]) && !isfinite(xd[i]);
    return STAGECAL_OK;
}

int evidence_conditions(const stagecal_runlog *log, const stagecal_column *col,
                        stagecal_evidence_set *set, stagecal_error *err)
{
    stagecal_physics_params pp = stagecal_physics_default_params();
    pp.cache_size = 2 * set->n + 2; /* no model is rebuilt while a condition points to it */
    if (!(set->phys = stagecal_physics_alloc(col, &pp, err)))
        return err ? err->code : STAGECAL_ENOMEM;
    set->conds = calloc(set->n ? set->n : 1, sizeof *set->conds);
    if (!set->conds)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t k = 0; k < set->n; k++) {
        stagecal_evidence *e = &set->ev[k];
        double ps = 0, ts = 0;
        size_t np = 0, nt = 0;
        for (size_t i = e->first; i <= e->last; i++) {
            if (log->p_pa && isfinite(log->p_pa[i]))
                ps += log->p_pa[i], np++;
            if (log->t_reflux_k && isfinite(log->t_reflux_k[i]))
                ts += log->t_reflux_k[i], nt++;
        }
        double xd = e->xd > 0 && e->xd <= 1 ? e->xd : 0.5;
        int rc = stagecal_physics_cond_at(set->phys, np ? ps / (double)np : NAN, xd, e->r,
                                          nt ? ts / (double)nt : NAN, &set->conds[k], err);
        if (rc != STAGECAL_OK)
            return rc;
        e->cond = &set->conds[k];
    }
    return STAGECAL_OK;
}

void evidence_physics_free(stagecal_evidence_set *set)
{
    stagecal_physics_free(set->phys);
    free(set->conds);
    free(set->tau);
}
