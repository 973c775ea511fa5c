/*
 * sim_dynamic.h — an independent dynamic batch-rectifier simulator for the tests and
 * studies of column holdup (tests/test_holdup.c, tests/tool_holdup_coverage.c). It shares
 * no code with the library: its own equilibrium (constant α), its own stage equations and
 * GSL's ODE integrator.
 *
 * What it simulates. A batch rectifier of N equilibrium stages counting the pot (a
 * constant stage count), constant molar overflow, constant vapour boil-up V, a total
 * condenser, liquid holdup h on each of the N − 1 column stages (the column holds a stated
 * fraction of the charge, split evenly) and an optional well-mixed reflux drum h_d:
 *     h·dx_j/dt   = L·(x_(j−1) − x_j) + V·(y_(j+1) − y_j),  j = 1 … N − 1,  y_j = y*(x_j)
 *     h_d·dx_D/dt = V·(y_1 − x_D)            (x_D = y_1 when h_d = 0)
 *     dW/dt = −D = L − V,   d(W·x_B)/dt = L·x_(N−1) − V·y*(x_B)
 * with x_0 = x_D and L = V·R/(R + 1) (L = V at total reflux). The column and drum start
 * full of charge liquid; the run begins with a total-reflux start-up, then draws
 * distillate at reflux R until t_end or until the pot falls below xb_stop. Rows are
 * logged every dt_log_s with Gaussian analyser noise (u_xd, u_xb), the DESIGN-style
 * header run,time[h],W[mol],xD[mol/mol],xB[mol/mol],R[-],V[mol/s].
 */
#ifndef STAGECAL_SIM_DYNAMIC_H
#define STAGECAL_SIM_DYNAMIC_H

#include <gsl/gsl_errno.h>
#include <gsl/gsl_odeiv2.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>

#define SIM_DYN_MAXN 40

typedef struct {
    double alpha;       /* constant relative volatility (> 1) */
    int n_stages;       /* equilibrium stages incl. the pot, 2 … SIM_DYN_MAXN */
    double charge_mol;  /* initial charge [mol] (pot + column + drum) */
    double xb0;         /* charge composition */
    double holdup_frac; /* column liquid holdup as a fraction of the charge */
    double drum_frac;   /* reflux-drum holdup as a fraction of the charge (0 = none) */
    double v_mol_s;     /* boil-up [mol/s] */
    double t_startup_s; /* total-reflux start-up [s] */
    double reflux;      /* production reflux ratio */
    double t_end_s;     /* end of the run [s] */
    double dt_log_s;    /* logging interval [s] */
    double u_xd, u_xb;  /* analyser noise (standard deviations) */
    double xb_stop;     /* the run ends when the pot falls below this */
} sim_dyn_params;

struct sim_dyn_state {
    const sim_dyn_params *p;
    double lv_l;    /* liquid flow L [mol/s] */
    double h_stage; /* holdup per column stage [mol] */
    double h_drum;  /* drum holdup [mol] */
};

static inline double sim_dyn_ystar(double alpha, double x)
{
    return alpha * x / (1 + (alpha - 1) * x);
}

/* State: u[0 … N−2] column liquids x_1 … x_(N−1), u[N−1] = W, u[N] = W·xB, u[N+1] = xD. */
static int sim_dyn_rhs(double t, const double u[], double du[], void *params)
{
    (void)t;
    const struct sim_dyn_state *s = params;
    const sim_dyn_params *p = s->p;
    int nc = p->n_stages - 1;
    double v = p->v_mol_s, l = s->lv_l;
    double w = u[nc], xb = u[nc + 1] / w;
    double y1 = nc > 0 ? sim_dyn_ystar(p->alpha, u[0]) : sim_dyn_ystar(p->alpha, xb);
    double xd = s->h_drum > 0 ? u[nc + 2] : y1;
    for (int j = 0; j < nc; j++) {
        double xin = j == 0 ? xd : u[j - 1];
        double yin = j + 1 < nc ? sim_dyn_ystar(p->alpha, u[j + 1]) : sim_dyn_ystar(p->alpha, xb);
        du[j] = (l * (xin - u[j]) + v * (yin - sim_dyn_ystar(p->alpha, u[j]))) / s->h_stage;
    }
    double xlast = nc > 0 ? u[nc - 1] : xd;
    du[nc] = l - v;
    du[nc + 1] = l * xlast - v * sim_dyn_ystar(p->alpha, xb);
    du[nc + 2] = s->h_drum > 0 ? v * (y1 - u[nc + 2]) / s->h_drum : 0;
    return GSL_SUCCESS;
}

/* The distillate composition of state u. */
static inline double sim_dyn_xd(const struct sim_dyn_state *s, const double *u)
{
    int nc = s->p->n_stages - 1;
    if (s->h_drum > 0)
        return u[nc + 2];
    return sim_dyn_ystar(s->p->alpha, nc > 0 ? u[0] : u[nc + 1] / u[nc]);
}

/* Simulates one run and appends its rows to out (no header) with time offset t0_h [h].
 * Returns the number of rows written, −1 when the integrator fails. rng adds the noise. */
static inline int sim_dyn_run(const sim_dyn_params *p, gsl_rng *rng, FILE *out, const char *run,
                              double t0_h)
{
    struct sim_dyn_state s = {p, p->v_mol_s, 0, 0};
    int nc = p->n_stages - 1;
    double hcol = p->holdup_frac * p->charge_mol;
    s.h_stage = nc > 0 ? hcol / nc : 0;
    s.h_drum = p->drum_frac * p->charge_mol;
    double u[SIM_DYN_MAXN + 3];
    for (int j = 0; j < nc; j++)
        u[j] = p->xb0;
    u[nc] = p->charge_mol - hcol - s.h_drum;
    u[nc + 1] = u[nc] * p->xb0;
    u[nc + 2] = p->xb0;
    gsl_odeiv2_system sys = {sim_dyn_rhs, NULL, (size_t)nc + 3, &s};
    gsl_odeiv2_driver *d =
        gsl_odeiv2_driver_alloc_y_new(&sys, gsl_odeiv2_step_rkf45, 1.0, 1e-10, 1e-10);
    if (!d)
        return -1;
    double t = 0;
    int rows = 0;
    for (int k = 0;; k++) {
        double tk = k * p->dt_log_s;
        if (tk > p->t_end_s)
            break;
        /* integrate to tk, switching to production at the end of the start-up */
        if (t < p->t_startup_s && tk >= p->t_startup_s) {
            if (gsl_odeiv2_driver_apply(d, &t, p->t_startup_s, u) != GSL_SUCCESS)
                return gsl_odeiv2_driver_free(d), -1;
            s.lv_l = isinf(p->reflux) ? p->v_mol_s : p->v_mol_s * p->reflux / (p->reflux + 1);
            gsl_odeiv2_driver_reset(d);
        }
        if (tk > t && gsl_odeiv2_driver_apply(d, &t, tk, u) != GSL_SUCCESS)
            return gsl_odeiv2_driver_free(d), -1;
        double w = u[nc], xb = u[nc + 1] / w, xd = sim_dyn_xd(&s, u);
        if (xb < p->xb_stop)
            break;
        double xd_m = fmin(1, fmax(0, xd + gsl_ran_gaussian(rng, p->u_xd)));
        double xb_m = fmin(1, fmax(0, xb + gsl_ran_gaussian(rng, p->u_xb)));
        int prod = tk >= p->t_startup_s && isfinite(p->reflux);
        fprintf(out, "%s,%.6f,%.4f,%.6f,%.6f,", run, t0_h + tk / 3600.0, w, xd_m, xb_m);
        if (prod)
            fprintf(out, "%.4g,", p->reflux);
        else
            fprintf(out, "inf,");
        fprintf(out, "%.5f\n", p->v_mol_s);
        rows++;
    }
    gsl_odeiv2_driver_free(d);
    return rows;
}

#endif
