/*
 * test_trend.c — weighted trend, EWMA chart and its run lengths, crossing forecast,
 * events file, segmented histories.
 *
 * Sources of truth: statsmodels WLS (run as STAGECAL_PYTHON) for the trend line;
 * Lucas & Saccucci 1990 (Technometrics 32, 1–12) ARL values for λ = 0.2, L = 2.962
 * (from memory: 500, 10.5 and 3.7 at shifts 0, 1, 2 σ) and plain Monte Carlo of the
 * chart for the run lengths; exactness of the t interval of a weighted line (and
 * hence of its Fieller inversion) for the coverage simulations. All seeds fixed.
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>
#include <time.h>

#include "testutil.h"
#include "stagecal/model.h"
#include "stagecal/trend.h"

#define MONTH STAGECAL_TREND_MONTH_S
#define T2026 1767225600.0 /* 2026-01-01T00:00:00Z */

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* Seconds since 1970 for a UTC calendar date (days-from-civil arithmetic), so the test
 * does not depend on timegm or the time zone. */
static long long timegm_portable(const struct tm *tm)
{
    long long y = tm->tm_year + 1900, m = tm->tm_mon + 1, d = tm->tm_mday;
    y += (m - 1) / 12;
    m = (m - 1) % 12 + 1;
    y -= m <= 2;
    long long era = (y >= 0 ? y : y - 399) / 400;
    long long yoe = y - era * 400;
    long long doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
    long long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return (era * 146097 + doe - 719468) * 86400;
}

static void trend_fit_matches_statsmodels_wls(void **state)
{
    (void)state;
    /* Eight fits, months 0..9 with gaps, high-entropy values and unequal se. */
    static const double m[] = {0.0, 1.2, 2.3, 3.1, 5.4, 6.0, 7.7, 9.3};
    static const double v[] = {11.87, 11.62, 11.71, 11.32, 11.05, 11.21, 10.73, 10.58};
    static const double se[] = {0.21, 0.35, 0.18, 0.42, 0.27, 0.31, 0.24, 0.38};
    stagecal_trend_point p[8];
    for (size_t i = 0; i < 8; i++) {
        p[i].t_s = T2026 + m[i] * MONTH;
        p[i].value = v[i];
        p[i].se = se[i];
    }
    stagecal_trend_fit f;
    assert_int_equal(stagecal_trend_fit_line(p, 8, 0.95, &f, NULL), STAGECAL_OK);
    double want[5];
    testutil_python_numbers(
        "trend_oracle.py",
        "import numpy as np, statsmodels.api as sm\n"
        "m=np.array([0.0,1.2,2.3,3.1,5.4,6.0,7.7,9.3])\n"
        "v=np.array([11.87,11.62,11.71,11.32,11.05,11.21,10.73,10.58])\n"
        "se=np.array([0.21,0.35,0.18,0.42,0.27,0.31,0.24,0.38])\n"
        "r=sm.WLS(v,sm.add_constant(m),weights=1/se**2).fit()\n"
        "ci=r.conf_int(0.05)\n"
        "print('%.17g %.17g %.17g %.17g %.17g'%(r.params[0],r.params[1],r.bse[1],"
        "ci[1][0],ci[1][1]))\n",
        want, 5);
    /* statsmodels WLS scales the covariance by the weighted residual variance and
     * uses t(n − 2): the same estimator. 1e-9: different algebra (QR vs sums),
     * t quantiles agree to ~1e-11. */
    double a0;
    stagecal_trend_line_eval(&f, T2026, &a0, NULL, NULL, NULL);
    assert_rel(a0, want[0], 1e-9, "intercept at month 0 vs statsmodels WLS");
    assert_rel(f.b * MONTH, want[1], 1e-9, "slope [stages/month] vs statsmodels WLS");
    assert_rel(sqrt(f.c11) * MONTH, want[2], 1e-9, "slope se vs statsmodels WLS");
    assert_rel(f.b_low * MONTH, want[3], 1e-9, "slope CI low vs statsmodels");
    assert_rel(f.b_high * MONTH, want[4], 1e-9, "slope CI high vs statsmodels");
    assert_int_equal(f.n, 8);
    assert_rel(f.dof, 6, 0, "dof = n - 2");
}

/* A monthly history: value = n0 + rate·months + se·Z, se in [0.2, 0.5]. */
static void simulate(gsl_rng *rng, stagecal_trend_point *p, size_t n, double n0, double rate)
{
    for (size_t i = 0; i < n; i++) {
        double months = (double)i + gsl_rng_uniform(rng) * 0.3; /* refits not exactly monthly */
        p[i].t_s = T2026 + months * MONTH;
        p[i].se = 0.2 + 0.3 * gsl_rng_uniform(rng);
        p[i].value = n0 + rate * months + gsl_ran_gaussian(rng, p[i].se);
    }
}

static void trend_rate_interval_covers_truth(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 6060);
    const size_t reps = 3000, n = 18;
    const double rate = -0.15; /* stages per month */
    stagecal_trend_point p[18];
    size_t hit = 0;
    for (size_t k = 0; k < reps; k++) {
        simulate(rng, p, n, 12.0, rate);
        stagecal_trend_fit f;
        assert_int_equal(stagecal_trend_fit_line(p, n, 0.95, &f, NULL), STAGECAL_OK);
        hit += f.b_low * MONTH <= rate && rate <= f.b_high * MONTH;
    }
    /* Exact t interval for a weighted line with weights known up to a factor
     * (Draper & Smith 1998 §9.2): nominal 0.95; binomial sd sqrt(.95·.05/3000) =
     * 0.004, tolerance 0.016 = 4 sd. */
    print_message("slope interval coverage %.4f over %zu histories\n", (double)hit / (double)reps,
                  reps);
    assert_abs((double)hit / (double)reps, 0.95, 0.016, "slope interval coverage");
    gsl_rng_free(rng);
}

static void trend_forecast_band_covers_true_crossing(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 9090);
    const size_t reps = 3000, n = 18;
    const double n0 = 12.0, rate = -0.15, required = 9.0;
    const double t_true = T2026 + (n0 - required) / -rate * MONTH; /* month 20 */
    stagecal_trend_point p[18];
    size_t hit = 0, bounded = 0;
    for (size_t k = 0; k < reps; k++) {
        simulate(rng, p, n, n0, rate);
        stagecal_trend_fit f;
        stagecal_trend_forecast fc;
        assert_int_equal(stagecal_trend_fit_line(p, n, 0.95, &f, NULL), STAGECAL_OK);
        assert_int_equal(stagecal_trend_forecast_crossing(&f, required, p[n - 1].t_s, &fc, NULL),
                         STAGECAL_OK);
        if (fc.status == STAGECAL_FORECAST_NOT_DECLINING)
            continue; /* no crossing forecast: counted as a miss */
        bounded += fc.status == STAGECAL_FORECAST_OK;
        hit += fc.low_s <= t_true && t_true <= fc.high_s;
    }
    /* The band is {t : the 95 % band of the line at t contains the requirement}; it
     * contains the true crossing exactly when the pointwise interval at t_true covers
     * the true mean (Fieller 1954), so coverage is the nominal 0.95 (± 0.016 = 4
     * binomial sd). With 18 points and |slope| ≈ 10 se(slope) the band is finite. */
    print_message("forecast band coverage %.4f, finite bands %zu/%zu\n", (double)hit / (double)reps,
                  bounded, reps);
    assert_abs((double)hit / (double)reps, 0.95, 0.016, "forecast band coverage");
    assert_true(bounded == reps);
    gsl_rng_free(rng);
}

static void trend_forecast_statuses(void **state)
{
    (void)state;
    /* Flat line: slope 0 exactly → not declining; noisy slight decline → unbounded. */
    stagecal_trend_point flat[4] = {{T2026, 10, 0.3},
                                    {T2026 + MONTH, 10.2, 0.3},
                                    {T2026 + 2 * MONTH, 9.8, 0.3},
                                    {T2026 + 3 * MONTH, 10, 0.3}};
    stagecal_trend_fit f;
    stagecal_trend_forecast fc;
    assert_int_equal(stagecal_trend_fit_line(flat, 4, 0.95, &f, NULL), STAGECAL_OK);
    /* Least squares by hand: Σ(t − 1.5)(v − 10) = −1.5·0 − 0.5·0.2 + 0.5·(−0.2) + 0 = −0.2,
     * Σ(t − 1.5)² = 5 → slope −0.04 per month. */
    assert_rel(f.b * MONTH, -0.04, 1e-12, "slope by hand");
    assert_int_equal(stagecal_trend_forecast_crossing(&f, 9.0, flat[3].t_s, &fc, NULL),
                     STAGECAL_OK);
    assert_int_equal(fc.status, STAGECAL_FORECAST_UNBOUNDED);
    assert_true(isinf(fc.high_s));
    flat[1].value = 9.8;
    flat[2].value = 10.2;
    assert_int_equal(stagecal_trend_fit_line(flat, 4, 0.95, &f, NULL), STAGECAL_OK);
    assert_int_equal(stagecal_trend_forecast_crossing(&f, 9.0, flat[3].t_s, &fc, NULL),
                     STAGECAL_OK);
    assert_int_equal(fc.status, STAGECAL_FORECAST_NOT_DECLINING);
    assert_string_equal(stagecal_forecast_status_name(fc.status), "not-declining");
}

static void trend_ewma_arl_matches_lucas_saccucci(void **state)
{
    (void)state;
    stagecal_trend_ewma_params par = stagecal_trend_ewma_default_params();
    double arl;
    /* Lucas & Saccucci 1990, λ = 0.2, L = 2.962 (from memory): ARL 500 in control,
     * 10.5 at a 1σ shift, 3.7 at 2σ. The table rounds to 3 figures and a 201-state
     * chain is good to ~0.1 %, so 1 % (in control) and 2 % (shifted). */
    assert_int_equal(stagecal_trend_ewma_arl(&par, 0.0, 201, &arl, NULL), STAGECAL_OK);
    assert_rel(arl, 500, 0.01, "ARL0, Lucas & Saccucci 1990");
    assert_int_equal(stagecal_trend_ewma_arl(&par, 1.0, 201, &arl, NULL), STAGECAL_OK);
    assert_rel(arl, 10.5, 0.02, "ARL(1 sigma), Lucas & Saccucci 1990");
    assert_int_equal(stagecal_trend_ewma_arl(&par, -2.0, 201, &arl, NULL), STAGECAL_OK);
    assert_rel(arl, 3.7, 0.02, "ARL(-2 sigma) = ARL(2 sigma) by symmetry, L&S 1990");
}

/* First alarm (1-based) of the chart on a sequence with a step of `shift` σ from
 * the first point, baseline known; n_max when none. */
static size_t run_length(gsl_rng *rng, double shift, size_t n_max)
{
    stagecal_trend_point p[64];
    stagecal_trend_ewma_point c[64];
    stagecal_trend_ewma_params par = stagecal_trend_ewma_default_params();
    for (size_t i = 0; i < n_max; i++) {
        p[i].t_s = T2026 + (double)i * MONTH;
        p[i].value = 10.0 + 0.4 * (shift + gsl_ran_gaussian(rng, 1.0));
        p[i].se = 0.4;
    }
    assert_int_equal(stagecal_trend_ewma(p, n_max, 10.0, 0.0, &par, c, NULL, NULL), STAGECAL_OK);
    for (size_t i = 0; i < n_max; i++)
        if (c[i].alarm)
            return i + 1;
    return n_max;
}

static void trend_step_loss_alarm_within_design_delay(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 31337);
    stagecal_trend_ewma_params par = stagecal_trend_ewma_default_params();
    /* A planted step loss of 2σ (e.g. 0.8 stages with se 0.4): the design promises a
     * mean delay of 3.7 fits (L&S 1990) and, from the Brook–Evans chain, P(alarm
     * within k fits); k is the smallest with P ≥ 0.95. */
    size_t k95 = 0;
    double prob = 0;
    for (size_t k = 1; k <= 20 && prob < 0.95; k++) {
        assert_int_equal(stagecal_trend_ewma_rl_cdf(&par, -2.0, 201, k, &prob, NULL), STAGECAL_OK);
        k95 = k;
    }
    assert_true(k95 >= 4 && k95 <= 8);
    const size_t reps = 4000;
    double sum = 0, sum2 = 0;
    size_t within = 0;
    for (size_t r = 0; r < reps; r++) {
        size_t rl = run_length(rng, -2.0, 64);
        sum += (double)rl;
        sum2 += (double)rl * (double)rl;
        within += rl <= k95;
    }
    double mean = sum / (double)reps;
    double sd = sqrt((sum2 - (double)reps * mean * mean) / (double)(reps - 1));
    print_message("2-sigma step: k95 = %zu, mean delay %.3f (sd %.3f), within k95 %.4f\n", k95,
                  mean, sd, (double)within / (double)reps);
    /* Monte Carlo mean vs the published 3.7: 4 standard errors plus the table's
     * rounding (0.05). */
    assert_abs(mean, 3.7, 4 * sd / sqrt((double)reps) + 0.05, "mean alarm delay vs L&S ARL 3.7");
    /* Fraction alarmed within k95: ≥ 0.95 − 4 binomial sd (sd = 0.0034). */
    assert_true((double)within / (double)reps >= 0.95 - 4 * 0.0034);
    /* And the chain against the simulation at 1σ (a slower loss): 4 standard errors. */
    double arl1;
    assert_int_equal(stagecal_trend_ewma_arl(&par, -1.0, 201, &arl1, NULL), STAGECAL_OK);
    sum = sum2 = 0;
    for (size_t r = 0; r < reps; r++) {
        size_t rl = run_length(rng, -1.0, 64);
        sum += (double)rl;
        sum2 += (double)rl * (double)rl;
    }
    mean = sum / (double)reps;
    sd = sqrt((sum2 - (double)reps * mean * mean) / (double)(reps - 1));
    print_message("1-sigma step: chain ARL %.3f, Monte Carlo %.3f\n", arl1, mean);
    /* P(RL > 64) at 1σ is below 1e-4 (chain), so truncation at 64 is negligible. */
    assert_abs(mean, arl1, 4 * sd / sqrt((double)reps), "Monte Carlo ARL(1 sigma) vs chain");
    gsl_rng_free(rng);
}

static const char events_csv[] = "# invented events for a fictional column\n"
                                 "time,column,kind,note\n"
                                 "2026-07-01,K-7,repack,\"new bed, same packing\"\n"
                                 "\n"
                                 "2026-03-14T06:00Z,K-7,note,sample point moved\n"
                                 "2026-05-02,K-9,maintenance,\n";

static void write_file(const char *path, const char *text)
{
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    assert_true(fputs(text, f) >= 0);
    assert_int_equal(fclose(f), 0);
}

static void trend_events_read_and_reject(void **state)
{
    (void)state;
    char path[512];
    snprintf(path, sizeof path, "%s/trend_events.csv", STAGECAL_BUILD_DIR);
    write_file(path, events_csv);
    stagecal_trend_event *ev = NULL;
    size_t n = 0;
    stagecal_error e;
    assert_int_equal(stagecal_trend_events_read(path, &ev, &n, &e), STAGECAL_OK);
    assert_int_equal(n, 3);
    /* sorted by time: 2026-03-14 06:00, 2026-05-02, 2026-07-01 (seconds since 1970
     * by calendar arithmetic: 2026-03-14 is day 20526). */
    assert_rel(ev[0].t_s, 20526.0 * 86400 + 6 * 3600, 0, "first event time");
    assert_int_equal(ev[0].kind, STAGECAL_EVENT_NOTE);
    assert_string_equal(ev[1].column_id, "K-9");
    assert_int_equal(ev[2].kind, STAGECAL_EVENT_REPACK);
    assert_string_equal(ev[2].note, "new bed, same packing");
    assert_int_equal(ev[2].line, 3);
    free(ev);

    write_file(path, "when,column,kind\n");
    assert_int_equal(stagecal_trend_events_read(path, &ev, &n, &e), STAGECAL_EDATA);
    assert_non_null(strstr(e.text, "trend_events.csv:1: header is not 'time,column,kind[,note]'"));
    write_file(path, "time,column,kind\n2026-01-05,K-7,repack\n2026-02-30,K-7,repack\n");
    assert_int_equal(stagecal_trend_events_read(path, &ev, &n, &e), STAGECAL_EDATA);
    assert_non_null(strstr(e.text, "trend_events.csv:3: time '2026-02-30' is not a date"));
    write_file(path, "time,column,kind\n2026-01-05,K-7,overhaul\n");
    assert_int_equal(stagecal_trend_events_read(path, &ev, &n, &e), STAGECAL_EDATA);
    assert_non_null(strstr(e.text, ":2: kind 'overhaul' is unknown"));
    write_file(path, "time,column,kind\n2026-01-05,../x,repack\n");
    assert_int_equal(stagecal_trend_events_read(path, &ev, &n, &e), STAGECAL_EDATA);
    snprintf(path, sizeof path, "%s/no_such_events.csv", STAGECAL_BUILD_DIR);
    assert_int_equal(stagecal_trend_events_read(path, &ev, &n, &e), STAGECAL_ENOINPUT);
    assert_null(ev);
}

static void trend_analyse_splits_at_repack(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 2718);
    /* Months 0..11: loss of 0.2 stages/month from 12; repack at month 12.5 restores
     * 12.5 stages; months 13..24 lose 0.1/month. The history is given shuffled. */
    stagecal_trend_point p[24];
    size_t np = 0;
    for (size_t i = 0; i < 12; i++, np++) {
        p[np].t_s = T2026 + (double)i * MONTH;
        p[np].se = 0.15;
        p[np].value = 12 - 0.2 * (double)i + gsl_ran_gaussian(rng, 0.15);
    }
    for (size_t i = 13; i < 25; i++, np++) {
        p[np].t_s = T2026 + (double)i * MONTH;
        p[np].se = 0.15;
        p[np].value = 12.5 - 0.1 * ((double)i - 12.5) + gsl_ran_gaussian(rng, 0.15);
    }
    for (size_t i = 0; i < np; i++) { /* deterministic shuffle */
        size_t j = gsl_rng_uniform_int(rng, np);
        stagecal_trend_point tmp = p[i];
        p[i] = p[j];
        p[j] = tmp;
    }
    stagecal_trend_event ev[3];
    memset(ev, 0, sizeof ev);
    ev[0].t_s = T2026 + 5.5 * MONTH; /* another column's repack: ignored */
    snprintf(ev[0].column_id, sizeof ev[0].column_id, "K-9");
    ev[1].t_s = T2026 + 8.5 * MONTH; /* a note: does not split */
    ev[1].kind = STAGECAL_EVENT_NOTE;
    snprintf(ev[1].column_id, sizeof ev[1].column_id, "K-7");
    ev[2].t_s = T2026 + 12.5 * MONTH;
    ev[2].kind = STAGECAL_EVENT_REPACK;
    snprintf(ev[2].column_id, sizeof ev[2].column_id, "K-7");

    stagecal_trend_params par = stagecal_trend_default_params();
    par.required = 10.0;
    stagecal_trend_history h;
    assert_int_equal(stagecal_trend_analyse(p, np, ev, 3, "K-7", &par, &h, NULL), STAGECAL_OK);
    assert_int_equal(h.n_segments, 2);
    assert_int_equal(h.segments[0].n, 12);
    assert_int_equal(h.segments[1].first, 12);
    assert_int_equal(h.segments[1].event, 2);
    assert_true(h.segments[0].has_fit && h.segments[1].has_fit);
    for (size_t i = 1; i < np; i++)
        assert_true(h.points[i].t_s > h.points[i - 1].t_s);
    /* Each segment's interval holds its own true rate (seeded; each is a 95 %
     * interval, so this fixed seed is one draw — checked, not tuned). */
    const stagecal_trend_fit *f0 = &h.segments[0].fit, *f1 = &h.segments[1].fit;
    assert_true(f0->b_low * MONTH <= -0.2 && -0.2 <= f0->b_high * MONTH);
    assert_true(f1->b_low * MONTH <= -0.1 && -0.1 <= f1->b_high * MONTH);
    /* The current segment drives the forecast: 12.5 − 0.1(t − 12.5) = 10 at month 37.5. */
    assert_int_equal(h.has_forecast, 1);
    assert_int_equal(h.forecast.status, STAGECAL_FORECAST_OK);
    double t_true = T2026 + 37.5 * MONTH;
    assert_true(h.forecast.low_s <= t_true && t_true <= h.forecast.high_s);
    /* A loss of 0.2/month against se 0.15 passes the 2.962-limit within the first
     * segment: at month 6 the drift is 0.6 below a baseline near month 1 (≈ 3.5σ). */
    assert_true(h.segments[0].n_alarms > 0);
    assert_true(h.segments[0].first_alarm >= 3 && h.segments[0].first_alarm < 12);
    for (size_t i = 0; i < np; i++)
        assert_true(h.chart[i].alarm <= 0); /* losses only, no gains */
    assert_rel(h.arl0, 500, 0.01, "in-control ARL of the default design (L&S 1990)");
    stagecal_trend_history_free(&h);
    stagecal_trend_history_free(NULL);
    gsl_rng_free(rng);
}

static void trend_rejects_bad_arguments(void **state)
{
    (void)state;
    stagecal_error e;
    stagecal_trend_point p[3] = {{T2026, 10, 0.3}, {T2026, 10.1, 0.3}, {T2026, 9.9, 0.3}};
    stagecal_trend_fit f;
    assert_int_equal(stagecal_trend_fit_line(p, 2, 0.95, &f, &e), STAGECAL_EINVAL);
    assert_string_equal(e.text, "2 point(s) cannot carry a trend with an interval (expected >= 3)");
    assert_int_equal(stagecal_trend_fit_line(p, 3, 0.95, &f, &e), STAGECAL_EINVAL);
    assert_string_equal(e.text,
                        "all 3 points have the same time (expected fits at different dates)");
    p[1].se = 0;
    assert_int_equal(stagecal_trend_fit_line(p, 3, 0.95, &f, &e), STAGECAL_EINVAL);
    p[1].se = 0.3;
    stagecal_trend_ewma_params par = {1.5, 3};
    stagecal_trend_ewma_point c[3];
    assert_int_equal(stagecal_trend_ewma(p, 3, 10, 0, &par, c, NULL, &e), STAGECAL_EINVAL);
    double arl;
    par.lambda = 0.2;
    assert_int_equal(stagecal_trend_ewma_arl(&par, 0, 200, &arl, &e), STAGECAL_EINVAL);
    stagecal_trend_history h;
    stagecal_trend_params tp = stagecal_trend_default_params();
    assert_int_equal(stagecal_trend_analyse(p, 0, NULL, 0, "K-7", &tp, &h, &e), STAGECAL_EINVAL);
    stagecal_trend_history_free(&h);
    stagecal_trend_forecast fc;
    f.b = -1;
    assert_int_equal(stagecal_trend_forecast_crossing(&f, NAN, 0, &fc, &e), STAGECAL_EINVAL);
}

/* A constant-form model file (stages = a, se = sqrt(cov)) fitted at t_s, written under
 * dir/<id>/. The fictional column is invented test data. */
static void write_model(const char *dir, const char *id, double t_s, double stages, double se,
                        double height_m)
{
    stagecal_model m;
    stagecal_error err;
    stagecal_model_init(&m);
    snprintf(m.column_id, sizeof m.column_id, "%s", id);
    snprintf(m.light, sizeof m.light, "light");
    snprintf(m.heavy, sizeof m.heavy, "heavy");
    snprintf(m.vle_kind, sizeof m.vle_kind, "alpha");
    const double alpha = 2.385;
    assert_int_equal(stagecal_model_add_vle_param(&m, "alpha", &alpha, 1, &err), STAGECAL_OK);
    assert_int_equal(stagecal_form_parse("constant", &m.form, &err), STAGECAL_OK);
    m.theta[0] = stages;
    m.cov[0] = se * se;
    m.sigma = 0.5;
    m.dof = 20;
    m.n_windows = 21;
    m.n_samples = 2100;
    m.n_runs = 5;
    m.r_min = 1;
    m.r_max = 10;
    time_t tt = (time_t)t_s;
    struct tm tm;
    assert_non_null(gmtime_r(&tt, &tm));
    assert_true(strftime(m.fitted_utc, sizeof m.fitted_utc, "%Y-%m-%dT%H:%M:%SZ", &tm) > 0);
    if (height_m > 0) {
        m.has_hetp = 1;
        m.height_m = height_m;
        m.hetp_r = 4;
        m.hetp_f = 0;
        m.hetp_m = height_m / (stages - 1);
        m.hetp_low_m = m.hetp_m * 0.9;
        m.hetp_high_m = m.hetp_m * 1.1;
        m.hetp_level = 0.95;
    }
    char sub[600];
    snprintf(sub, sizeof sub, "%s/%s", dir, id);
    int rc = stagecal_model_write(&m, sub, NULL, 0, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    stagecal_model_free(&m);
}

static json_t *run_json(const char *args, int *exit_code)
{
    char cmd[2048];
    snprintf(cmd, sizeof cmd, "%s %s", STAGECAL_BIN, args);
    FILE *pp = popen(cmd, "r");
    assert_non_null(pp);
    json_error_t je;
    json_t *doc = json_loadf(pp, 0, &je);
    int st = pclose(pp);
    *exit_code = WIFEXITED(st) ? WEXITSTATUS(st) : -1;
    return doc;
}

static void trend_cli_reads_fits_folder(void **state)
{
    (void)state;
    char dir[512], events[600], args[1500];
    snprintf(dir, sizeof dir, "%s/trend_fits_%ld", STAGECAL_BUILD_DIR, (long)getpid());
    /* 13 monthly fits (calendar months, 1st of the month) on an exact line: 12 stages
     * at 2026-01-01 losing 0.1 per mean month; a note event (does not split). */
    for (int k = 0; k < 13; k++) {
        struct tm tm = {0};
        tm.tm_year = 126;
        tm.tm_mon = k;
        tm.tm_mday = 1;
        double t = (double)timegm_portable(&tm);
        write_model(dir, "K-7", t, 12 - 0.1 * (t - T2026) / MONTH, 0.2, 3.3);
    }
    snprintf(events, sizeof events, "%s/events.csv", dir);
    write_file(events, "time,column,kind,note\n2026-04-02,K-7,note,new analyser\n");
    snprintf(args, sizeof args,
             "trend K-7 --fits %s --events %s --reflux 4 --require 9 --json 2>/dev/null", dir,
             events);
    int code;
    json_t *doc = run_json(args, &code);
    assert_int_equal(code, 0);
    assert_non_null(doc);
    json_t *col = json_array_get(json_object_get(doc, "columns"), 0);
    assert_int_equal(json_array_size(json_object_get(col, "fits")), 13);
    json_t *seg = json_array_get(json_object_get(col, "segments"), 0);
    assert_int_equal(json_array_size(json_object_get(col, "segments")), 1);
    json_t *tr = json_object_get(seg, "trend");
    /* Exact line: slope −0.1 per mean month to rounding (1e-9 relative: times are
     * whole seconds, values carry 17 digits through JSON). */
    assert_rel(json_real_value(json_object_get(tr, "slope_per_month")), -0.1, 1e-9,
               "CLI slope on an exact line");
    /* Crossing of 9 stages: 30 mean months after 2026-01-01 = T2026 + 30·2629746 s =
     * 1846117980 s = 2028-07-02T02:33:00Z (Python datetime, printed once). */
    json_t *fc = json_object_get(col, "forecast");
    assert_string_equal(json_string_value(json_object_get(fc, "status")), "ok");
    assert_string_equal(json_string_value(json_object_get(fc, "date")), "2028-07-02T02:33:00Z");
    /* HETP per fit = H/(stages − 1): first fit 3.3/11 = 0.3 m (exact arithmetic). */
    json_t *f0 = json_array_get(json_object_get(col, "fits"), 0);
    assert_rel(json_real_value(json_object_get(json_object_get(f0, "hetp"), "value_m")), 0.3, 1e-12,
               "HETP of the first fit");
    /* The chart sees a steady loss of 0.5 se per month: it must alarm (loss side). */
    assert_true(json_integer_value(json_object_get(seg, "alarms")) > 0);
    json_decref(doc);

    /* hetp on the first and last fit: 3.3/11 = 0.3 m and 3.3/(10.8 − 1); the change is
     * their difference (exact arithmetic up to JSON's 17 digits: 1e-12). */
    double last = 12 - 0.1 * (1798761600.0 - T2026) / MONTH; /* 2027-01-01 */
    snprintf(args, sizeof args,
             "hetp %s/K-7/K-7-20260101T000000Z.json %s/K-7/K-7-20270101T000000Z.json "
             "--reflux 4 --design-hetp 0.3 --json 2>/dev/null",
             dir, dir);
    doc = run_json(args, &code);
    assert_int_equal(code, 0);
    assert_non_null(doc);
    json_t *cmp = json_object_get(doc, "comparison");
    assert_rel(json_real_value(json_object_get(cmp, "difference")), 3.3 / (last - 1) - 0.3, 1e-12,
               "CLI HETP change");
    assert_true(json_is_true(json_object_get(cmp, "significant")));
    assert_string_equal(
        json_string_value(json_object_get(json_object_get(doc, "design"), "verdict")), "worse");
    json_decref(doc);

    /* Fleet view: a second column with four flat fits joins K-7, one row each. */
    for (int k = 0; k < 4; k++)
        write_model(dir, "K-9", T2026 + 86400.0 * (35 * k + 3), 9.5 + 0.05 * (k % 2), 0.25, 0);
    snprintf(args, sizeof args, "trend K-7 K-9 --fits %s --reflux 4 --require 9 --json 2>/dev/null",
             dir);
    doc = run_json(args, &code);
    assert_int_equal(code, 0);
    assert_int_equal(json_array_size(json_object_get(doc, "columns")), 2);
    json_t *k9 = json_array_get(json_object_get(doc, "columns"), 1);
    assert_string_equal(json_string_value(json_object_get(k9, "column_id")), "K-9");
    assert_true(
        json_is_null(json_object_get(json_array_get(json_object_get(k9, "fits"), 0), "hetp")));
    json_decref(doc);

    /* Fleet view of two columns; the second folder is missing: exit 66. */
    snprintf(args, sizeof args, "trend K-7 K-8 --fits %s --reflux 4 2>/dev/null", dir);
    doc = run_json(args, &code);
    assert_int_equal(code, 66);
    json_decref(doc);
    /* Model files are never replaced, so leave nothing for a later run to add to. */
    snprintf(args, sizeof args, "rm -rf '%s'", dir);
    assert_int_equal(system(args), 0);
}

/* ---- fits that share run logs ----------------------------------------------------- */

/* A stand-in SHA-256 for content number k (64 lowercase hex digits). The selection only
 * compares digests, so any distinct valid digests will do. */
static void fake_sha(unsigned k, char hex[STAGECAL_MODEL_HEX])
{
    snprintf(hex, STAGECAL_MODEL_HEX, "%064x", k);
}

#define COLUMN_FILE 999u /* content number of the column file (rows = 0 in every fit) */

/* A model in memory fitted at t_s on the run logs with content numbers logs[0..nl),
 * recorded with the column file first (rows = 0), as calibrate records them. paths may
 * be NULL (then "logs/<k>.csv"). Only the fields the selection reads are set. */
static void make_fit(stagecal_model *m, double t_s, const unsigned *logs, size_t nl,
                     const char *const *paths)
{
    char hex[STAGECAL_MODEL_HEX], path[64];
    stagecal_model_init(m);
    snprintf(m->column_id, sizeof m->column_id, "K-7");
    time_t tt = (time_t)t_s;
    struct tm tm;
    assert_non_null(gmtime_r(&tt, &tm));
    assert_true(strftime(m->fitted_utc, sizeof m->fitted_utc, "%Y-%m-%dT%H:%M:%SZ", &tm) > 0);
    fake_sha(COLUMN_FILE, hex);
    assert_int_equal(stagecal_model_add_input(m, "columns/K-7.json", hex, 0, NULL), STAGECAL_OK);
    for (size_t i = 0; i < nl; i++) {
        fake_sha(logs[i], hex);
        snprintf(path, sizeof path, "logs/%u.csv", logs[i]);
        assert_int_equal(stagecal_model_add_input(m, paths ? paths[i] : path, hex, 120, NULL),
                         STAGECAL_OK);
    }
}

static void free_fits(stagecal_model *m, size_t n)
{
    for (size_t i = 0; i < n; i++)
        stagecal_model_free(&m[i]);
}

#define DAY 86400.0

/* The rule (include/stagecal/trend.h), applied by hand to each case below: newest time
 * of fit first, keep a fit unless a kept fit read one of its run logs (rows > 0). */
static void trend_select_disjoint_fits_all_kept(void **state)
{
    (void)state;
    stagecal_model m[3];
    stagecal_trend_selection sel[3];
    size_t kept = 0;
    /* Jan, Feb, Mar alone; every fit also read the column file (rows = 0), and Feb's log
     * has Jan's path but other bytes (a file overwritten): neither counts as shared. */
    const unsigned jan = 1, feb = 2, mar = 3;
    const char *same_path[] = {"logs/current.csv"};
    make_fit(&m[0], T2026 + 31 * DAY, &jan, 1, same_path);
    make_fit(&m[1], T2026 + 59 * DAY, &feb, 1, same_path);
    make_fit(&m[2], T2026 + 90 * DAY, &mar, 1, NULL);
    assert_int_equal(stagecal_trend_select(m, NULL, 3, sel, &kept, NULL), STAGECAL_OK);
    assert_int_equal(kept, 3);
    for (size_t i = 0; i < 3; i++)
        assert_int_equal(sel[i].by, -1);
    free_fits(m, 3);
}

static void trend_select_older_quarter_fit_superseded(void **state)
{
    (void)state;
    stagecal_model m[4];
    stagecal_trend_selection sel[4];
    size_t kept = 0;
    /* The quick start: Jan–Mar together (index 0, oldest), then Jan, Feb, Mar alone.
     * Mar (newest) is kept, then Feb and Jan (disjoint); the quarter shares all three,
     * the newest kept one among them is Mar (index 3), and its first run log that Mar
     * read is Mar's, input 3 (inputs: column file, Jan, Feb, Mar). */
    const unsigned q[] = {1, 2, 3};
    make_fit(&m[0], T2026 + 100 * DAY, q, 3, NULL);
    make_fit(&m[1], T2026 + 101 * DAY, &q[0], 1, NULL);
    make_fit(&m[2], T2026 + 102 * DAY, &q[1], 1, NULL);
    make_fit(&m[3], T2026 + 103 * DAY, &q[2], 1, NULL);
    assert_int_equal(stagecal_trend_select(m, NULL, 4, sel, &kept, NULL), STAGECAL_OK);
    assert_int_equal(kept, 3);
    assert_int_equal(sel[0].by, 3);
    assert_int_equal(sel[0].input, 3);
    assert_string_equal(m[0].inputs[sel[0].input].path, "logs/3.csv");
    for (size_t i = 1; i < 4; i++)
        assert_int_equal(sel[i].by, -1);
    free_fits(m, 4);
}

static void trend_select_newer_combined_fit_supersedes_monthly(void **state)
{
    (void)state;
    stagecal_model m[4];
    stagecal_trend_selection sel[4];
    size_t kept = 0;
    /* Jan, Feb, Mar alone, then a newer fit of all three (index 3) that names the logs
     * by other paths: the digest decides. The combined fit is kept; each monthly fit
     * shares its only log (input 1, after the column file) with it. */
    const unsigned q[] = {1, 2, 3};
    const char *moved[] = {"/archive/a.csv", "/archive/b.csv", "/archive/c.csv"};
    make_fit(&m[0], T2026 + 31 * DAY, &q[0], 1, NULL);
    make_fit(&m[1], T2026 + 59 * DAY, &q[1], 1, NULL);
    make_fit(&m[2], T2026 + 90 * DAY, &q[2], 1, NULL);
    make_fit(&m[3], T2026 + 91 * DAY, q, 3, moved);
    assert_int_equal(stagecal_trend_select(m, NULL, 4, sel, &kept, NULL), STAGECAL_OK);
    assert_int_equal(kept, 1);
    assert_int_equal(sel[3].by, -1);
    for (size_t i = 0; i < 3; i++) {
        assert_int_equal(sel[i].by, 3);
        assert_int_equal(sel[i].input, 1);
    }
    free_fits(m, 4);
}

static void trend_select_only_kept_fits_block(void **state)
{
    (void)state;
    stagecal_model m[4];
    stagecal_trend_selection sel[4];
    size_t kept = 0;
    /* Newest first: A = {Jan, Feb} kept; B = {Feb, Mar} shares Feb with A: set aside
     * (input 1, Feb, comes first in B); C = {Mar} shares only with B, which was set
     * aside: kept; D has no run log at all (column file only): kept. */
    const unsigned a[] = {1, 2}, b[] = {2, 3}, c[] = {3};
    make_fit(&m[0], T2026 + 40 * DAY, c, 1, NULL);    /* C */
    make_fit(&m[1], T2026 + 50 * DAY, b, 2, NULL);    /* B */
    make_fit(&m[2], T2026 + 60 * DAY, a, 2, NULL);    /* A */
    make_fit(&m[3], T2026 + 10 * DAY, NULL, 0, NULL); /* D */
    assert_int_equal(stagecal_trend_select(m, NULL, 4, sel, &kept, NULL), STAGECAL_OK);
    assert_int_equal(kept, 3);
    assert_int_equal(sel[0].by, -1);
    assert_int_equal(sel[1].by, 2);
    assert_int_equal(sel[1].input, 1);
    assert_int_equal(sel[2].by, -1);
    assert_int_equal(sel[3].by, -1);
    free_fits(m, 4);
}

static void trend_select_ties_follow_the_writer(void **state)
{
    (void)state;
    stagecal_model m[4];
    stagecal_trend_selection sel[4];
    size_t kept = 0;
    /* Four fits of the same log in one second. stagecal_model_write names them NAME,
     * NAME-2, NAME-3, …, NAME-10 in write order; the names are listed here in byte
     * order (as a folder listing gives them), where "-10" < "-2" < ".json". The rule
     * ranks copy 10 newest, so index 0 is kept and the others point to it. */
    const unsigned jan = 1;
    const char *names[] = {
        "fits/K-7/K-7-20260301T000000Z-10.json", "fits/K-7/K-7-20260301T000000Z-2.json",
        "fits/K-7/K-7-20260301T000000Z-3.json", "fits/K-7/K-7-20260301T000000Z.json"};
    for (size_t i = 0; i < 4; i++)
        make_fit(&m[i], T2026 + 59 * DAY, &jan, 1, NULL);
    assert_int_equal(stagecal_trend_select(m, names, 4, sel, &kept, NULL), STAGECAL_OK);
    assert_int_equal(kept, 1);
    assert_int_equal(sel[0].by, -1);
    for (size_t i = 1; i < 4; i++)
        assert_int_equal(sel[i].by, 0);
    /* Without names the higher index is the newer. */
    assert_int_equal(stagecal_trend_select(m, NULL, 4, sel, &kept, NULL), STAGECAL_OK);
    assert_int_equal(kept, 1);
    assert_int_equal(sel[3].by, -1);
    for (size_t i = 0; i < 3; i++)
        assert_int_equal(sel[i].by, 3);
    /* Different stems in one second compare by bytes, the greater newer: "K-7-b" over
     * "K-7-a" (hand-named files). */
    const char *other[] = {"K-7-b.json", "K-7-a.json", "K-7-a-2.json", "K-7-a-3.json"};
    assert_int_equal(stagecal_trend_select(m, other, 4, sel, &kept, NULL), STAGECAL_OK);
    assert_int_equal(sel[0].by, -1);
    for (size_t i = 1; i < 4; i++)
        assert_int_equal(sel[i].by, 0);
    free_fits(m, 4);
}

static void trend_select_rejects_bad_time(void **state)
{
    (void)state;
    stagecal_model m[2];
    stagecal_trend_selection sel[2];
    stagecal_error e;
    size_t kept = 7;
    const unsigned jan = 1;
    make_fit(&m[0], T2026, &jan, 1, NULL);
    make_fit(&m[1], T2026, &jan, 1, NULL);
    assert_int_equal(stagecal_trend_select(m, NULL, 0, sel, &kept, &e), STAGECAL_OK);
    assert_int_equal(kept, 0);
    snprintf(m[1].fitted_utc, sizeof m[1].fitted_utc, "yesterday");
    const char *names[] = {"a.json", "b.json"};
    assert_int_equal(stagecal_trend_select(m, names, 2, sel, &kept, &e), STAGECAL_EDATA);
    assert_non_null(strstr(e.text, "b.json: time of fit 'yesterday' is not a timestamp"));
    free_fits(m, 2);
}

/* The rule's defining properties on random histories (an oracle that does not replay
 * the greedy pass): with fits ranked newest first, (1) no two kept fits share a run
 * log; (2) a set-aside fit's `by` is kept, ranks newer, shares the log `input`, and no
 * kept fit ranked newer than `by` shares any of its logs; (3) `input` is its first run
 * log that `by` read. A set satisfying (1) and "every set-aside fit overlaps a newer
 * kept fit" is unique (induction over the ranking), so these pin the result. */
static int shares(const stagecal_model *a, size_t ia, const stagecal_model *b)
{
    if (a->inputs[ia].rows == 0)
        return 0;
    for (size_t j = 0; j < b->n_inputs; j++)
        if (b->inputs[j].rows > 0 && strcmp(a->inputs[ia].sha256, b->inputs[j].sha256) == 0)
            return 1;
    return 0;
}

static int overlap(const stagecal_model *a, const stagecal_model *b)
{
    for (size_t i = 0; i < a->n_inputs; i++)
        if (shares(a, i, b))
            return 1;
    return 0;
}

static void trend_select_random_histories_satisfy_rule(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 2385);
    enum { NF = 10 }; /* fits per history, at most; logs are numbered 1–9 */
    stagecal_model m[NF];
    stagecal_trend_selection sel[NF];
    size_t total_kept = 0, total = 0;
    for (int rep = 0; rep < 400; rep++) {
        size_t n = 1 + gsl_rng_uniform_int(rng, NF);
        for (size_t i = 0; i < n; i++) {
            unsigned logs[3];
            size_t nl = gsl_rng_uniform_int(rng, 4); /* 0–3 logs, possibly none */
            /* distinct within a fit: log k is drawn from its own third of 1–9 */
            for (size_t k = 0; k < nl; k++)
                logs[k] = 1 + (unsigned)(k * 3 + gsl_rng_uniform_int(rng, 3));
            /* distinct times: rank = time; the draw order is not the time order */
            make_fit(&m[i], T2026 + DAY * (double)((i * 7) % NF), logs, nl, NULL);
        }
        size_t kept = 0;
        assert_int_equal(stagecal_trend_select(m, NULL, n, sel, &kept, NULL), STAGECAL_OK);
        size_t count = 0;
        for (size_t i = 0; i < n; i++) {
            double ti = (double)((i * 7) % NF);
            if (sel[i].by < 0) {
                count++;
                for (size_t j = 0; j < n; j++) /* (1) */
                    if (j != i && sel[j].by < 0)
                        assert_false(overlap(&m[i], &m[j]));
                continue;
            }
            size_t b = (size_t)sel[i].by; /* (2) */
            assert_true(b < n && sel[b].by < 0);
            assert_true((double)((b * 7) % NF) > ti);
            assert_true(sel[i].input < m[i].n_inputs && shares(&m[i], sel[i].input, &m[b]));
            for (size_t j = 0; j < n; j++)
                if (sel[j].by < 0 && (double)((j * 7) % NF) > (double)((b * 7) % NF))
                    assert_false(overlap(&m[i], &m[j]));
            for (size_t k = 0; k < sel[i].input; k++) /* (3) */
                assert_false(shares(&m[i], k, &m[b]));
        }
        assert_int_equal(kept, count);
        assert_true(kept >= 1);
        total_kept += kept;
        total += n;
        free_fits(m, n);
    }
    print_message("random histories: %zu of %zu fits kept\n", total_kept, total);
    /* The draws must exercise both outcomes, or the checks above prove little. */
    assert_true(total_kept > total / 5 && total_kept < total);
    gsl_rng_free(rng);
}

/* The printing rule for a fit's stage interval: the issue's [-6116333.594, 6116349.839]
 * (a one-dof fit) and an interval below the pot are "not determined"; a sane one is not. */
static void test_undetermined_rule(void **state)
{
    (void)state;
    assert_non_null(stagecal_trend_undetermined(1, -6116333.594, 6116349.839));
    assert_non_null(strstr(stagecal_trend_undetermined(4, 0.5, 9.0), "below 1 stage"));
    assert_non_null(stagecal_trend_undetermined(4, 7.0, INFINITY));
    assert_null(stagecal_trend_undetermined(4, 7.9, 8.4));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_undetermined_rule),
        cmocka_unit_test(trend_fit_matches_statsmodels_wls),
        cmocka_unit_test(trend_rate_interval_covers_truth),
        cmocka_unit_test(trend_forecast_band_covers_true_crossing),
        cmocka_unit_test(trend_forecast_statuses),
        cmocka_unit_test(trend_ewma_arl_matches_lucas_saccucci),
        cmocka_unit_test(trend_step_loss_alarm_within_design_delay),
        cmocka_unit_test(trend_events_read_and_reject),
        cmocka_unit_test(trend_analyse_splits_at_repack),
        cmocka_unit_test(trend_rejects_bad_arguments),
        cmocka_unit_test(trend_cli_reads_fits_folder),
        cmocka_unit_test(trend_select_disjoint_fits_all_kept),
        cmocka_unit_test(trend_select_older_quarter_fit_superseded),
        cmocka_unit_test(trend_select_newer_combined_fit_supersedes_monthly),
        cmocka_unit_test(trend_select_only_kept_fits_block),
        cmocka_unit_test(trend_select_ties_follow_the_writer),
        cmocka_unit_test(trend_select_rejects_bad_time),
        cmocka_unit_test(trend_select_random_histories_satisfy_rule),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
