/*
 * history_robust.c — the history fit's bread (J'WJ)^−1 and the moment estimate of the
 * excess variance (its CR2 sandwich over runs and the Bell–McCaffrey dof are in src/cr2.c,
 * shared with the regression); also the honesty check of an estimate and the conversion of
 * the evidence module's windows. Sources and the model: include/stagecal/history.h.
 *
 * Workload: m windows (tens to a few hundred), P parameters (under 20), G runs (tens).
 */
#include <gsl/gsl_blas.h>
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/history.h"
#include "history_internal.h"
#include "internal.h"
#include "parallel.h"

/* (J'WJ)^{-1} into B (P×P) by Cholesky; EDATA when singular. */
int history_bread(const gsl_matrix *J, const double *w, gsl_matrix *B, stagecal_error *err)
{
    size_t n = J->size1, P = J->size2;
    gsl_matrix_set_zero(B);
    for (size_t i = 0; i < n; i++)
        for (size_t a = 0; a < P; a++)
            for (size_t b = 0; b <= a; b++)
                B->data[a * P + b] += w[i] * gsl_matrix_get(J, i, a) * gsl_matrix_get(J, i, b);
    for (size_t a = 0; a < P; a++)
        for (size_t b = 0; b < a; b++)
            gsl_matrix_set(B, b, a, gsl_matrix_get(B, a, b));
    gsl_quiet q = gsl_quiet_begin();
    int g = gsl_linalg_cholesky_decomp1(B);
    if (g == GSL_SUCCESS)
        g = gsl_linalg_cholesky_invert(B);
    gsl_quiet_end(q);
    if (g != GSL_SUCCESS)
        return error_set(err, STAGECAL_EDATA,
                         "the history's design is singular (a segment's level and loss cannot "
                         "both be estimated, or the correlation's parameters are not identified)");
    return STAGECAL_OK;
}

/* Method-of-moments excess variance (DerSimonian–Laird in regression form). */
double history_moment_tau2(const gsl_matrix *J, const double *w, const double *res,
                           const gsl_matrix *B)
{
    size_t n = J->size1, P = J->size2;
    double q = 0, sw = 0, tr = 0;
    for (size_t i = 0; i < n; i++) {
        q += w[i] * res[i] * res[i];
        sw += w[i];
        double h = 0; /* J_i B J_i' */
        for (size_t a = 0; a < P; a++)
            for (size_t b = 0; b < P; b++)
                h += gsl_matrix_get(J, i, a) * gsl_matrix_get(B, a, b) * gsl_matrix_get(J, i, b);
        tr += w[i] * w[i] * h;
    }
    double den = sw - tr, t2 = den > 0 ? (q - ((double)n - (double)P)) / den : 0;
    return t2 > 0 ? t2 : 0;
}

int stagecal_history_check(stagecal_history_estimate *e, double lo_phys, double hi_phys,
                           const char *what)
{
    if (!e->determined && e->reason[0])
        return 0;
    e->determined = 0;
    if (!(e->dof >= 2))
        snprintf(e->reason, sizeof e->reason,
                 "%s not determined: %.2g degree(s) of freedom (at least 2 needed)", what, e->dof);
    else if (!(isfinite(e->low) && isfinite(e->high) && isfinite(e->se)))
        snprintf(e->reason, sizeof e->reason, "%s not determined: the evidence does not bound it",
                 what);
    else if (e->low < lo_phys || e->high > hi_phys)
        snprintf(e->reason, sizeof e->reason,
                 "%s not determined: its interval [%.3g, %.3g] is wider than the physical range",
                 what, e->low, e->high);
    else
        e->determined = 1, e->reason[0] = '\0';
    return e->determined;
}

size_t stagecal_history_points_from_evidence(const stagecal_evidence_set *set,
                                             stagecal_history_point *out)
{
    size_t m = 0;
    for (size_t i = 0; i < set->n; i++) {
        const stagecal_evidence *e = &set->ev[i];
        if (!e->stages_ok || !(e->se_stages > 0) || !isfinite(e->t_mid_s))
            continue;
        stagecal_history_point *p = &out[m++];
        p->t_s = e->t_mid_s;
        p->run = (long)e->run;
        p->r = e->r;
        p->f_load = e->has_load ? e->f_load : NAN;
        p->stages = e->stages;
        p->se = e->se_stages;
    }
    return m;
}
