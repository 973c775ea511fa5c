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

#include "synth_calibration.h"
#include "testutil.h"

#include "stagecal/calibrate.h"
#include "stagecal/stages.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
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
        synth_ar1(rng, y, N, sigma, rho);
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
    double truth = sqrt(synth_ar1_var_mean(sigma, rho, N));
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

/* ---- synthetic calibrations (tests/synth_calibration.h) ----------------------------- */

/* Over 200 seeded synthetic calibrations from a known law with autocorrelated
 * analyser noise, the 95 % intervals of the parameters and of the confidence band
 * at three conditions contain the truth between 90 % and 99 % of the time, for
 * both fits. (Binomial sd of a 95 % rate over 200 trials is 1.5 %: the window
 * [90 %, 99 %] is about ±3 sd; the bound is the issue's. tests/tool_coverage.c runs
 * the same study over thousands of data sets, docs/calibration.md §5.) */
static void calibrate_intervals_cover_truth(void **state)
{
    (void)state;
    enum { REPS = 200 };
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 7);
    stagecal_vle *vle = stagecal_vle_alloc_alpha(SYNTH_ALPHA, NULL);
    stagecal_form form;
    assert_int_equal(stagecal_form_parse("saturating", &form, NULL), STAGECAL_OK);
    int hs[SYNTH_NQ] = {0}, hc[SYNTH_NQ] = {0}, ns = 0, nc = 0;
    for (int rep = 0; rep < REPS; rep++) {
        struct synth_fit fs, fc;
        assert_int_equal(synth_one(rng, vle, &form, SYNTH_SE_ESTIMATED, &fs, &fc), 0);
        ns += fs.ok;
        nc += fc.ok;
        for (int q = 0; q < SYNTH_NQ; q++) {
            hs[q] += fs.ok && synth_covers(&fs, q);
            hc[q] += fc.ok && synth_covers(&fc, q);
        }
    }
    print_message("coverage over %d data sets (stage space: %d fits, composition space: %d):\n",
                  REPS, ns, nc);
    for (int q = 0; q < SYNTH_NQ; q++)
        print_message("  %-11s stage space %.3f   composition space %.3f\n", synth_what[q],
                      (double)hs[q] / ns, (double)hc[q] / nc);
    assert_true(ns >= REPS * 0.98);
    assert_true(nc >= REPS * 0.98);
    for (int q = 0; q < SYNTH_NQ; q++) {
        double fs = (double)hs[q] / ns, fc = (double)hc[q] / nc;
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
        if (oracle_smoker_xb(alpha, r, mid, n) > xb)
            hi = mid;
        else
            lo = mid;
    }
    return 0.5 * (lo + hi);
}

/* Pooling: the ρ of each analyser becomes the lag-pair-weighted mean, and each standard
 * error is rescaled from s/√n_eff(ρ_own) to s/√n_eff(ρ_pooled) with the AR(1) n_eff =
 * m(1 − ρ)/(1 + ρ) (Wilks 2011, eq. 5.12 — from memory). Windows: m = 41 and 21 (40 and 20
 * lag pairs), ρ = 0.1 and 0.7 → pooled (40·0.1 + 20·0.7)/60 = 0.3. Exact arithmetic, so
 * 1e-12 relative. A window without samples (m = 0) is left alone. */
static void calibrate_pool_rho_rescales(void **state)
{
    (void)state;
    stagecal_evidence ev[3];
    memset(ev, 0, sizeof ev);
    ev[0].m_xd = ev[0].m_xb = 41, ev[0].rho_xd = ev[0].rho_xb = 0.1;
    ev[1].m_xd = ev[1].m_xb = 21, ev[1].rho_xd = ev[1].rho_xb = 0.7;
    ev[2].m_xd = 0, ev[2].m_xb = 0, ev[2].rho_xd = ev[2].rho_xb = 0.9;
    for (int k = 0; k < 3; k++)
        ev[k].u_xd = 0.001 * (k + 1), ev[k].u_xb = 0.002 * (k + 1);
    stagecal_evidence_pool_rho(ev, 3);
    const double pooled = (40 * 0.1 + 20 * 0.7) / 60.0;
    double n0 = 41 * (1 - 0.1) / 1.1, n0p = 41 * (1 - pooled) / (1 + pooled);
    double n1 = 21 * (1 - 0.7) / 1.7, n1p = 21 * (1 - pooled) / (1 + pooled);
    assert_rel(ev[0].rho_xd, pooled, 1e-12, "pooled rho, xD");
    assert_rel(ev[1].rho_xb, pooled, 1e-12, "pooled rho, xB");
    assert_rel(ev[0].u_xd, 0.001 * sqrt(n0 / n0p), 1e-12, "u_xd window 0");
    assert_rel(ev[1].u_xd, 0.002 * sqrt(n1 / n1p), 1e-12, "u_xd window 1");
    assert_rel(ev[0].u_xb, 0.002 * sqrt(n0 / n0p), 1e-12, "u_xb window 0");
    assert_rel(ev[2].rho_xd, 0.9, 0, "no samples: untouched");
    assert_rel(ev[2].u_xd, 0.003, 0, "no samples: untouched");
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
        double n = synth_law(a_true, b_true, rs[w]);
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
        cmocka_unit_test(calibrate_pool_rho_rescales),
        cmocka_unit_test(calibrate_intervals_cover_truth),
        cmocka_unit_test(calibrate_follows_drifting_pot),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
