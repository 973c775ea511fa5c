/*
 * batch_event.c — events of the batch prediction (cut targets, schedule switches,
 * the reflux ceiling, safety stops), their location on the step length, the rows of
 * the trajectory and the closing of cuts; the names of stops and targets.
 */
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "batch_internal.h"
#include "internal.h"

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

/* ---- events ------------------------------------------------------------------------------- */

int batch_event_g(stagecal_batch_workspace *w, int ev, double tau, const double *u, double *g,
                  stagecal_error *err)
{
    const stagecal_batch_policy *po = &w->pb.policy;
    double xb = u[1] / u[0], scale = w->pb.w0_mol / w->pb.v_mol_s; /* s per unit τ */
    double r, xd, n, xbr;
    unsigned o;
    int rc;
    *g = INFINITY;
    /* the dynamic model's start-up: receivers go on at the first draw */
    if (w->dyn && w->startup && (ev == EV_TARGET || ev == EV_CEILING))
        return STAGECAL_OK;
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
            if ((rc = w->dyn ? batch_dyn_xd(w, u, &xd, err)
                             : batch_policy_state(w, xb, &r, &xd, &n, &o, err)))
                return rc;
            *g = xd - c->value;
            break;
        case STAGECAL_BATCH_UNTIL_FRACTION: /* distilled: the dynamic pot starts below W0 */
            *g = c->value - (w->dyn ? w->total_done + u[2] : 1 - u[0]);
            break;
        case STAGECAL_BATCH_UNTIL_TIME:
            *g = c->value / scale - tau;
            break;
        case STAGECAL_BATCH_UNTIL_REFLUX:
            if (w->ceiling_hit) {
                *g = 0; /* R already sits at the ceiling, above any lower target */
                break;
            }
            if ((rc = batch_law_stages(&w->col, c->value, &n, &o, NULL, err)) ||
                (rc = batch_col_step(&w->col, po->xd_set, c->value, n, &xbr, err)))
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
        if ((rc = batch_law_stages(&w->col, po->reflux_max, &n, &o, NULL, err)) ||
            (rc = batch_col_step(&w->col, po->xd_set, po->reflux_max, n, &xbr, err)))
            return rc;
        *g = xb - xbr;
        break;
    case EV_EMPTY:
        *g = u[0] - w->par.min_pot_fraction;
        break;
    case EV_TIME:
        *g = w->tau_max - tau;
        break;
    case EV_STARTUP:
        if (w->dyn)
            return batch_dyn_startup_g(w, tau, u, g, err);
        break;
    }
    return STAGECAL_OK;
}

double batch_next_time_event(const stagecal_batch_workspace *w)
{
    const stagecal_batch_policy *po = &w->pb.policy;
    double scale = w->pb.w0_mol / w->pb.v_mol_s, t = w->tau_max;
    const stagecal_batch_cut_spec *c = &w->pb.cuts[w->cut];
    if (c->kind == STAGECAL_BATCH_UNTIL_TIME && c->value / scale > w->tau)
        t = fmin(t, c->value / scale);
    if (po->kind == STAGECAL_BATCH_SCHEDULE && po->key == STAGECAL_BATCH_BY_TIME &&
        w->sched + 1 < po->n_steps)
        t = fmin(t, po->steps[w->sched + 1].at / scale);
    if (w->dyn && w->startup && w->dy.startup_max_s / scale > w->tau)
        t = fmin(t, w->dy.startup_max_s / scale);
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

int batch_step_from(stagecal_batch_workspace *w, double tau0, const double *u0, double h, double *u)
{
    double yerr[NSTATE];
    if (w->dyn)
        return batch_dyn_step_from(w, tau0, u0, h, u);
    memcpy(u, u0, sizeof(double) * NSTATE);
    if (h == 0)
        return GSL_SUCCESS;
    gsl_odeiv2_step_reset(w->drv->s);
    return gsl_odeiv2_step_apply(w->drv->s, tau0, h, u, yerr, NULL, NULL, &w->sys);
}

static double h_fn(double h, void *p)
{
    struct h_ctx *c = p;
    double u[NSTATE_MAX], g;
    if (c->code)
        return NAN;
    if (batch_step_from(c->w, c->tau0, c->u0, h, u) != GSL_SUCCESS) {
        c->code = c->w->fail_code ? c->w->fail_code
                                  : error_set(c->err, STAGECAL_ENOCONV,
                                              "event location: a Runge-Kutta step failed");
        if (c->w->fail_code && c->err)
            *c->err = c->w->fail;
        return NAN;
    }
    c->code = batch_event_g(c->w, c->ev, c->tau0 + h, u, &g, c->err);
    return c->code ? NAN : g;
}

int batch_locate_event(stagecal_batch_workspace *w, int ev, double tau0, const double *u0,
                       double *h, stagecal_error *err)
{
    struct h_ctx c = {w, ev, tau0, u0, 0, err};
    gsl_function f = {h_fn, &c};
    int rc = batch_brent(w->root_h, &f, 0, *h, w->par.event_epsabs, w->par.max_iter, h, &c.code,
                         err, "event location");
    if (rc)
        return rc;
    *h = gsl_root_fsolver_x_upper(w->root_h);
    return STAGECAL_OK;
}

/* ---- rows and cuts ---------------------------------------------------------------------- */

int batch_push_row(stagecal_batch_workspace *w, stagecal_batch_result *res, stagecal_error *err)
{
    const stagecal_batch_problem *pb = &w->pb;
    double xb = w->u[1] / w->u[0], r, xd, n, col_light = 0;
    unsigned o = 0;
    int rc = w->dyn ? batch_dyn_policy(w, xb, &r, &n, &o, err)
                    : batch_policy_state(w, xb, &r, &xd, &n, &o, err);
    if (rc || (w->dyn && (rc = batch_dyn_xd(w, w->u, &xd, err))))
        return rc;
    if (w->dyn)
        col_light = batch_dyn_column_light(w, w->u);
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
    row->startup = w->dyn && w->startup;
    row->reflux = row->startup ? INFINITY : r;
    row->stages = n;
    row->cut = w->cut;
    row->cut_mol = w->u[2] * pb->w0_mol;
    row->cut_x = w->u[2] > 0 ? w->u[3] / w->u[2] : xd;
    row->light_mol = (w->light_done + w->u[3]) * pb->w0_mol;
    row->total_mol = (w->total_done + w->u[2]) * pb->w0_mol;
    row->outside = o;
    /* mass balance of the light component, relative to the charge's light amount (the
     * dynamic model's column and drum included) */
    double bal = fabs(pb->xb0 - w->u[1] - col_light - (w->light_done + w->u[3])) / pb->xb0;
    if (bal > res->balance_error)
        res->balance_error = bal;
    if (row->startup) /* the start-up's total reflux is no operating point of the law */
        return STAGECAL_OK;
    if (!w->r_seen || r < res->r_min_used)
        res->r_min_used = r;
    if (!w->r_seen || r > res->r_max_used)
        res->r_max_used = r;
    w->r_seen = 1;
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
    c->xd_first = w->cut_xd0;
    c->xd_last = last->xd;
    /* u[4] integrates D·(xD − xD,0)², xD,0 the receiver's first xD (no cancellation where
     * the distillate hardly moves) */
    double dm = c->x_mean - w->cut_xd0;
    c->xd_sd = w->u[2] > 0 ? sqrt(fmax(0, w->u[4] / w->u[2] - dm * dm)) : 0;
    res->n_cuts = w->cut + 1;
    res->stop = stop;
    w->light_done += w->u[3];
    w->total_done += w->u[2];
    w->u[2] = w->u[3] = w->u[4] = 0;
    w->cut_tau0 = w->tau;
    w->cut_xd0 = last->xd;
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
            e->x_mean = e->xd_first = e->xd_last = last->xd;
            e->xb_end = c->xb_end;
            e->reflux_end = c->reflux_end;
        }
        res->n_cuts = pb->n_cuts;
    } else {
        w->cut++;
    }
}

void batch_fire(stagecal_batch_workspace *w, stagecal_batch_result *res, int ev)
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
    case EV_STARTUP: /* the first draw: the first receiver goes on */
        w->startup = 0;
        w->cut_tau0 = w->tau_startup = w->tau;
        w->cut_xd0 = w->xd_startup = res->rows[res->n_rows - 1].xd;
        break;
    }
    gsl_odeiv2_evolve_reset(w->drv->e);
    gsl_odeiv2_step_reset(w->drv->s);
}

int batch_fire_due(stagecal_batch_workspace *w, stagecal_batch_result *res, int pushed,
                   stagecal_error *err)
{
    int fired = pushed;
    for (size_t guard = 0;
         !w->done && guard < 4 * (STAGECAL_BATCH_MAXCUTS + STAGECAL_BATCH_MAXSTEPS); guard++) {
        int any = 0;
        for (int ev = 0; ev < NEV && !w->done; ev++) {
            double g;
            int rc = batch_event_g(w, ev, w->tau, w->u, &g, err);
            if (rc)
                return rc;
            if (g <= 0) {
                if (!fired && (rc = batch_push_row(w, res, err)))
                    return rc;
                batch_fire(w, res, ev);
                fired = any = 1;
                break;
            }
        }
        if (!any)
            break;
    }
    return STAGECAL_OK;
}
