/*
 * test_chart.c — self-starting EWMA/CUSUM charts on Q statistics and the CUSUM's
 * Markov-chain run lengths (include/stagecal/chart.h).
 *
 * Sources of truth: Siegmund's closed-form approximation of the one-sided CUSUM ARL,
 * ARL ≈ (exp(−2Δb) + 2Δb − 1)/(2Δ²), Δ = μ − k, b = h + 1.166 (Siegmund 1985,
 * Sequential Analysis, Springer, ch. X; from memory), accurate to about 1 % at h = 5;
 * the exact N(0, 1) law of Q statistics for normal data (Quesenberry 1991), checked by
 * simulation at the smallest dof (1); a small run-length simulation of the whole chart
 * (the full study is tests/tool_chart.c, figures in docs/hetp-trend.md §6).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "testutil.h"
#include "stagecal/chart.h"
#include "stagecal/plot.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

static double siegmund(double mu, double k, double h)
{
    double d = mu - k, b = h + 1.166;
    if (fabs(d) < 1e-9)
        return b * b; /* the limit Δ → 0 */
    return (exp(-2 * d * b) + 2 * d * b - 1) / (2 * d * d);
}

/* Two-sided ARL = 1/(1/ARL+ + 1/ARL−); tolerance 2 % (the approximation's ~1 % plus the
 * chain's discretisation at 201 states). */
static void test_cusum_arl_siegmund(void **state)
{
    (void)state;
    const double shifts[] = {0, 0.5, 1};
    for (size_t i = 0; i < 3; i++) {
        double mu = shifts[i], arl;
        double want = 1 / (1 / siegmund(mu, 0.5, 5) + 1 / siegmund(-mu, 0.5, 5));
        assert_int_equal(stagecal_chart_cusum_arl(0.5, 5, mu, 201, &arl, NULL), 0);
        assert_rel(arl, want, 0.02, "two-sided CUSUM ARL (Siegmund)");
    }
    /* at 2σ Siegmund's approximation is 3 % low; the tabulated two-sided ARL of k = 0.5,
     * h = 5 at a 2σ shift is 4.01 (Montgomery, Introduction to Statistical Quality
     * Control, CUSUM ARL table; from memory), tolerance 1 % */
    double arl2;
    assert_int_equal(stagecal_chart_cusum_arl(0.5, 5, 2, 201, &arl2, NULL), 0);
    assert_rel(arl2, 4.01, 0.01, "two-sided CUSUM ARL at 2 sigma (table)");
    assert_int_equal(stagecal_chart_cusum_arl(0.5, 5, 0, 10, &arl2, NULL), STAGECAL_EINVAL);
}

/* The third point's Q (t with 1 dof transformed) is N(0, 1) whatever μ and φ: its upper
 * 5 % tail holds 0.05 of 40 000 sequences (binomial sd 0.0011, tolerance 0.005), and
 * the 20th point's Q has mean 0 and variance 1 (tolerances 4.5 sd of the estimates). */
static void test_q_exact(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 3);
    stagecal_trend_point p[20];
    stagecal_chart_point c[20];
    stagecal_chart_params par = stagecal_chart_default_params();
    const int reps = 40000;
    int tail = 0;
    double s1 = 0, s2 = 0;
    for (int r = 0; r < reps; r++) {
        for (int i = 0; i < 20; i++) {
            double se = 0.1 + 0.3 * gsl_rng_uniform(rng);
            p[i] = (stagecal_trend_point){i, 8 + gsl_ran_gaussian(rng, 1.7 * se), se};
        }
        assert_int_equal(stagecal_chart_selfstart(p, 20, &par, c, NULL, NULL), 0);
        assert_false(c[1].started);
        assert_true(c[2].started);
        tail += c[2].q > 1.6448536269514722; /* scipy.stats.norm.ppf(0.95) */
        s1 += c[19].q;
        s2 += c[19].q * c[19].q;
    }
    gsl_rng_free(rng);
    double m = s1 / reps, v = s2 / reps - m * m;
    assert_abs((double)tail / reps, 0.05, 0.005, "P(Q3 > z95)");
    assert_abs(m, 0.0, 4.5 / sqrt(reps), "mean of Q20");
    assert_abs(v, 1.0, 4.5 * sqrt(2.0 / reps), "variance of Q20");
}

/* In-control ARL of the self-starting EWMA with unknown μ and φ: 300 sequences, within
 * 20 % of the chain's 500 (the simulated mean has sd ≈ 29, 6 %). */
static void test_arl0_small(void **state)
{
    (void)state;
    static stagecal_trend_point p[6000];
    static stagecal_chart_point c[6000];
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 5);
    stagecal_chart_params par = stagecal_chart_default_params();
    const int reps = 300;
    double sum = 0;
    for (int r = 0; r < reps; r++) {
        for (int i = 0; i < 6000; i++) {
            double se = 0.1 + 0.3 * gsl_rng_uniform(rng);
            p[i] = (stagecal_trend_point){i, 5 + gsl_ran_gaussian(rng, 0.6 * se), se};
        }
        assert_int_equal(stagecal_chart_selfstart(p, 6000, &par, c, NULL, NULL), 0);
        int i = 2;
        while (i < 6000 && !c[i].ewma_alarm)
            i++;
        sum += i - 1;
    }
    gsl_rng_free(rng);
    double design;
    stagecal_trend_ewma_params ew = stagecal_trend_ewma_default_params();
    assert_int_equal(stagecal_trend_ewma_arl(&ew, 0, 201, &design, NULL), 0);
    print_message("self-starting EWMA ARL0 %.0f (design %.0f)\n", sum / reps, design);
    assert_rel(sum / reps, design, 0.20, "in-control ARL, estimated parameters");
}

/* A planted 3σ loss after 15 points alarms (loss side) within a few points. */
static void test_loss_detected(void **state)
{
    (void)state;
    stagecal_trend_point p[30];
    stagecal_chart_point c[30];
    size_t na;
    for (int i = 0; i < 30; i++) {
        double wiggle = ((i * 7) % 5 - 2) * 0.05; /* deterministic ±0.1 scatter */
        p[i] = (stagecal_trend_point){i, 8 + wiggle - (i >= 15 ? 0.6 : 0), 0.1};
    }
    stagecal_chart_params par = stagecal_chart_default_params();
    assert_int_equal(stagecal_chart_selfstart(p, 30, &par, c, &na, NULL), 0);
    int first = -1;
    for (int i = 0; i < 30 && first < 0; i++)
        if (c[i].cusum_alarm || c[i].ewma_alarm)
            first = i;
    assert_true(first >= 15 && first <= 18);
    assert_true(c[first].cusum_alarm == -1 || c[first].ewma_alarm == -1);
    p[3].se = 0;
    assert_int_equal(stagecal_chart_selfstart(p, 30, &par, c, &na, NULL), STAGECAL_EINVAL);
}

/* The chart drawn from a self-starting run (stagecal_plot_selfstart) holds the chart's own
 * numbers: the EWMA panel's line is out[i].ewma (not drawn for the two start-up points),
 * the CUSUMs are cusum_hi and −cusum_lo, the EWMA limits are the asymptotic
 * ±L·sqrt(λ/(2 − λ)) = ±2.962·sqrt(0.2/1.8) = ±0.98733 of the design (Lucas & Saccucci
 * 1990), the CUSUM limits ±h = ±5, and the rings are the alarmed runs. */
static void test_plot_holds_the_chart(void **state)
{
    (void)state;
    stagecal_trend_point p[30];
    stagecal_chart_point c[30];
    size_t na;
    for (int i = 0; i < 30; i++) {
        double wiggle = ((i * 7) % 5 - 2) * 0.05;
        p[i] = (stagecal_trend_point){1.7e9 + 86400.0 * i, 8 + wiggle - (i >= 15 ? 0.6 : 0), 0.1};
    }
    stagecal_chart_params par = stagecal_chart_default_params();
    assert_int_equal(stagecal_chart_selfstart(p, 30, &par, c, &na, NULL), 0);
    assert_true(na > 0);
    stagecal_plot_selfstart_data d = {p, c, 30, par, NULL, NULL};
    stagecal_plot_chart *ch = NULL;
    stagecal_error err;
    assert_int_equal(stagecal_plot_selfstart(&d, &ch, &err), STAGECAL_OK);
    assert_int_equal(ch->n_panels, 3);
    const stagecal_plot_panel *ew = &ch->panels[1], *cu = &ch->panels[2];
    const stagecal_plot_series *lim = &ew->series[0], *line = &ew->series[1];
    assert_true(fabs(lim->y[3] - 0.98733) < 1e-5); /* 2.962/3 to 5 digits */
    assert_true(lim->y[0] == -lim->y[3]);
    for (int i = 0; i < 30; i++) {
        if (i < 2)
            assert_true(isnan(line->y[i]));
        else
            assert_true(line->y[i] == c[i].ewma);
        if (i >= 2) {
            assert_true(cu->series[1].y[i] == c[i].cusum_hi);
            assert_true(cu->series[2].y[i] == -c[i].cusum_lo);
        }
    }
    assert_true(cu->series[0].y[3] == 5.0 && cu->series[0].y[0] == -5.0);
    size_t rings = 0;
    for (size_t k = 0; k < ch->panels[0].n_series; k++)
        if (ch->panels[0].series[k].label &&
            strcmp(ch->panels[0].series[k].label, "alarm (EWMA or CUSUM)") == 0)
            rings = ch->panels[0].series[k].n;
    assert_int_equal(rings, na);
    stagecal_plot_params pp = stagecal_plot_default_params();
    char *svg = NULL;
    assert_int_equal(stagecal_plot_svg(ch, &pp, &svg, NULL, &err), STAGECAL_OK);
    assert_non_null(strstr(svg, ">EWMA of Q [-]<"));
    free(svg);
    stagecal_plot_chart_free(ch);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_cusum_arl_siegmund),   cmocka_unit_test(test_q_exact),
        cmocka_unit_test(test_arl0_small),           cmocka_unit_test(test_loss_detected),
        cmocka_unit_test(test_plot_holds_the_chart),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
