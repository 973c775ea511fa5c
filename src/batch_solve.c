/*
 * batch_solve.c — the inner solves of the batch prediction: the distillate
 * composition xD that stepping the stage law's stages down reaches the pot
 * composition (Brent on xD, bracketed below the lowest azeotrope above xB), and the
 * reflux ratio that holds xD at a set point (Brent on L/V). stagecal_batch_distillate
 * is the one-point use of the first.
 */
#include <gsl/gsl_errno.h>
#include <math.h>

#include "batch_internal.h"
#include "internal.h"

struct xd_ctx {
    const stagecal_batch_column *col;
    double xb, r, n;
    int code;
    stagecal_error *err;
};

static double xd_fn(double xd, void *p)
{
    struct xd_ctx *c = p;
    double xb = 0;
    if (c->code)
        return NAN;
    c->code = batch_col_step(c->col, xd, c->r, c->n, &xb, c->err);
    return c->code ? NAN : xb - c->xb;
}

int batch_brent(gsl_root_fsolver *s, gsl_function *f, double lo, double hi, double epsabs,
                size_t max_iter, double *x, int *code, stagecal_error *err, const char *what)
{
    int st = gsl_root_fsolver_set(s, f, lo, hi);
    for (size_t it = 0; st == GSL_SUCCESS && it < max_iter; it++) {
        st = gsl_root_fsolver_iterate(s);
        if (st != GSL_SUCCESS)
            break;
        lo = gsl_root_fsolver_x_lower(s);
        hi = gsl_root_fsolver_x_upper(s);
        if (gsl_root_test_interval(lo, hi, epsabs, 0) == GSL_SUCCESS) {
            *x = gsl_root_fsolver_root(s);
            return STAGECAL_OK;
        }
    }
    if (*code)
        return *code;
    if (st != GSL_SUCCESS)
        return error_set(err, STAGECAL_ENOCONV, "%s: root finding failed (%s)", what,
                         gsl_strerror(st));
    return error_set(err, STAGECAL_ENOCONV, "%s: no convergence in %zu iterations", what, max_iter);
}

/* Upper end of the xD bracket: the lowest azeotrope above xb, else x_max, less a
 * hair so that stepping starts inside its domain. */
static double xd_upper(const stagecal_batch_column *col, const double *az, size_t n_az, double xb)
{
    double hi = stagecal_vle_x_max(col->vle);
    for (size_t i = 0; i < n_az; i++)
        if (az[i] > xb) {
            hi = az[i];
            break;
        }
    return xb + (hi - xb) * (1 - 1e-12);
}

int batch_solve_xd(const stagecal_batch_column *col, const stagecal_batch_params *par,
                   gsl_root_fsolver *s, const double *az, size_t n_az, double xb, double r,
                   double n, double *xd_last, double *xd, stagecal_error *err)
{
    if (n <= 1 || r == 0) {
        /* no liquid flows down the column at R = 0: only the pot separates */
        int rc = stagecal_vle_ystar(col->vle, xb, xd);
        if (rc != STAGECAL_OK)
            return error_set(err, rc, "y*(x) failed at x = %.17g", xb);
        return STAGECAL_OK;
    }
    struct xd_ctx c = {col, xb, r, n, 0, err};
    gsl_function f = {xd_fn, &c};
    double lo = xb, hi = xd_upper(col, az, n_az, xb), flo, fhi;
    /* Warm start: the bracket around the last xD is usually valid and narrow. */
    if (xd_last && *xd_last > lo && *xd_last < hi) {
        double d = 1e-4, a = fmax(lo, *xd_last - d), b = fmin(hi, *xd_last + d);
        double fa = xd_fn(a, &c), fb = c.code ? NAN : xd_fn(b, &c);
        if (c.code)
            return c.code;
        if (fa < 0 && fb > 0)
            lo = a, hi = b;
        else if (fa == 0 || fb == 0) {
            *xd = fa == 0 ? a : b;
            return STAGECAL_OK;
        }
    }
    flo = xd_fn(lo, &c);
    fhi = c.code ? NAN : xd_fn(hi, &c);
    if (c.code)
        return c.code;
    if (flo >= 0) { /* the column does not enrich at all */
        *xd = lo;
        return STAGECAL_OK;
    }
    if (fhi <= 0) { /* richer than stepping from the top of the range reaches */
        *xd = hi;
        return STAGECAL_OK;
    }
    int rc = batch_brent(s, &f, lo, hi, par->x_epsabs, par->max_iter, xd, &c.code, err,
                         "distillate composition");
    if (rc == STAGECAL_OK && xd_last)
        *xd_last = *xd;
    return rc;
}

struct lv_ctx {
    const stagecal_batch_column *col;
    double xd, xb;
    int code;
    stagecal_error *err;
};

/* g(L/V) = xB reached from the set point at L/V − xB of the pot; decreasing. */
static double lv_fn(double lv, void *p)
{
    struct lv_ctx *c = p;
    double r = lv / (1 - lv), n, xb = 0;
    unsigned o;
    if (c->code)
        return NAN;
    c->code = batch_law_stages(c->col, r, &n, &o, NULL, c->err);
    if (!c->code)
        c->code = batch_col_step(c->col, c->xd, r, n, &xb, c->err);
    return c->code ? NAN : xb - c->xb;
}

int batch_policy_state(stagecal_batch_workspace *w, double xb, double *r, double *xd, double *n,
                       unsigned *outside, stagecal_error *err)
{
    const stagecal_batch_policy *po = &w->pb.policy;
    int rc;
    if (po->kind == STAGECAL_BATCH_CONSTANT_DISTILLATE && !w->ceiling_hit) {
        struct lv_ctx c = {&w->col, po->xd_set, xb, 0, err};
        gsl_function f = {lv_fn, &c};
        double lv_max = po->reflux_max / (po->reflux_max + 1), lv = 0;
        double g0 = lv_fn(0, &c), g1 = c.code ? NAN : lv_fn(lv_max, &c);
        if (c.code)
            return c.code;
        if (g0 <= 0) {
            lv = 0; /* the pot alone already gives xD >= the set point */
        } else if (g1 > 0) {
            lv = lv_max; /* beyond the ceiling (inside a step before the event): clamp */
        } else {
            double lo = 0, hi = lv_max;
            /* Warm start: the bracket around the last L/V is usually valid and narrow. */
            if (w->lv_last > 0 && w->lv_last < lv_max) {
                double d = 1e-4, a = fmax(0, w->lv_last - d), b = fmin(lv_max, w->lv_last + d);
                double ga = lv_fn(a, &c), gb = c.code ? NAN : lv_fn(b, &c);
                if (c.code)
                    return c.code;
                if (ga > 0 && gb < 0)
                    lo = a, hi = b;
            }
            rc = batch_brent(w->root_x, &f, lo, hi, w->par.x_epsabs, w->par.max_iter, &lv, &c.code,
                             err, "reflux ratio for the distillate set point");
            if (rc)
                return rc;
            w->lv_last = lv;
        }
        *r = lv / (1 - lv);
        if ((rc = batch_law_stages(&w->col, *r, n, outside, &w->clamped, err)))
            return rc;
        if (lv > 0 && lv < lv_max) {
            *xd = po->xd_set;
            return STAGECAL_OK;
        }
        return batch_solve_xd(&w->col, &w->par, w->root_x, w->az, w->n_az, xb, *r, *n, &w->xd_last,
                              xd, err);
    }
    if (po->kind == STAGECAL_BATCH_CONSTANT_DISTILLATE)
        *r = po->reflux_max;
    else if (po->kind == STAGECAL_BATCH_SCHEDULE)
        *r = po->steps[w->sched].reflux;
    else
        *r = po->reflux;
    if ((rc = batch_law_stages(&w->col, *r, n, outside, &w->clamped, err)))
        return rc;
    return batch_solve_xd(&w->col, &w->par, w->root_x, w->az, w->n_az, xb, *r, *n, &w->xd_last, xd,
                          err);
}

int stagecal_batch_distillate(const stagecal_batch_column *col, const stagecal_batch_params *params,
                              double xb, double r, double *xd, double *stages, stagecal_error *err)
{
    stagecal_batch_params par = params ? *params : stagecal_batch_default_params();
    double az[MAXAZ], n;
    unsigned o;
    int clamped = 0, rc;
    if (!(xb > 0 && xb < 1) || !(r >= 0))
        return error_set(err, STAGECAL_EINVAL, "xB = %g, R = %g: expected xB in (0, 1) and R >= 0",
                         xb, r);
    if ((rc = batch_law_stages(col, r, &n, &o, &clamped, err)))
        return rc;
    size_t n_az = stagecal_vle_azeotropes(col->vle, az, MAXAZ);
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for a root solver");
    rc = batch_solve_xd(col, &par, s, az, n_az > MAXAZ ? MAXAZ : n_az, xb, r, n, NULL, xd, err);
    gsl_root_fsolver_free(s);
    if (stages)
        *stages = n;
    return rc;
}
