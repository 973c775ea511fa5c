/*
 * vle_azeotrope.c — azeotropes of an equilibrium model, found once at alloc: sign
 * changes of y* − x at interior nodes, each refined with GSL Brent on the exact model
 * (IDEAL/activity) or on the interpolant (TABLE). A tangent azeotrope (no sign change)
 * is not reported.
 */
#include <float.h>

#include <gsl/gsl_errno.h>

#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

typedef double (*az_fn)(double x, void *ctx);

/* Azeotropes from sign changes of y − x at interior nodes; root of g on each. */
static void find_roots(stagecal_vle *v, az_fn g, void *ctx)
{
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return;
    v->naz = 0;
    for (size_t i = 1; i + 2 < v->n && v->naz < VLE_MAX_AZ; i++) {
        double ga = v->ys[i] - v->xs[i], gb = v->ys[i + 1] - v->xs[i + 1];
        if (ga == 0.0) {
            if (v->naz == 0 || v->az[v->naz - 1] != v->xs[i])
                v->az[v->naz++] = v->xs[i];
            continue;
        }
        if (!((ga < 0.0 && gb > 0.0) || (ga > 0.0 && gb < 0.0)))
            continue;
        gsl_function fn = {g, ctx};
        double root = 0.5 * (v->xs[i] + v->xs[i + 1]);
        if (gsl_root_fsolver_set(s, &fn, v->xs[i], v->xs[i + 1]) == GSL_SUCCESS) {
            for (size_t it = 0; it < v->vp.max_iter; it++) {
                if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
                    break;
                root = gsl_root_fsolver_root(s);
                if (gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                           1e-15, 4.0 * DBL_EPSILON) == GSL_SUCCESS)
                    break;
            }
        }
        v->az[v->naz++] = root;
    }
    gsl_root_fsolver_free(s);
}

static double az_table(double x, void *ctx)
{
    const stagecal_vle *v = ctx;
    return vle_herm_eval(v, v->ys, v->ms, x) - x;
}

static double az_exact(double x, void *ctx)
{
    const stagecal_vle *v = ctx;
    double t, y;
    if (vle_bubble_solve(v, x, vle_t_guess(v, x), NULL, &t, &y) != STAGECAL_OK)
        return GSL_NAN;
    return y - x;
}

void vle_find_azeotropes(stagecal_vle *v)
{
    find_roots(v, vle_is_activity(v->kind) ? az_exact : az_table, v);
}

size_t stagecal_vle_azeotropes(const stagecal_vle *vle, double *x_az, size_t cap)
{
    for (size_t i = 0; i < vle->naz && i < cap; i++)
        x_az[i] = vle->az[i];
    return vle->naz;
}
