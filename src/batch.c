/*
 * batch.c — quasi-steady batch rectification (Smoker & Rose 1940, "Graphic determination of batch
 * distillation curves for binary mixtures", Trans. AIChE 36, citation from memory): integration of
 * the pot balances with GSL's adaptive Runge–Kutta, the inner solves for xD (and R under a
 * constant-distillate policy), cut targets as events.
 *
 * State, dimensionless (all amounts over the charge W0, time τ = t·V/W0):
 *   u[0] = W/W0, u[1] = W·xB/W0, u[2] = D_cut/W0, u[3] = D_cut·x̄_cut/W0
 * with du/dτ = (−1, −xD, 1, xD)/(R + 1). The collected distillate is integrated,
 * not derived from W, so the mass balance W0·xB0 = W·xB + Σ D·x̄D is a check on the
 * integration and on the bookkeeping across cuts, not an identity.
 *
 * Events (cut targets, schedule switches, the reflux ceiling, safety stops) are
 * functions g(τ, u) that are > 0 before and ≤ 0 after. After every accepted step
 * each g is evaluated; when one changed sign, the crossing is located by Brent root
 * finding on the length h of a single Runge–Kutta step from the start of that step
 * (the same formula of the same order as the accepted step, with a shorter h, so the
 * located state is at least as accurate as the accepted one). Time-based events also
 * bound the step, so they are hit exactly.
 *
 * Column holdup is neglected; V is constant; constant molar overflow.
 */
#include "stagecal/batch.h"

#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "batch_internal.h"
#include "internal.h"

/* ---- defaults, init, check -------------------------------------------------------------- */

void stagecal_batch_problem_init(stagecal_batch_problem *pb)
{
    memset(pb, 0, sizeof *pb);
    pb->policy.kind = STAGECAL_BATCH_CONSTANT_REFLUX;
}

stagecal_batch_params stagecal_batch_default_params(void)
{
    /* one initializer: a member added later starts as 0, never as stack garbage */
    return (stagecal_batch_params){.epsabs = 1e-12,
                                   .epsrel = 1e-10,
                                   .rk8pd = 1,
                                   .x_epsabs = 1e-14,
                                   .event_epsabs = 1e-13,
                                   .max_iter = 200,
                                   .output_dt_s = 0,
                                   .min_pot_fraction = 1e-3,
                                   .t_max_s = 30.0 * 86400.0,
                                   .max_steps = 100000,
                                   .dynamics = NULL,
                                   .dyn_epsabs = 1e-11,
                                   .dyn_epsrel = 1e-9};
}

void stagecal_batch_result_init(stagecal_batch_result *res)
{
    memset(res, 0, sizeof *res);
}

void stagecal_batch_result_free(stagecal_batch_result *res)
{
    if (!res)
        return;
    free(res->rows);
    stagecal_batch_result_init(res);
}

static void add_warning(stagecal_batch_result *res, const char *fmt, ...) SC_PRINTF(2, 3);
static void add_warning(stagecal_batch_result *res, const char *fmt, ...)
{
    va_list ap;
    if (res->n_warnings >= STAGECAL_BATCH_MAXWARN)
        return;
    va_start(ap, fmt);
    vsnprintf(res->warnings[res->n_warnings], STAGECAL_BATCH_WARNLEN, fmt, ap);
    va_end(ap);
    res->n_warnings++;
}

int stagecal_batch_check(const stagecal_batch_problem *pb, stagecal_error *err)
{
    const stagecal_batch_policy *po = &pb->policy;
    if (!(pb->w0_mol > 0 && isfinite(pb->w0_mol)))
        return error_set(err, STAGECAL_EINVAL, "charge %g mol: expected a finite amount > 0",
                         pb->w0_mol);
    if (!(pb->xb0 > 0 && pb->xb0 < 1))
        return error_set(err, STAGECAL_EINVAL,
                         "charge composition %g: expected a mole fraction in (0, 1)", pb->xb0);
    if (!(pb->v_mol_s > 0 && isfinite(pb->v_mol_s)))
        return error_set(err, STAGECAL_EINVAL, "boil-up %g mol/s: expected a finite rate > 0",
                         pb->v_mol_s);
    if (!(pb->latent_j_mol >= 0 && isfinite(pb->latent_j_mol)))
        return error_set(err, STAGECAL_EINVAL, "latent heat %g J/mol: expected >= 0 (0 = unknown)",
                         pb->latent_j_mol);
    switch (po->kind) {
    case STAGECAL_BATCH_CONSTANT_REFLUX:
        if (!(po->reflux >= 0 && isfinite(po->reflux)))
            return error_set(err, STAGECAL_EINVAL,
                             "reflux ratio %g: expected a finite R >= 0 (a batch at total "
                             "reflux collects nothing)",
                             po->reflux);
        break;
    case STAGECAL_BATCH_CONSTANT_DISTILLATE:
        if (!(po->xd_set > pb->xb0 && po->xd_set < 1))
            return error_set(err, STAGECAL_EINVAL,
                             "distillate set point %g: expected a mole fraction in (xB0 = %g, 1)",
                             po->xd_set, pb->xb0);
        if (!(po->reflux_max > 0 && isfinite(po->reflux_max)))
            return error_set(err, STAGECAL_EINVAL, "reflux ceiling %g: expected a finite R > 0",
                             po->reflux_max);
        break;
    case STAGECAL_BATCH_SCHEDULE:
        if (po->n_steps < 1 || po->n_steps > STAGECAL_BATCH_MAXSTEPS)
            return error_set(err, STAGECAL_EINVAL,
                             "reflux schedule has %zu entries: expected 1 to %d", po->n_steps,
                             STAGECAL_BATCH_MAXSTEPS);
        for (size_t i = 0; i < po->n_steps; i++) {
            const stagecal_batch_schedule_step *s = &po->steps[i];
            if (!(s->reflux >= 0 && isfinite(s->reflux)))
                return error_set(err, STAGECAL_EINVAL,
                                 "reflux schedule entry %zu: R = %g, expected a finite R >= 0",
                                 i + 1, s->reflux);
            if (po->key == STAGECAL_BATCH_BY_TIME) {
                if (!(s->at >= 0 && isfinite(s->at)) || (i > 0 && !(s->at > po->steps[i - 1].at)))
                    return error_set(err, STAGECAL_EINVAL,
                                     "reflux schedule entry %zu: time %g s, expected times >= 0 "
                                     "in increasing order",
                                     i + 1, s->at);
            } else if (!(s->at > 0 && s->at <= 1) || (i > 0 && !(s->at < po->steps[i - 1].at))) {
                return error_set(err, STAGECAL_EINVAL,
                                 "reflux schedule entry %zu: pot composition %g, expected mole "
                                 "fractions in (0, 1] in decreasing order",
                                 i + 1, s->at);
            }
        }
        if (po->key == STAGECAL_BATCH_BY_TIME ? po->steps[0].at != 0
                                              : !(po->steps[0].at >= pb->xb0))
            return error_set(err, STAGECAL_EINVAL,
                             "reflux schedule: the first entry must apply from the start (time 0, "
                             "or a pot composition >= xB0 = %g)",
                             pb->xb0);
        break;
    default:
        return error_set(err, STAGECAL_EINVAL, "unknown reflux policy %d", (int)po->kind);
    }
    if (pb->n_cuts < 1 || pb->n_cuts > STAGECAL_BATCH_MAXCUTS)
        return error_set(err, STAGECAL_EINVAL, "%zu cuts: expected 1 to %d receivers", pb->n_cuts,
                         STAGECAL_BATCH_MAXCUTS);
    for (size_t i = 0; i < pb->n_cuts; i++) {
        const stagecal_batch_cut_spec *c = &pb->cuts[i];
        double v = c->value;
        int ok;
        switch (c->kind) {
        case STAGECAL_BATCH_UNTIL_POT_X:
        case STAGECAL_BATCH_UNTIL_MEAN_X:
        case STAGECAL_BATCH_UNTIL_DISTILLATE_X:
            ok = v > 0 && v < 1;
            break;
        case STAGECAL_BATCH_UNTIL_FRACTION:
            ok = v > 0 && v < 1;
            break;
        case STAGECAL_BATCH_UNTIL_TIME:
            ok = v > 0 && isfinite(v);
            break;
        case STAGECAL_BATCH_UNTIL_REFLUX:
            if (po->kind != STAGECAL_BATCH_CONSTANT_DISTILLATE)
                return error_set(err, STAGECAL_EINVAL,
                                 "cut %zu: target 'reflux' needs the constant-distillate policy "
                                 "(R only rises under it)",
                                 i + 1);
            ok = v > 0 && isfinite(v);
            break;
        default:
            return error_set(err, STAGECAL_EINVAL, "cut %zu: unknown target %d", i + 1,
                             (int)c->kind);
        }
        if (!ok)
            return error_set(err, STAGECAL_EINVAL,
                             "cut %zu: target %s = %g is outside its domain (mole fractions and "
                             "fractions in (0, 1), times and R > 0)",
                             i + 1, stagecal_batch_target_name((int)c->kind), v);
    }
    return STAGECAL_OK;
}

static int rhs(double tau, const double u[], double dudt[], void *params)
{
    stagecal_batch_workspace *w = params;
    double r, xd, n, xb;
    unsigned o;
    (void)tau;
    w->n_rhs++;
    if (w->fail_code)
        return GSL_EBADFUNC;
    if (!(u[0] > 0) || !(u[1] > 0))
        return GSL_FAILURE; /* overshoot of a trial step: GSL halves the step */
    xb = u[1] / u[0];
    if (!(xb < 1))
        return GSL_FAILURE;
    w->fail_code = batch_policy_state(w, xb, &r, &xd, &n, &o, &w->fail);
    if (w->fail_code)
        return GSL_EBADFUNC;
    double d = 1 / (r + 1);
    dudt[0] = -d;
    dudt[1] = -d * xd;
    dudt[2] = d;
    dudt[3] = d * xd;
    dudt[4] = d * (xd - w->cut_xd0) * (xd - w->cut_xd0);
    return GSL_SUCCESS;
}

/* ---- workspace ---------------------------------------------------------------------------- */

stagecal_batch_workspace *stagecal_batch_alloc(const stagecal_batch_problem *pb,
                                               const stagecal_batch_column *col,
                                               const stagecal_batch_params *params,
                                               stagecal_error *err)
{
    if (stagecal_batch_check(pb, err) != STAGECAL_OK)
        return NULL;
    if (!col || !col->vle || !col->stages) {
        error_set(err, STAGECAL_EINVAL,
                  "batch column: an equilibrium model and a stage law are "
                  "required");
        return NULL;
    }
    stagecal_batch_workspace *w = calloc(1, sizeof *w);
    if (!w) {
        error_set(err, STAGECAL_ENOMEM, "out of memory for a batch workspace");
        return NULL;
    }
    w->pb = *pb;
    w->col = *col;
    w->par = params ? *params : stagecal_batch_default_params();
    w->sys.function = rhs;
    w->sys.jacobian = NULL;
    w->sys.dimension = NSTATE;
    w->sys.params = w;
    w->drv = gsl_odeiv2_driver_alloc_y_new(
        &w->sys, w->par.rk8pd ? gsl_odeiv2_step_rk8pd : gsl_odeiv2_step_rkf45, 1e-3, w->par.epsabs,
        w->par.epsrel);
    w->root_x = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    w->root_h = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!w->drv || !w->root_x || !w->root_h) {
        stagecal_batch_free(w);
        error_set(err, STAGECAL_ENOMEM, "out of memory for the ODE and root solvers");
        return NULL;
    }
    w->n_az = stagecal_vle_azeotropes(col->vle, w->az, MAXAZ);
    if (w->n_az > MAXAZ)
        w->n_az = MAXAZ;
    w->dim = NSTATE;
    if (w->par.dynamics && batch_dyn_setup(w, err) != STAGECAL_OK) {
        stagecal_batch_free(w);
        return NULL;
    }
    return w;
}

void stagecal_batch_free(stagecal_batch_workspace *w)
{
    if (!w)
        return;
    if (w->drv)
        gsl_odeiv2_driver_free(w->drv);
    if (w->root_x)
        gsl_root_fsolver_free(w->root_x);
    if (w->root_h)
        gsl_root_fsolver_free(w->root_h);
    free(w);
}

int stagecal_batch_init(stagecal_batch_workspace *w, stagecal_batch_result *res,
                        stagecal_error *err)
{
    int rc;
    stagecal_batch_result_free(res);
    w->tau = 0;
    w->h = 1e-3;
    w->u[0] = 1;
    w->u[1] = w->pb.xb0;
    w->u[2] = w->u[3] = w->u[4] = 0;
    w->r_seen = 0;
    w->light_done = w->total_done = 0;
    w->cut_tau0 = 0;
    w->cut = w->sched = 0;
    w->ceiling_hit = w->done = 0;
    w->xd_last = 0;
    w->lv_last = 0;
    w->n_rhs = 0;
    w->clamped = 0;
    w->fail_code = 0;
    w->tau_max = w->par.t_max_s * w->pb.v_mol_s / w->pb.w0_mol;
    w->next_out =
        w->par.output_dt_s > 0 ? w->par.output_dt_s * w->pb.v_mol_s / w->pb.w0_mol : INFINITY;
    /* schedule by pot composition: skip entries that already apply at xB0 */
    if (w->pb.policy.kind == STAGECAL_BATCH_SCHEDULE && w->pb.policy.key == STAGECAL_BATCH_BY_POT_X)
        while (w->sched + 1 < w->pb.policy.n_steps &&
               w->pb.policy.steps[w->sched + 1].at >= w->pb.xb0)
            w->sched++;
    if (w->dyn && (rc = batch_dyn_start(w, err)))
        return rc;
    gsl_odeiv2_driver_reset(w->drv);
    if ((rc = batch_push_row(w, res, err)))
        return rc;
    w->cut_xd0 = res->rows[0].xd;
    return batch_fire_due(w, res, 1, err);
}

int stagecal_batch_test(const stagecal_batch_workspace *w)
{
    return w->done;
}

int stagecal_batch_iterate(stagecal_batch_workspace *w, stagecal_batch_result *res,
                           stagecal_error *err)
{
    double tau0 = w->tau, u0[NSTATE_MAX], g0[NEV], g1[NEV];
    int rc, st;
    if (w->done)
        return STAGECAL_OK;
    if (res->n_steps >= w->par.max_steps)
        return error_set(err, STAGECAL_ENOCONV,
                         "batch integration: more than %zu steps (params.max_steps)",
                         w->par.max_steps);
    memcpy(u0, w->u, w->dim * sizeof u0[0]);
    for (int ev = 0; ev < NEV; ev++)
        if ((rc = batch_event_g(w, ev, w->tau, w->u, &g0[ev], err)))
            return rc;
    double t1 = fmin(batch_next_time_event(w), w->next_out);
    w->fail_code = 0;
    st =
        gsl_odeiv2_evolve_apply(w->drv->e, w->drv->c, w->drv->s, &w->sys, &w->tau, t1, &w->h, w->u);
    if (st != GSL_SUCCESS) {
        if (w->fail_code) {
            if (err)
                *err = w->fail;
            return w->fail_code;
        }
        return error_set(err, STAGECAL_ENOCONV, "batch integration failed at t = %g s: %s",
                         tau0 * w->pb.w0_mol / w->pb.v_mol_s, gsl_strerror(st));
    }
    res->n_steps++;
    /* earliest crossing among the events that changed sign */
    int first = -1;
    double h_first = w->tau - tau0;
    for (int ev = 0; ev < NEV; ev++) {
        if ((rc = batch_event_g(w, ev, w->tau, w->u, &g1[ev], err)))
            return rc;
        if (!(g0[ev] > 0 && g1[ev] <= 0))
            continue;
        double h_ev = w->tau - tau0;
        if (g1[ev] < 0) {
            if ((rc = batch_locate_event(w, ev, tau0, u0, &h_ev, err)))
                return rc;
        }
        if (first < 0 || h_ev < h_first) {
            first = ev;
            h_first = h_ev;
        }
    }
    if (first >= 0) {
        if (h_first < w->tau - tau0) {
            if (batch_step_from(w, tau0, u0, h_first, w->u) != GSL_SUCCESS) {
                if (w->fail_code) {
                    if (err)
                        *err = w->fail;
                    return w->fail_code;
                }
                return error_set(err, STAGECAL_ENOCONV, "event location: a step failed");
            }
            w->tau = tau0 + h_first;
        }
        if ((rc = batch_push_row(w, res, err)))
            return rc;
        batch_fire(w, res, first);
    } else if ((rc = batch_push_row(w, res, err))) {
        return rc;
    }
    while (w->tau >= w->next_out)
        w->next_out += w->par.output_dt_s * w->pb.v_mol_s / w->pb.w0_mol;
    if ((rc = batch_fire_due(w, res, 1, err)))
        return rc;
    return w->dyn && !w->done ? batch_dyn_restructure(w, err) : STAGECAL_OK;
}

int stagecal_batch_run(const stagecal_batch_problem *pb, const stagecal_batch_column *col,
                       const stagecal_batch_params *params, stagecal_batch_result *res,
                       stagecal_error *err)
{
    stagecal_batch_workspace *w = stagecal_batch_alloc(pb, col, params, err);
    int rc;
    if (!w)
        return err ? err->code : STAGECAL_EINVAL;
    rc = stagecal_batch_init(w, res, err);
    while (rc == STAGECAL_OK && !stagecal_batch_test(w))
        rc = stagecal_batch_iterate(w, res, err);
    if (rc == STAGECAL_OK) {
        res->t_end_s = w->tau * pb->w0_mol / pb->v_mol_s;
        res->w_end_mol = w->u[0] * pb->w0_mol;
        res->xb_end = w->u[1] / w->u[0];
        res->energy_j = pb->v_mol_s * res->t_end_s * pb->latent_j_mol;
        res->clamped = w->clamped;
        res->n_rhs = w->n_rhs;
        res->dynamic = w->dyn;
        res->t_startup_s = w->dyn ? w->tau_startup * pb->w0_mol / pb->v_mol_s : 0;
        res->xd_startup = w->dyn ? w->xd_startup : NAN;
        res->n_remaps = w->n_remaps;
        if (w->dyn && w->startup)
            add_warning(res, "the batch ended during the total-reflux start-up: nothing was "
                             "drawn");
        if (res->stop == STAGECAL_BATCH_STOP_POT_EMPTY)
            add_warning(res, "the pot ran down to %.3g of the charge before the last target",
                        w->par.min_pot_fraction);
        if (res->stop == STAGECAL_BATCH_STOP_TIME_LIMIT)
            add_warning(res, "the batch reached the time limit (%.6g h) before the last target",
                        w->par.t_max_s / 3600);
        if (w->clamped)
            add_warning(res, "the stage law gave fewer than 1 stage somewhere; the pot alone "
                             "(1 stage) was used there");
    }
    stagecal_batch_free(w);
    return rc;
}

void stagecal_batch_envelope_warnings(const stagecal_model *m, double f_load,
                                      stagecal_batch_result *res)
{
    if (res->outside & STAGECAL_MODEL_R_BELOW)
        add_warning(res,
                    "extrapolation: the batch runs at R down to %.4g, below the lowest reflux "
                    "ratio calibrated (%.4g)",
                    res->r_min_used, m->r_min);
    if (res->outside & STAGECAL_MODEL_R_ABOVE)
        add_warning(res,
                    "extrapolation: the batch runs at R up to %.4g, above the highest reflux "
                    "ratio calibrated (%.4g)",
                    res->r_max_used, m->r_max);
    if (res->outside & (STAGECAL_MODEL_F_BELOW | STAGECAL_MODEL_F_ABOVE))
        add_warning(res,
                    "extrapolation: the F-factor %.4g Pa^0.5 lies outside the calibrated range "
                    "[%.4g, %.4g]",
                    f_load, m->f_min, m->f_max);
}
