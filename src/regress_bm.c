/*
 * regress_bm.c — the Bell–McCaffrey degrees of freedom of a contrast of a least-squares
 * fit (Bell, R. M. & McCaffrey, D. F. 2002, "Bias reduction in standard errors for linear
 * regression with multi-stage samples", Survey Methodology 28, 169–181; in the form of
 * Imbens, G. W. & Kolesár, M. 2016, "Robust standard errors in small samples: some
 * practical advice", Rev. Econ. Stat. 98(4), 701–712). The formula and its O(n p²) form:
 * include/stagecal/regress.h, stagecal_regress_bm_dof.
 *
 * Workload: n windows (tens to a few hundred), p ≤ STAGECAL_FORM_MAXP; one pass over the
 * rows for XᵀX, one for the leverages and S; everything else is p×p on the stack.
 */
#include "stagecal/regress.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <math.h>

#include "cr2.h"
#include "internal.h"
#include "parallel.h"

int stagecal_regress_bm_dof(const double *x, size_t n, size_t p, const double *c, double *dof,
                            stagecal_error *err)
{
    if (!x || !c || !dof || p < 1 || p > STAGECAL_FORM_MAXP || n <= p)
        return error_set(err, STAGECAL_EINVAL,
                         "Bell-McCaffrey dof: %zu rows of %zu values (expected 1 to %d values "
                         "and more rows than values)",
                         n, p, STAGECAL_FORM_MAXP);
    /* columns equilibrated (their norms cn), so that parameters of very different size
     * do not square a bad condition number into the Cholesky factor; K does not depend on
     * the scale of c, and a_i, h_i are the same in the scaled problem with c/cn */
    double cn[STAGECAL_FORM_MAXP] = {0}, cs[STAGECAL_FORM_MAXP];
    for (size_t i = 0; i < n; i++)
        for (size_t k = 0; k < p; k++)
            cn[k] += x[i * p + k] * x[i * p + k];
    for (size_t k = 0; k < p; k++) {
        if (!(cn[k] > 0) || !isfinite(cn[k]))
            return error_set(err, STAGECAL_EDATA,
                             "Bell-McCaffrey dof: column %zu of the design is zero or not finite",
                             k + 1);
        cn[k] = sqrt(cn[k]);
        cs[k] = c[k] / cn[k];
    }
    double A[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP] = {0};
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < p; j++)
            for (size_t k = 0; k < p; k++)
                A[j * p + k] += x[i * p + j] / cn[j] * (x[i * p + k] / cn[k]);
    gsl_matrix_view Av = gsl_matrix_view_array(A, p, p);
    gsl_quiet q = gsl_quiet_begin();
    int gs = gsl_linalg_cholesky_decomp1(&Av.matrix);
    if (gs == GSL_SUCCESS)
        gs = gsl_linalg_cholesky_invert(&Av.matrix);
    gsl_quiet_end(q);
    if (gs != GSL_SUCCESS)
        return error_set(err, STAGECAL_EDATA, "Bell-McCaffrey dof: the design is rank deficient");
    double Ac[STAGECAL_FORM_MAXP], cac = 0;
    for (size_t j = 0; j < p; j++) {
        Ac[j] = 0;
        for (size_t k = 0; k < p; k++)
            Ac[j] += A[j * p + k] * cs[k];
        cac += cs[j] * Ac[j];
    }
    if (!(cac > 0))
        return error_set(err, STAGECAL_EDATA, "Bell-McCaffrey dof: the contrast has no variance");
    double S[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP] = {0}, diag = 0;
    for (size_t i = 0; i < n; i++) {
        double xs[STAGECAL_FORM_MAXP], h = 0, a = 0;
        for (size_t k = 0; k < p; k++)
            xs[k] = x[i * p + k] / cn[k];
        for (size_t j = 0; j < p; j++) {
            double Ax = 0;
            for (size_t k = 0; k < p; k++)
                Ax += A[j * p + k] * xs[k];
            h += xs[j] * Ax;
            a += xs[j] * Ac[j];
        }
        if (!(h < 1 - 1e-12))
            return error_set(err, STAGECAL_EDATA,
                             "Bell-McCaffrey dof: row %zu has leverage %.17g (expected < 1)", i + 1,
                             h);
        double d2 = a * a / (1 - h);
        diag += d2 * d2 * (1 - 2 * h);
        for (size_t j = 0; j < p; j++)
            for (size_t k = 0; k < p; k++)
                S[j * p + k] += d2 * xs[j] * xs[k];
    }
    double T[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP], trtt = 0;
    for (size_t j = 0; j < p; j++)
        for (size_t k = 0; k < p; k++) {
            T[j * p + k] = 0;
            for (size_t l = 0; l < p; l++)
                T[j * p + k] += A[j * p + l] * S[l * p + k];
        }
    for (size_t j = 0; j < p; j++)
        for (size_t k = 0; k < p; k++)
            trtt += T[j * p + k] * T[k * p + j];
    double den = diag + trtt;
    if (!(den > 0) || !isfinite(den))
        return error_set(err, STAGECAL_EDATA, "Bell-McCaffrey dof: the contrast has no variance");
    /* (Σλ)² / Σλ² lies in [1, rank] = [1, n − p]; the clamp only catches rounding */
    *dof = fmin(fmax(cac * cac / den, 1.0), (double)(n - p));
    return STAGECAL_OK;
}

int stagecal_regress_contrast_dof(const double *x, size_t n, size_t p, const size_t *cluster,
                                  const double *c, double *dof, stagecal_error *err)
{
    if (!cluster)
        return stagecal_regress_bm_dof(x, n, p, c, dof, err);
    if (p > STAGECAL_FORM_MAXP)
        return error_set(err, STAGECAL_EINVAL, "cluster dof: %zu values per row (at most %d)", p,
                         STAGECAL_FORM_MAXP);
    return cr2_design_dof(x, n, p, cluster, c, dof, err);
}
