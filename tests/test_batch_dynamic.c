/*
 * test_batch_dynamic.c — the dynamic batch model with column holdup (src/batch_dynamic.c).
 *
 * Sources of truth: the quasi-steady model (src/batch.c, itself checked against Rayleigh 1902
 * and the Smoker–Rose integral in test_batch.c) as the holdup goes to 0; Fenske's closed form
 * at total reflux (Fenske 1932, "Fractionation of straight-run Pennsylvania gasoline", Ind.
 * Eng. Chem. 24, 482–485, from memory): xD/(1 − xD) = α^N·xB/(1 − xB) for N ideal stages with
 * the pot; the material balances (mass conservation, the Rayleigh balance with the column's
 * liquid); and the independent stage-by-stage simulator written for the tests
 * (tests/sim_dynamic.h: its own equilibrium, equations and GSL integrator, whole stages).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_odeiv2.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "testutil.h"

#include "sim_dynamic.h"
#include "stagecal/batch.h"
#include "stagecal/form.h"
#include "stagecal/model.h"

#define ALPHA 2.5
#define W0 10000.0          /* mol */
#define V_MOL_S (2.4 / 3.6) /* 2.4 kmol/h */

struct fixture {
    stagecal_vle *vle;
    stagecal_model m; /* saturating law 9·(1 − exp(−0.5·R)), as bench_batch.c */
    stagecal_batch_model_law law;
    double n_const;
    stagecal_batch_column col_const, col_law;
};

static int setup(void **state)
{
    struct fixture *f = calloc(1, sizeof *f);
    stagecal_error err;
    assert_non_null(f);
    f->vle = stagecal_vle_alloc_alpha(ALPHA, &err);
    assert_non_null(f->vle);
    stagecal_model_init(&f->m);
    assert_int_equal(stagecal_form_parse("saturating", &f->m.form, &err), STAGECAL_OK);
    f->m.theta[0] = 9;
    f->m.theta[1] = 0.5;
    f->m.r_min = 1;
    f->m.r_max = 25;
    f->law = (stagecal_batch_model_law){&f->m, NULL, NAN};
    f->n_const = 6.4;
    f->col_const =
        (stagecal_batch_column){f->vle, stagecal_batch_constant_stages, &f->n_const, NULL, NULL};
    f->col_law = (stagecal_batch_column){f->vle, stagecal_batch_model_stages, &f->law, NULL, NULL};
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    struct fixture *f = *state;
    stagecal_model_free(&f->m);
    stagecal_vle_free(f->vle);
    free(f);
    return 0;
}

/* 10 kmol at x = 0.5, 2.4 kmol/h, R = 3: a product until its mean falls to 0.95, then a
 * slop cut down to a pot of 0.1. */
static stagecal_batch_problem two_cuts(void)
{
    stagecal_batch_problem pb;
    stagecal_batch_problem_init(&pb);
    pb.w0_mol = W0;
    pb.xb0 = 0.5;
    pb.v_mol_s = V_MOL_S;
    pb.policy.reflux = 3;
    pb.n_cuts = 2;
    pb.cuts[0].kind = STAGECAL_BATCH_UNTIL_MEAN_X;
    pb.cuts[0].value = 0.95;
    pb.cuts[1].kind = STAGECAL_BATCH_UNTIL_POT_X;
    pb.cuts[1].value = 0.1;
    return pb;
}

static void run(const stagecal_batch_problem *pb, const stagecal_batch_column *col,
                const stagecal_batch_dynamics *dy, stagecal_batch_result *res)
{
    stagecal_batch_params par = stagecal_batch_default_params();
    stagecal_error err;
    par.dynamics = dy;
    par.output_dt_s = 360; /* a row every 0.1 h */
    stagecal_batch_result_init(res);
    int rc = stagecal_batch_run(pb, col, &par, res, &err);
    if (rc != STAGECAL_OK)
        print_error("batch: %s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
}

/* The pot composition of the row at time t (the rows fall on every 0.1 h exactly). */
static double pot_x_at(const stagecal_batch_result *r, double t)
{
    for (size_t i = 0; i < r->n_rows; i++)
        if (fabs(r->rows[i].t_s - t) < 1e-6)
            return r->rows[i].xb;
    fail_msg("no row at t = %g s", t);
    return NAN;
}

/* (a) holdup → 0: 1e-6 of the charge on the column (no drum), constant R and a rising R
 * (constant distillate, the law's N following R). The dynamic model's steady column is the
 * stage convention exactly (fractional stage included), so it differs from the quasi-steady
 * model only by the holdup's own effect, first order in the holdup, and the integrators'
 * tolerances (msbdf 1e-9 relative): cut times 1e-5 relative; amounts within 5 holdups (the
 * column's liquid changes hands between pot, column and receivers); compositions 1e-6. */
static void holdup_to_zero_agrees(void **state)
{
    struct fixture *f = *state;
    stagecal_batch_problem pb = two_cuts();
    stagecal_batch_dynamics dy;
    stagecal_batch_result qs, dn;
    stagecal_batch_dynamics_init(&dy);
    dy.holdup_column_mol = 1e-6 * W0;
    for (int pass = 0; pass < 2; pass++) {
        const stagecal_batch_column *col = pass == 0 ? &f->col_const : &f->col_law;
        if (pass == 1) { /* a reflux that rises: the law's N follows (feed-forward) */
            pb.policy.kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
            pb.policy.xd_set = 0.95;
            pb.policy.reflux_max = 20;
            pb.cuts[0].kind = STAGECAL_BATCH_UNTIL_REFLUX;
            pb.cuts[0].value = 20;
        }
        run(&pb, col, NULL, &qs);
        run(&pb, col, &dy, &dn);
        assert_true(dn.dynamic && !qs.dynamic);
        assert_true(dn.t_startup_s < 1e-4 * qs.t_end_s);
        for (size_t k = 0; k < 2; k++) {
            assert_int_equal(dn.cuts[k].stop, qs.cuts[k].stop);
            assert_rel(dn.cuts[k].t_end_s, qs.cuts[k].t_end_s, 1e-5, "cut end time");
            assert_abs(dn.cuts[k].amount_mol, qs.cuts[k].amount_mol, 5 * dy.holdup_column_mol,
                       "cut amount");
            assert_abs(dn.cuts[k].x_mean, qs.cuts[k].x_mean, 1e-6, "cut mean composition");
            /* the first draw leaves a fraction ~1e-6 of the distillate at the start-up's
             * richer composition (~0.04 above): √(1e-6)·0.04 = 4e-5 of spread */
            assert_abs(dn.cuts[k].xd_sd, qs.cuts[k].xd_sd, 1e-4, "cut smearing");
        }
        for (int i = 1; i <= 10; i++) { /* the pot's trajectory */
            double t = 360 * floor(0.1 * i * qs.t_end_s / 360);
            assert_abs(pot_x_at(&dn, t), pot_x_at(&qs, t), 1e-6, "pot composition");
        }
        stagecal_batch_result_free(&qs);
        stagecal_batch_result_free(&dn);
    }
}

/* (b) At total reflux the column settles on Fenske's closed form: a 60-h start-up (the
 * slowest mode of these columns is below 2 h: 30 time constants) with constant α; the
 * distillate at its end against α^N times the pot's odds, N = 6.4 (the stage convention is
 * Fenske exactly for constant α, fractional stages included) and N = 7. 1e-9: the
 * integration's relative tolerance (measured 1e-16); the remaining transient is below 1e-12. */
static void total_reflux_is_fenske(void **state)
{
    struct fixture *f = *state;
    stagecal_batch_problem pb = two_cuts();
    stagecal_batch_dynamics dy;
    stagecal_batch_result dn;
    stagecal_batch_dynamics_init(&dy);
    dy.holdup_column_mol = 0.04 * W0;
    dy.holdup_drum_mol = 0.01 * W0;
    dy.startup_max_s = 60 * 3600.0;
    double ns[2] = {6.4, 7};
    for (int pass = 0; pass < 2; pass++) {
        f->n_const = ns[pass];
        run(&pb, &f->col_const, &dy, &dn);
        assert_rel(dn.t_startup_s, dy.startup_max_s, 1e-12, "start-up time");
        const stagecal_batch_row *last = NULL;
        for (size_t i = 0; i < dn.n_rows; i++)
            if (dn.rows[i].startup)
                last = &dn.rows[i];
        assert_non_null(last);
        assert_rel(last->t_s, dy.startup_max_s, 1e-12, "last start-up row");
        double odds = pow(ALPHA, ns[pass]) * last->xb / (1 - last->xb);
        assert_abs(last->xd, odds / (1 + odds), 1e-9, "Fenske distillate");
        assert_abs(dn.xd_startup, last->xd, 1e-15, "distillate at the first draw");
        stagecal_batch_result_free(&dn);
    }
    f->n_const = 6.4;
}

/* (c) Balances: the charge = pot + column + drum + receivers (overall) and the same for
 * the light component, at every row (res.balance_error), with a drum, and a reflux
 * schedule whose switch changes the law's whole-stage count (3 → 1.5: 6.99 → 4.75 stages),
 * so the column profile is mapped onto fewer stages. Every member is integrated (the
 * receivers are not inferred from the pot), so the closure is a check; 1e-9 relative. */
static void balances_close(void **state)
{
    struct fixture *f = *state;
    stagecal_batch_problem pb = two_cuts();
    stagecal_batch_dynamics dy;
    stagecal_batch_result dn;
    stagecal_batch_dynamics_init(&dy);
    dy.holdup_column_mol = 0.05 * W0;
    dy.holdup_drum_mol = 0.01 * W0;
    pb.policy.kind = STAGECAL_BATCH_SCHEDULE;
    pb.policy.key = STAGECAL_BATCH_BY_TIME;
    pb.policy.n_steps = 2;
    pb.policy.steps[0] = (stagecal_batch_schedule_step){0, 3};
    pb.policy.steps[1] = (stagecal_batch_schedule_step){4 * 3600.0, 1.5};
    run(&pb, &f->col_law, &dy, &dn);
    assert_true(dn.n_remaps >= 1);
    double total = dn.w_end_mol + dy.holdup_column_mol + dy.holdup_drum_mol;
    for (size_t k = 0; k < dn.n_cuts; k++)
        total += dn.cuts[k].amount_mol;
    assert_rel(total, W0, 1e-9, "overall balance");
    assert_true(dn.balance_error < 1e-9);
    stagecal_batch_result_free(&dn);
}

/* (d) More holdup delays the first cut: the product's end (mean 0.95) at 0 (quasi-steady),
 * 2, 4 and 6 % of the charge on the column, strictly increasing, and so does the start-up. */
static void holdup_delays_first_cut(void **state)
{
    struct fixture *f = *state;
    stagecal_batch_problem pb = two_cuts();
    stagecal_batch_dynamics dy;
    stagecal_batch_result dn;
    double prev_end = 0, prev_su = -1;
    stagecal_batch_dynamics_init(&dy);
    for (int k = 0; k <= 3; k++) {
        dy.holdup_column_mol = 0.02 * k * W0;
        run(&pb, &f->col_const, k ? &dy : NULL, &dn);
        assert_true(dn.cuts[0].t_end_s > prev_end);
        assert_true(dn.t_startup_s > prev_su);
        prev_end = dn.cuts[0].t_end_s;
        prev_su = dn.t_startup_s;
        stagecal_batch_result_free(&dn);
    }
}

/* The independent simulator (tests/sim_dynamic.h) with 7 whole stages, α = 2.5, 4 % holdup,
 * 1 % drum, a 1-h total-reflux start-up then R = 3: distillate and pot composition at 1.5,
 * 3 and 6 h. Both integrate the same equations to ~1e-9 (measured 5e-9); 1e-7 absolute. */
static void agrees_with_independent_simulator(void **state)
{
    struct fixture *f = *state;
    sim_dyn_params p = {ALPHA, 7, W0,         0.5, 0.04, 0.01, V_MOL_S,
                        3600,  3, 6 * 3600.0, 600, 0,    0,    0.0};
    struct sim_dyn_state s = {&p, V_MOL_S, 0.04 * W0 / 6, 0.01 * W0};
    double u[SIM_DYN_MAXN + 3], t = 0;
    for (int j = 0; j < 6; j++)
        u[j] = 0.5;
    u[6] = W0 * 0.95;
    u[7] = u[6] * 0.5;
    u[8] = 0.5;
    gsl_odeiv2_system sys = {sim_dyn_rhs, NULL, 9, &s};
    gsl_odeiv2_driver *d =
        gsl_odeiv2_driver_alloc_y_new(&sys, gsl_odeiv2_step_rk8pd, 1.0, 1e-12, 1e-12);
    assert_non_null(d);
    stagecal_batch_problem pb = two_cuts();
    pb.cuts[0].kind = STAGECAL_BATCH_UNTIL_TIME;
    pb.cuts[0].value = 7 * 3600.0;
    pb.n_cuts = 1;
    stagecal_batch_dynamics dy;
    stagecal_batch_result dn;
    stagecal_batch_dynamics_init(&dy);
    dy.holdup_column_mol = 0.04 * W0;
    dy.holdup_drum_mol = 0.01 * W0;
    dy.startup_max_s = 3600;
    f->n_const = 7;
    run(&pb, &f->col_const, &dy, &dn);
    f->n_const = 6.4;
    double times[3] = {1.5 * 3600, 3 * 3600, 6 * 3600};
    for (int i = 0; i < 3; i++) {
        if (t < 3600 && times[i] >= 3600) {
            assert_int_equal(gsl_odeiv2_driver_apply(d, &t, 3600, u), GSL_SUCCESS);
            s.lv_l = V_MOL_S * 3 / 4.0;
            gsl_odeiv2_driver_reset(d);
        }
        assert_int_equal(gsl_odeiv2_driver_apply(d, &t, times[i], u), GSL_SUCCESS);
        double xd_sim = sim_dyn_xd(&s, u), xb_sim = u[7] / u[6];
        const stagecal_batch_row *row = NULL;
        for (size_t k = 0; k < dn.n_rows; k++)
            if (fabs(dn.rows[k].t_s - times[i]) < 1e-6)
                row = &dn.rows[k];
        assert_non_null(row); /* the rows fall every 0.1 h */
        assert_abs(row->xd, xd_sim, 1e-7, "distillate against the simulator");
        assert_abs(row->xb, xb_sim, 1e-7, "pot against the simulator");
        assert_rel(row->w_mol, u[6], 1e-9, "pot amount against the simulator");
    }
    gsl_odeiv2_driver_free(d);
    stagecal_batch_result_free(&dn);
}

/* Rayleigh's still (one stage, R = 0, constant α): W(x) = W0·exp(−∫_x^x0 dx'/(y − x')) in the
 * closed form of Rayleigh (1902, Phil. Mag. (6) 4, 521–537, from memory), and the receiver
 * fills with dD = W·dx/(y − x) as the pot falls; k = 0, 1, 2 gives ∫ y^k dD. */
static double rayleigh_moment(double x, void *p)
{
    const int k = *(const int *)p;
    double y = ALPHA * x / (1 + (ALPHA - 1) * x), x0 = 0.5;
    double lnw = (log(x / x0) + ALPHA * log((1 - x0) / (1 - x))) / (ALPHA - 1);
    return pow(y, k) * exp(lnw) / (y - x);
}

/* The smearing of a receiver (sd of its composition) in the quasi-steady model against
 * Rayleigh's still integrated by GSL's adaptive quadrature (QAGS) over the pot composition
 * 0.5 → 0.2: the receiver's mean and standard deviation from the three moments. 1e-10: the
 * quadrature (1e-12 relative) and the ODE (1e-10 relative; measured 3e-15). The dynamic model
 * gives no smearing at 1e-6 holdup beyond its start-up's √holdup share (test above). */
static void smearing_is_rayleigh(void **state)
{
    struct fixture *f = *state;
    stagecal_batch_problem pb = two_cuts();
    stagecal_batch_result qs;
    gsl_integration_workspace *ws = gsl_integration_workspace_alloc(200);
    double mom[3], e;
    assert_non_null(ws);
    for (int k = 0; k < 3; k++) {
        gsl_function fn = {rayleigh_moment, &k};
        assert_int_equal(gsl_integration_qags(&fn, 0.2, 0.5, 0, 1e-12, 200, ws, &mom[k], &e),
                         GSL_SUCCESS);
    }
    gsl_integration_workspace_free(ws);
    f->n_const = 1;
    pb.policy.reflux = 0;
    pb.n_cuts = 1;
    pb.cuts[0].kind = STAGECAL_BATCH_UNTIL_POT_X;
    pb.cuts[0].value = 0.2;
    run(&pb, &f->col_const, NULL, &qs);
    f->n_const = 6.4;
    double mean = mom[1] / mom[0], sd = sqrt(mom[2] / mom[0] - mean * mean);
    assert_abs(qs.cuts[0].x_mean, mean, 1e-10, "Rayleigh mean distillate");
    assert_abs(qs.cuts[0].xd_sd, sd, 1e-10, "Rayleigh smearing");
    assert_abs(qs.cuts[0].xd_first, 0.5 * ALPHA / (1 + 0.5 * (ALPHA - 1)), 1e-12, "first xD");
    stagecal_batch_result_free(&qs);
}

/* The band of the dynamic model draws the holdup with its stated uncertainty: with the
 * law's covariance at 0, a first receiver of a fixed fraction of the charge ends at the
 * start-up plus a fixed draw, and at total reflux time runs as holdup/V in the stage
 * equations, so its band is the start-up's ±1.96·u·t_startup (normal percentiles of
 * 1 + u·z): each side within [0.7, 1.3] of that (200 draws: the 2.5/97.5 % percentiles
 * scatter by ~10 %; the pot's small change during the start-up bends the scaling). Without
 * an uncertainty the band has no width. */
static void band_draws_the_holdup(void **state)
{
    struct fixture *f = *state;
    stagecal_batch_problem pb = two_cuts();
    stagecal_batch_params par = stagecal_batch_default_params();
    stagecal_batch_dynamics dy;
    stagecal_batch_result nom;
    stagecal_batch_band band;
    stagecal_error err;
    pb.cuts[0].kind = STAGECAL_BATCH_UNTIL_FRACTION;
    pb.cuts[0].value = 0.2;
    stagecal_batch_dynamics_init(&dy);
    dy.holdup_column_mol = 0.04 * W0;
    memset(f->m.cov, 0, sizeof f->m.cov);
    f->m.dof = INFINITY;
    run(&pb, &f->col_law, &dy, &nom);
    par.dynamics = &dy;
    for (int pass = 0; pass < 2; pass++) {
        dy.holdup_u_rel = pass ? 0.25 : 0;
        assert_int_equal(stagecal_batch_band_sample(&pb, f->vle, &f->m, NAN, &par, &nom, 200, 3,
                                                    0.95, &band, &err),
                         STAGECAL_OK);
        const stagecal_batch_interval *iv = &band.cuts[0].t_end_s;
        if (!pass) {
            assert_abs(iv->high - iv->low, 0, 1e-9 * nom.cuts[0].t_end_s, "no holdup drawn");
            continue;
        }
        double half = 1.96 * 0.25 * nom.t_startup_s;
        assert_true(iv->high - iv->nominal > 0.7 * half && iv->high - iv->nominal < 1.3 * half);
        assert_true(iv->nominal - iv->low > 0.7 * half && iv->nominal - iv->low < 1.3 * half);
    }
    stagecal_batch_result_free(&nom);
}

/* Inputs the model cannot take are refused with a message. */
static void refuses_what_it_cannot_model(void **state)
{
    struct fixture *f = *state;
    stagecal_batch_problem pb = two_cuts();
    stagecal_batch_params par = stagecal_batch_default_params();
    stagecal_batch_dynamics dy;
    stagecal_batch_result res;
    stagecal_error err;
    stagecal_batch_dynamics_init(&dy);
    par.dynamics = &dy;
    stagecal_batch_result_init(&res);
    /* no holdup: the quasi-steady model is the answer */
    assert_int_equal(stagecal_batch_run(&pb, &f->col_const, &par, &res, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "quasi-steady"));
    dy.holdup_column_mol = 0.6 * W0;
    assert_int_equal(stagecal_batch_run(&pb, &f->col_const, &par, &res, &err), STAGECAL_EINVAL);
    /* fewer than 2 stages: no column stage to hold the liquid */
    dy.holdup_column_mol = 0.02 * W0;
    f->n_const = 1.5;
    assert_int_equal(stagecal_batch_run(&pb, &f->col_const, &par, &res, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "at least 2"));
    f->n_const = 6.4;
    /* a start-up purity beyond the total-reflux distillate, without a time */
    dy.startup_xd = 0.9999;
    assert_int_equal(stagecal_batch_run(&pb, &f->col_const, &par, &res, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "total reflux"));
    stagecal_batch_result_free(&res);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(holdup_to_zero_agrees),
        cmocka_unit_test(total_reflux_is_fenske),
        cmocka_unit_test(balances_close),
        cmocka_unit_test(holdup_delays_first_cut),
        cmocka_unit_test(agrees_with_independent_simulator),
        cmocka_unit_test(smearing_is_rayleigh),
        cmocka_unit_test(band_draws_the_holdup),
        cmocka_unit_test(refuses_what_it_cannot_model),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
