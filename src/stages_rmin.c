/*
 * stages_rmin.c — the minimum reflux ratio for a general equilibrium model
 * (include/stagecal/stages.h, stagecal_min_reflux; docs/methods.md). The operating line from
 * (xD, xD) at L/V touches the equilibrium curve at x when L/V equals minus the slope of the
 * line from (xD, xD) to (x, y*(x)), so L/V_min is that slope's maximum over [xB, xD) (a
 * pinch at x_target or a tangent pinch above it); R_min = (L/V)/(1 − L/V).
 */
#include "stagecal/stages.h"

#include <math.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_min.h>

#include "stages_internal.h"
#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

/* stagecal_min_reflux has no params argument (fixed signature), so its tunables are here:
 * the slope of the line from (xD, xD) to the curve is scanned on RMIN_NGRID points of
 * [xB, xD) (a tangent pinch narrower than (xD − xB)/RMIN_NGRID could be missed), then
 * refined by GSL Brent minimisation to RMIN_XTOL in x within RMIN_MAXIT iterations. */
#define RMIN_NGRID 128
#define RMIN_MAXIT 100
#define RMIN_XTOL 1e-13

typedef struct {
    const stagecal_vle *vle;
    double xd;
    int rc;
} rmin_ctx;

/* Minus the slope of the line from (xD, xD) to (x, y*(x)); the line at L/V touches the
 * curve at x when L/V equals that slope, so L/V_min is its maximum over [xB, xD). */
static double neg_slope(double x, void *p)
{
    rmin_ctx *c = p;
    double y;
    int rc = stagecal_vle_ystar(c->vle, x, &y);
    if (rc) {
        c->rc = rc;
        return GSL_NAN;
    }
    return -(c->xd - y) / (c->xd - x);
}

int stagecal_min_reflux(const stagecal_vle *vle, double xd, double xb, double *rmin,
                        stagecal_error *err)
{
    if (!vle || !rmin)
        return error_set(err, STAGECAL_EINVAL, "min_reflux: a required pointer is NULL");
    double x_max = stagecal_vle_x_max(vle);
    if (!(xd > 0.0 && xd < 1.0) || xd > x_max || !(xb > 0.0 && xb < xd))
        return error_set(err, STAGECAL_EINVAL,
                         "min_reflux: xD = %g, xB = %g, expected 0 < xB < xD <= %g", xd, xb,
                         x_max < 1.0 ? x_max : 1.0);
    double az = stages_azeotrope_below(vle, xd);
    if (az >= 0.0)
        return error_set(err, STAGECAL_EINVAL,
                         "min_reflux: azeotrope at x = %.6f at or below xD = %g, no reflux "
                         "ratio reaches xB = %g",
                         az, xd, xb);
    rmin_ctx c = {vle, xd, 0};
    /* Coarse scan (tangent pinches may sit anywhere), then Brent on the best bracket. */
    double best = HUGE_VAL, gx[RMIN_NGRID], gf[RMIN_NGRID];
    size_t ibest = 0;
    for (size_t i = 0; i < RMIN_NGRID; i++) {
        gx[i] = xb + (xd - xb) * (double)i / (double)RMIN_NGRID;
        gf[i] = neg_slope(gx[i], &c);
        if (c.rc)
            return error_set(err, STAGECAL_EINTERNAL, "min_reflux: y*(%g) failed: %s", gx[i],
                             stagecal_strerror(c.rc));
        if (gf[i] < best) {
            best = gf[i];
            ibest = i;
        }
    }
    if (ibest > 0 && ibest + 1 < RMIN_NGRID && gf[ibest] < gf[ibest - 1] &&
        gf[ibest] < gf[ibest + 1]) {
        gsl_min_fminimizer *s = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
        if (!s)
            return error_set(err, STAGECAL_ENOMEM, "out of memory (minimiser)");
        gsl_function fn = {neg_slope, &c};
        int gs = gsl_min_fminimizer_set_with_values(s, &fn, gx[ibest], gf[ibest], gx[ibest - 1],
                                                    gf[ibest - 1], gx[ibest + 1], gf[ibest + 1]);
        for (int it = 0; gs == GSL_SUCCESS && it < RMIN_MAXIT; it++) {
            gs = gsl_min_fminimizer_iterate(s);
            if (gs != GSL_SUCCESS || c.rc)
                break;
            if (gsl_min_test_interval(gsl_min_fminimizer_x_lower(s), gsl_min_fminimizer_x_upper(s),
                                      RMIN_XTOL, 0.0) == GSL_SUCCESS)
                break;
        }
        if (gs == GSL_SUCCESS && !c.rc && gsl_min_fminimizer_f_minimum(s) <= best) {
            best = gsl_min_fminimizer_f_minimum(s);
        }
        gsl_min_fminimizer_free(s);
        if (c.rc || (gs != GSL_SUCCESS && gs != GSL_CONTINUE))
            return error_set(err, STAGECAL_ENOCONV, "min_reflux: tangent pinch search: %s",
                             c.rc ? stagecal_strerror(c.rc) : gsl_strerror(gs));
    }
    double lv = -best;
    if (lv <= 0.0) {
        *rmin = 0.0; /* the pot vapour alone is at least xD */
        return STAGECAL_OK;
    }
    if (!(lv < 1.0))
        return error_set(err, STAGECAL_EINVAL,
                         "min_reflux: the equilibrium curve meets the diagonal, no finite "
                         "reflux ratio");
    *rmin = lv / (1.0 - lv);
    return STAGECAL_OK;
}
