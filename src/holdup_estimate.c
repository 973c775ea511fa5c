/*
 * holdup_estimate.c — the column's liquid holdup from a run's total-reflux start-up
 * (include/stagecal/holdup.h, stagecal_holdup_from_startup; docs/methods.md, "Column
 * holdup").
 *
 * At total reflux the stage balances of a column with h mol of liquid on each of its
 * N − 1 stages (constant molar overflow, total condenser, no drum, the pot held at xB) read
 *     h·dx_j/dt = V·(x_(j−1) − x_j) + V·(y*(x_(j+1)) − y*(x_j)),  x_0 = y*(x_1),
 * so the start-up's time runs as h/V: a reference start-up computed here (GSL's ODE
 * driver), sampled at the run's own times and fitted with the same first-order fit as the
 * logs, gives the h whose fitted time constant is the logged one (a fixed point in h,
 * because the fitted τ of a response that is not first order depends on which part of it
 * the samples cover). The stage-by-stage model is the one of Distefano, G. P. (1968),
 * AIChE J. 14, 190–199 (from memory), here at total reflux without the pot's change.
 *
 * Workload: per run and per neighbouring whole stage count, up to 30 reference start-ups of
 * N − 1 ODEs over the start-up's span.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_odeiv2.h>

#include "internal.h"
#include "stagecal/holdup.h"

#define EST_MAX_STAGES 60

struct startup_ode {
    const stagecal_vle *vle;
    size_t nc;    /* column stages */
    double h, xb; /* holdup per stage [mol] (V = 1 mol/s), pot composition */
    int failed;   /* an equilibrium evaluation failed */
};

static double ystar(struct startup_ode *s, double x)
{
    double y;
    x = fmin(1.0, fmax(0.0, x));
    if (stagecal_vle_ystar(s->vle, x, &y) != STAGECAL_OK) {
        s->failed = 1;
        return x;
    }
    return y;
}

static int startup_rhs(double t, const double x[], double dx[], void *params)
{
    (void)t;
    struct startup_ode *s = params;
    double ypot = ystar(s, s->xb), y_here = ystar(s, x[0]), xd = y_here;
    for (size_t j = 0; j < s->nc; j++) {
        double y_below = j + 1 < s->nc ? ystar(s, x[j + 1]) : ypot;
        double x_above = j == 0 ? xd : x[j - 1];
        dx[j] = ((x_above - x[j]) + (y_below - y_here)) / s->h;
        y_here = y_below;
    }
    return s->failed ? GSL_EBADFUNC : GSL_SUCCESS;
}

/* The reference distillate at times t_rel (from 0) of nc stages with holdup h per stage, all
 * starting at x0, the pot at xb; 0 on success. */
static int reference_startup(const stagecal_vle *vle, size_t nc, double h, double x0, double xb,
                             const double *t_rel, size_t n, double *xd)
{
    struct startup_ode s = {vle, nc, h, xb, 0};
    double x[EST_MAX_STAGES];
    for (size_t j = 0; j < nc; j++)
        x[j] = x0;
    gsl_odeiv2_system sys = {startup_rhs, NULL, nc, &s};
    gsl_odeiv2_driver *d =
        gsl_odeiv2_driver_alloc_y_new(&sys, gsl_odeiv2_step_rkf45, 1e-3 * h, 1e-10, 1e-10);
    if (!d)
        return -1;
    double t = 0;
    int rc = 0;
    for (size_t i = 0; i < n && rc == 0; i++) {
        if (t_rel[i] > t && gsl_odeiv2_driver_apply(d, &t, t_rel[i], x) != GSL_SUCCESS)
            rc = -1;
        xd[i] = ystar(&s, x[0]);
    }
    gsl_odeiv2_driver_free(d);
    return rc || s.failed ? -1 : 0;
}

/* The holdup per stage h [mol at V = 1 mol/s] whose reference start-up of nc stages has the
 * fitted time constant tau_obs on the run's sample times; 0 on success. */
static int holdup_per_stage(const stagecal_vle *vle, size_t nc, double x0, double xb,
                            const double *t_rel, size_t n, double tau_obs,
                            const stagecal_holdup_params *par, double *xd, double *h_out)
{
    double h = tau_obs / (double)nc;
    for (int it = 0; it < 30; it++) {
        stagecal_holdup_tau ref;
        if (reference_startup(vle, nc, h, x0, xb, t_rel, n, xd) ||
            stagecal_holdup_fit_startup(t_rel, xd, n, 0.0, par, &ref, NULL) != STAGECAL_OK ||
            !ref.ok)
            return -1;
        double next = h * tau_obs / ref.tau_s;
        if (fabs(next - h) <= 1e-6 * h) {
            *h_out = next;
            return 0;
        }
        h = next;
    }
    return -1;
}

static void est_fail(stagecal_holdup_est *out, const char *why)
{
    out->ok = 0;
    out->holdup_mol = out->se_holdup_mol = 0;
    snprintf(out->reason, sizeof out->reason, "%s", why);
}

int stagecal_holdup_from_startup(const stagecal_vle *vle, const double *t_s, size_t n, double x0,
                                 double xb, double stages, double v_mol_s,
                                 const stagecal_holdup_tau *su,
                                 const stagecal_holdup_params *params, stagecal_holdup_est *out,
                                 stagecal_error *err)
{
    if (!vle || !t_s || !su || !out)
        return error_set(err, STAGECAL_EINVAL, "NULL argument");
    stagecal_holdup_params par = params ? *params : stagecal_holdup_default_params();
    out->stages = stages;
    out->reason[0] = '\0';
    if (!su->ok) {
        est_fail(out, "no start-up time constant");
        return STAGECAL_OK;
    }
    if (!(stages >= 2 && stages < EST_MAX_STAGES) || !(v_mol_s > 0) || !(xb > 0 && xb < 1) ||
        !(x0 > 0 && x0 < 1) || n < 3) {
        est_fail(out, "no stage count, boil-up or pot composition for the start-up");
        return STAGECAL_OK;
    }
    double *buf = malloc(2 * n * sizeof *buf);
    if (!buf)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    double *t_rel = buf, *xd = buf + n;
    for (size_t i = 0; i < n; i++)
        t_rel[i] = t_s[i] - t_s[0];
    /* the two whole column-stage counts around the fractional one, interpolated */
    size_t nc_lo = (size_t)floor(stages) - 1;
    double frac = stages - floor(stages), h_lo = 0, h_hi = 0;
    int bad = holdup_per_stage(vle, nc_lo, x0, xb, t_rel, n, su->tau_s, &par, xd, &h_lo) ||
              (frac > 0 &&
               holdup_per_stage(vle, nc_lo + 1, x0, xb, t_rel, n, su->tau_s, &par, xd, &h_hi));
    free(buf);
    if (bad) {
        est_fail(out, "the reference start-up did not reproduce the time constant");
        return STAGECAL_OK;
    }
    /* the column's holdup at V = 1 mol/s, then scaled: time runs as h/V */
    double hcol = (1 - frac) * h_lo * (double)nc_lo + frac * h_hi * (double)(nc_lo + 1);
    out->ok = 1;
    out->holdup_mol = hcol * v_mol_s;
    out->se_holdup_mol = out->holdup_mol * su->se_tau_s / su->tau_s;
    return STAGECAL_OK;
}
