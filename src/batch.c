/*
 * batch.c — quasi-steady batch rectification (Smoker & Rose 1940, REFERENCES §10):
 * integration of the pot balances with GSL's adaptive Runge–Kutta, the inner solves
 * for xD (and R under a constant-distillate policy), cut targets as events.
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
#include <gsl/gsl_odeiv2.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "stagecal/form.h"
#include "stagecal/stages.h"

#define NSTATE 4
#define MAXAZ 8

enum { EV_TARGET = 0, EV_SWITCH, EV_CEILING, EV_EMPTY, EV_TIME, NEV };

struct stagecal_batch_workspace {
    stagecal_batch_problem pb;
    stagecal_batch_column col;
    stagecal_batch_params par;
    gsl_odeiv2_system sys;    /* the pot balances (params = this workspace) */
    gsl_odeiv2_driver *drv;   /* GSL driver: owns step, control and evolve */
    gsl_root_fsolver *root_x; /* inner solves (xD, L/V) */
    gsl_root_fsolver *root_h; /* event location on the step length */
    double az[MAXAZ];         /* azeotropes of the vle, ascending */
    size_t n_az;
    double tau;        /* current τ */
    double h;          /* suggested next step in τ */
    double u[NSTATE];  /* current state */
    double light_done; /* light in finished cuts / W0 */
    double total_done; /* distillate in finished cuts / W0 */
    double cut_tau0;   /* τ at which the current cut started */
    size_t cut;        /* current cut */
    size_t sched;      /* current schedule entry */
    int ceiling_hit;   /* constant distillate: R has reached reflux_max */
    int done;          /* batch ended */
    double next_out;   /* τ of the next output row (INFINITY if none) */
    double tau_max;    /* τ of params.t_max_s */
    double xd_last;    /* last xD solved (warm start of the bracket) */
    double lv_last;    /* last L/V of the constant-distillate solve (warm start) */
    size_t n_rhs;
    int clamped;
    int fail_code;       /* error raised inside a GSL callback */
    stagecal_error fail; /* its message */
};

/* ---- names ---------------------------------------------------------------------------- */

static const char *const stop_names[] = {"target", "reflux-ceiling", "pot-empty", "time-limit",
                                         "not-started"};
static const char *const target_names[] = {"pot-x",    "mean-x", "distillate-x",
                                           "fraction", "time",   "reflux"};

const char *stagecal_batch_stop_name(int stop)
{
    return (stop >= 0 && stop < 5) ? stop_names[stop] : "unknown";
}

const char *stagecal_batch_target_name(int kind)
{
    return (kind >= 0 && kind < 6) ? target_names[kind] : "unknown";
}

int stagecal_batch_target_from_name(const char *name)
{
    for (int i = 0; i < 6; i++)
        if (strcmp(name, target_names[i]) == 0)
            return i;
    return -1;
}

/* ---- defaults, init, check -------------------------------------------------------------- */

void stagecal_batch_problem_init(stagecal_batch_problem *pb)
{
    memset(pb, 0, sizeof *pb);
    pb->policy.kind = STAGECAL_BATCH_CONSTANT_REFLUX;
}

stagecal_batch_params stagecal_batch_default_params(void)
{
    stagecal_batch_params p;
    p.epsabs = 1e-12;
    p.epsrel = 1e-10;
    p.rk8pd = 1;
    p.x_epsabs = 1e-14;
    p.event_epsabs = 1e-13;
    p.max_iter = 200;
    p.output_dt_s = 0;
    p.min_pot_fraction = 1e-3;
    p.t_max_s = 30.0 * 86400.0;
    p.max_steps = 100000;
    return p;
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

/* ---- stage laws ------------------------------------------------------------------------- */

int stagecal_batch_constant_stages(void *data, double r, double *stages, unsigned *outside,
                                   stagecal_error *err)
{
    (void)r, (void)err;
    *stages = *(const double *)data;
    *outside = 0;
    return STAGECAL_OK;
}

int stagecal_batch_model_stages(void *data, double r, double *stages, unsigned *outside,
                                stagecal_error *err)
{
    const stagecal_batch_model_law *law = data;
    const stagecal_model *m = law->m;
    const double *theta = law->theta ? law->theta : m->theta;
    unsigned o = 0;
    int rc = stagecal_form_eval(&m->form, theta, r, law->f_load, stages, NULL);
    if (rc != STAGECAL_OK || !isfinite(*stages))
        return error_set(err, rc != STAGECAL_OK ? rc : STAGECAL_EINVAL,
                         "correlation '%s' is undefined at R = %g, F = %g", m->form.name, r,
                         law->f_load);
    if (r < m->r_min)
        o |= STAGECAL_MODEL_R_BELOW;
    if (r > m->r_max)
        o |= STAGECAL_MODEL_R_ABOVE;
    if (m->has_load && isfinite(law->f_load)) {
        if (law->f_load < m->f_min)
            o |= STAGECAL_MODEL_F_BELOW;
        if (law->f_load > m->f_max)
            o |= STAGECAL_MODEL_F_ABOVE;
    }
    *outside = o;
    return STAGECAL_OK;
}

/* ---- inner solves ------------------------------------------------------------------------ */

/* Forward stepping through the column's callback, or stagecal_stages_step. One stage
 * is the pot alone: xB = x*(xD) whatever R. */
static int col_step(const stagecal_batch_column *col, double xd, double r, double n, double *xb,
                    stagecal_error *err)
{
    if (n <= 1 || r == 0) {
        int rc = stagecal_vle_xstar(col->vle, xd, xb);
        if (rc != STAGECAL_OK)
            return error_set(err, rc, "x*(y) failed at y = %.17g", xd);
        return STAGECAL_OK;
    }
    if (col->step)
        return col->step(col->step_data, col->vle, xd, r, n, xb, err);
    int status = 0;
    size_t len = 0;
    int rc = stagecal_stages_step(col->vle, xd, r, n, 1.0, NULL, xb, NULL, 0, &len, &status, err);
    if (rc != STAGECAL_OK)
        return rc;
    /* At a pinch the steps stopped making progress: stepping reports the composition
     * reached, the pinch of this operating line to rounding, which more stages cannot
     * lower (stages.h). */
    if (status == STAGECAL_STAGES_PINCH)
        return STAGECAL_OK;
    if (status != STAGECAL_STAGES_OK)
        return error_set(err, STAGECAL_ENOCONV,
                         "stepping %.6g stages down from xD = %.9g at R = %.6g gave status '%s'", n,
                         xd, r, stagecal_stages_status_name(status));
    return STAGECAL_OK;
}

static int law_stages(const stagecal_batch_column *col, double r, double *n, unsigned *outside,
                      int *clamped, stagecal_error *err)
{
    int rc = col->stages(col->stages_data, r, n, outside, err);
    if (rc != STAGECAL_OK)
        return rc;
    if (!isfinite(*n))
        return error_set(err, STAGECAL_EINVAL, "stage law gave %g stages at R = %g", *n, r);
    if (*n < 1) {
        *n = 1; /* fewer than the pot alone is not physical: the pot is an ideal stage */
        if (clamped)
            *clamped = 1;
    }
    return STAGECAL_OK;
}

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
    c->code = col_step(c->col, xd, c->r, c->n, &xb, c->err);
    return c->code ? NAN : xb - c->xb;
}

/* Runs Brent on f over [lo, hi] (f(lo) < 0 < f(hi) checked by the caller). */
static int brent(gsl_root_fsolver *s, gsl_function *f, double lo, double hi, double epsabs,
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

static int solve_xd(const stagecal_batch_column *col, const stagecal_batch_params *par,
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
    int rc = brent(s, &f, lo, hi, par->x_epsabs, par->max_iter, xd, &c.code, err,
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
    c->code = law_stages(c->col, r, &n, &o, NULL, c->err);
    if (!c->code)
        c->code = col_step(c->col, c->xd, r, n, &xb, c->err);
    return c->code ? NAN : xb - c->xb;
}

/* ---- state at a point ---------------------------------------------------------------------- */

/* R, xD, stages and envelope flags at pot composition xb under the current policy. */
static int policy_state(stagecal_batch_workspace *w, double xb, double *r, double *xd, double *n,
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
            rc = brent(w->root_x, &f, lo, hi, w->par.x_epsabs, w->par.max_iter, &lv, &c.code, err,
                       "reflux ratio for the distillate set point");
            if (rc)
                return rc;
            w->lv_last = lv;
        }
        *r = lv / (1 - lv);
        if ((rc = law_stages(&w->col, *r, n, outside, &w->clamped, err)))
            return rc;
        if (lv > 0 && lv < lv_max) {
            *xd = po->xd_set;
            return STAGECAL_OK;
        }
        return solve_xd(&w->col, &w->par, w->root_x, w->az, w->n_az, xb, *r, *n, &w->xd_last, xd,
                        err);
    }
    if (po->kind == STAGECAL_BATCH_CONSTANT_DISTILLATE)
        *r = po->reflux_max;
    else if (po->kind == STAGECAL_BATCH_SCHEDULE)
        *r = po->steps[w->sched].reflux;
    else
        *r = po->reflux;
    if ((rc = law_stages(&w->col, *r, n, outside, &w->clamped, err)))
        return rc;
    return solve_xd(&w->col, &w->par, w->root_x, w->az, w->n_az, xb, *r, *n, &w->xd_last, xd, err);
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
    w->fail_code = policy_state(w, xb, &r, &xd, &n, &o, &w->fail);
    if (w->fail_code)
        return GSL_EBADFUNC;
    double d = 1 / (r + 1);
    dudt[0] = -d;
    dudt[1] = -d * xd;
    dudt[2] = d;
    dudt[3] = d * xd;
    return GSL_SUCCESS;
}

/* ---- events ------------------------------------------------------------------------------- */

/* g of event `ev` at (tau, u); > 0 before, ≤ 0 at and after. INFINITY when the event
 * is not armed. */
static int event_g(stagecal_batch_workspace *w, int ev, double tau, const double *u, double *g,
                   stagecal_error *err)
{
    const stagecal_batch_policy *po = &w->pb.policy;
    double xb = u[1] / u[0], scale = w->pb.w0_mol / w->pb.v_mol_s; /* s per unit τ */
    double r, xd, n, xbr;
    unsigned o;
    int rc;
    *g = INFINITY;
    switch (ev) {
    case EV_TARGET: {
        const stagecal_batch_cut_spec *c = &w->pb.cuts[w->cut];
        switch (c->kind) {
        case STAGECAL_BATCH_UNTIL_POT_X:
            *g = xb - c->value;
            break;
        case STAGECAL_BATCH_UNTIL_MEAN_X:
            if (u[2] > 0) {
                *g = u[3] / u[2] - c->value;
                break;
            }
            /* an empty receiver's mean is the current xD */
            /* fall through */
        case STAGECAL_BATCH_UNTIL_DISTILLATE_X:
            if ((rc = policy_state(w, xb, &r, &xd, &n, &o, err)))
                return rc;
            *g = xd - c->value;
            break;
        case STAGECAL_BATCH_UNTIL_FRACTION:
            *g = c->value - (1 - u[0]);
            break;
        case STAGECAL_BATCH_UNTIL_TIME:
            *g = c->value / scale - tau;
            break;
        case STAGECAL_BATCH_UNTIL_REFLUX:
            if (w->ceiling_hit) {
                *g = 0; /* R already sits at the ceiling, above any lower target */
                break;
            }
            if ((rc = law_stages(&w->col, c->value, &n, &o, NULL, err)) ||
                (rc = col_step(&w->col, po->xd_set, c->value, n, &xbr, err)))
                return rc;
            *g = xb - xbr;
            break;
        }
        break;
    }
    case EV_SWITCH:
        if (po->kind != STAGECAL_BATCH_SCHEDULE || w->sched + 1 >= po->n_steps)
            break;
        if (po->key == STAGECAL_BATCH_BY_TIME)
            *g = po->steps[w->sched + 1].at / scale - tau;
        else
            *g = xb - po->steps[w->sched + 1].at;
        break;
    case EV_CEILING:
        if (po->kind != STAGECAL_BATCH_CONSTANT_DISTILLATE || w->ceiling_hit)
            break;
        if ((rc = law_stages(&w->col, po->reflux_max, &n, &o, NULL, err)) ||
            (rc = col_step(&w->col, po->xd_set, po->reflux_max, n, &xbr, err)))
            return rc;
        *g = xb - xbr;
        break;
    case EV_EMPTY:
        *g = u[0] - w->par.min_pot_fraction;
        break;
    case EV_TIME:
        *g = w->tau_max - tau;
        break;
    }
    return STAGECAL_OK;
}

/* The next τ at which a time-based event falls (bounds the step so it is hit exactly). */
static double next_time_event(const stagecal_batch_workspace *w)
{
    const stagecal_batch_policy *po = &w->pb.policy;
    double scale = w->pb.w0_mol / w->pb.v_mol_s, t = w->tau_max;
    const stagecal_batch_cut_spec *c = &w->pb.cuts[w->cut];
    if (c->kind == STAGECAL_BATCH_UNTIL_TIME && c->value / scale > w->tau)
        t = fmin(t, c->value / scale);
    if (po->kind == STAGECAL_BATCH_SCHEDULE && po->key == STAGECAL_BATCH_BY_TIME &&
        w->sched + 1 < po->n_steps)
        t = fmin(t, po->steps[w->sched + 1].at / scale);
    return t;
}

struct h_ctx {
    stagecal_batch_workspace *w;
    int ev;
    double tau0;
    const double *u0;
    int code;
    stagecal_error *err;
};

/* One Runge–Kutta step of length h from (tau0, u0) into u. */
static int step_from(stagecal_batch_workspace *w, double tau0, const double *u0, double h,
                     double *u)
{
    double yerr[NSTATE];
    memcpy(u, u0, sizeof(double) * NSTATE);
    if (h == 0)
        return GSL_SUCCESS;
    gsl_odeiv2_step_reset(w->drv->s);
    return gsl_odeiv2_step_apply(w->drv->s, tau0, h, u, yerr, NULL, NULL, &w->sys);
}

static double h_fn(double h, void *p)
{
    struct h_ctx *c = p;
    double u[NSTATE], g;
    if (c->code)
        return NAN;
    if (step_from(c->w, c->tau0, c->u0, h, u) != GSL_SUCCESS) {
        c->code = c->w->fail_code ? c->w->fail_code
                                  : error_set(c->err, STAGECAL_ENOCONV,
                                              "event location: a Runge-Kutta step failed");
        if (c->w->fail_code && c->err)
            *c->err = c->w->fail;
        return NAN;
    }
    c->code = event_g(c->w, c->ev, c->tau0 + h, u, &g, c->err);
    return c->code ? NAN : g;
}

/* ---- rows and cuts ---------------------------------------------------------------------- */

static int push_row(stagecal_batch_workspace *w, stagecal_batch_result *res, stagecal_error *err)
{
    const stagecal_batch_problem *pb = &w->pb;
    double xb = w->u[1] / w->u[0], r, xd, n;
    unsigned o = 0;
    int rc = policy_state(w, xb, &r, &xd, &n, &o, err);
    if (rc)
        return rc;
    if (res->n_rows == res->cap_rows) {
        size_t cap = res->cap_rows ? 2 * res->cap_rows : 256;
        stagecal_batch_row *rows = realloc(res->rows, cap * sizeof *rows);
        if (!rows)
            return error_set(err, STAGECAL_ENOMEM, "out of memory for %zu trajectory rows", cap);
        res->rows = rows;
        res->cap_rows = cap;
    }
    stagecal_batch_row *row = &res->rows[res->n_rows++];
    row->t_s = w->tau * pb->w0_mol / pb->v_mol_s;
    row->w_mol = w->u[0] * pb->w0_mol;
    row->xb = xb;
    row->xd = xd;
    row->reflux = r;
    row->stages = n;
    row->cut = w->cut;
    row->cut_mol = w->u[2] * pb->w0_mol;
    row->cut_x = w->u[2] > 0 ? w->u[3] / w->u[2] : xd;
    row->light_mol = (w->light_done + w->u[3]) * pb->w0_mol;
    row->total_mol = (w->total_done + w->u[2]) * pb->w0_mol;
    row->outside = o;
    /* mass balance of the light component, relative to the charge's light amount */
    double bal = fabs(pb->xb0 - w->u[1] - (w->light_done + w->u[3])) / pb->xb0;
    if (bal > res->balance_error)
        res->balance_error = bal;
    if (res->n_rows == 1 || r < res->r_min_used)
        res->r_min_used = r;
    if (res->n_rows == 1 || r > res->r_max_used)
        res->r_max_used = r;
    res->outside |= o;
    return STAGECAL_OK;
}

/* Closes the current cut with reason `stop` and moves to the next (or ends). */
static void close_cut(stagecal_batch_workspace *w, stagecal_batch_result *res, int stop)
{
    const stagecal_batch_problem *pb = &w->pb;
    stagecal_batch_cut *c = &res->cuts[w->cut];
    const stagecal_batch_row *last = &res->rows[res->n_rows - 1];
    double scale = pb->w0_mol / pb->v_mol_s;
    snprintf(c->name, sizeof c->name, "%s", pb->cuts[w->cut].name);
    if (c->name[0] == '\0')
        snprintf(c->name, sizeof c->name, "cut%zu", w->cut + 1);
    c->stop = stop;
    c->t_start_s = w->cut_tau0 * scale;
    c->t_end_s = w->tau * scale;
    c->amount_mol = w->u[2] * pb->w0_mol;
    c->light_mol = w->u[3] * pb->w0_mol;
    c->x_mean = w->u[2] > 0 ? w->u[3] / w->u[2] : last->xd;
    c->yield = w->u[2];
    c->recovery = w->u[3] / pb->xb0;
    c->xb_end = w->u[1] / w->u[0];
    c->reflux_end = last->reflux;
    res->n_cuts = w->cut + 1;
    res->stop = stop;
    w->light_done += w->u[3];
    w->total_done += w->u[2];
    w->u[2] = w->u[3] = 0;
    w->cut_tau0 = w->tau;
    if (stop == STAGECAL_BATCH_STOP_POT_EMPTY || stop == STAGECAL_BATCH_STOP_TIME_LIMIT ||
        w->cut + 1 >= pb->n_cuts) {
        w->done = 1;
        for (size_t i = w->cut + 1; i < pb->n_cuts; i++) {
            stagecal_batch_cut *e = &res->cuts[i];
            memset(e, 0, sizeof *e);
            snprintf(e->name, sizeof e->name, "%s", pb->cuts[i].name);
            if (e->name[0] == '\0')
                snprintf(e->name, sizeof e->name, "cut%zu", i + 1);
            e->stop = STAGECAL_BATCH_STOP_NOT_STARTED;
            e->t_start_s = e->t_end_s = w->tau * scale;
            e->x_mean = last->xd;
            e->xb_end = c->xb_end;
            e->reflux_end = c->reflux_end;
        }
        res->n_cuts = pb->n_cuts;
    } else {
        w->cut++;
    }
}

/* Fires event ev at the current state (row already pushed). */
static void fire(stagecal_batch_workspace *w, stagecal_batch_result *res, int ev)
{
    switch (ev) {
    case EV_TARGET:
        close_cut(w, res, STAGECAL_BATCH_STOP_TARGET);
        break;
    case EV_SWITCH:
        w->sched++;
        break;
    case EV_CEILING:
        w->ceiling_hit = 1;
        /* A receiver put on at this very instant (its predecessor's target coincided with
         * the ceiling, e.g. 'reflux' = reflux_max) stays on: its own target governs. */
        if (!(w->cut > 0 && w->cut_tau0 == w->tau))
            close_cut(w, res, STAGECAL_BATCH_STOP_CEILING);
        break;
    case EV_EMPTY:
        close_cut(w, res, STAGECAL_BATCH_STOP_POT_EMPTY);
        break;
    case EV_TIME:
        close_cut(w, res, STAGECAL_BATCH_STOP_TIME_LIMIT);
        break;
    }
    gsl_odeiv2_evolve_reset(w->drv->e);
    gsl_odeiv2_step_reset(w->drv->s);
}

/* Fires every event already due at the current state (g ≤ 0), earliest index first;
 * each firing consumes the event (next cut, next entry, flag) or ends the batch. */
static int fire_due(stagecal_batch_workspace *w, stagecal_batch_result *res, int pushed,
                    stagecal_error *err)
{
    int fired = pushed;
    for (size_t guard = 0;
         !w->done && guard < 4 * (STAGECAL_BATCH_MAXCUTS + STAGECAL_BATCH_MAXSTEPS); guard++) {
        int any = 0;
        for (int ev = 0; ev < NEV && !w->done; ev++) {
            double g;
            int rc = event_g(w, ev, w->tau, w->u, &g, err);
            if (rc)
                return rc;
            if (g <= 0) {
                if (!fired && (rc = push_row(w, res, err)))
                    return rc;
                fire(w, res, ev);
                fired = any = 1;
                break;
            }
        }
        if (!any)
            break;
    }
    return STAGECAL_OK;
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
    w->u[2] = w->u[3] = 0;
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
    gsl_odeiv2_driver_reset(w->drv);
    /* schedule by pot composition: skip entries that already apply at xB0 */
    if (w->pb.policy.kind == STAGECAL_BATCH_SCHEDULE && w->pb.policy.key == STAGECAL_BATCH_BY_POT_X)
        while (w->sched + 1 < w->pb.policy.n_steps &&
               w->pb.policy.steps[w->sched + 1].at >= w->pb.xb0)
            w->sched++;
    if ((rc = push_row(w, res, err)))
        return rc;
    return fire_due(w, res, 1, err);
}

int stagecal_batch_test(const stagecal_batch_workspace *w)
{
    return w->done;
}

int stagecal_batch_iterate(stagecal_batch_workspace *w, stagecal_batch_result *res,
                           stagecal_error *err)
{
    double tau0 = w->tau, u0[NSTATE], g0[NEV], g1[NEV];
    int rc, st;
    if (w->done)
        return STAGECAL_OK;
    if (res->n_steps >= w->par.max_steps)
        return error_set(err, STAGECAL_ENOCONV,
                         "batch integration: more than %zu steps (params.max_steps)",
                         w->par.max_steps);
    memcpy(u0, w->u, sizeof u0);
    for (int ev = 0; ev < NEV; ev++)
        if ((rc = event_g(w, ev, w->tau, w->u, &g0[ev], err)))
            return rc;
    double t1 = fmin(next_time_event(w), w->next_out);
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
        if ((rc = event_g(w, ev, w->tau, w->u, &g1[ev], err)))
            return rc;
        if (!(g0[ev] > 0 && g1[ev] <= 0))
            continue;
        double h_ev = w->tau - tau0;
        if (g1[ev] < 0) {
            struct h_ctx c = {w, ev, tau0, u0, 0, err};
            gsl_function f = {h_fn, &c};
            if ((rc = brent(w->root_h, &f, 0, h_ev, w->par.event_epsabs, w->par.max_iter, &h_ev,
                            &c.code, err, "event location")))
                return rc;
            h_ev = gsl_root_fsolver_x_upper(w->root_h);
        }
        if (first < 0 || h_ev < h_first) {
            first = ev;
            h_first = h_ev;
        }
    }
    if (first >= 0) {
        if (h_first < w->tau - tau0) {
            if (step_from(w, tau0, u0, h_first, w->u) != GSL_SUCCESS) {
                if (w->fail_code) {
                    if (err)
                        *err = w->fail;
                    return w->fail_code;
                }
                return error_set(err, STAGECAL_ENOCONV, "event location: a step failed");
            }
            w->tau = tau0 + h_first;
        }
        if ((rc = push_row(w, res, err)))
            return rc;
        fire(w, res, first);
        while (w->tau >= w->next_out)
            w->next_out += w->par.output_dt_s * w->pb.v_mol_s / w->pb.w0_mol;
        return fire_due(w, res, 1, err);
    }
    if ((rc = push_row(w, res, err)))
        return rc;
    while (w->tau >= w->next_out)
        w->next_out += w->par.output_dt_s * w->pb.v_mol_s / w->pb.w0_mol;
    return fire_due(w, res, 1, err);
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
    if ((rc = law_stages(col, r, &n, &o, &clamped, err)))
        return rc;
    size_t n_az = stagecal_vle_azeotropes(col->vle, az, MAXAZ);
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for a root solver");
    rc = solve_xd(col, &par, s, az, n_az > MAXAZ ? MAXAZ : n_az, xb, r, n, NULL, xd, err);
    gsl_root_fsolver_free(s);
    if (stages)
        *stages = n;
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
