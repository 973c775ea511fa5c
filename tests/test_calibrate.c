/*
 * test_calibrate.c — the unit of evidence and the two fits of the calibration.
 *
 * Sources of truth: the variance of the mean of an AR(1) series (closed form), the
 * Smoker closed-form inverse and Fenske (REFERENCES §1–2) to generate synthetic pot
 * compositions independently of the stepping code, and the coverage of 95 %
 * intervals over many seeded synthetic data sets (a property any honest interval
 * must have).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "testutil.h"

#include "stagecal/calibrate.h"
#include "stagecal/stages.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* Var of the mean of n AR(1) samples with lag-1 correlation ρ and marginal variance
 * σ²: (σ²/n)·[1 + 2 Σ_{k=1}^{n−1} (1 − k/n) ρ^k] (textbook result for a stationary
 * series, e.g. Wilks 2011 §5.2.4 — from memory). */
static double ar1_var_mean(double sigma, double rho, size_t n)
{
    double s = 1;
    for (size_t k = 1; k < n; k++)
        s += 2 * (1 - (double)k / (double)n) * pow(rho, (double)k);
    return sigma * sigma / (double)n * s;
}

static void ar1(gsl_rng *rng, double *e, size_t n, double sigma, double rho)
{
    e[0] = gsl_ran_gaussian(rng, sigma);
    for (size_t i = 1; i < n; i++)
        e[i] = rho * e[i - 1] + sqrt(1 - rho * rho) * gsl_ran_gaussian(rng, sigma);
}

/* The standard error from stagecal_evidence_mean tracks the true standard deviation
 * of a window mean of autocorrelated noise, where the naive s/√n is far too small. */
static void calibrate_evidence_se_matches_ar1(void **state)
{
    (void)state;
    enum { N = 60, REPS = 4000 };
    const double sigma = 1.0, rho = 0.7;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261201);
    double t[N], y[N], se_sum = 0, naive_sum = 0;
    for (size_t i = 0; i < N; i++)
        t[i] = 60.0 * (double)i;
    for (int r = 0; r < REPS; r++) {
        double mean, se, neff;
        ar1(rng, y, N, sigma, rho);
        assert_int_equal(stagecal_evidence_mean(t, y, N, 0, &mean, &se, &neff, NULL), STAGECAL_OK);
        se_sum += se;
        double ss = 0, m = 0;
        for (size_t i = 0; i < N; i++)
            m += y[i] / N;
        for (size_t i = 0; i < N; i++)
            ss += (y[i] - m) * (y[i] - m);
        naive_sum += sqrt(ss / (N - 1) / N);
    }
    /* The detrending removes a little variance (the slope), so compare with the
     * closed form to 20 %: the AR(1) n_eff is an approximation (finite n, estimated ρ
     * biased low in short series). The naive s/√n is ~2.4 times too small here. */
    double truth = sqrt(ar1_var_mean(sigma, rho, N));
    assert_rel(se_sum / REPS, truth, 0.20, "AR(1) window-mean standard error");
    assert_true(naive_sum / REPS < 0.6 * truth);
    gsl_rng_free(rng);
}

static void calibrate_evidence_needs_three(void **state)
{
    (void)state;
    double t[3] = {0, 1, 2}, y[3] = {1, NAN, 2}, m, se;
    stagecal_error err;
    assert_int_equal(stagecal_evidence_mean(t, y, 3, 0, &m, &se, NULL, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "window mean needs at least 3 finite samples, got 2");
}

/* ---- synthetic calibrations ---------------------------------------------------------- */

/* Pot composition after `n` stages (pot included) from xD at reflux r with constant
 * α, by Smoker's closed-form inverse (REFERENCES §2) or Fenske at total reflux
 * (REFERENCES §1) — independent of the stepping code under test. */
static double smoker_xb(double alpha, double r, double xd, double n)
{
    if (isinf(r)) {
        double odds = xd / (1 - xd) / pow(alpha, n);
        return odds / (1 + odds);
    }
    double m = r / (r + 1), b = xd / (r + 1);
    double qa = m * (alpha - 1), qb = m + b * (alpha - 1) - alpha, qc = b;
    double disc = sqrt(qb * qb - 4 * qa * qc);
    double k1 = (-qb - disc) / (2 * qa), k2 = (-qb + disc) / (2 * qa);
    double k = (k1 > 0 && k1 < 1) ? k1 : k2;
    double c = 1 + (alpha - 1) * k;
    double beta = m * c * (alpha - 1) / (alpha - m * c * c);
    double a = m * c * c / alpha;
    return k + 1 / (beta + (1 / (xd - k) - beta) / pow(a, n));
}

static double law(double a, double b, double r)
{
    return isinf(r) ? a : a * (1 - exp(-b * r));
}

struct coverage {
    int hits[5];
    int fits;
};

/* One synthetic calibration: windows at several reflux ratios, AR(1) noise on the
 * analysers, per-sample inversion, window evidence, both fits. */
static void one_dataset(gsl_rng *rng, const stagecal_vle *vle, const stagecal_form *form,
                        struct coverage *cs, struct coverage *cc)
{
    static const double rs[] = {1.2, 1.6, 2.0, 2.5, 3.0, 4.0, 5.0, 6.5, 8.0, 10.0, 15.0, INFINITY};
    enum { NW = sizeof rs / sizeof rs[0], NS = 40 };
    const double alpha = 2.0, a_true = 10.0, b_true = 0.45, u_xd = 0.0015, u_xb = 0.0025, rho = 0.6;
    stagecal_evidence ev[NW];
    static double xds[NW][NS], xbs[NW][NS];
    double t[NS], exd[NS], exb[NS];
    stagecal_stages_params sp = stagecal_stages_default_params();
    sp.want_sensitivities = 1;
    for (size_t i = 0; i < NS; i++)
        t[i] = 60.0 * (double)i;
    for (size_t w = 0; w < NW; w++) {
        double *xd = xds[w], *xb = xbs[w];
        double xd_true = 0.90 + 0.07 * gsl_rng_uniform(rng);
        double xb_true = smoker_xb(alpha, rs[w], xd_true, law(a_true, b_true, rs[w]));
        size_t nok = 0;
        ar1(rng, exd, NS, u_xd, rho);
        ar1(rng, exb, NS, u_xb, rho);
        for (size_t i = 0; i < NS; i++) {
            stagecal_stages_result res;
            xd[i] = xd_true + exd[i];
            xb[i] = xb_true + exb[i];
            assert_int_equal(stagecal_stages_invert(vle, xd[i], xb[i], rs[w], 1.0, &sp, &res, NULL),
                             STAGECAL_OK);
            nok += res.status == STAGECAL_STAGES_OK;
        }
        stagecal_evidence *e = &ev[w];
        memset(e, 0, sizeof *e);
        e->r = rs[w];
        e->total_reflux = isinf(rs[w]);
        e->n_samples = NS;
        assert_int_equal(stagecal_evidence_mean(t, xd, NS, u_xd, &e->xd, &e->u_xd, NULL, NULL), 0);
        assert_int_equal(stagecal_evidence_mean(t, xb, NS, u_xb, &e->xb, &e->u_xb, NULL, NULL), 0);
        e->m = NS; /* the window's samples, as the calibration chain passes them */
        e->s_t = t;
        e->s_xd = xd;
        e->s_xb = xb;
        assert_int_equal(stagecal_evidence_stages(vle, 1.0, e, NULL), STAGECAL_OK);
        if (nok < 3)
            e->stages_ok = 0;
    }
    /* stage space */
    double r[NW], s[NW], sg[NW];
    size_t n = 0;
    for (size_t w = 0; w < NW; w++)
        if (ev[w].stages_ok) {
            r[n] = ev[w].r;
            s[n] = ev[w].stages;
            sg[n] = ev[w].se_stages;
            n++;
        }
    stagecal_regress_data d = {n, r, NULL, s, sg};
    stagecal_regress_params rp = stagecal_regress_default_params();
    rp.band_points = 0;
    stagecal_regress_result fs, fc;
    const double rq[3] = {1.5, 5.0, INFINITY};
    const double truth[2] = {a_true, b_true};
    if (stagecal_regress_fit(&d, form, &rp, &fs, NULL) == STAGECAL_OK) {
        cs->fits++;
        for (int i = 0; i < 2; i++)
            cs->hits[i] += fs.ci_low[i] <= truth[i] && truth[i] <= fs.ci_high[i];
        for (int q = 0; q < 3; q++) {
            stagecal_band bd;
            assert_int_equal(stagecal_regress_band(form, fs.theta, fs.cov, fs.sigma, fs.dof, 0.95,
                                                   rq[q], 0, &bd, NULL),
                             STAGECAL_OK);
            double tv = law(a_true, b_true, rq[q]);
            cs->hits[2 + q] += bd.ci_low <= tv && tv <= bd.ci_high;
        }
        if (stagecal_fit_composition(vle, 1.0, ev, NW, form, fs.theta, &rp, &fc, NULL) ==
            STAGECAL_OK) {
            cc->fits++;
            for (int i = 0; i < 2; i++)
                cc->hits[i] += fc.ci_low[i] <= truth[i] && truth[i] <= fc.ci_high[i];
            for (int q = 0; q < 3; q++) {
                stagecal_band bd;
                assert_int_equal(stagecal_regress_band(form, fc.theta, fc.cov, 1.0, fc.dof, 0.95,
                                                       rq[q], 0, &bd, NULL),
                                 STAGECAL_OK);
                double tv = law(a_true, b_true, rq[q]);
                cc->hits[2 + q] += bd.ci_low <= tv && tv <= bd.ci_high;
            }
            stagecal_regress_result_free(&fc);
        }
        stagecal_regress_result_free(&fs);
    }
}

/* Over 200 seeded synthetic calibrations from a known law with autocorrelated
 * analyser noise, the 95 % intervals of the parameters and of the confidence band
 * at three conditions contain the truth between 90 % and 99 % of the time, for
 * both fits. (Binomial sd of a 95 % rate over 200 trials is 1.5 %: the window
 * [90 %, 99 %] is about ±3 sd; the bound is the issue's.) */
static void calibrate_intervals_cover_truth(void **state)
{
    (void)state;
    enum { REPS = 200 };
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 7);
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.0, NULL);
    stagecal_form form;
    assert_int_equal(stagecal_form_parse("saturating", &form, NULL), STAGECAL_OK);
    struct coverage cs = {{0}, 0}, cc = {{0}, 0};
    for (int rep = 0; rep < REPS; rep++)
        one_dataset(rng, vle, &form, &cs, &cc);
    static const char *const what[5] = {"a", "b", "band R=1.5", "band R=5", "band R=inf"};
    print_message("coverage over %d data sets (stage space: %d fits, composition space: %d):\n",
                  REPS, cs.fits, cc.fits);
    for (int i = 0; i < 5; i++)
        print_message("  %-11s stage space %.3f   composition space %.3f\n", what[i],
                      (double)cs.hits[i] / cs.fits, (double)cc.hits[i] / cc.fits);
    assert_true(cs.fits >= REPS * 0.98);
    assert_true(cc.fits >= REPS * 0.98);
    for (int i = 0; i < 5; i++) {
        double fs = (double)cs.hits[i] / cs.fits, fc = (double)cc.hits[i] / cc.fits;
        assert_true(fs >= 0.90 && fs <= 0.99);
        assert_true(fc >= 0.90 && fc <= 0.99);
    }
    stagecal_vle_free(vle);
    gsl_rng_free(rng);
}

/* xD over a pot at xb for n stages at reflux r: bisection on the Smoker inverse. */
static double smoker_xd(double alpha, double r, double xb, double n)
{
    double lo = xb, hi = 1 - 1e-12;
    for (int it = 0; it < 200; it++) {
        double mid = 0.5 * (lo + hi);
        if (smoker_xb(alpha, r, mid, n) > xb)
            hi = mid;
        else
            lo = mid;
    }
    return 0.5 * (lo + hi);
}

/* A batch pot drifts through a window. On noise-free logs from a known law, both fits
 * recover the law (the stage count follows the drift sample by sample), while the
 * inversion of plain window means is visibly biased. Truth from Smoker's closed-form
 * inverse (REFERENCES §2). */
static void calibrate_follows_drifting_pot(void **state)
{
    (void)state;
    static const double rs[] = {1.5, 2.0, 2.5, 3.0, 4.0, 5.0};
    enum { NW = 6, NS = 30 };
    const double alpha = 2.5, a_true = 9.0, b_true = 0.5;
    double t[NW][NS], xd[NW][NS], xb[NW][NS];
    stagecal_evidence ev[NW];
    stagecal_vle *vle = stagecal_vle_alloc_alpha(alpha, NULL);
    double worst_means = 0;
    for (size_t w = 0; w < NW; w++) {
        double n = law(a_true, b_true, rs[w]);
        for (size_t j = 0; j < NS; j++) {
            t[w][j] = 600.0 * (double)j;
            xb[w][j] = 0.60 - 0.30 * (double)j / (NS - 1); /* strong drift in one window */
            xd[w][j] = smoker_xd(alpha, rs[w], xb[w][j], n);
        }
        stagecal_evidence *e = &ev[w];
        memset(e, 0, sizeof *e);
        e->r = rs[w];
        assert_int_equal(
            stagecal_evidence_mean(t[w], xd[w], NS, 0.002, &e->xd, &e->u_xd, NULL, NULL),
            STAGECAL_OK);
        assert_int_equal(
            stagecal_evidence_mean(t[w], xb[w], NS, 0.003, &e->xb, &e->u_xb, NULL, NULL),
            STAGECAL_OK);
        /* the means alone */
        assert_int_equal(stagecal_evidence_stages(vle, 1.0, e, NULL), STAGECAL_OK);
        assert_true(e->stages_ok);
        worst_means = fmax(worst_means, fabs(e->stages - n) / n);
        /* with the samples */
        e->m = NS;
        e->s_t = t[w];
        e->s_xd = xd[w];
        e->s_xb = xb[w];
        assert_int_equal(stagecal_evidence_stages(vle, 1.0, e, NULL), STAGECAL_OK);
        /* the straight-line trend leaves the trajectory's curvature: 1 % (measured 0.3 %) */
        assert_rel(e->stages, n, 1e-2, "window stages following the drift");
    }
    print_message("inverting plain means: worst relative bias %.3g\n", worst_means);
    assert_true(worst_means > 0.01);

    stagecal_form form;
    stagecal_regress_result fc;
    const double theta0[2] = {8.0, 0.7};
    assert_int_equal(stagecal_form_parse("saturating", &form, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_fit_composition(vle, 1.0, ev, NW, &form, theta0, NULL, &fc, NULL),
                     STAGECAL_OK);
    /* noise-free samples predicted one by one: exact up to the solver's tolerance and the
     * finite-difference Jacobian (1e-6 relative) */
    assert_rel(fc.theta[0], a_true, 1e-6, "composition fit a, drifting pot");
    assert_rel(fc.theta[1], b_true, 1e-6, "composition fit b, drifting pot");
    stagecal_regress_result_free(&fc);
    stagecal_vle_free(vle);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(calibrate_evidence_se_matches_ar1),
        cmocka_unit_test(calibrate_evidence_needs_three),
        cmocka_unit_test(calibrate_intervals_cover_truth),
        cmocka_unit_test(calibrate_follows_drifting_pot),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
