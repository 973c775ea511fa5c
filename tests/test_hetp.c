/*
 * test_hetp.c — HETP with its interval, Welch comparisons, design and rule-of-thumb
 * checks, tray efficiency.
 *
 * Sources of truth: closed forms (HETP = H/N, the t interval mapped through a
 * monotone function), scipy.stats (t quantiles and Welch's test via
 * ttest_ind_from_stats, run as STAGECAL_PYTHON), rule-of-thumb examples of Kister 1992,
 * "Distillation Design", ch. 11, after Harrison & France 1989 (from memory) (from memory there),
 * and seeded simulations whose expected rates follow from the test's design (size = 1 − level,
 * power from the normal approximation).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "testutil.h"
#include "stagecal/hetp.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

static void hetp_point_and_interval_match_scipy(void **state)
{
    (void)state;
    /* H = 3.75 m over 7.5 column stages, se 0.42, 11 dof. */
    stagecal_hetp_stages s = {7.5, 0.42, 11, 0};
    stagecal_hetp_result r;
    assert_int_equal(stagecal_hetp_compute(3.75, &s, 0.95, &r, NULL), STAGECAL_OK);
    double want[3];
    testutil_python_numbers("hetp_oracle.py",
                            "from scipy.stats import t\n"
                            "q=t.ppf(0.975,11)\n"
                            "print('%.17g %.17g %.17g'%(q,3.75/(7.5+q*0.42),3.75/(7.5-q*0.42)))\n",
                            want, 3);
    /* Closed form H/N; delta se H·se/N² (both exact arithmetic, 1e-15 relative). */
    assert_rel(r.hetp_m, 0.5, 1e-15, "hetp = H/N");
    assert_rel(r.se_m, 3.75 * 0.42 / 56.25, 1e-15, "delta-method se");
    /* GSL's gsl_cdf_tdist_Pinv vs scipy's t.ppf: measured 4e-12 relative apart at
     * 11 dof (GSL refines its inverse by a few Newton steps); 1e-10 leaves margin. */
    assert_rel(r.t, want[0], 1e-10, "t quantile vs scipy.stats.t.ppf");
    assert_rel(r.low_m, want[1], 1e-10, "low end vs scipy-based H/(N + t se)");
    assert_rel(r.high_m, want[2], 1e-10, "high end vs scipy-based H/(N - t se)");
    assert_int_equal(r.unbounded, 0);

    /* An interval of N that reaches 0 leaves HETP unbounded above (flagged). */
    stagecal_hetp_stages weak = {1.0, 0.9, 3, 0};
    assert_int_equal(stagecal_hetp_compute(2.0, &weak, 0.95, &r, NULL), STAGECAL_OK);
    assert_int_equal(r.unbounded, 1);
    assert_true(isinf(r.high_m));
    assert_true(isfinite(r.low_m) && r.low_m > 0);
}

/* One simulated fit: n windows of column stages ~ N(n_true, sd); the mean, its se
 * and n − 1 dof (a constant-form fit). */
static stagecal_hetp_stages simulate_fit(gsl_rng *rng, double n_true, double sd, size_t n)
{
    double s = 0, ss = 0;
    for (size_t i = 0; i < n; i++) {
        double v = n_true + gsl_ran_gaussian(rng, sd);
        s += v;
        ss += v * v;
    }
    double mean = s / (double)n;
    double var = (ss - (double)n * mean * mean) / (double)(n - 1);
    stagecal_hetp_stages out = {mean, sqrt(var / (double)n), (double)(n - 1), 0};
    return out;
}

static void hetp_interval_coverage_near_nominal(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261201);
    const size_t reps = 4000;
    size_t hit = 0;
    const double h = 4.2, n_true = 8.4; /* true HETP 0.5 m */
    for (size_t k = 0; k < reps; k++) {
        stagecal_hetp_stages s = simulate_fit(rng, n_true, 0.9, 8);
        stagecal_hetp_result r;
        assert_int_equal(stagecal_hetp_compute(h, &s, 0.95, &r, NULL), STAGECAL_OK);
        hit += r.low_m <= h / n_true && h / n_true <= r.high_m;
    }
    /* The endpoint-mapped t interval is exact for normal windows (monotone map of an
     * exact interval): coverage 0.95; binomial sd sqrt(.95·.05/4000) = 0.0034, so
     * 0.015 is about 4.4 sd. */
    print_message("HETP interval coverage %.4f\n", (double)hit / (double)reps);
    assert_abs((double)hit / (double)reps, 0.95, 0.015, "HETP interval coverage");
    gsl_rng_free(rng);
}

static void hetp_welch_matches_scipy(void **state)
{
    (void)state;
    /* a: 0.512 ± 0.021 (9 dof), b: 0.587 ± 0.034 (14 dof). scipy's Welch test takes
     * sample sd and n: sd = se·sqrt(n), n = dof + 1. */
    stagecal_hetp_diff d;
    assert_int_equal(stagecal_hetp_welch(0.512, 0.021, 9, 0.587, 0.034, 14, 0.95, &d, NULL),
                     STAGECAL_OK);
    double want[4];
    testutil_python_numbers(
        "hetp_oracle.py",
        "from scipy.stats import ttest_ind_from_stats, t\n"
        "from math import sqrt\n"
        "r=ttest_ind_from_stats(0.587,0.034*sqrt(15),15,0.512,0.021*sqrt(10),10,"
        "equal_var=False)\n"
        "va,vb=0.021**2,0.034**2\n"
        "nu=(va+vb)**2/(va**2/9+vb**2/14)\n"
        "print('%.17g %.17g %.17g %.17g'%(r.statistic,r.pvalue,nu,"
        "t.ppf(0.975,nu)))\n",
        want, 4);
    /* scipy computes the same statistic from sd and n (1e-12: rounding only); its p
     * value uses the Welch–Satterthwaite dof — matching it checks our dof. */
    assert_rel(d.t_stat, want[0], 1e-12, "Welch t vs scipy ttest_ind_from_stats");
    assert_rel(d.p_value, want[1], 1e-10, "Welch p vs scipy ttest_ind_from_stats");
    assert_rel(d.dof, want[2], 1e-12, "Satterthwaite dof (Satterthwaite 1946)");
    /* t quantiles: GSL vs scipy agree to ~1e-11 (see above), hence 1e-10. */
    assert_rel(d.t_crit, want[3], 1e-10, "t quantile at the Satterthwaite dof vs scipy");
    assert_rel(d.diff, 0.075, 1e-12, "difference b - a");
    assert_rel(d.low, 0.075 - want[3] * sqrt(0.021 * 0.021 + 0.034 * 0.034), 1e-10, "low end");
    assert_int_equal(d.significant, d.p_value < 0.05);
}

/* Before/after repack with HETP from delta-method se and a Welch test at 95 %. */
static int repack_differs(gsl_rng *rng, double n_before, double n_after)
{
    const double h = 5.0, sd = 0.8;
    const size_t windows = 12;
    stagecal_hetp_stages a = simulate_fit(rng, n_before, sd, windows);
    stagecal_hetp_stages b = simulate_fit(rng, n_after, sd, windows);
    stagecal_hetp_result ra, rb;
    stagecal_hetp_diff d;
    assert_int_equal(stagecal_hetp_compute(h, &a, 0.95, &ra, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_hetp_compute(h, &b, 0.95, &rb, NULL), STAGECAL_OK);
    assert_int_equal(
        stagecal_hetp_welch(ra.hetp_m, ra.se_m, a.dof, rb.hetp_m, rb.se_m, b.dof, 0.95, &d, NULL),
        STAGECAL_OK);
    return d.significant;
}

static void hetp_repack_no_change_not_significant(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 424242);
    const size_t reps = 2000;
    size_t sig = 0;
    for (size_t k = 0; k < reps; k++)
        sig += repack_differs(rng, 10.0, 10.0);
    double rate = (double)sig / (double)reps;
    /* Truth: no change. The issue asks for "no significant difference" in >= 90 % of
     * repeats; the design size is 5 % (delta method + Welch, approximately). Also
     * bound it below so the test cannot pass by never rejecting: 0.02..0.08 is the
     * nominal 0.05 ± 6 binomial sd (sd = 0.0049 at n = 2000). */
    print_message("no change: significant in %.4f of repeats\n", rate);
    assert_true(1.0 - rate >= 0.90);
    assert_abs(rate, 0.05, 0.03, "false-difference rate at 95 % (nominal 0.05)");
    gsl_rng_free(rng);
}

static void hetp_repack_20pct_loss_detected(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 777);
    const size_t reps = 2000;
    size_t sig = 0;
    /* A 20 % HETP loss: 10 column stages become 10/1.2 = 8.333 over the same height.
     * HETP 0.5 → 0.6 m; se ≈ 5·0.231/N² gives 0.0115 and 0.0166 m, so the shift is
     * 0.1/0.0202 ≈ 5 se and the normal-approximation power at 95 % is
     * Φ(4.95 − 1.96 − small-dof penalty) ≈ 0.99 (common practice, no source, for the
     * rough power figure). Detected in >= 97 % of repeats. */
    for (size_t k = 0; k < reps; k++)
        sig += repack_differs(rng, 10.0, 10.0 / 1.2);
    print_message("20 %% HETP loss: detected in %.4f of repeats\n", (double)sig / (double)reps);
    assert_true((double)sig / (double)reps >= 0.97);
    gsl_rng_free(rng);
}

static void hetp_design_and_rule_checks(void **state)
{
    (void)state;
    stagecal_hetp_rule rule;
    /* Examples of the rule (Kister 1992, from memory): a_p 250 → 0.5 m, 350 →
     * 0.3857142857 m; 25 mm → 0.45 m, 50 mm → 0.9 m. Exact arithmetic: 1e-10. */
    assert_int_equal(stagecal_hetp_rule_of_thumb(STAGECAL_PACKING_STRUCTURED, 250, &rule, NULL),
                     STAGECAL_OK);
    assert_rel(rule.hetp_m, 0.5, 1e-10, "structured a_p = 250");
    assert_rel(rule.low_m, 0.35, 1e-10, "structured band low (-30 %, common practice)");
    assert_int_equal(stagecal_hetp_rule_of_thumb(STAGECAL_PACKING_STRUCTURED, 350, &rule, NULL),
                     STAGECAL_OK);
    assert_rel(rule.hetp_m, 0.3857142857, 1e-10, "structured a_p = 350");
    assert_int_equal(stagecal_hetp_rule_of_thumb(STAGECAL_PACKING_RANDOM, 0.025, &rule, NULL),
                     STAGECAL_OK);
    assert_rel(rule.hetp_m, 0.45, 1e-10, "random 25 mm");
    assert_int_equal(stagecal_hetp_rule_of_thumb(STAGECAL_PACKING_RANDOM, 0.05, &rule, NULL),
                     STAGECAL_OK);
    assert_rel(rule.hetp_m, 0.9, 1e-10, "random 50 mm");

    /* Measured 0.5 m [0.45, 0.56] against designs and the 50 mm random range
     * [0.63, 1.17]: the verdicts follow from the interval's position. */
    stagecal_hetp_result r = {0.5, 0.025, 0.95, 2.2, 0.45, 0.56, 0, 0};
    stagecal_hetp_design_check dc;
    assert_int_equal(stagecal_hetp_vs_design(&r, 0.52, &dc, NULL), STAGECAL_OK);
    assert_int_equal(dc.verdict, STAGECAL_HETP_CONSISTENT);
    assert_rel(dc.ratio, 0.5 / 0.52, 1e-15, "ratio to design");
    assert_int_equal(stagecal_hetp_vs_design(&r, 0.40, &dc, NULL), STAGECAL_OK);
    assert_int_equal(dc.verdict, STAGECAL_HETP_WORSE);
    assert_int_equal(stagecal_hetp_vs_design(&r, 0.60, &dc, NULL), STAGECAL_OK);
    assert_int_equal(dc.verdict, STAGECAL_HETP_BETTER);
    assert_int_equal(stagecal_hetp_vs_rule(&r, &rule), STAGECAL_HETP_BETTER);
    assert_string_equal(stagecal_hetp_verdict_name(STAGECAL_HETP_WORSE), "worse");
    stagecal_packing_kind k;
    assert_int_equal(stagecal_packing_kind_parse("random", &k), 0);
    assert_int_equal(k, STAGECAL_PACKING_RANDOM);
    assert_int_equal(stagecal_packing_kind_parse("rings", &k), -1);
}

static void hetp_tray_efficiency(void **state)
{
    (void)state;
    /* 14.3 column stages on 22 trays: E_O = 0.65 (definition; common practice, no source). */
    stagecal_hetp_stages s = {14.3, 0.55, 20, 0};
    stagecal_hetp_tray t;
    assert_int_equal(stagecal_hetp_tray_efficiency(&s, 22, 0.90, &t, NULL), STAGECAL_OK);
    assert_rel(t.efficiency, 0.65, 1e-15, "E_O = N/trays");
    assert_rel(t.se, 0.025, 1e-15, "se/trays");
    /* t(0.95, 20) = 1.7247182429207857 (scipy.stats.t.ppf, printed once; the tabulated
     * value is 1.725). 1e-10: GSL vs scipy quantiles, as above. */
    assert_rel(t.t, 1.7247182429207857, 1e-10, "t quantile");
    assert_rel(t.high - t.low, 2 * 1.7247182429207857 * 0.025, 1e-10, "interval width");
}

static void hetp_rejects_bad_arguments(void **state)
{
    (void)state;
    stagecal_error e;
    stagecal_hetp_result r;
    stagecal_hetp_stages good = {7.5, 0.4, 10, 0}, bad_n = {0, 0.4, 10, 0},
                         bad_se = {7.5, -1, 10, 0}, bad_dof = {7.5, 0.4, 0, 0};
    assert_int_equal(stagecal_hetp_compute(0, &good, 0.95, &r, &e), STAGECAL_EINVAL);
    assert_string_equal(e.text, "packed height 0 m is not positive (expected the bed height in m)");
    assert_int_equal(stagecal_hetp_compute(3, &bad_n, 0.95, &r, &e), STAGECAL_EINVAL);
    assert_int_equal(stagecal_hetp_compute(3, &bad_se, 0.95, &r, &e), STAGECAL_EINVAL);
    assert_int_equal(stagecal_hetp_compute(3, &bad_dof, 0.95, &r, &e), STAGECAL_EINVAL);
    assert_int_equal(stagecal_hetp_compute(3, &good, 1.0, &r, &e), STAGECAL_EINVAL);
    assert_string_equal(e.text, "confidence level 1 is outside (0, 1) (expected e.g. 0.95)");
    stagecal_hetp_diff d;
    assert_int_equal(stagecal_hetp_welch(0, 0.1, 5, 1, 0.1, 5, 0.95, &d, &e), STAGECAL_EINVAL);
    assert_int_equal(stagecal_hetp_welch(1, 0, 5, 1, 0, 5, 0.95, &d, &e), STAGECAL_EINVAL);
    assert_int_equal(stagecal_hetp_welch(1, 0.1, -5, 1, 0.1, 5, 0.95, &d, &e), STAGECAL_EINVAL);
    stagecal_hetp_design_check dc;
    assert_int_equal(stagecal_hetp_vs_design(&r, -0.5, &dc, &e), STAGECAL_EINVAL);
    stagecal_hetp_rule rule;
    assert_int_equal(stagecal_hetp_rule_of_thumb(STAGECAL_PACKING_STRUCTURED, 20, &rule, &e),
                     STAGECAL_EINVAL);
    assert_int_equal(stagecal_hetp_rule_of_thumb(STAGECAL_PACKING_RANDOM, 25, &rule, &e),
                     STAGECAL_EINVAL);
    assert_string_equal(e.text, "nominal packing size 25 m is outside [0.006, 0.1] (expected "
                                "d_p in m)");
    stagecal_hetp_tray t;
    assert_int_equal(stagecal_hetp_tray_efficiency(&good, 0, 0.95, &t, &e), STAGECAL_EINVAL);
}

/* TOST against the design figure: p values and the 90 % ratio interval against
 * scipy.stats.t (sf and ppf at 4 dof) applied to the margin mapped into column stages,
 * n_lo = H/(D·1.1), n_hi = H·1.1/D. Tolerance 1e-10 relative for p (GSL t CDF), 1e-9 for the
 * interval (GSL t quantile). */
static void hetp_equiv_design_matches_scipy(void **state)
{
    (void)state;
    stagecal_hetp_stages s = {7.3, 0.12, 4, 0};
    stagecal_hetp_equiv e;
    assert_int_equal(stagecal_hetp_equiv_design(4.5, &s, 0.6, 0.10, 0.05, &e, NULL), 0);
    assert_rel(e.p_worse, 0.007964171041749152, 1e-10, "p of H0 worse (scipy)");
    assert_rel(e.p_better, 0.0006888296654063015, 1e-10, "p of H0 better (scipy)");
    assert_rel(e.low, 0.9926121053918617, 1e-9, "ratio low (scipy; GSL t quantile to ~1e-10)");
    assert_rel(e.high, 1.064708982193122, 1e-9, "ratio high (scipy; GSL t quantile to ~1e-10)");
    assert_int_equal(e.verdict, STAGECAL_EQUIV_EQUIVALENT);
    assert_non_null(strstr(e.text, "as good as the design figure"));
    /* too thin: 1 dof; one-sided: N − t·se ≤ 0 */
    stagecal_hetp_stages thin1 = {7.3, 0.12, 1, 0}, open = {1.0, 2.0, 5, 0};
    assert_int_equal(stagecal_hetp_equiv_design(4.5, &thin1, 0.6, 0.10, 0.05, &e, NULL), 0);
    assert_int_equal(e.verdict, STAGECAL_EQUIV_NOT_DETERMINED);
    assert_non_null(strstr(e.text, "fewer than 2 degrees"));
    assert_true(isnan(e.low) && isnan(e.high));
    assert_int_equal(stagecal_hetp_equiv_design(4.5, &open, 0.6, 0.10, 0.05, &e, NULL), 0);
    assert_int_equal(e.verdict, STAGECAL_EQUIV_NOT_DETERMINED);
    assert_non_null(strstr(e.text, "from below only"));
    /* a bed clearly worse than design by more than the margin */
    stagecal_hetp_stages bad = {5.5, 0.1, 10, 0};
    assert_int_equal(stagecal_hetp_equiv_design(4.5, &bad, 0.6, 0.10, 0.05, &e, NULL), 0);
    assert_int_equal(e.verdict, STAGECAL_EQUIV_WORSE);
    assert_int_equal(stagecal_hetp_equiv_design(4.5, &s, 0.6, 0, 0.05, &e, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_hetp_equiv_design(4.5, &s, 0.6, 0.1, 0.5, &e, NULL), STAGECAL_EINVAL);
}

/* TOST old bed vs new bed on the log scale with Welch–Satterthwaite dof: numbers from
 * scipy.stats.t (cdf, sf) on the same formulas; tolerance 1e-10 relative. */
static void hetp_equiv_pair_matches_scipy(void **state)
{
    (void)state;
    stagecal_hetp_stages a = {7.5, 0.1, 3, 0}, b = {7.2, 0.15, 5, 0};
    stagecal_hetp_equiv e;
    assert_int_equal(stagecal_hetp_equiv_pair(4.5, &a, 4.5, &b, 0.10, 0.05, &e, NULL), 0);
    assert_rel(e.dof, 7.763913294277302, 1e-12, "Satterthwaite dof (scipy)");
    assert_rel(e.p_worse, 0.029865411609688385, 1e-10, "p of H0 worse (scipy)");
    assert_rel(e.p_better, 0.00031681483918592746, 1e-10, "p of H0 better (scipy)");
    assert_int_equal(e.verdict, STAGECAL_EQUIV_EQUIVALENT);
    assert_non_null(strstr(e.text, "as good as the old bed"));
    stagecal_hetp_stages thin1 = {7.2, 0.15, 1.5, 0};
    assert_int_equal(stagecal_hetp_equiv_pair(4.5, &a, 4.5, &thin1, 0.10, 0.05, &e, NULL), 0);
    assert_int_equal(e.verdict, STAGECAL_EQUIV_NOT_DETERMINED);
}

/* Type I error of the design TOST at the margin: estimates drawn from their exact law
 * (N̂ normal, se² = σ²·χ²_ν/ν, ν = 3, the demo's one-month fits) with the true HETP at
 * design·1.1; 20 000 draws. The test is exact there, so the rate is 0.05 − (the other
 * side's tiny share); it must not exceed 0.05 + 3 binomial sd (0.0046). */
static void hetp_equiv_type1_at_margin(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 21);
    const double H = 4.5, D = 0.6, sigma = 0.12, nu = 3;
    const double n_true = H / (D * 1.1);
    int reps = 20000, eq = 0;
    for (int i = 0; i < reps; i++) {
        stagecal_hetp_stages s = {n_true + gsl_ran_gaussian(rng, sigma),
                                  sigma * sqrt(gsl_ran_chisq(rng, nu) / nu), nu, 0};
        stagecal_hetp_equiv e;
        assert_int_equal(stagecal_hetp_equiv_design(H, &s, D, 0.10, 0.05, &e, NULL), 0);
        eq += e.verdict == STAGECAL_EQUIV_EQUIVALENT;
    }
    gsl_rng_free(rng);
    double rate = (double)eq / reps;
    print_message("TOST type I at the margin: %.4f\n", rate);
    assert_true(rate <= 0.05 + 3 * sqrt(0.05 * 0.95 / reps));
    assert_true(rate >= 0.03); /* not vacuous: the test does reject near its level */
}

/* The honesty rule for printing: dof < 2 or an HETP unbounded above is not printed as a
 * two-sided interval (the demo's "(0.000-inf)" came from a one-dof fit). */
static void hetp_undetermined_rule(void **state)
{
    (void)state;
    stagecal_hetp_stages one = {7.0, 0.5, 1, 0}, open = {1.0, 2.0, 5, 0}, good = {7.0, 0.1, 6, 0};
    stagecal_hetp_result r;
    assert_int_equal(stagecal_hetp_compute(4.5, &one, 0.95, &r, NULL), 0);
    assert_non_null(strstr(stagecal_hetp_undetermined(&one, &r), "fewer than 2"));
    assert_int_equal(stagecal_hetp_compute(4.5, &open, 0.95, &r, NULL), 0);
    assert_non_null(strstr(stagecal_hetp_undetermined(&open, &r), "not bounded above"));
    assert_int_equal(stagecal_hetp_compute(4.5, &good, 0.95, &r, NULL), 0);
    assert_null(stagecal_hetp_undetermined(&good, &r));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(hetp_point_and_interval_match_scipy),
        cmocka_unit_test(hetp_interval_coverage_near_nominal),
        cmocka_unit_test(hetp_welch_matches_scipy),
        cmocka_unit_test(hetp_repack_no_change_not_significant),
        cmocka_unit_test(hetp_repack_20pct_loss_detected),
        cmocka_unit_test(hetp_design_and_rule_checks),
        cmocka_unit_test(hetp_tray_efficiency),
        cmocka_unit_test(hetp_rejects_bad_arguments),
        cmocka_unit_test(hetp_equiv_design_matches_scipy),
        cmocka_unit_test(hetp_equiv_pair_matches_scipy),
        cmocka_unit_test(hetp_equiv_type1_at_margin),
        cmocka_unit_test(hetp_undetermined_rule),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
