/*
 * batch_dynamic.c — the dynamic batch model: a stage-by-stage batch rectifier with the
 * column's liquid holdup (stagecal_batch_params.dynamics; docs/methods.md, "Dynamic batch
 * prediction"). The model is the stage-by-stage one of Distefano, G. P. (1968),
 * "Mathematical modeling and numerical integration of multicomponent batch distillation
 * equations", AIChE J. 14, 190–199 (from memory), for a binary with constant molar liquid
 * holdup on every column stage and in the reflux drum, constant molar overflow, constant
 * boil-up V, a total condenser and ideal stages (E_MV = 1: the stage law gives effective
 * stages). In the time τ = t·V/W0 and amounts over the charge W0, with m = L/V, d = 1 − m:
 *
 *   h·dx_j/dτ   = m·(x_(j−1) − x_j) + (y_(j+1) − y_j),  j = 1 … nw,  y_j = y*(x_j), x_0 = xD
 *   h_d·dxD/dτ  = y_1 − xD                 (no drum: xD = y_1, algebraic)
 *   dW/dτ = −d,  d(W·xB)/dτ = m·x_L − y*(xB),  receiver: d, d·xD, d·(xD − xD,0)²
 *
 * x_L the liquid that reaches the pot. The state follows batch.c (NSTATE pot and receiver
 * members) with the nw stage liquids and the drum's after them.
 *
 * Stage count. The law's N at the policy's R is used as the stage convention counts it:
 * column stages N − 1 = nw + f, nw whole stages (floor) that hold the column's liquid
 * evenly, and for f > 0 a fractional element without holdup between the lowest whole
 * stage and the pot: from the liquid x_in leaving that stage it passes down the liquid
 * x_out of the convention's fractional step (stages_fraction_target: Smoker's inverse with
 * the local α of the full step from x_in on the operating line through the current xD)
 * and, by its balance, the vapour y*(xB) + m·(x_in − x_out) up. In a steady column this is
 * the convention's step exactly, so the model reduces to the quasi-steady one (batch.c)
 * as the holdup goes to 0. When the law's N at a new R (schedule switch, a rising reflux)
 * leaves [nw + 1, nw + 2], the profile is mapped onto the new whole stages by linear
 * interpolation in relative height, shifted uniformly so that the column keeps its light
 * component (the pot takes the difference only where the shift would leave [0, 1]); the
 * balances stay exact and the count of such changes is reported.
 *
 * Operation. The column and drum start full of charge liquid (the rest in the pot); the
 * start-up runs at total reflux (m = 1, nothing drawn) until xD reaches startup_xd, or
 * startup_max_s, or (neither given) startup_fraction of the way from the pot to the
 * total-reflux distillate of the quasi-steady model (or a constant-distillate set point,
 * whichever comes first); then the policy draws.
 *
 * Integration. The system is stiff (stage time constants h/(V·(1 + m·y*')), minutes or far
 * less, against hours), so GSL's implicit multistep BDF (gsl_odeiv2_step_msbdf) with a
 * Jacobian. The Jacobian is by forward differences of the right-hand side, one column per
 * state member (the system is small, at most DYN_MAXSTAGES + 6, and msbdf re-evaluates it
 * only when its Newton iteration needs it; an analytic one would need y*' of every
 * equilibrium model). Events are located as in batch.c, with the state at a trial step
 * length computed by the same driver from the start of the step.
 */
#include <float.h>
#include <math.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "batch_internal.h"
#include "internal.h"

void stagecal_batch_dynamics_init(stagecal_batch_dynamics *d)
{
    memset(d, 0, sizeof *d);
    d->startup_fraction = 0.99;
}

/* y*(x) with x held in [0, x_max] (trial states of the Newton iteration may stray). */
static double ystar(stagecal_batch_workspace *w, double x)
{
    double y, xmax = stagecal_vle_x_max(w->col.vle);
    int rc = stagecal_vle_ystar(w->col.vle, fmin(fmax(x, 0.0), xmax), &y);
    if (rc != STAGECAL_OK) {
        if (!w->fail_code)
            w->fail_code = error_set(&w->fail, rc, "dynamic model: y*(x) failed at x = %.17g", x);
        return x;
    }
    return y;
}

static int dyn_fail(stagecal_batch_workspace *w, stagecal_error *err)
{
    if (err)
        *err = w->fail;
    return w->fail_code;
}

int batch_dyn_xd(stagecal_batch_workspace *w, const double *u, double *xd, stagecal_error *err)
{
    *xd = w->hd > 0 ? u[NSTATE + w->nw] : ystar(w, u[NSTATE]);
    return w->fail_code ? dyn_fail(w, err) : STAGECAL_OK;
}

double batch_dyn_column_light(const stagecal_batch_workspace *w, const double *u)
{
    double s = 0;
    for (size_t j = 0; j < w->nw; j++)
        s += u[NSTATE + j];
    return w->hs * s + (w->hd > 0 ? w->hd * u[NSTATE + w->nw] : 0);
}

int batch_dyn_policy(stagecal_batch_workspace *w, double xb, double *r, double *n,
                     unsigned *outside, stagecal_error *err)
{
    const stagecal_batch_policy *po = &w->pb.policy;
    if (po->kind == STAGECAL_BATCH_CONSTANT_DISTILLATE && !w->ceiling_hit) {
        double xd; /* the quasi-steady reflux program at the current pot (feed-forward) */
        return batch_policy_state(w, xb, r, &xd, n, outside, err);
    }
    *r = po->kind == STAGECAL_BATCH_CONSTANT_DISTILLATE ? po->reflux_max
         : po->kind == STAGECAL_BATCH_SCHEDULE          ? po->steps[w->sched].reflux
                                                        : po->reflux;
    return batch_law_stages(&w->col, *r, n, outside, &w->clamped, err);
}

static int dyn_rhs(double tau, const double u[], double du[], void *params)
{
    stagecal_batch_workspace *w = params;
    double r, n, xd;
    unsigned o;
    (void)tau;
    w->n_rhs++;
    if (w->fail_code)
        return GSL_EBADFUNC;
    if (!(u[0] > 0) || !(u[1] > 0) || !(u[1] < u[0]))
        return GSL_FAILURE; /* overshoot of a trial step: GSL shortens the step */
    double xb = u[1] / u[0];
    if ((w->fail_code = batch_dyn_policy(w, xb, &r, &n, &o, &w->fail)))
        return GSL_EBADFUNC;
    double m = w->startup || isinf(r) ? 1.0 : r / (r + 1), d = w->startup ? 0.0 : 1 / (r + 1);
    const double *x = u + NSTATE;
    size_t nw = w->nw;
    double f = fmin(fmax(n - 1 - (double)nw, 0.0), 1.0); /* the fractional element */
    double ypot = ystar(w, xb), y_here = ystar(w, x[0]);
    xd = w->hd > 0 ? x[nw] : y_here;
    double x_in = x[nw - 1], x_out = x_in, y_up = ypot;
    if (f > 0) {
        double yn = m * x_in + d * xd, xn;
        int rc = stagecal_vle_xstar(w->col.vle, fmin(fmax(yn, 0.0), 1.0), &xn);
        if (rc != STAGECAL_OK) {
            w->fail_code = error_set(&w->fail, rc, "dynamic model: x*(y) failed at y = %.17g", yn);
            return GSL_EBADFUNC;
        }
        x_out = xn < x_in && xn > 0 ? stages_fraction_target(x_in, xn, yn, m, d * xd, f) : x_in;
        y_up = ypot + m * (x_in - x_out);
    }
    for (size_t j = 0; j < nw; j++) {
        double y_below = j + 1 < nw ? ystar(w, x[j + 1]) : y_up;
        double x_above = j == 0 ? xd : x[j - 1];
        du[NSTATE + j] = (m * (x_above - x[j]) + (y_below - y_here)) / w->hs;
        if (j == 0 && w->hd > 0)
            du[NSTATE + nw] = (y_here - xd) / w->hd;
        y_here = y_below;
    }
    if (w->fail_code)
        return GSL_EBADFUNC;
    du[0] = -d;
    du[1] = m * x_out - ypot;
    du[2] = d;
    du[3] = d * xd;
    du[4] = d * (xd - w->cut_xd0) * (xd - w->cut_xd0);
    return GSL_SUCCESS;
}

/* Forward differences of dyn_rhs (see the head of the file); the receiver members (2 … 4)
 * do not enter the right-hand side. */
static int dyn_jac(double tau, const double u[], double *dfdy, double dfdt[], void *params)
{
    stagecal_batch_workspace *w = params;
    size_t n = w->dim;
    double f0[NSTATE_MAX], f1[NSTATE_MAX], up[NSTATE_MAX];
    int st = dyn_rhs(tau, u, f0, params);
    if (st != GSL_SUCCESS)
        return st;
    memcpy(up, u, n * sizeof up[0]);
    for (size_t k = 0; k < n; k++) {
        if (k >= 2 && k < NSTATE) {
            for (size_t i = 0; i < n; i++)
                dfdy[i * n + k] = 0;
            continue;
        }
        volatile double uk = u[k] + sqrt(DBL_EPSILON) * fmax(fabs(u[k]), 1e-6);
        double dk = uk - u[k];
        up[k] = uk;
        if ((st = dyn_rhs(tau, up, f1, params)) != GSL_SUCCESS)
            return st;
        for (size_t i = 0; i < n; i++)
            dfdy[i * n + k] = (f1[i] - f0[i]) / dk;
        up[k] = u[k];
    }
    for (size_t i = 0; i < n; i++)
        dfdt[i] = 0;
    return GSL_SUCCESS;
}

/* (Re)allocates the msbdf driver for the current dimension. */
static int dyn_driver(stagecal_batch_workspace *w, stagecal_error *err)
{
    if (w->drv)
        gsl_odeiv2_driver_free(w->drv);
    w->sys.function = dyn_rhs;
    w->sys.jacobian = dyn_jac;
    w->sys.dimension = w->dim;
    w->sys.params = w;
    w->drv = gsl_odeiv2_driver_alloc_y_new(&w->sys, gsl_odeiv2_step_msbdf, 1e-6, w->par.dyn_epsabs,
                                           w->par.dyn_epsrel);
    if (!w->drv)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for the dynamic model's solver");
    return STAGECAL_OK;
}

int batch_dyn_setup(stagecal_batch_workspace *w, stagecal_error *err)
{
    const stagecal_batch_dynamics *d = w->par.dynamics;
    double w0 = w->pb.w0_mol;
    if (!(d->holdup_column_mol > 0 && isfinite(d->holdup_column_mol)))
        return error_set(err, STAGECAL_EINVAL,
                         "column holdup %g mol: the dynamic model needs a finite holdup > 0 (with "
                         "none, the quasi-steady model is the answer)",
                         d->holdup_column_mol);
    if (!(d->holdup_drum_mol >= 0 && isfinite(d->holdup_drum_mol)))
        return error_set(err, STAGECAL_EINVAL, "reflux-drum holdup %g mol: expected >= 0",
                         d->holdup_drum_mol);
    if (!(d->holdup_column_mol + d->holdup_drum_mol < 0.5 * w0))
        return error_set(err, STAGECAL_EINVAL,
                         "holdup %g mol (column and drum) is half the charge %g mol or more: the "
                         "pot would hold less than the column",
                         d->holdup_column_mol + d->holdup_drum_mol, w0);
    if (!(d->startup_xd >= 0 && d->startup_xd < 1) ||
        !(d->startup_max_s >= 0 && isfinite(d->startup_max_s)) ||
        !(d->startup_fraction > 0 && d->startup_fraction < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "start-up: purity %g, time %g s, fraction %g: expected a purity in [0, 1) "
                         "(0 = none), a time >= 0 (0 = none) and a fraction in (0, 1)",
                         d->startup_xd, d->startup_max_s, d->startup_fraction);
    if (!(w->par.dyn_epsabs > 0) || !(w->par.dyn_epsrel >= 0))
        return error_set(err, STAGECAL_EINVAL, "dynamic model tolerances %g, %g: expected > 0",
                         w->par.dyn_epsabs, w->par.dyn_epsrel);
    w->dyn = 1;
    w->dy = *d;
    w->hd = d->holdup_drum_mol / w0;
    return STAGECAL_OK;
}

/* Whole column stages for n stages (incl. the pot); EINVAL outside 1 … DYN_MAXSTAGES. */
static int whole_stages(double n, double r, size_t *nw, stagecal_error *err)
{
    double c = floor(n - 1);
    if (c < 1)
        return error_set(err, STAGECAL_EINVAL,
                         "the stage law gives %.4g stages at R = %g: the dynamic model needs at "
                         "least 2 (one column stage to hold the column's liquid)",
                         n, r);
    if (c > DYN_MAXSTAGES)
        return error_set(err, STAGECAL_EINVAL,
                         "the stage law gives %.4g stages at R = %g: the dynamic model takes at "
                         "most %d column stages",
                         n, r, DYN_MAXSTAGES);
    *nw = (size_t)c;
    return STAGECAL_OK;
}

int batch_dyn_start(stagecal_batch_workspace *w, stagecal_error *err)
{
    const stagecal_batch_problem *pb = &w->pb;
    double h = w->dy.holdup_column_mol / pb->w0_mol, r, n;
    unsigned o;
    int rc;
    w->startup = 1;
    w->n_remaps = 0;
    w->tau_startup = 0;
    if ((rc = batch_dyn_policy(w, pb->xb0, &r, &n, &o, err)) ||
        (rc = whole_stages(n, r, &w->nw, err)))
        return rc;
    w->hs = h / (double)w->nw;
    w->dim = NSTATE + w->nw + (w->hd > 0);
    w->u[0] = 1 - h - w->hd;
    w->u[1] = w->u[0] * pb->xb0;
    for (size_t k = 2; k < NSTATE; k++)
        w->u[k] = 0;
    for (size_t j = NSTATE; j < w->dim; j++)
        w->u[j] = pb->xb0;
    if (w->dy.startup_xd > 0 && !(w->dy.startup_max_s > 0)) {
        double xinf;
        if ((rc = batch_solve_xd(&w->col, &w->par, w->root_x, w->az, w->n_az, pb->xb0, INFINITY, n,
                                 NULL, &xinf, err)))
            return rc;
        if (!(w->dy.startup_xd < xinf))
            return error_set(err, STAGECAL_EINVAL,
                             "start-up purity %.6g: %.4g stages reach only %.6g at total reflux "
                             "from the charge; give a lower purity or a start-up time",
                             w->dy.startup_xd, n, xinf);
    }
    return dyn_driver(w, err);
}

int batch_dyn_startup_g(stagecal_batch_workspace *w, double tau, const double *u, double *g,
                        stagecal_error *err)
{
    const stagecal_batch_dynamics *d = &w->dy;
    double xd, scale = w->pb.w0_mol / w->pb.v_mol_s;
    int rc;
    *g = INFINITY;
    if (!w->startup)
        return STAGECAL_OK;
    if ((rc = batch_dyn_xd(w, u, &xd, err)))
        return rc;
    if (d->startup_xd > 0)
        *g = d->startup_xd - xd;
    if (d->startup_max_s > 0)
        *g = fmin(*g, d->startup_max_s / scale - tau);
    if (d->startup_xd > 0 || d->startup_max_s > 0)
        return STAGECAL_OK;
    double xb = u[1] / u[0], r, n, xinf;
    unsigned o;
    if ((rc = batch_dyn_policy(w, xb, &r, &n, &o, err)) ||
        (rc = batch_solve_xd(&w->col, &w->par, w->root_x, w->az, w->n_az, xb, INFINITY, n, NULL,
                             &xinf, err)))
        return rc;
    double target = xb + d->startup_fraction * (xinf - xb);
    if (w->pb.policy.kind == STAGECAL_BATCH_CONSTANT_DISTILLATE) /* or the set point, first */
        target = fmin(target, w->pb.policy.xd_set);
    *g = target - xd;
    return STAGECAL_OK;
}

int batch_dyn_restructure(stagecal_batch_workspace *w, stagecal_error *err)
{
    double r, n, old[DYN_MAXSTAGES], xd = w->hd > 0 ? w->u[NSTATE + w->nw] : 0;
    unsigned o;
    size_t nw = 0;
    int rc = batch_dyn_policy(w, w->u[1] / w->u[0], &r, &n, &o, err);
    if (rc)
        return rc;
    if (n - 1 >= (double)w->nw && n - 1 <= (double)w->nw + 1)
        return STAGECAL_OK;
    if ((rc = whole_stages(n, r, &nw, err)))
        return rc;
    double light_old = batch_dyn_column_light(w, w->u);
    memcpy(old, w->u + NSTATE, w->nw * sizeof old[0]);
    for (size_t k = 0; k < nw; k++) { /* the same relative height on the old stages */
        double p = ((double)k + 0.5) / (double)nw * (double)w->nw - 0.5;
        p = fmin(fmax(p, 0.0), (double)(w->nw - 1));
        size_t i = (size_t)p;
        double a = p - (double)i;
        w->u[NSTATE + k] = i + 1 < w->nw ? (1 - a) * old[i] + a * old[i + 1] : old[i];
    }
    w->hs *= (double)w->nw / (double)nw;
    w->nw = nw;
    w->dim = NSTATE + nw + (w->hd > 0);
    if (w->hd > 0)
        w->u[NSTATE + nw] = xd;
    /* the light the interpolation gained or lost: a uniform shift of the new profile keeps
     * it on the column (the pot, and with it R and N, do not move); where that would leave
     * [0, 1], the pot takes it */
    double diff = light_old - batch_dyn_column_light(w, w->u), shift = diff / (w->hs * (double)nw);
    int inside = 1;
    for (size_t k = 0; k < nw; k++)
        inside = inside && w->u[NSTATE + k] + shift >= 0 && w->u[NSTATE + k] + shift <= 1;
    for (size_t k = 0; inside && k < nw; k++)
        w->u[NSTATE + k] += shift;
    if (!inside)
        w->u[1] += diff;
    w->n_remaps++;
    return dyn_driver(w, err);
}

int batch_dyn_step_from(stagecal_batch_workspace *w, double tau0, const double *u0, double h,
                        double *u)
{
    double t = tau0;
    memcpy(u, u0, w->dim * sizeof u[0]);
    if (h == 0)
        return GSL_SUCCESS;
    gsl_odeiv2_driver_reset_hstart(w->drv, fmin(h, w->h > 0 ? w->h : h));
    return gsl_odeiv2_driver_apply(w->drv, &t, tau0 + h, u);
}
