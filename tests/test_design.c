/*
 * test_design.c — the Fisher information of the correlation, the band before and after
 * new windows, and the I-/D-optimal search for the next tests.
 *
 * Sources of truth: GSL's numerical differentiation (gsl_deriv_central) of the model
 * file's own predictions for the information matrix; GSL's LU inverse for I₀ = C⁻¹;
 * GSL's weighted linear least squares (gsl_multifit_wlinear) for the covariance after new
 * windows; the model file's confidence band (stagecal_model_eval) for the band before;
 * the textbook D-optimum for a straight line on an interval (half of the trials at each
 * end: Kiefer & Wolfowitz 1959, "Optimum designs in regression problems", Ann. Math.
 * Statist. 30:271–294; a textbook example in Atkinson, Donev & Tobias 2007, "Optimum
 * Experimental Designs, with SAS" — both from memory); a
 * brute-force grid for the I-optimal single test.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_deriv.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_multifit.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "demo_points_model.h"
#include "testutil.h"
#include "stagecal/design.h"
#include "stagecal/model.h"
#include "stagecal/regress.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* A model file in memory: form, θ, a positive definite covariance, σ, dof, envelope. */
static void make_model(stagecal_model *m, const char *form, const double *theta, const double *cov,
                       double sigma, double dof)
{
    stagecal_model_init(m);
    assert_int_equal(stagecal_form_parse(form, &m->form, NULL), STAGECAL_OK);
    size_t p = m->form.p;
    memcpy(m->theta, theta, p * sizeof *theta);
    memcpy(m->cov, cov, p * p * sizeof *cov);
    m->sigma = sigma;
    m->dof = dof;
    m->n_windows = 20;
    m->n_samples = 800;
    m->r_min = 3;
    m->r_max = 5;
    m->has_load = 1;
    m->f_min = 0.8;
    m->f_max = 1.6;
}

/* stages from the model file's own evaluation with θ_i replaced by x */
struct fd_ctx {
    stagecal_model *m;
    size_t i;
    double r, f;
};

static double model_stages(double x, void *params)
{
    struct fd_ctx *c = params;
    double keep = c->m->theta[c->i];
    stagecal_model_point pt;
    c->m->theta[c->i] = x;
    int rc = stagecal_model_eval(c->m, c->r, c->f, 0, &pt, NULL);
    c->m->theta[c->i] = keep;
    return rc ? NAN : pt.stages;
}

static void check_info_fd(const char *form, const double *theta, const double *cov)
{
    stagecal_model m;
    stagecal_design_problem pb;
    make_model(&m, form, theta, cov, 0.31, 17);
    assert_int_equal(stagecal_design_from_model(&m, &pb, NULL), STAGECAL_OK);
    size_t p = m.form.p;
    const double rs[] = {1.3, 2.5, 4.75, INFINITY};
    const double fs[] = {0.85, 1.45};
    for (size_t a = 0; a < 4; a++)
        for (size_t b = 0; b < 2; b++) {
            double info[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP], g[STAGECAL_FORM_MAXP];
            assert_int_equal(stagecal_design_window_info(&pb, rs[a], fs[b], info, NULL),
                             STAGECAL_OK);
            for (size_t i = 0; i < p; i++) {
                struct fd_ctx c = {&m, i, rs[a], fs[b]};
                gsl_function fn = {model_stages, &c};
                double abserr;
                /* GSL's 5-point central difference with a step of 1e-4 of the parameter's
                 * size: its own error estimate is below 1e-9 here. */
                double h = 1e-4 * fmax(fabs(theta[i]), 1.0);
                assert_int_equal(gsl_deriv_central(&fn, theta[i], h, &g[i], &abserr), GSL_SUCCESS);
                assert_true(abserr < 1e-7 * fmax(fabs(g[i]), 1.0));
            }
            for (size_t i = 0; i < p; i++)
                for (size_t j = 0; j < p; j++) {
                    char label[96];
                    snprintf(label, sizeof label, "%s info[%zu][%zu] at R=%g F=%g", form, i, j,
                             rs[a], fs[b]);
                    /* tolerance: the difference quotient's own error (≤ 1e-7 relative,
                     * above) entering a product of two gradients */
                    double want = g[i] * g[j] / (0.31 * 0.31);
                    assert_abs(info[i * p + j], want, 1e-6 * fmax(fabs(want), 1.0), label);
                }
        }
    /* I₀ = C⁻¹ against GSL's LU inverse (tolerance: two inversions of a matrix whose
     * condition number is below 1e4 here, 1e-10 relative to the largest entry). */
    double a[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP], inv[STAGECAL_FORM_MAXP * STAGECAL_FORM_MAXP];
    memcpy(a, cov, p * p * sizeof *a);
    gsl_matrix_view av = gsl_matrix_view_array(a, p, p), iv = gsl_matrix_view_array(inv, p, p);
    gsl_permutation *perm = gsl_permutation_alloc(p);
    int sg;
    assert_int_equal(gsl_linalg_LU_decomp(&av.matrix, perm, &sg), GSL_SUCCESS);
    assert_int_equal(gsl_linalg_LU_invert(&av.matrix, perm, &iv.matrix), GSL_SUCCESS);
    gsl_permutation_free(perm);
    double big = 0;
    for (size_t i = 0; i < p * p; i++)
        big = fmax(big, fabs(inv[i]));
    for (size_t i = 0; i < p * p; i++)
        assert_abs(pb.info[i], inv[i], 1e-10 * big, "I0 = inverse of the covariance");
    stagecal_model_free(&m);
}

static void design_information_matches_finite_differences(void **state)
{
    (void)state;
    const double th1[] = {9.5, 0.9};
    const double c1[] = {0.04, -0.003, -0.003, 0.0009};
    check_info_fd("saturating", th1, c1);
    const double th2[] = {8.1, 0.85, 1.2, -0.4};
    const double c2[] = {0.30,  -0.01, -0.20, 0.05,  -0.01, 0.002,  0.004, -0.001,
                         -0.20, 0.004, 0.25,  -0.08, 0.05,  -0.001, -0.08, 0.04};
    check_info_fd("saturating-load", th2, c2);
    const double th3[] = {10.2, -6.3, 0.7};
    const double c3[] = {0.5, -0.6, -0.1, -0.6, 1.0, 0.02, -0.1, 0.02, 0.09};
    check_info_fd("linear:1+1/R+F", th3, c3);
}

/* A fitted model of the demo points (datasets/points, invented data), with a load term
 * allowed (make_model's has_load). */
static void demo_model(stagecal_model *m, const char *form)
{
    demo_points_model(m, form);
    m->has_load = 1;
}

static void design_half_width_before_is_model_band(void **state)
{
    (void)state;
    const char *forms[] = {"saturating-load", "linear:1+1/R+F", "saturating"};
    for (size_t fi = 0; fi < 3; fi++) {
        stagecal_model m;
        stagecal_design_problem pb;
        demo_model(&m, forms[fi]);
        assert_int_equal(stagecal_design_from_model(&m, &pb, NULL), STAGECAL_OK);
        stagecal_design_point at[6] = {{1.0, 0.7, 1},      {2.5, 1.4, 2}, {6, 1.0, 1},
                                       {INFINITY, 0.9, 1}, {0.8, 0.5, 1}, {12, 1.5, 0.5}};
        stagecal_design_at out[6];
        stagecal_design_result res;
        stagecal_design_params par = stagecal_design_default_params();
        par.starts = 4;
        assert_int_equal(stagecal_design_propose(&pb, at, 6, &par, m.r_min, m.r_max, m.f_min,
                                                 m.f_max, &res, out, NULL),
                         STAGECAL_OK);
        for (size_t j = 0; j < 6; j++) {
            stagecal_model_point pt;
            assert_int_equal(stagecal_model_eval(&m, at[j].r, at[j].f_load, 0, &pt, NULL),
                             STAGECAL_OK);
            assert_true(out[j].determined_before);
            /* tolerance: the information route inverts C twice (eigen-decompositions of
             * its correlation matrix, condition number < 1e4 here): ~1e-12 measured */
            assert_rel(out[j].half_before, 0.5 * (pt.ci_high - pt.ci_low), 1e-9,
                       "half-width before = model's confidence band");
            assert_rel(out[j].stages, pt.stages, 1e-14, "prediction");
            assert_true(out[j].half_after < out[j].half_before);
        }
        stagecal_model_free(&m);
    }
}

/* A model file that carries its fit's design (the default hc2-bm calibration, format 3)
 * and the rows' runs (--covariance cr2-run, format 5): its bands use Student t at the
 * Bell–McCaffrey dof of each condition's own contrast, clustered by run with the runs
 * (stagecal_model_eval), not the file's dof (σ's). The half-width before, in numbers and in
 * the chart, is that band, and its dof the contrast's: at R = 3 against numpy's
 * (tests/cr2_crosscheck.py, Pustejovsky & Tipton 2018; testutil_cr2_dof), at most G − 1 =
 * 3. After the tests the same dof (no credit for windows whose runs are unknown).
 * Tolerances: 1e-9 relative against numpy (the same linear algebra by two routes, rounding
 * ~1e-13); 1e-9 between the information route and the model's band (as above). */
#define DN 10
static void design_half_width_takes_the_models_design_dof(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_design_problem pb;
    stagecal_error err;
    double theta[2] = {8, -3}, cov[4] = {0.04, -0.05, -0.05, 0.09}, x[2 * DN], r[DN], ref[3];
    size_t run[DN];
    make_model(&m, "linear:1+1/R", theta, cov, 0.3, 8);
    for (size_t i = 0; i < DN; i++) {
        r[i] = 1.5 + 0.4 * (double)i;
        x[2 * i] = 1;
        x[2 * i + 1] = 1 / r[i];
        run[i] = i % 4;
    }
    testutil_cr2_dof(r, run, DN, ref);
    assert_int_equal(stagecal_model_set_design(&m, x, DN, &err), STAGECAL_OK);
    stagecal_design_point at[3] = {{3.0, NAN, 1}, {4.5, NAN, 1}, {1.2, NAN, 1}};
    stagecal_design_test tests[2] = {{2.0, NAN, 0}, {5.5, NAN, 0}};
    double clustered = 0;
    for (int clu = 1; clu >= 0; clu--) {
        assert_int_equal(stagecal_model_set_design_run(&m, clu ? run : NULL, &err), STAGECAL_OK);
        assert_int_equal(stagecal_design_from_model(&m, &pb, &err), STAGECAL_OK);
        stagecal_design_result res;
        stagecal_design_at out[3];
        assert_int_equal(
            stagecal_design_evaluate(&pb, tests, 2, at, 3, STAGECAL_DESIGN_I, &res, out, &err),
            STAGECAL_OK);
        if (clu) {
            assert_rel(out[0].dof_before, ref[2], 1e-9, "clustered dof at R = 3 vs numpy");
            assert_true(out[0].dof_before <= 3);
            clustered = out[0].dof_before;
        } else {
            assert_true(out[0].dof_before > clustered); /* the windows' own, unclustered */
        }
        assert_true(isnan(res.t_before) && isnan(res.t_after));
        for (size_t j = 0; j < 3; j++) {
            stagecal_model_point pt;
            assert_int_equal(stagecal_model_eval(&m, at[j].r, NAN, 0, &pt, &err), STAGECAL_OK);
            assert_true(pt.dof_fit < m.dof);
            assert_rel(out[j].dof_before, pt.dof_fit, 1e-12, "dof before = the band's");
            assert_rel(out[j].half_before, 0.5 * (pt.ci_high - pt.ci_low), 1e-9,
                       "half-width before = model's confidence band");
            assert_rel(out[j].dof_after, out[j].dof_before, 1e-15, "no dof credited after");
            assert_rel(out[j].half_after,
                       gsl_cdf_tdist_Pinv(0.975, out[j].dof_before) * out[j].se_after, 1e-12,
                       "half-width after");
        }
        stagecal_design_curves c;
        assert_int_equal(stagecal_design_chart_curves(&m, &pb, &res, out, 3, &c, &err),
                         STAGECAL_OK);
        for (size_t i = 0; i < c.n; i += 20) {
            stagecal_model_point pt;
            assert_int_equal(stagecal_model_eval(&m, c.r[i], NAN, 0, &pt, &err), STAGECAL_OK);
            assert_rel(c.now_hi[i] - c.stages[i], 0.5 * (pt.ci_high - pt.ci_low), 1e-9,
                       "chart's band before = model's confidence band");
        }
    }
    stagecal_model_free(&m);
}

/* linear:1+1/R at θ = (10, −7), σ = 0.4, 3 dof, no windows yet. */
static void inv_r_problem(stagecal_design_problem *pb)
{
    stagecal_form f;
    const double theta[] = {10.0, -7.0};
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &f, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_design_init(pb, &f, theta, 0.4, 3, 0.95, NULL), STAGECAL_OK);
}

/* I-optimal proposal of k tests in R lo..hi for n conditions of interest. */
static void propose(const stagecal_design_problem *pb, const stagecal_design_point *at, size_t n,
                    size_t k, double lo, double hi, stagecal_design_result *res,
                    stagecal_design_at *out)
{
    stagecal_design_params par = stagecal_design_default_params();
    par.tests = k;
    par.r_lo = lo;
    par.r_hi = hi;
    assert_int_equal(stagecal_design_propose(pb, at, n, &par, NAN, NAN, NAN, NAN, res, out, NULL),
                     STAGECAL_OK);
}

static void design_after_matches_weighted_least_squares(void **state)
{
    (void)state;
    /* linear:1+1/R, five windows at R 3..5, σ = 0.4: the variance after the proposed tests
     * must equal x₀ᵀ(XᵀWX)⁻¹x₀ from GSL's weighted least squares over all windows. */
    stagecal_design_problem pb;
    const double rw[] = {3, 3.5, 4, 4.5, 5};
    inv_r_problem(&pb);
    for (size_t i = 0; i < 5; i++)
        assert_int_equal(stagecal_design_add_window(&pb, rw[i], NAN, 1, NULL), STAGECAL_OK);
    stagecal_design_point at[2] = {{2, NAN, 1}, {2.5, NAN, 1}};
    stagecal_design_at out[2];
    stagecal_design_result res;
    propose(&pb, at, 2, 3, 1.5, 8, &res, out);
    assert_int_equal(res.k, 3);
    size_t n = 5 + res.k;
    gsl_matrix *x = gsl_matrix_alloc(n, 2), *cov = gsl_matrix_alloc(2, 2);
    gsl_vector *y = gsl_vector_alloc(n), *w = gsl_vector_alloc(n), *c = gsl_vector_alloc(2);
    for (size_t i = 0; i < n; i++) {
        double r = i < 5 ? rw[i] : res.tests[i - 5].r;
        gsl_matrix_set(x, i, 0, 1);
        gsl_matrix_set(x, i, 1, 1 / r);
        gsl_vector_set(y, i, 10 - 7 / r + 0.01 * (double)(i % 3));
        gsl_vector_set(w, i, 1 / (0.4 * 0.4));
    }
    gsl_multifit_linear_workspace *ws = gsl_multifit_linear_alloc(n, 2);
    double chisq;
    assert_int_equal(gsl_multifit_wlinear(x, w, y, c, cov, &chisq, ws), GSL_SUCCESS);
    for (size_t j = 0; j < 2; j++) {
        double x0[2] = {1, 1 / at[j].r}, v = 0;
        for (size_t a = 0; a < 2; a++)
            for (size_t b = 0; b < 2; b++)
                v += x0[a] * gsl_matrix_get(cov, a, b) * x0[b];
        /* tolerance: two 2×2 inversions, condition number < 1e3 */
        assert_rel(out[j].se_after * out[j].se_after, v, 1e-10, "variance after = WLS");
    }
    /* stagecal_design_evaluate on the same tests gives the same numbers, and 3 windows at
     * R = 4.5 (inside the old windows) help R = 2 less than the proposal */
    stagecal_design_result ev;
    stagecal_design_at eo[2];
    assert_int_equal(
        stagecal_design_evaluate(&pb, res.tests, res.k, at, 2, STAGECAL_DESIGN_I, &ev, eo, NULL),
        STAGECAL_OK);
    for (size_t j = 0; j < 2; j++)
        assert_rel(eo[j].half_after, out[j].half_after, 1e-15, "evaluate = propose");
    assert_rel(ev.crit_after, res.crit_after, 1e-15, "criterion");
    stagecal_design_test common[3] = {{4.5, NAN, 0}, {4.5, NAN, 0}, {4.5, NAN, 0}};
    assert_int_equal(
        stagecal_design_evaluate(&pb, common, 3, at, 2, STAGECAL_DESIGN_I, &ev, eo, NULL),
        STAGECAL_OK);
    assert_true(eo[0].half_after > out[0].half_after);
    assert_true(ev.crit_after > res.crit_after);
    assert_int_equal(
        stagecal_design_evaluate(&pb, common, 3, at, 0, STAGECAL_DESIGN_I, &ev, eo, NULL),
        STAGECAL_EINVAL);
    gsl_multifit_linear_free(ws);
    gsl_matrix_free(x);
    gsl_matrix_free(cov);
    gsl_vector_free(y);
    gsl_vector_free(w);
    gsl_vector_free(c);
    /* the best single test is at the low end (the conditions of interest lie below the
     * windows, and the variance falls monotonically towards them); all tests there */
    for (size_t t = 0; t < res.k; t++) {
        assert_rel(res.tests[t].r, 1.5, 1e-6, "I-optimal tests at the low end");
        /* inside the bounds exactly (R → L/V → R must not step outside) */
        assert_true(res.tests[t].r >= 1.5 && res.tests[t].r <= 8);
    }
}

static void design_d_optimal_line_puts_points_at_the_ends(void **state)
{
    (void)state;
    /* linear:1+L/V is a straight line in L/V; R in [1, 4] is L/V in [0.5, 0.8]. D-optimum
     * for a first-order model on an interval: half the trials at each end (Kiefer &
     * Wolfowitz 1959; Atkinson, Donev & Tobias 2007). From no information (singular, the
     * ridge path) with K = 4, and from one window at the centre with K = 2. */
    stagecal_form f;
    stagecal_design_problem pb;
    const double theta[] = {-3.0, 14.0};
    assert_int_equal(stagecal_form_parse("linear:1+L/V", &f, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_design_init(&pb, &f, theta, 0.3, 4, 0.95, NULL), STAGECAL_OK);
    stagecal_design_point at[1] = {{2, NAN, 1}};
    stagecal_design_at out[1];
    stagecal_design_result res;
    stagecal_design_params par = stagecal_design_default_params();
    par.criterion = STAGECAL_DESIGN_D;
    par.r_lo = 1;
    par.r_hi = 4;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, NAN, NAN, NAN, NAN, &res, out, NULL),
                     STAGECAL_OK);
    assert_int_equal(res.rank_before, 0);
    assert_int_equal(res.rank_after, 2);
    assert_false(out[0].determined_before);
    assert_true(out[0].determined_after);
    /* tolerance: BOBYQA's step tolerance 1e-10 on the scaled variable; 1e-6 in R */
    assert_rel(res.tests[0].r, 1, 1e-6, "D: lower end");
    assert_rel(res.tests[1].r, 1, 1e-6, "D: lower end");
    assert_rel(res.tests[2].r, 4, 1e-6, "D: upper end");
    assert_rel(res.tests[3].r, 4, 1e-6, "D: upper end");

    /* 16 tests: more variables than the joint search takes, so coordinate exchange; the
     * same textbook answer, 8 at each end */
    par.tests = 16;
    stagecal_design_result big;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, NAN, NAN, NAN, NAN, &big, out, NULL),
                     STAGECAL_OK);
    assert_true(16 > par.joint_max);
    for (size_t t = 0; t < 16; t++)
        assert_rel(big.tests[t].r, t < 8 ? 1 : 4, 1e-6, "D by exchange: half at each end");
    par.tests = 4;

    assert_int_equal(stagecal_design_add_window(&pb, 1.0 / 0.35 - 1, NAN, 1, NULL), STAGECAL_OK);
    par.tests = 2;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, NAN, NAN, NAN, NAN, &res, out, NULL),
                     STAGECAL_OK);
    assert_int_equal(res.rank_before, 1);
    assert_rel(res.tests[0].r, 1, 1e-6, "D after a centre window: lower end");
    assert_rel(res.tests[1].r, 4, 1e-6, "D after a centre window: upper end");
}

static void design_singular_information_names_the_identifying_condition(void **state)
{
    (void)state;
    /* linear:1+1/R with every window at R = 3: only a + b/3 is identified. One window at
     * R adds det ∝ (1/R − 1/3)²: in [1.5, 10] the largest is at R = 1.5 (|2/3 − 1/3| = 1/3
     * against |1/10 − 1/3| = 0.233). */
    stagecal_design_problem pb;
    inv_r_problem(&pb);
    assert_int_equal(stagecal_design_add_window(&pb, 3, NAN, 6, NULL), STAGECAL_OK);
    stagecal_design_point at[2] = {{3, NAN, 1}, {2, NAN, 1}};
    stagecal_design_at out[2];
    stagecal_design_result res;
    propose(&pb, at, 2, 2, 1.5, 10, &res, out);
    assert_int_equal(res.rank_before, 1);
    assert_int_equal(res.identify_rank, 2);
    assert_rel(res.identify_r, 1.5, 1e-6, "identifying condition");
    assert_true(out[0].determined_before); /* a + b/3 is estimable */
    assert_false(out[1].determined_before);
    assert_true(isnan(out[1].half_before));
    assert_true(out[1].determined_after);
    assert_int_equal(res.rank_after, 2);
    /* se before at R = 3 is σ/√6 exactly (six windows there) */
    assert_rel(out[0].se_before, 0.4 / sqrt(6), 1e-12, "se of the mean of six windows");
}

static void design_i_optimal_single_test_matches_grid(void **state)
{
    (void)state;
    /* saturating form, one test: the I-criterion over a fine grid of L/V (brute force) is
     * never below the optimiser's. */
    stagecal_form f;
    stagecal_design_problem pb;
    const double theta[] = {9.5, 0.9};
    assert_int_equal(stagecal_form_parse("saturating", &f, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_design_init(&pb, &f, theta, 0.3, 10, 0.95, NULL), STAGECAL_OK);
    const double rw[] = {4, 4.2, 4.5, 4.5, 4.8, 5, 3.5, 3};
    for (size_t i = 0; i < 8; i++)
        assert_int_equal(stagecal_design_add_window(&pb, rw[i], NAN, 1, NULL), STAGECAL_OK);
    stagecal_design_point at[2] = {{2, NAN, 1}, {2.5, NAN, 3}};
    stagecal_design_at out[2];
    stagecal_design_result res;
    stagecal_design_params par = stagecal_design_default_params();
    par.tests = 1;
    par.r_lo = 1.2;
    par.r_hi = INFINITY;
    assert_int_equal(stagecal_design_propose(&pb, at, 2, &par, NAN, NAN, NAN, NAN, &res, out, NULL),
                     STAGECAL_OK);
    double best = INFINITY;
    for (size_t i = 0; i <= 20000; i++) {
        double lv = 1.2 / 2.2 + (1 - 1.2 / 2.2) * (double)i / 20000.0;
        stagecal_design_test t = {lv >= 1 ? INFINITY : lv / (1 - lv), NAN, 0};
        double crit = 0, v;
        int det;
        for (size_t j = 0; j < 2; j++) {
            assert_int_equal(stagecal_design_variance(&pb, &t, 1, at[j].r, NAN, &v, &det, NULL),
                             STAGECAL_OK);
            crit += (j == 0 ? 0.25 : 0.75) * v;
        }
        best = fmin(best, crit);
    }
    /* the optimiser may only beat the grid (resolution 2e-5 in L/V), never lose by more
     * than the objective's rounding */
    assert_true(res.crit_after <= best * (1 + 1e-9));
    assert_true(res.crit_after >= best * (1 - 1e-4));
    /* and it lies below the windows, towards the conditions of interest */
    assert_true(res.tests[0].r < 2.5);
}

static void design_durations_and_errors(void **state)
{
    (void)state;
    stagecal_model m;
    stagecal_design_problem pb;
    const double th[] = {9.5, 0.9}, c[] = {0.04, -0.003, -0.003, 0.0009};
    make_model(&m, "saturating", th, c, 0.3, 18);
    assert_int_equal(stagecal_design_from_model(&m, &pb, NULL), STAGECAL_OK);
    assert_int_equal(pb.window_samples, 40);
    stagecal_design_point at[1] = {{2, NAN, 1}};
    stagecal_design_at out[1];
    stagecal_design_result res;
    stagecal_design_params par = stagecal_design_default_params();
    stagecal_error err;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, NAN, NAN, &res, out, &err),
                     STAGECAL_OK);
    /* the default range spans the hints (envelope 3..5) and the condition of interest */
    assert_rel(res.r_lo, 2, 0, "range low");
    assert_rel(res.r_hi, 5, 0, "range high");
    /* 15 samples settle (run-log warm-up) + 40 window samples, every 600 s */
    assert_rel(res.tests[0].duration_s, 55 * 600.0, 1e-15, "duration");

    par.tests = 0;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, NAN, NAN, &res, out, &err),
                     STAGECAL_EINVAL);
    par = stagecal_design_default_params();
    par.r_lo = 5;
    par.r_hi = 2;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, NAN, NAN, &res, out, &err),
                     STAGECAL_EINVAL);
    par = stagecal_design_default_params();
    at[0].weight = 0;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, NAN, NAN, &res, out, &err),
                     STAGECAL_EINVAL);
    at[0].weight = 1;
    /* ln R is undefined at total reflux */
    stagecal_form f;
    const double th2[] = {5, 2};
    assert_int_equal(stagecal_form_parse("linear:1+lnR", &f, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_design_init(&pb, &f, th2, 0.3, 5, 0.95, NULL), STAGECAL_OK);
    par.r_lo = 1;
    par.r_hi = INFINITY;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, NAN, NAN, NAN, NAN, &res, out, &err),
                     STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "undefined"));
    /* a load form needs an F range */
    stagecal_model_free(&m);
    const double th3[] = {10.2, -6.3, 0.7};
    const double c3[] = {0.5, -0.6, -0.1, -0.6, 1.0, 0.02, -0.1, 0.02, 0.09};
    make_model(&m, "linear:1+1/R+F", th3, c3, 0.3, 18);
    assert_int_equal(stagecal_design_from_model(&m, &pb, NULL), STAGECAL_OK);
    par = stagecal_design_default_params();
    at[0].f_load = NAN;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, NAN, NAN, &res, out, &err),
                     STAGECAL_EINVAL);
    /* the column's flooding margin: a default F range is cut at it, a stated one above it
     * is refused, and every proposed test stays at or below it */
    at[0].f_load = 1.2;
    par.f_max = 1.5;
    par.f_lo = 0.5;
    par.f_hi = 2.0;
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, NAN, NAN, &res, out, &err),
                     STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "flooding margin"));
    par.f_lo = par.f_hi = NAN;
    at[0].f_load = 1.9; /* a condition of interest beyond it does not widen the range */
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, 0.5, 1.8, &res, out, &err),
                     STAGECAL_OK);
    assert_true(res.f_hi == 1.5 && res.f_lo == 0.5);
    for (size_t t = 0; t < res.k; t++)
        assert_true(res.tests[t].f_load <= 1.5);
    par.f_max = 0.4; /* below the whole range */
    assert_int_equal(stagecal_design_propose(&pb, at, 1, &par, 3, 5, 0.5, 1.8, &res, out, &err),
                     STAGECAL_EINVAL);
    par = stagecal_design_default_params();
    /* a model with σ = 0 or a covariance that is not positive definite: bad data */
    m.sigma = 0;
    assert_int_equal(stagecal_design_from_model(&m, &pb, &err), STAGECAL_EDATA);
    m.sigma = 0.3;
    m.cov[1] = m.cov[3] = 0.8; /* |corr(a, b)| > 1 */
    assert_int_equal(stagecal_design_from_model(&m, &pb, &err), STAGECAL_EDATA);
    stagecal_model_free(&m);
    assert_int_equal(stagecal_design_init(&pb, &f, th2, 0, 5, 0.95, &err), STAGECAL_EINVAL);
    assert_string_equal(stagecal_design_criterion_key(STAGECAL_DESIGN_D), "d");
    assert_string_equal(stagecal_design_criterion_name(STAGECAL_DESIGN_I), "I-optimal");
}

/* The information weight of a window follows the model's scatter function σ(R) (format 4)
 * where it has one: a degree-0 function with exp(c0) = sigma_stages is the one-σ path
 * exactly, and with a degree-1 function a window at R adds g gᵀ/σ(R)², σ(R) = exp(c0 +
 * c1·R/(R + 1)) with R/(R + 1) clamped to the fitted range (include/stagecal/scatter.h; the
 * closed form, from the header, not from the code under test). The variance after the
 * proposed tests equals the weighted least squares with weights 1/σ(R)² (GSL). */
static void design_weight_follows_scatter_function(void **state)
{
    (void)state;
    const double theta[] = {10.0, -7.0}, cov[] = {0.09, -0.2, -0.2, 0.5};
    const double sd0 = exp(-1.2); /* exp(c0) is sigma_stages to the bit */
    stagecal_model flat, one, lin;
    make_model(&flat, "linear:1+1/R", theta, cov, sd0, 9);
    make_model(&one, "linear:1+1/R", theta, cov, sd0, 9);
    make_model(&lin, "linear:1+1/R", theta, cov, 0.3, 9);
    one.scatter.n = 1;
    one.scatter.c[0] = -1.2;
    one.scatter.cov[0] = 1.0 / 18;
    one.scatter.lv_lo = 0.5;
    one.scatter.lv_hi = 1;
    lin.scatter.n = 2;
    lin.scatter.c[0] = log(0.2) - 1.5 * 0.5; /* σ = 0.2 at λ = 0.5, 0.2·e^0.75 at λ = 1 */
    lin.scatter.c[1] = 1.5;
    lin.scatter.cov[0] = lin.scatter.cov[3] = 0.01;
    lin.scatter.lv_lo = 0.5; /* R = 1 */
    lin.scatter.lv_hi = 0.9; /* R = 9 */
    assert_int_equal(stagecal_scatter_check(&one.scatter, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_scatter_check(&lin.scatter, NULL), STAGECAL_OK);
    stagecal_design_problem pf, p1, pl;
    assert_int_equal(stagecal_design_from_model(&flat, &pf, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_design_from_model(&one, &p1, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_design_from_model(&lin, &pl, NULL), STAGECAL_OK);
    assert_int_equal(pf.scatter.n, 0);
    assert_int_equal(pl.scatter.n, 2);

    const double rs[] = {0.5, 1, 2.5, 4, 9, 30, INFINITY};
    for (size_t a = 0; a < sizeof rs / sizeof rs[0]; a++) {
        double i_f[4], i_1[4], i_l[4];
        assert_int_equal(stagecal_design_window_info(&pf, rs[a], NAN, i_f, NULL), STAGECAL_OK);
        assert_int_equal(stagecal_design_window_info(&p1, rs[a], NAN, i_1, NULL), STAGECAL_OK);
        assert_int_equal(stagecal_design_window_info(&pl, rs[a], NAN, i_l, NULL), STAGECAL_OK);
        double lv = isinf(rs[a]) ? 1 : rs[a] / (rs[a] + 1);
        lv = fmin(fmax(lv, 0.5), 0.9); /* clamped to the fitted range */
        double sd = 0.2 * exp(1.5 * (lv - 0.5)), g[2] = {1, isinf(rs[a]) ? 0 : 1 / rs[a]};
        for (size_t k = 0; k < 4; k++) {
            char label[64];
            snprintf(label, sizeof label, "info[%zu] at R = %g", k, rs[a]);
            /* tolerance: the same weight to the bit (exp(c0) = sigma), so equal; 1e-12 */
            assert_abs(i_1[k], i_f[k], 1e-12 * fabs(i_f[k]), label);
            /* tolerance: a few roundings in λ, exp and the products: 1e-13 relative */
            double want = g[k / 2] * g[k % 2] / (sd * sd);
            assert_abs(i_l[k], want, 1e-13 * fabs(want), label);
        }
    }

    /* proposals: the degree-0 function proposes what one σ does; the degree-1 one's
     * after-variance is the WLS with weights 1/σ(R)² over the old information and the tests */
    stagecal_design_point at[2] = {{2, NAN, 1}, {6, NAN, 2}};
    stagecal_design_at of[2], o1[2], ol[2];
    stagecal_design_result rf, r1, rl;
    propose(&pf, at, 2, 3, 1, INFINITY, &rf, of);
    propose(&p1, at, 2, 3, 1, INFINITY, &r1, o1);
    propose(&pl, at, 2, 3, 1, INFINITY, &rl, ol);
    for (size_t t = 0; t < 3; t++) /* the same weights to the bit: the same search */
        assert_true(r1.tests[t].r == rf.tests[t].r);
    for (size_t j = 0; j < 2; j++) {
        /* tolerance: the same arithmetic on the same numbers; 1e-12 */
        assert_rel(o1[j].half_after, of[j].half_after, 1e-12, "degree 0 = one sigma");
        assert_rel(o1[j].half_before, of[j].half_before, 1e-12, "degree 0 = one sigma");
    }
    /* M = C⁻¹ + Σ_k x_k x_kᵀ/σ(R_k)²; v = x₀ᵀ M⁻¹ x₀ (GSL LU) */
    double mm[4] = {0}, c[4];
    memcpy(c, cov, sizeof c);
    double det = c[0] * c[3] - c[1] * c[2];
    mm[0] = c[3] / det, mm[1] = -c[1] / det, mm[2] = -c[2] / det, mm[3] = c[0] / det;
    for (size_t t = 0; t < rl.k; t++) {
        double r = rl.tests[t].r, lv = isinf(r) ? 1 : r / (r + 1);
        lv = fmin(fmax(lv, 0.5), 0.9);
        double sd = 0.2 * exp(1.5 * (lv - 0.5)), x[2] = {1, isinf(r) ? 0 : 1 / r};
        for (size_t k = 0; k < 4; k++)
            mm[k] += x[k / 2] * x[k % 2] / (sd * sd);
    }
    gsl_matrix_view mv = gsl_matrix_view_array(mm, 2, 2);
    gsl_permutation *perm = gsl_permutation_alloc(2);
    double inv[4];
    gsl_matrix_view iv = gsl_matrix_view_array(inv, 2, 2);
    int sg;
    assert_int_equal(gsl_linalg_LU_decomp(&mv.matrix, perm, &sg), GSL_SUCCESS);
    assert_int_equal(gsl_linalg_LU_invert(&mv.matrix, perm, &iv.matrix), GSL_SUCCESS);
    gsl_permutation_free(perm);
    for (size_t j = 0; j < 2; j++) {
        double x0[2] = {1, 1 / at[j].r}, v = 0;
        for (size_t a = 0; a < 2; a++)
            for (size_t b = 0; b < 2; b++)
                v += x0[a] * inv[a * 2 + b] * x0[b];
        /* tolerance: two 2×2 inversions of a matrix with condition number < 1e3 */
        assert_rel(ol[j].se_after * ol[j].se_after, v, 1e-10, "variance after = WLS by sigma(R)");
    }
    stagecal_model_free(&flat);
    stagecal_model_free(&one);
    stagecal_model_free(&lin);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(design_information_matches_finite_differences),
        cmocka_unit_test(design_half_width_before_is_model_band),
        cmocka_unit_test(design_half_width_takes_the_models_design_dof),
        cmocka_unit_test(design_after_matches_weighted_least_squares),
        cmocka_unit_test(design_d_optimal_line_puts_points_at_the_ends),
        cmocka_unit_test(design_singular_information_names_the_identifying_condition),
        cmocka_unit_test(design_i_optimal_single_test_matches_grid),
        cmocka_unit_test(design_durations_and_errors),
        cmocka_unit_test(design_weight_follows_scatter_function),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
