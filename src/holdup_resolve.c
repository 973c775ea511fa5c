/*
 * holdup_resolve.c — the column-holdup compensation a log gets (src/holdup_internal.h): the
 * kind asked for or chosen, each run's holdup (stated, or from its total-reflux start-up)
 * and the compensated distillate. The evidence builder and the drift and balance checks
 * both take it from here, so they see the same compensated distillate. Methods:
 * docs/methods.md, "Column holdup".
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "holdup_internal.h"
#include "internal.h"
#include "runlog_internal.h"
#include "stagecal/stages.h"

/* The compensation asked for, AUTO resolved. */
static stagecal_holdup_comp holdup_kind(const stagecal_column *col, int want,
                                        const stagecal_holdup_tau *pooled)
{
    if (want != HOLDUP_WANT_AUTO)
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
#define HOLDUP_MODEL_U_REL 0.05

static double holdup_u_rel(const stagecal_column *col)
{
    double u = col->holdup_u_rel > 0 ? col->holdup_u_rel : 0.25;
    return hypot(u, HOLDUP_MODEL_U_REL);
}

/* Each run's holdup from its total-reflux start-up (stagecal_holdup_from_startup) into
 * est (one per run); the stage count from the total-reflux inversion of the start-up's
 * asymptote at the start-up's mean xB. Per run, h[k] and u[k] (NAN when not estimated);
 * *pooled the mean of the estimates and *u_pooled their relative scatter (the run-to-run
 * spread a run without its own estimate faces; its own relative se when only one). */
static int estimate_holdups(const stagecal_runlog *log, const stagecal_column *col,
                            const stagecal_holdup_tau *su, const double *n_run,
                            stagecal_holdup_est *est, double *h, double *u, double *pooled,
                            double *u_pooled, stagecal_error *err)
{
    size_t maxn = 1, nok = 0;
    for (size_t k = 0; k < log->nruns; k++)
        maxn = log->runs[k].n > maxn ? log->runs[k].n : maxn;
    double *t = malloc(2 * maxn * sizeof *t), *x = t ? t + maxn : NULL, s1 = 0, s2 = 0, rel = 0;
    if (!t) {
        free(t);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    int rc = STAGECAL_OK;
    for (size_t k = 0; k < log->nruns && rc == STAGECAL_OK; k++) {
        size_t a = log->runs[k].first, end = a + log->runs[k].n, m = 0, nb = 0, nv = 0;
        double x0 = NAN, xb = 0, v = 0;
        for (size_t i = a; i < end && isinf(log->r[i]); i++) {
            if (isfinite(log->xd[i]) && isfinite(log->t_s[i]))
                t[m] = log->t_s[i], x[m++] = log->xd[i];
            if (isfinite(log->xb[i]))
                x0 = isfinite(x0) ? x0 : log->xb[i], xb += log->xb[i], nb++;
            if (log->v_mol_s && isfinite(log->v_mol_s[i]))
                v += log->v_mol_s[i], nv++;
        }
        stagecal_stages_result res = {0};
        double stages = n_run[k];
        if (!isfinite(stages) && su[k].ok && nb > 0 &&
            stagecal_stages_invert(col->system.vle, su[k].xd_inf, xb / (double)nb, INFINITY, 1.0,
                                   NULL, &res, NULL) == STAGECAL_OK &&
            res.status == STAGECAL_STAGES_OK)
            stages = res.stages;
        rc = stagecal_holdup_from_startup(col->system.vle, t, m, x0, nb ? xb / (double)nb : NAN,
                                          stages, nv ? v / (double)nv : NAN, &su[k], NULL, &est[k],
                                          err);
        const stagecal_holdup_est *e = &est[k];
        h[k] = u[k] = NAN;
        if (rc == STAGECAL_OK && e->ok && e->holdup_mol > 0) {
            h[k] = e->holdup_mol;
            u[k] = hypot(e->se_holdup_mol / e->holdup_mol, HOLDUP_MODEL_U_REL);
            s1 += h[k], s2 += h[k] * h[k], rel = e->se_holdup_mol / e->holdup_mol, nok++;
        }
    }
    free(t);
    *pooled = nok ? s1 / (double)nok : 0;
    double sd = nok > 1 ? sqrt(fmax(s2 - s1 * s1 / (double)nok, 0) / (double)(nok - 1)) : 0;
    *u_pooled = hypot(nok > 1 ? sd / *pooled : rel, HOLDUP_MODEL_U_REL);
    return rc;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Per run, the median plain count of the compensated distillate xd over the run's rows at
 * a finite reflux set point (NAN when none inverts); scratch has log->n entries. */
static void run_counts(const stagecal_runlog *log, const stagecal_column *col, const double *xd,
                       double *scratch, double *n_run)
{
    for (size_t k = 0; k < log->nruns; k++) {
        size_t a = log->runs[k].first, end = a + log->runs[k].n, m = 0;
        for (size_t i = a; i < end; i++) {
            stagecal_stages_result res;
            double r = runlog_rset(log, i);
            if (isfinite(r) && isfinite(xd[i]) && isfinite(log->xb[i]) && log->xb[i] < xd[i] &&
                xd[i] < 1 && log->xb[i] > 0 &&
                stagecal_stages_invert(col->system.vle, xd[i], log->xb[i], r, 1.0, NULL, &res,
                                       NULL) == STAGECAL_OK &&
                res.status == STAGECAL_STAGES_OK)
                scratch[m++] = res.stages;
        }
        qsort(scratch, m, sizeof *scratch, cmp_double);
        n_run[k] = m ? (m % 2 ? scratch[m / 2] : 0.5 * (scratch[m / 2 - 1] + scratch[m / 2])) : NAN;
    }
}

/* Without a stated holdup: each run's own from its start-up, the stage count it needs from
 * the run's compensated production rows (3 rounds: the start-up asymptote's count first,
 * then the median count of the rows compensated with the last estimates). The per-run
 * holdups and their relative uncertainties stay in out->run_h, out->run_u. */
static int holdup_from_runs(const stagecal_runlog *log, const stagecal_column *col,
                            const stagecal_holdup_tau *su, stagecal_holdup_model *hm,
                            holdup_resolved *out, double *xd, double *u2, double *gs,
                            stagecal_error *err)
{
    size_t nr = log->nruns ? log->nruns : 1;
    double *n_run = malloc((nr + (log->n ? log->n : 1)) * sizeof *n_run), *scratch = n_run + nr;
    out->est = calloc(nr, sizeof *out->est);
    if (!n_run || !out->est) {
        free(n_run);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    for (size_t k = 0; k < nr; k++)
        n_run[k] = NAN;
    int rc = STAGECAL_OK;
    for (int round = 0; round < 3 && rc == STAGECAL_OK; round++) {
        if ((rc = estimate_holdups(log, col, su, n_run, out->est, out->run_h, out->run_u,
                                   &hm->holdup_mol, &hm->u_rel, err)))
            break;
        hm->run_holdup_mol = out->run_h, hm->run_u_rel = out->run_u;
        rc = holdup_compensate_split(log, hm, NULL, xd, u2, gs, err);
        if (round < 2 && rc == STAGECAL_OK)
            run_counts(log, col, xd, scratch, n_run);
    }
    /* a run without its own estimate was compensated with the pooled one */
    for (size_t k = 0; k < log->nruns; k++)
        if (!isfinite(out->run_h[k]))
            out->run_h[k] = hm->holdup_mol, out->run_u[k] = hm->u_rel;
    free(n_run);
    return rc;
}

void holdup_resolved_free(holdup_resolved *h)
{
    if (!h)
        return;
    free(h->tau);
    free(h->est);
    free(h->run_h);
    h->tau = NULL, h->est = NULL, h->run_h = h->run_u = NULL;
}

int holdup_resolve(const stagecal_runlog *log, const stagecal_column *col, int want,
                   const stagecal_holdup_tau *pooled, holdup_resolved *out, double *xd, double *u2,
                   double *gs, stagecal_error *err)
{
    size_t nr = log->nruns ? log->nruns : 1;
    *out = (holdup_resolved){0};
    out->tau = calloc(nr, sizeof *out->tau);
    out->run_h = malloc(2 * nr * sizeof *out->run_h);
    stagecal_holdup_tau *su = calloc(nr, sizeof *su);
    if (!out->tau || !out->run_h || !su) {
        free(su);
        holdup_resolved_free(out);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    out->run_u = out->run_h + nr;
    int rc = stagecal_holdup_estimate(log, col->u.xd, NULL, out->tau, su, NULL, &out->pooled, err);
    if (pooled)
        out->pooled = *pooled;
    stagecal_holdup_model hm = {holdup_kind(col, want, &out->pooled),
                                out->tau,
                                out->pooled,
                                col->system.vle,
                                col->holdup_column_mol,
                                col->holdup_drum_mol,
                                su,
                                col->u.xd,
                                holdup_u_rel(col),
                                NULL,
                                NULL};
    out->kind = hm.kind;
    out->drum_mol = hm.drum_mol;
    for (size_t k = 0; k < nr; k++)
        out->run_h[k] = hm.holdup_mol, out->run_u[k] = hm.u_rel;
    if (rc == STAGECAL_OK && hm.kind == STAGECAL_HOLDUP_COMP_STAGES && !(hm.holdup_mol > 0) &&
        !(hm.drum_mol > 0))
        rc = holdup_from_runs(log, col, su, &hm, out, xd, u2, gs, err);
    else if (rc == STAGECAL_OK)
        rc = holdup_compensate_split(log, &hm, NULL, xd, u2, gs, err);
    free(su);
    return rc;
}
