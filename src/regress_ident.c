/*
 * regress_ident.c — does the evidence determine each parameter of a fit? (see
 * stagecal_regress_identify in stagecal/regress.h). A fit whose information matrix is
 * nearly singular still returns numbers — b = 6.57 with a standard error of 8e8 — and
 * printing them as an estimate and an interval is not honest: such a parameter is
 * reported as not determined instead.
 */
#include <gsl/gsl_linalg.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "stagecal/regress.h"

static double scale_of(double theta)
{
    return fabs(theta) > 1 ? fabs(theta) : 1.0;
}

int stagecal_regress_identify(stagecal_regress_result *res)
{
    size_t p = res->p;
    int nund = 0;
    res->undetermined = 0;
    res->condition = NAN;
    if (p < 1 || p > STAGECAL_FORM_MAXP)
        return 0;
    for (size_t j = 0; j < p; j++) {
        double half = res->tquant * res->se[j];
        if (!isfinite(res->se[j]) || !(half <= STAGECAL_IDENT_MAX_REL * scale_of(res->theta[j]))) {
            res->undetermined |= 1u << j;
            nund++;
        }
    }
    /* condition number of the information matrix in relative units: SVD of the relative
     * covariance (its singular values are the information's reciprocals) */
    double a[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP], v[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP];
    double sv[STAGECAL_FORM_MAXP], wk[STAGECAL_FORM_MAXP];
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++)
            a[i * p + j] =
                res->cov[i * p + j] / (scale_of(res->theta[i]) * scale_of(res->theta[j]));
    gsl_matrix_view A = gsl_matrix_view_array(a, p, p), V = gsl_matrix_view_array(v, p, p);
    gsl_vector_view S = gsl_vector_view_array(sv, p), W = gsl_vector_view_array(wk, p);
    int finite = 1;
    for (size_t k = 0; k < p * p; k++)
        finite &= isfinite(a[k]);
    if (finite && gsl_linalg_SV_decomp(&A.matrix, &V.matrix, &S.vector, &W.vector) == 0)
        res->condition = sv[p - 1] > 0 ? sv[0] / sv[p - 1] : INFINITY;
    return nund;
}

void stagecal_regress_ident_text(const stagecal_regress_result *res, char *buf, size_t len)
{
    size_t j = 0;
    while (j < res->p && !(res->undetermined & (1u << j)))
        j++;
    if (j >= res->p) {
        snprintf(buf, len, "every parameter is determined");
        return;
    }
    const char *name = j < res->form.p ? res->form.param_names[j] : "?";
    const char *hint = "points spread over the conditions where the curve changes with it";
    if (strcmp(res->form.name, "saturating") == 0 && j == 1)
        hint = "points at reflux ratios low enough that exp(-b R) is not near 0, where the "
               "stage count still rises with R";
    else if (strcmp(res->form.name, "saturating") == 0)
        hint = "points at high reflux ratios or total reflux, where the stage count levels off "
               "at a";
    else if (strcmp(res->form.name, "saturating-load") == 0)
        hint = "points spread over reflux ratios (low ones included) and over the vapour load";
    double half = res->tquant * res->se[j];
    snprintf(buf, len,
             "parameter '%s' of form '%s' is not determined by the evidence (%.0f %% interval "
             "+-%.3g, %.2g times its size; condition number of the information %.2g); what "
             "would determine it: %s",
             name, res->form.name, 100 * res->level, half, half / scale_of(res->theta[j]),
             res->condition, hint);
}
