/*
 * stages_step.c — the McCabe–Thiele stepper shared by the inversion (stages.c) and
 * forward stepping (stagecal_stages_step, here).
 *
 * With L/V = m and b = (1 − m)·xD the operating line is y = m·x + b. From the top,
 * x_0 = xD and for n = 1, 2, …: y_n = m·x_(n−1) + b and x_n solves
 * (1 − E)·(m·x + b) + E·y*(x) = y_n (x_n = x*(y_n) when E = 1; otherwise GSL's Brent
 * solver on a bracket that always holds the root, see pseudo_eq_solve). The fraction of
 * the crossing step is Smoker's count with α_loc of that step (stages_smoker.c); forward
 * stepping inverts it with Smoker's closed-form inverse, so the two round-trip.
 */
#include <float.h>
#include <math.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#define MAX_AZ 8 /* azeotropes inspected (vle finds at most a handful) */

#include "stages_internal.h"
#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

int stepper_ystar(stepper *st, double x, double *y)
{
    if (st->table && x >= 0.0 && x <= 1.0) {
        /* stagecal_vle_ystar's range check passed: its table query */
        *y = st->vle->bx ? vle_table_ystar_inline(st->vle, x) : vle_table_ystar(st->vle, x);
        return STAGECAL_OK;
    }
    int rc = stagecal_vle_ystar(st->vle, x, y);
    if (rc != STAGECAL_OK)
        return error_set(st->err, rc == STAGECAL_EINVAL ? STAGECAL_EINTERNAL : rc,
                         "equilibrium y*(%.17g) failed: %s", x, stagecal_strerror(rc));
    return STAGECAL_OK;
}

static int xstar_failed(stepper *st, int rc, double y)
{
    return error_set(st->err, rc == STAGECAL_EINVAL ? STAGECAL_EINTERNAL : rc,
                     "equilibrium x*(%.17g) failed: %s", y, stagecal_strerror(rc));
}

/* stepper_xstar, inline in the step: the table's inverse with its slope (vle_internal.h)
 * without a call */
static inline int xstar(stepper *st, double y, double *x)
{
    int rc;
    st->slope_ok = 0;
    if (st->want_slope && st->table && st->e == 1.0 && y >= 0.0 && y <= 1.0) {
        /* stagecal_vle_xstar's range check passed: its table query, with the slope */
        rc = st->vle->bx ? vle_herm_invert_slope_inline(st->vle, y, x, &st->slope)
                         : vle_herm_invert_slope(st->vle, y, x, &st->slope);
        st->slope_ok = rc == STAGECAL_OK;
        st->slope_x = *x;
    } else {
        rc = stagecal_vle_xstar(st->vle, y, x);
    }
    return rc != STAGECAL_OK ? xstar_failed(st, rc, y) : STAGECAL_OK;
}

int stepper_xstar(stepper *st, double y, double *x)
{
    return xstar(st, y, x);
}

int stepper_dydx(stepper *st, double x, double *dydx)
{
    /* stagecal_vle_dydx's range check is [0, 1] for a table, which holds the x*(y) it gave */
    if (st->slope_ok && x == st->slope_x) {
        *dydx = st->slope;
        return STAGECAL_OK;
    }
    return stagecal_vle_dydx(st->vle, x, dydx);
}

int stepper_ystar_slope(stepper *st, double x, double *y, double *dydx)
{
    if (!st->table || !(x >= 0.0 && x <= 1.0) || !st->vle->bx)
        return 0;
    vle_table_ystar_slope(st->vle, x, y, dydx);
    return 1;
}

/* Pseudo-equilibrium curve minus the target vapour: increasing in x when y* is. */
static double pseudo_eq_f(double x, void *p)
{
    stepper *st = p;
    double ys;
    int rc = stagecal_vle_ystar(st->vle, x, &ys);
    if (rc != STAGECAL_OK) {
        if (!st->vle_rc)
            st->vle_rc = rc;
        return GSL_NAN;
    }
    return (1.0 - st->e) * op_line(st, x) + st->e * ys - st->y;
}

/* Vapour on the (pseudo-)equilibrium curve at liquid x. */
int stepper_pseudo_y(stepper *st, double x, double *y)
{
    double ys;
    int rc = stepper_ystar(st, x, &ys);
    if (rc)
        return rc;
    *y = st->e == 1.0 ? ys : (1.0 - st->e) * op_line(st, x) + st->e * ys;
    return STAGECAL_OK;
}

/* Liquid x leaving a stage whose vapour is st->y, given the liquid from above x_prev.
 * The root is bracketed: at x_prev the pseudo-equilibrium lies above y_n (otherwise the
 * line meets the curve there and x_prev is returned, which the caller reports as a
 * pinch); the E = 1 solution x_e = x*(y_n) lies below the root when the
 * line is below y_n at x_e (then [x_e, x_prev]), otherwise [0, x_e] holds it. */
SC_NOINLINE static int pseudo_eq_solve(stepper *st, double x_prev, double *x)
{
    double xe = 0.0, fhi, lo, hi;
    int rc = xstar(st, st->y, &xe);
    if (rc)
        return rc;
    if (st->e == 1.0) {
        *x = xe;
        return STAGECAL_OK;
    }
    st->vle_rc = 0;
    fhi = pseudo_eq_f(x_prev, st);
    if (st->vle_rc)
        return error_set(st->err, STAGECAL_EINTERNAL, "equilibrium y*(%.17g) failed", x_prev);
    if (!(fhi > 0.0)) {
        *x = x_prev; /* the line meets the curve at x_prev: no progress, reported as pinch */
        return STAGECAL_OK;
    }
    if (op_line(st, xe) <= st->y) {
        lo = xe;
        hi = x_prev;
    } else {
        lo = 0.0;
        hi = xe;
    }
    if (lo >= hi) {
        *x = lo;
        return STAGECAL_OK;
    }
    gsl_function fn = {pseudo_eq_f, st};
    int gs = gsl_root_fsolver_set(st->s, &fn, lo, hi);
    if (gs == GSL_EINVAL) {
        /* A bracket end is itself the root (f = 0 there within rounding). */
        double flo = pseudo_eq_f(lo, st);
        *x = fabs(flo) <= fabs(fhi) ? lo : hi;
        return STAGECAL_OK;
    }
    if (gs != GSL_SUCCESS)
        return error_set(st->err, STAGECAL_ENOCONV, "pseudo-equilibrium solve: %s",
                         gsl_strerror(gs));
    for (size_t it = 0; it < st->par->max_iter; it++) {
        gs = gsl_root_fsolver_iterate(st->s);
        if (gs != GSL_SUCCESS || st->vle_rc)
            return error_set(st->err, STAGECAL_ENOCONV,
                             "pseudo-equilibrium solve for y = %.17g: %s", st->y,
                             st->vle_rc ? stagecal_strerror(st->vle_rc) : gsl_strerror(gs));
        lo = gsl_root_fsolver_x_lower(st->s);
        hi = gsl_root_fsolver_x_upper(st->s);
        if (gsl_root_test_interval(lo, hi, st->par->x_epsabs, 4.0 * DBL_EPSILON) == GSL_SUCCESS) {
            *x = gsl_root_fsolver_root(st->s);
            return STAGECAL_OK;
        }
    }
    return error_set(st->err, STAGECAL_ENOCONV,
                     "pseudo-equilibrium solve for y = %.17g: no convergence in %zu iterations",
                     st->y, st->par->max_iter);
}

/* One step from x_prev: fills *x, *y. Returns STAGECAL_OK; *pinch = 1 when no progress. */
int stepper_step(stepper *st, double x_prev, double *x, double *y, int *pinch)
{
    st->y = op_line(st, x_prev);
    *y = st->y;
    int rc;
    if (st->e == 1.0) { /* pseudo_eq_solve's first part, inline (the rest out of line) */
        double xe = 0.0;
        if ((rc = xstar(st, st->y, &xe)))
            return rc;
        *x = xe;
    } else if ((rc = pseudo_eq_solve(st, x_prev, x))) {
        return rc;
    }
    *pinch = !(*x < x_prev);
    return STAGECAL_OK;
}

/* Is the operating line at or above the equilibrium curve somewhere on [lo, hi]? */
int stepper_scan_pinch(stepper *st, double lo, double hi, size_t npts, int *found)
{
    *found = 0;
    for (size_t i = 0; i <= npts; i++) {
        double x = lo + (hi - lo) * (double)i / (double)npts, ys;
        int rc = stepper_ystar(st, x, &ys);
        if (rc)
            return rc;
        if (ys <= op_line(st, x)) {
            *found = 1;
            return STAGECAL_OK;
        }
    }
    return STAGECAL_OK;
}

tl3 stepper_crossing(tl3 m, tl3 b, tl3 x_prev, tl3 xn, tl3 yn, tl3 x_target)
{
    tl3 one = tl_const(1.0);
    tl3 alpha_loc = tl_div(tl_mul(yn, tl_sub(one, xn)), tl_mul(xn, tl_sub(one, yn)));
    smoker_consts sc;
    tl3 f = tl_const(NAN);
    if (smoker_setup(alpha_loc, m, b, &sc) == 0 && x_target.v > sc.k.v)
        f = smoker_count(&sc, x_prev, x_target);
    if (!isfinite(f.v)) /* α_loc within rounding of 1: the curve is locally the line */
        f = tl_div(tl_sub(x_prev, x_target), tl_sub(x_prev, xn));
    /* The crossing lies in [x_n, x_(n-1)], so f leaves [0, 1] only by rounding, at a whole
     * stage: the value is clamped and the derivatives of the branch kept (replacing f by a
     * constant there gave dN/dxD = dN/dxB = dN/dR = 0, so u(N) = 0 and an infinite weight). */
    if (f.v < 0.0)
        f.v = 0.0;
    else if (f.v > 1.0)
        f.v = 1.0;
    return f;
}

static tl3 tl_of(const double *o)
{
    tl3 r = {o[0], {o[1], o[2], o[3]}};
    return r;
}

void stepper_crossing4(const tab_cross c[4], double f[4][4], int avx2)
{
    if (avx2) {
        stages_crossing4_avx2(c, f);
        return;
    }
    for (int j = 0; j < 4; j++) {
        tl3 r = stepper_crossing(tl_of(c[j].m), tl_of(c[j].b), tl_of(c[j].x_prev), tl_of(c[j].xn),
                                 tl_of(c[j].yn), tl_of(c[j].x_target));
        f[j][0] = r.v;
        for (int i = 0; i < TL_N; i++)
            f[j][1 + i] = r.d[i];
    }
}

int stepper_init(stepper *st, const stagecal_vle *vle, const stagecal_stages_params *par, double xd,
                 double reflux, double e, stagecal_error *err)
{
    memset(st, 0, sizeof *st);
    st->vle = vle;
    st->par = par;
    st->xd = xd;
    st->e = e;
    st->err = err;
    st->table = vle_on_table(vle);
    if (isinf(reflux)) {
        st->m = 1.0;
        st->b = 0.0;
    } else {
        st->m = reflux / (reflux + 1.0);
        st->b = xd / (reflux + 1.0); /* (1 − L/V)·xD without the cancellation */
    }
    if (e < 1.0) {
        st->s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
        if (!st->s)
            return error_set(err, STAGECAL_ENOMEM, "out of memory (root solver)");
    }
    return STAGECAL_OK;
}

void stepper_free(stepper *st)
{
    if (st->s)
        gsl_root_fsolver_free(st->s);
    st->s = NULL;
}

/* First azeotrope at or below xd, or −1 when none. */
double stages_azeotrope_below(const stagecal_vle *vle, double xd)
{
    /* stagecal_vle_azeotropes' list read in place (no copy; it holds at most VLE_MAX_AZ) */
    for (size_t i = 0; i < vle->naz && i < MAX_AZ; i++)
        if (vle->az[i] <= xd)
            return vle->az[i];
    return -1.0;
}

/* ---- forward stepping ----------------------------------------------------------------- */

double stages_fraction_target(double x_prev, double xn, double yn, double m, double b, double f)
{
    /* The inverse of stepper_crossing: Smoker's closed-form inverse with α_loc. */
    double alpha_loc = yn * (1.0 - xn) / (xn * (1.0 - yn)), x_target;
    smoker_consts sc;
    if (smoker_setup_v(alpha_loc, m, b, &sc) == 0)
        x_target = smoker_inverse(&sc, x_prev, f);
    else
        x_target = x_prev - f * (x_prev - xn);
    if (!(x_target >= xn && x_target <= x_prev))
        x_target = x_prev - f * (x_prev - xn);
    return x_target;
}

static void put_point(stagecal_stage_point *profile, size_t cap, size_t i, double stage, double x,
                      double y)
{
    if (profile && i < cap) {
        profile[i].stage = stage;
        profile[i].x = x;
        profile[i].y = y;
    }
}

/* y*(x) and x*(y) of constant α as alpha_query (vle.c) computes them, with the range checks of
 * its dispatcher (x in [0, x_max], y in [0, 1]); 0 when out of range. */
static int alpha_ystar(double a, double x_max, double x, double *y)
{
    if (!(x >= 0.0 && x <= x_max))
        return 0;
    *y = a * x / (1.0 + (a - 1.0) * x);
    return 1;
}

static int alpha_xstar(double a, double y, double *x)
{
    if (!(y >= 0.0 && y <= 1.0))
        return 0;
    *x = y / (y + a * (1.0 - y));
    return 1;
}

/* Forward stepping for constant α at E_MV = 1 on its own: the operations of the general path
 * below (stepper_init's line, stepper_step with x*(y), the crossing step's fraction, the pot)
 * in the same order without the stepper and the model dispatch, so the same doubles. Returns 1
 * with *xb, the profile and *len filled when every step made progress and every query was in
 * range; 0 otherwise, and the general path then repeats the work and reports. */
static int alpha_step_fast(const stagecal_vle *vle, double x_max, double xd, double reflux,
                           double stages, double column, double nwhole_d,
                           stagecal_stage_point *profile, size_t cap, double *xb, size_t *len)
{
    double a = vle->alpha, m = 1.0, b = 0.0;
    if (!isinf(reflux)) {
        m = reflux / (reflux + 1.0);
        b = xd / (reflux + 1.0);
    }
    size_t nwhole = (size_t)nwhole_d, k = 0;
    double x_prev = xd, x_target = xd, xn = xd, yn = xd, y;
    if (column > 0.0) {
        double f = column - nwhole_d;
        for (size_t n = 1; n <= nwhole + 1; n++) {
            yn = m * x_prev + b;
            if (!alpha_xstar(a, yn, &xn) || !(xn < x_prev))
                return 0;
            if (n > nwhole)
                break;
            put_point(profile, cap, k++, (double)n, xn, yn);
            x_prev = xn;
        }
        if (f == 1.0) {
            x_target = xn;
            put_point(profile, cap, k++, (double)(nwhole + 1), xn, yn);
        } else {
            x_target = stages_fraction_target(x_prev, xn, yn, m, b, f);
            if (!alpha_ystar(a, x_max, x_target, &y))
                return 0;
            put_point(profile, cap, k++, column, x_target, y);
        }
    }
    double ypot = m * x_target + b, ys;
    if (!alpha_xstar(a, ypot, xb) || !alpha_ystar(a, x_max, *xb, &ys))
        return 0;
    put_point(profile, cap, k++, stages, *xb, ys);
    *len = k;
    return 1;
}

int stagecal_stages_step(const stagecal_vle *vle, double xd, double reflux, double stages,
                         double murphree, const stagecal_stages_params *params, double *xb,
                         stagecal_stage_point *profile, size_t cap, size_t *len, int *status,
                         stagecal_error *err)
{
    if (!vle || !xb || !len || !status)
        return error_set(err, STAGECAL_EINVAL, "stages_step: a required pointer is NULL");
    stagecal_stages_params def;
    const stagecal_stages_params *par = params;
    if (!par) { /* the defaults are built only when asked for (hot path) */
        def = stagecal_stages_default_params();
        par = &def;
    }
    double x_max = stagecal_vle_x_max(vle);
    *xb = 0.0;
    *len = 0;
    *status = STAGECAL_STAGES_INVALID;
    if (!(stages >= 1.0) || !isfinite(stages))
        return error_set(err, STAGECAL_EINVAL,
                         "stages %g: expected a finite count >= 1 (the pot included)", stages);
    if (!(xd > 0.0 && xd < 1.0) || xd > x_max)
        return error_set(err, STAGECAL_EINVAL, "xD = %g outside (0, %g)", xd,
                         x_max < 1.0 ? x_max : 1.0);
    if (!(murphree > 0.0 && murphree <= 1.0))
        return error_set(err, STAGECAL_EINVAL, "Murphree efficiency %g outside (0, 1]", murphree);
    if (!(reflux >= 0.0))
        return error_set(err, STAGECAL_EINVAL, "reflux ratio %g: expected R >= 0 or inf", reflux);
    double column = stages - 1.0;
    double nwhole_d = column > 0.0 ? ceil(column) - 1.0 : 0.0;
    if (nwhole_d >= (double)par->max_stages)
        return error_set(err, STAGECAL_EINVAL, "stages %g: more than max_stages = %zu", stages,
                         par->max_stages);
    if (reflux == 0.0) {
        error_set(err, STAGECAL_OK, "reflux ratio 0: stages are not defined without reflux");
        return STAGECAL_OK;
    }
    double az = stages_azeotrope_below(vle, xd);
    if (az >= 0.0) {
        *status = STAGECAL_STAGES_AZEOTROPE;
        error_set(err, STAGECAL_OK, "azeotrope at x = %.6f at or below xD = %.6g", az, xd);
        return STAGECAL_OK;
    }

    if (murphree == 1.0 && stagecal_vle_get_kind(vle) == STAGECAL_VLE_ALPHA &&
        alpha_step_fast(vle, x_max, xd, reflux, stages, column, nwhole_d, profile, cap, xb, len)) {
        *status = STAGECAL_STAGES_OK;
        return STAGECAL_OK;
    }
    stepper st;
    int rc = stepper_init(&st, vle, par, xd, reflux, murphree, err);
    if (rc)
        return rc;
    size_t nwhole = (size_t)nwhole_d, k = 0;
    double x_prev = xd, x_target = xd, xn = xd, yn = xd, y;
    int pinch = 0;
    if (column > 0.0) {
        double f = column - nwhole_d; /* in (0, 1] */
        for (size_t n = 1; n <= nwhole; n++) {
            if ((rc = stepper_step(&st, x_prev, &xn, &yn, &pinch)))
                goto done;
            if (pinch)
                goto pinched;
            put_point(profile, cap, k++, (double)n, xn, yn);
            x_prev = xn;
        }
        if ((rc = stepper_step(&st, x_prev, &xn, &yn, &pinch)))
            goto done;
        if (pinch)
            goto pinched;
        if (f == 1.0) {
            x_target = xn;
            put_point(profile, cap, k++, (double)(nwhole + 1), xn, yn);
        } else {
            x_target = stages_fraction_target(x_prev, xn, yn, st.m, st.b, f);
            if ((rc = stepper_pseudo_y(&st, x_target, &y)))
                goto done;
            put_point(profile, cap, k++, column, x_target, y);
        }
    }
    {
        double ypot = op_line(&st, x_target), ys;
        if ((rc = stepper_xstar(&st, ypot, xb)))
            goto done;
        if ((rc = stepper_ystar(&st, *xb, &ys)))
            goto done;
        put_point(profile, cap, k++, stages, *xb, ys);
        *len = k;
        *status = STAGECAL_STAGES_OK;
    }
    goto done;
pinched:
    /* The step made no progress: the liquid has reached the pinch of this operating line
     * to rounding, and more stages (the pot included) reach no further, so the pot ends
     * at the composition reached, the last x. */
    *status = STAGECAL_STAGES_PINCH;
    *xb = x_prev;
    *len = 0;
    error_set(err, STAGECAL_OK, "pinch: no progress below x = %.10g at L/V = %.10g", x_prev, st.m);
done:
    stepper_free(&st);
    if (rc) {
        *xb = 0.0;
        *len = 0;
        *status = STAGECAL_STAGES_INVALID;
    }
    return rc;
}
