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
#include "holdup_internal.h"
#include "internal.h"
#include "runlog_internal.h"
#include "stagecal/stages.h"

int evidence_holdup(const stagecal_runlog *log, const stagecal_column *col,
                    const stagecal_evidence_params *par, stagecal_evidence_set *set, double *xd,
                    double *u2, double *gs, stagecal_error *err)
{
    set->nruns = log->nruns;
    holdup_resolved hr;
    int rc = holdup_resolve(log, col, par->holdup, par->holdup_pooled, &hr, xd, u2, gs, err);
    /* the set owns what it reports */
    set->tau = hr.tau, set->tau_pooled = hr.pooled, set->holdup_est = hr.est;
    set->holdup_kind = hr.kind;
    hr.tau = NULL, hr.est = NULL;
    holdup_resolved_free(&hr);
    if (rc != STAGECAL_OK)
        return rc;
    set->n_settling = 0;
    for (size_t i = 0; i < log->n; i++)
        set->n_settling += isfinite(log->xd[i]) && !isfinite(xd[i]);
    return STAGECAL_OK;
}

int evidence_conditions(const stagecal_column *col, stagecal_evidence_set *set, const double *p,
                        const double *t, size_t stride, stagecal_error *err)
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
        double xd = e->xd > 0 && e->xd <= 1 ? e->xd : 0.5;
        int rc = stagecal_physics_cond_at(set->phys, p[k * stride], xd, e->r, t[k * stride],
                                          &set->conds[k], err);
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
    free(set->holdup_est);
}
