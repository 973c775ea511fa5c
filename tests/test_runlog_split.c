/*
 * test_runlog_split.c — runs found by themselves in a log without a run column (time gaps,
 * pot recharges; a single spike is not a recharge), the CSV dialect (';' with decimal
 * commas reads like ',' with points), and the robust load-cell noise estimate
 * runlog_noise_sd against the standard deviation of the Gaussian noise that made the data,
 * and the medians' shortcut runlog_median against GSL's median bit for bit.
 * The logs here are invented for the tests.
 */
#define _GNU_SOURCE 1
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "runlog_internal.h"
#include "stagecal/runlog.h"
#include "testutil.h"

#define HDR "time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-]\n"

/* n rows from time t0 [h], 10 min apart, W falling from w0 by 0.1 a row, appended to buf. */
static void rows(char *buf, size_t cap, double t0, double w0, int n)
{
    for (int i = 0; i < n; i++) {
        size_t len = strlen(buf);
        snprintf(buf + len, cap - len, "%.4f,%.2f,0.95,%.3f,3\n", t0 + i / 6.0, w0 - 0.1 * i,
                 0.5 - 0.002 * i);
    }
}

static stagecal_runlog *read_text(const char *text, stagecal_findings *f,
                                  const stagecal_runlog_params *par)
{
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_error e;
    assert_non_null(log);
    assert_int_equal(
        stagecal_runlog_read_buffer(log, text, strlen(text), "t.csv", NULL, par, f, &e),
        STAGECAL_OK);
    return log;
}

static void split_finds_gap_and_recharge(void **state)
{
    (void)state;
    static char buf[8192];
    snprintf(buf, sizeof buf, "%s", HDR);
    rows(buf, sizeof buf, 0, 10, 12);    /* lines 2-13 */
    rows(buf, sizeof buf, 75, 10, 12);   /* lines 14-25: after a gap of 73 h */
    rows(buf, sizeof buf, 77, 12.5, 12); /* lines 26-37: no gap, W from 8.9 to 12.5 */
    stagecal_findings *f = stagecal_findings_alloc(20);
    stagecal_runlog *log = read_text(buf, f, NULL);
    assert_int_equal(log->nruns, 3);
    assert_string_equal(log->runs[0].name, "t.csv#1");
    assert_string_equal(log->runs[1].name, "t.csv#2");
    assert_string_equal(log->runs[2].name, "t.csv#3");
    assert_int_equal(log->runs[1].first_line, 14);
    assert_int_equal(log->runs[2].first_line, 26);
    assert_int_equal(f->n_errors, 0);
    assert_int_equal(f->n_warnings, 2);
    assert_string_equal(f->items[0].text,
                        "t.csv:14: no 'run' column: run 't.csv#2' starts here, after a time gap "
                        "of 3.0 d since line 13 (expected a 'run' column naming the runs; runs "
                        "are found by time gaps and pot recharges, docs/runlog.md)");
    assert_string_equal(f->items[1].text,
                        "t.csv:26: no 'run' column: run 't.csv#3' starts here, where W rose from "
                        "8.9 to 12.5 since line 25 (a pot recharge) (expected a 'run' column "
                        "naming the runs; runs are found by time gaps and pot recharges, "
                        "docs/runlog.md)");
    stagecal_runlog_free(log);

    /* switched off: one run, and both new charges are W-rise warnings */
    stagecal_runlog_params par = stagecal_runlog_default_params();
    par.split_gap_s = par.split_gap_samples = par.split_rise_frac = 0;
    f->n = f->n_errors = f->n_warnings = 0;
    log = read_text(buf, f, &par);
    assert_int_equal(log->nruns, 1);
    assert_int_equal(f->n_warnings, 2);
    assert_non_null(strstr(f->items[0].text, "t.csv:14: column 'W[kmol]': holdup rose from 8.9"));
    assert_non_null(strstr(f->items[1].text, "t.csv:26: column 'W[kmol]': holdup rose from 8.9"));
    stagecal_runlog_free(log);
    stagecal_findings_free(f);
}

/* A gap shorter than 2 h and 20 spacings, and a one-sample spike of W under 10 %, leave one
 * run; a run column turns the finder off. */
static void split_leaves_one_run(void **state)
{
    (void)state;
    static char buf[8192];
    snprintf(buf, sizeof buf, "%s", HDR);
    rows(buf, sizeof buf, 0, 10, 12);
    rows(buf, sizeof buf, 3.5, 8.8, 12); /* a gap of 1.67 h */
    size_t len = strlen(buf);
    snprintf(buf + len, sizeof buf - len, "5.5,8.2,0.95,0.47,3\n"); /* +6.5 % over 7.7 */
    stagecal_findings *f = stagecal_findings_alloc(20);
    stagecal_runlog *log = read_text(buf, f, NULL);
    assert_int_equal(log->nruns, 1);
    assert_string_equal(log->runs[0].name, "t.csv");
    stagecal_runlog_free(log);
    stagecal_findings_free(f);
}

/* ';' with decimal commas gives the same numbers as ',' with points; the header decides. */
static void dialect_semicolon_decimal_comma(void **state)
{
    (void)state;
    const char *comma = HDR "0,10,0.95,0.5,inf\n0.25,10,0.96,0.5,inf\n0.5,9.9,0.96,0.49,3\n"
                            "0.75,9.8,0.95,0.48,3\n1,9.6,0.95,0.47,3.5\n";
    const char *semi = "time[h];W[kmol];xD[mol/mol];xB[mol/mol];R[-]\n0;10;0,95;0,5;inf\n"
                       "0,25;10;0,96;0,5;inf\n0,5;9,9;0,96;0,49;3\n0,75;9,8;0,95;0,48;3\n"
                       "1;9,6;0,95;0,47;3,5\n";
    stagecal_findings *f = stagecal_findings_alloc(20);
    stagecal_runlog *a = read_text(comma, f, NULL);
    stagecal_runlog *b = read_text(semi, f, NULL);
    assert_int_equal(f->n_errors, 0);
    assert_int_equal(a->n, 5);
    assert_int_equal(b->n, 5);
    for (size_t i = 0; i < 5; i++) {
        assert_true(a->t_s[i] == b->t_s[i]);
        assert_true(a->w_mol[i] == b->w_mol[i]);
        assert_true(a->xd[i] == b->xd[i]);
        assert_true(a->xb[i] == b->xb[i]);
        assert_true(a->r[i] == b->r[i] || (isinf(a->r[i]) && isinf(b->r[i])));
    }
    assert_true(b->r[4] == 3.5);
    stagecal_runlog_free(a);
    stagecal_runlog_free(b);
    /* forced comma on the ';' file: the message names the separator */
    stagecal_runlog_params par = stagecal_runlog_default_params();
    par.csv_separator = ',';
    stagecal_runlog *c = stagecal_runlog_alloc();
    stagecal_error e;
    f->n = f->n_errors = f->n_warnings = 0;
    assert_int_equal(stagecal_runlog_read_buffer(c, semi, strlen(semi), "t.csv", NULL, &par, f, &e),
                     STAGECAL_EDATA);
    assert_non_null(strstr(f->items[0].text, "a semicolon-separated file (--csv-dialect "
                                             "semicolon)?"));
    stagecal_runlog_free(c);
    stagecal_findings_free(f);
}

/* The estimate against the truth: 400 series of 300 samples of a falling, slowly curving W
 * (a batch draw, 4000 kg → 2800 kg) plus Gaussian noise of sd 20 and one gross spike each.
 * Tolerances: the mean estimate within 3 % of 20 (the second differences remove the draw;
 * the spike is what the MAD ignores), and the spread of single estimates (sd) under 12 % —
 * the MAD has about 37 % of the efficiency of the sample sd (Rousseeuw & Croux 1993,
 * "Alternatives to the median absolute deviation", JASA 88:1273-1283), and the second
 * differences are correlated, so one series of 300 gives about ±7 %. */
static void noise_estimate_matches_truth(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261202);
    enum { N = 300, REPS = 400 };
    double x[N], tmp[N], sum = 0, sum2 = 0;
    for (int r = 0; r < REPS; r++) {
        for (int i = 0; i < N; i++)
            x[i] = 4000 - 3.0 * i - 0.0033 * i * i + gsl_ran_gaussian(rng, 20.0);
        x[N / 2] += 400; /* a gross spike */
        x[N / 3] = NAN;  /* a missing value */
        double s = runlog_noise_sd(x, N, tmp);
        sum += s, sum2 += s * s;
    }
    double mean = sum / REPS, sd = sqrt(sum2 / REPS - mean * mean);
    printf("noise estimate: mean %.3f (true 20), sd %.3f over %d series of %d\n", mean, sd, REPS,
           N);
    assert_true(fabs(mean / 20.0 - 1) < 0.03);
    assert_true(sd / 20.0 < 0.12);
    double few[5] = {1, 2, 3, 4, 5};
    assert_true(runlog_noise_sd(few, 5, tmp) == 0.0); /* fewer than 7 values: none */
    gsl_rng_free(rng);
}

/* runlog_median against GSL's gsl_stats_median (the reference: GSL's own two selections),
 * bit for bit (tolerance 0: the shortcut must give the same double), over 20 000 random arrays
 * of 0 to 400 values drawn to hold ties, zeros of both signs, infinities and NaNs. */
static void median_matches_gsl(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261204);
    enum { MAXN = 400, REPS = 20000 };
    static double a[MAXN], b[MAXN];
    const double special[] = {0.0, -0.0, INFINITY, -INFINITY, NAN, 1.0, -1.0};
    size_t differ = 0;
    for (int r = 0; r < REPS; r++) {
        size_t n = gsl_rng_uniform_int(rng, r < 100 ? MAXN + 1 : 40);
        unsigned kind = (unsigned)gsl_rng_uniform_int(rng, 4);
        for (size_t i = 0; i < n; i++) {
            double v = gsl_ran_gaussian(rng, 1.0);
            if (kind == 1) /* ties: a few distinct values */
                v = (double)gsl_rng_uniform_int(rng, 5) - 2.0;
            else if (kind >= 2 && gsl_rng_uniform(rng) < 0.3) /* special values */
                v = special[gsl_rng_uniform_int(rng, kind == 2 ? 2 : 7)];
            a[i] = b[i] = v;
        }
        double m = runlog_median(a, n), g = gsl_stats_median(b, 1, n);
        differ += memcmp(&m, &g, sizeof m) != 0 && !(isnan(m) && isnan(g));
    }
    assert_int_equal(differ, 0);
    gsl_rng_free(rng);
}

int main(void)
{
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(split_finds_gap_and_recharge),
        cmocka_unit_test(split_leaves_one_run),
        cmocka_unit_test(dialect_semicolon_decimal_comma),
        cmocka_unit_test(noise_estimate_matches_truth),
        cmocka_unit_test(median_matches_gsl),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
