/*
 * softsensor.c — compositions from temperatures: the bubble and dew curves at a pressure,
 * their inverses (GSL Brent on x), the inference of one reading with its uncertainty or its
 * censoring, and the consistency check of a temperature sensor against analyser readings.
 * Workload: one inversion per logged row without an analyser reading (a minute log of a
 * month is ~4e4 rows; each inversion is ~40 bubble-point solves). docs/methods.md,
 * "Compositions from temperatures".
 */
#include "stagecal/softsensor.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_deriv.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <stdlib.h>

#include "batch_internal.h"
#include "internal.h"

stagecal_softsensor_params stagecal_softsensor_default_params(void)
{
    stagecal_softsensor_params p = {STAGECAL_RUNLOG_BOUND_Z, 0.05, 0.001};
    return p;
}

/* ---- forward curves --------------------------------------------------------------------- */

struct curve {
    const stagecal_vle *vle;
    int dew;  /* 0: T of liquid x; 1: y*(x) (for dy/dx) */
    int code; /* first failure inside a GSL callback */
    double t; /* target temperature of a root search */
};

static double bubble_of(double x, void *p)
{
    struct curve *c = p;
    double t;
    int rc = stagecal_vle_tbubble(c->vle, x, &t);
    if (rc) {
        c->code = c->code ? c->code : rc;
        return NAN;
    }
    return t;
}

static double ystar_of(double x, void *p)
{
    struct curve *c = p;
    double y, t;
    int rc = stagecal_vle_ystar_exact(c->vle, x, &y, &t);
    if (rc) {
        c->code = c->code ? c->code : rc;
        return NAN;
    }
    return y;
}

/* End of the branch the soft sensor uses: 1 (x_max), or the first azeotrope. */
static double branch_end(const stagecal_vle *vle)
{
    double az;
    return stagecal_vle_azeotropes(vle, &az, 1) > 0 ? az : stagecal_vle_x_max(vle);
}

/* Derivative of f at x inside [0, xe] by GSL's adaptive differences: central where the
 * step fits, one-sided at the ends. */
static int slope_at(gsl_function *f, double x, double xe, double *d)
{
    const double h = 1e-4;
    double abserr;
    int st;
    if (x - h < 0)
        st = gsl_deriv_forward(f, x, h, d, &abserr);
    else if (x + h > xe)
        st = gsl_deriv_backward(f, x, h, d, &abserr);
    else
        st = gsl_deriv_central(f, x, h, d, &abserr);
    return st == GSL_SUCCESS && isfinite(*d) ? STAGECAL_OK : STAGECAL_ENOCONV;
}

static int need_t(const stagecal_vle *vle, stagecal_error *err)
{
    if (!vle || !stagecal_vle_has_temperature(vle))
        return error_set(err, STAGECAL_EINVAL,
                         "the equilibrium model has no temperatures (ideal, activity or a table "
                         "with T is needed to read compositions from temperatures)");
    return STAGECAL_OK;
}

int stagecal_softsensor_bubble_t(const stagecal_vle *vle, double x, double *t_k, double *dtdx,
                                 stagecal_error *err)
{
    int rc = need_t(vle, err);
    if (rc)
        return rc;
    double xe = stagecal_vle_x_max(vle);
    if (!(x >= 0 && x <= xe))
        return error_set(err, STAGECAL_EINVAL, "x = %g is outside [0, %g]", x, xe);
    struct curve c = {vle, 0, 0, 0};
    gsl_function f = {bubble_of, &c};
    *t_k = bubble_of(x, &c);
    if (!c.code && dtdx && slope_at(&f, x, xe, dtdx) != STAGECAL_OK && !c.code)
        c.code = STAGECAL_ENOCONV;
    if (c.code)
        return error_set(err, c.code, "bubble point of x = %g failed", x);
    return STAGECAL_OK;
}

int stagecal_softsensor_dew_t(const stagecal_vle *vle, double y, double *t_k, double *dtdy,
                              stagecal_error *err)
{
    int rc = need_t(vle, err);
    if (rc)
        return rc;
    double x, dtdx = 0, dydx = 1;
    if (!(y >= 0 && y <= 1) || stagecal_vle_xstar(vle, y, &x) != STAGECAL_OK)
        return error_set(err, STAGECAL_EINVAL, "no liquid in equilibrium with y = %g", y);
    if ((rc = stagecal_softsensor_bubble_t(vle, x, t_k, dtdy ? &dtdx : NULL, err)))
        return rc;
    if (dtdy) {
        struct curve c = {vle, 1, 0, 0};
        gsl_function f = {ystar_of, &c};
        if (slope_at(&f, x, stagecal_vle_x_max(vle), &dydx) != STAGECAL_OK || c.code || !(dydx > 0))
            return error_set(err, STAGECAL_ENOCONV, "slope of y*(x) at x = %g failed", x);
        *dtdy = dtdx / dydx;
    }
    return STAGECAL_OK;
}

/* ---- inverse curves --------------------------------------------------------------------- */

static double bubble_minus_t(double x, void *p)
{
    struct curve *c = p;
    return bubble_of(x, c) - c->t;
}

/* x on [0, xe] with T_bubble(x) = t_k. */
static int invert_bubble(const stagecal_vle *vle, double t_k, double *x, stagecal_error *err)
{
    int rc = need_t(vle, err);
    if (rc)
        return rc;
    if (!isfinite(t_k) || !(t_k > 0))
        return error_set(err, STAGECAL_EINVAL, "temperature %g K is not positive and finite", t_k);
    double xe = branch_end(vle), t0, t1;
    if ((rc = stagecal_softsensor_bubble_t(vle, 0, &t0, NULL, err)) ||
        (rc = stagecal_softsensor_bubble_t(vle, xe, &t1, NULL, err)))
        return rc;
    if (t_k == t0 || t_k == t1) {
        *x = t_k == t0 ? 0 : xe;
        return STAGECAL_OK;
    }
    if ((t_k - t0) * (t_k - t1) > 0)
        return error_set(err, STAGECAL_EDATA,
                         "%.3f K is outside the bubble curve's %.3f K (x = 0) to %.3f K "
                         "(x = %.6g)",
                         t_k, t0, t1, xe);
    struct curve c = {vle, 0, 0, t_k};
    gsl_function f = {bubble_minus_t, &c};
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    int code = 0;
    rc = batch_brent(s, &f, 0, xe, 1e-14, 200, x, &code, err, "bubble-point inversion");
    gsl_root_fsolver_free(s);
    if (!rc && c.code)
        rc = error_set(err, c.code, "bubble-point inversion at %.3f K failed", t_k);
    return rc;
}

int stagecal_softsensor_bubble_x(const stagecal_vle *vle, double t_k, double *x, double *dtdx,
                                 stagecal_error *err)
{
    double t;
    int rc = invert_bubble(vle, t_k, x, err);
    if (!rc && dtdx)
        rc = stagecal_softsensor_bubble_t(vle, *x, &t, dtdx, err);
    return rc;
}

int stagecal_softsensor_dew_y(const stagecal_vle *vle, double t_k, double *y, double *dtdy,
                              stagecal_error *err)
{
    double x, t;
    int rc = invert_bubble(vle, t_k, &x, err);
    if (rc)
        return rc;
    if (stagecal_vle_ystar_exact(vle, x, y, &t) != STAGECAL_OK)
        return error_set(err, STAGECAL_ENOCONV, "y*(x = %g) failed", x);
    *y = GSL_MIN(GSL_MAX(*y, 0.0), 1.0);
    return dtdy ? stagecal_softsensor_dew_t(vle, *y, &t, dtdy, err) : STAGECAL_OK;
}

/* ---- one reading ------------------------------------------------------------------------ */

/* The composition at temperature t on the curve (top: dew, else bubble), t clamped into
 * the branch's range. */
static int comp_at(const stagecal_vle *vle, int top, double t, double t0, double t1, double *x,
                   double *slope, stagecal_error *err)
{
    double lo = GSL_MIN(t0, t1), hi = GSL_MAX(t0, t1);
    t = GSL_MIN(GSL_MAX(t, lo), hi);
    return top ? stagecal_softsensor_dew_y(vle, t, x, slope, err)
               : stagecal_softsensor_bubble_x(vle, t, x, slope, err);
}

int stagecal_softsensor_infer(const stagecal_vle *vle, double t_k, double u_t_k, int top,
                              const stagecal_softsensor_params *params, stagecal_reading *out,
                              int *status, stagecal_error *err)
{
    stagecal_softsensor_params par = params ? *params : stagecal_softsensor_default_params();
    int rc = need_t(vle, err);
    if (rc)
        return rc;
    if (!out || !status || !isfinite(t_k) || !(u_t_k >= 0))
        return error_set(err, STAGECAL_EINVAL, "bad temperature or uncertainty");
    double xe = branch_end(vle), t0, t1;
    if ((rc = stagecal_softsensor_bubble_t(vle, 0, &t0, NULL, err)) ||
        (rc = stagecal_softsensor_bubble_t(vle, xe, &t1, NULL, err)))
        return rc;
    /* te: the temperature of the end the sensor cannot resolve (the light end for the top,
     * the heavy end for the pot); away: the direction in T away from it */
    double te = top ? t1 : t0, tf = top ? t0 : t1, away = tf > te ? 1.0 : -1.0;
    double margin = par.z * u_t_k;
    double from_end = away * (t_k - te), beyond_far = away * (t_k - tf);
    *out = (stagecal_reading){NAN, STAGECAL_CENSOR_NONE, 0};
    if (beyond_far > margin) {
        *status = STAGECAL_SOFT_OUTSIDE;
        return STAGECAL_OK;
    }
    double x, slope = 0;
    if (from_end >= margin) { /* (just beyond the far end, within the noise: at the end) */
        if ((rc = comp_at(vle, top, t_k, t0, t1, &x, &slope, err)))
            return rc;
        double u = slope != 0 ? u_t_k / fabs(slope) : INFINITY;
        if (u <= par.max_u) {
            *out = (stagecal_reading){x, STAGECAL_CENSOR_NONE, u};
            *status = STAGECAL_SOFT_RESOLVED;
            return STAGECAL_OK;
        }
    }
    /* censored: the composition at the temperature moved z·u(T) away from the end */
    if ((rc = comp_at(vle, top, t_k + away * margin, t0, t1, &x, NULL, err)))
        return rc;
    *out = (stagecal_reading){x, top ? STAGECAL_CENSOR_ABOVE : STAGECAL_CENSOR_BELOW, 0};
    *status = STAGECAL_SOFT_CENSORED;
    return STAGECAL_OK;
}

/* ---- consistency ------------------------------------------------------------------------ */

void stagecal_softsensor_check_add(stagecal_softsensor_check *c, double t_k, double u_t_k,
                                   double t_model, double slope, double u_x)
{
    double s2 = u_t_k * u_t_k + slope * slope * u_x * u_x, r = t_k - t_model;
    c->n++;
    if (!(s2 > 0))
        return;
    c->sw += 1 / s2;
    c->swr += r / s2;
    c->chi2 += r * r / s2;
}

void stagecal_softsensor_check_end(stagecal_softsensor_check *c)
{
    if (c->n == 0 || !(c->sw > 0)) {
        c->offset_k = c->se_k = c->z = NAN;
        return;
    }
    c->offset_k = c->swr / c->sw;
    c->se_k = 1 / sqrt(c->sw);
    c->z = c->offset_k / c->se_k;
}

double stagecal_softsensor_check_zcrit(double alpha, size_t ntests)
{
    double a = alpha / (2.0 * (double)(ntests ? ntests : 1));
    return gsl_cdf_ugaussian_Qinv(a);
}

/* ---- Kalman filter and RTS smoother ------------------------------------------------------ */

struct walk {
    const double *t, *z, *u;
    size_t n;
    double *xf, *pf, *xp, *pp; /* filtered and predicted means and variances, per row */
};

static int has_reading(const struct walk *w, size_t i)
{
    return isfinite(w->z[i]) && isfinite(w->u[i]) && w->u[i] > 0;
}

/* The forward pass at q; returns the innovations' log-likelihood (−∞ without readings). */
static double kalman_forward(struct walk *w, double q)
{
    double x = NAN, p = INFINITY, ll = 0, tprev = NAN;
    for (size_t i = 0; i < w->n; i++) {
        double dt = isfinite(tprev) ? GSL_MAX(w->t[i] - tprev, 0.0) : 0.0;
        tprev = w->t[i];
        if (isfinite(p))
            p += q * dt; /* predict */
        w->xp[i] = x, w->pp[i] = p;
        if (has_reading(w, i)) {
            double r = w->u[i] * w->u[i];
            if (!isfinite(p)) { /* the first reading starts the walk (a diffuse prior) */
                x = w->z[i], p = r;
            } else {
                double s = p + r, nu = w->z[i] - x, k = p / s;
                ll -= 0.5 * (log(2 * M_PI * s) + nu * nu / s);
                x += k * nu;
                p = p * r / s; /* (1 − k)·p without the cancellation of 1 − k */
            }
        }
        w->xf[i] = x, w->pf[i] = p;
    }
    return ll;
}

static double neg_loglik(double log10q, void *ctx)
{
    return -kalman_forward(ctx, pow(10.0, log10q));
}

int stagecal_softsensor_smooth(const double *t_s, const double *z, const double *u, size_t n,
                               double q, double *xs, double *us,
                               stagecal_softsensor_smooth_info *info, stagecal_error *err)
{
    size_t used = 0, first = n, last = 0;
    for (size_t i = 0; i < n; i++)
        if (isfinite(z[i]) && isfinite(u[i]) && u[i] > 0) {
            used++;
            first = GSL_MIN(first, i), last = i;
        }
    if (used < 2)
        return error_set(err, STAGECAL_EDATA, "%zu readings to smooth (expected at least 2)", used);
    double *buf = malloc(4 * n * sizeof *buf);
    if (!buf)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    struct walk w = {t_s, z, u, n, buf, buf + n, buf + 2 * n, buf + 3 * n};
    if (!(q > 0)) { /* maximum likelihood: a grid over 14 decades, then Brent */
        double best = INFINITY, lq = -14;
        int kb = 0;
        for (int k = 0; k <= 56; k++) {
            double f = neg_loglik(-14 + 0.25 * k, &w);
            if (f < best)
                best = f, kb = k, lq = -14 + 0.25 * k;
        }
        if (kb > 0 && kb < 56) {
            gsl_min_fminimizer *m = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
            gsl_function f = {neg_loglik, &w};
            if (m && gsl_min_fminimizer_set(m, &f, lq, lq - 0.25, lq + 0.25) == GSL_SUCCESS) {
                for (int it = 0; it < 60; it++) {
                    if (gsl_min_fminimizer_iterate(m) != GSL_SUCCESS)
                        break;
                    double a = gsl_min_fminimizer_x_lower(m), b = gsl_min_fminimizer_x_upper(m);
                    if (gsl_min_test_interval(a, b, 1e-4, 0) == GSL_SUCCESS)
                        break;
                }
                lq = gsl_min_fminimizer_x_minimum(m);
            }
            gsl_min_fminimizer_free(m);
        }
        q = pow(10.0, lq);
    }
    double ll = kalman_forward(&w, q);
    /* backward (RTS): from the last filtered state; rows after the last reading keep the
     * filter's prediction, rows before the first take the first smoothed value with the
     * walk's growth backwards in time */
    for (size_t i = n; i-- > 0;) {
        if (i >= last) {
            xs[i] = w.xf[i], us[i] = sqrt(w.pf[i]);
            if (i > last) { /* prediction beyond the last reading */
                double v = w.pf[last] + q * (t_s[i] - t_s[last]);
                xs[i] = w.xf[last], us[i] = sqrt(v);
            }
            continue;
        }
        if (i < first) {
            double v = us[first] * us[first] + q * (t_s[first] - t_s[i]);
            xs[i] = xs[first], us[i] = sqrt(v);
            continue;
        }
        double c = w.pp[i + 1] > 0 ? w.pf[i] / w.pp[i + 1] : 0;
        double ps = us[i + 1] * us[i + 1];
        xs[i] = w.xf[i] + c * (xs[i + 1] - w.xp[i + 1]);
        us[i] = sqrt(GSL_MAX(w.pf[i] + c * c * (ps - w.pp[i + 1]), 0.0));
    }
    free(buf);
    if (info)
        *info = (stagecal_softsensor_smooth_info){q, ll, used};
    return STAGECAL_OK;
}
