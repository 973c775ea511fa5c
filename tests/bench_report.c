/*
 * bench_report.c — how long the full demo report takes to render (target < 2 s).
 *
 * usage: bench_report [OUT.html [REPEATS]]
 *
 * Builds a report with every section and every kind of chart from invented demo
 * content (fictional site "Demo Works", fictional column D-101, fictional campaigns;
 * the numbers are made up to look plausible and are no measurement), renders it
 * REPEATS times (default 5) with stagecal_report_write and prints the best and the
 * median wall time. The last rendering stays in OUT.html (default
 * ./demo_report.html); tests/report_render.sh opens that file in headless Chromium.
 * Exit status 0 when the median is below 2 s, 1 otherwise, 2 on an error.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include <gsl/gsl_errno.h>

#include "stagecal/plot.h"
#include "stagecal/report.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"

#define NS 36 /* samples */
#define NG 40 /* fit grid */
#define NT 10 /* calibrations in the trend */
#define NB 49 /* batch time points */
#define TARGET_S 2.0

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Invented correlation: stages = a·(1 − exp(−b·R)), a = 9.2, b = 0.55. */
static double demo_fit(double r)
{
    return isinf(r) ? 9.2 : 9.2 * (1 - exp(-0.55 * r));
}

int main(int argc, char **argv)
{
    const char *out = argc > 1 ? argv[1] : "demo_report.html";
    int repeats = argc > 2 ? (int)strtol(argv[2], NULL, 10) : 5;
    if (repeats < 1)
        repeats = 1;
    gsl_set_error_handler_off();
    stagecal_error err;

    /* samples: three fictional campaigns, deterministic scatter */
    double r[NS], f[NS], st[NS], fitted[NS], res[NS], t[NS];
    size_t grp[NS];
    const char *runs[3] = {"campaign A (fictional)", "campaign B (fictional)",
                           "campaign C (fictional)"};
    for (int i = 0; i < NS; i++) {
        grp[i] = (size_t)(i % 3);
        r[i] = i == NS - 1 ? INFINITY : 0.6 + 0.18 * i;
        f[i] = 0.9 + 0.05 * (i % 11);
        double wiggle = 0.35 * sin(1.7 * i) + 0.1 * cos(5.3 * i);
        fitted[i] = demo_fit(r[i]);
        st[i] = fitted[i] + wiggle;
        res[i] = wiggle;
        t[i] = 1.7600e9 + 3600.0 * 9 * i;
    }
    double grid[NG], gf[NG], ci_lo[NG], ci_hi[NG], pi_lo[NG], pi_hi[NG];
    for (int i = 0; i < NG; i++) {
        grid[i] = 0.3 + 7.4 * i / (NG - 1);
        gf[i] = demo_fit(grid[i]);
        double se = 0.12 + 0.03 * fabs(grid[i] - 3.5);
        ci_lo[i] = gf[i] - 2.06 * se, ci_hi[i] = gf[i] + 2.06 * se;
        pi_lo[i] = gf[i] - 2.06 * sqrt(se * se + 0.09),
        pi_hi[i] = gf[i] + 2.06 * sqrt(se * se + 0.09);
    }
    stagecal_plot_fit_data fd = {NULL,  r,     st,    grp,   NS, runs, 3,   grid, gf,
                                 ci_lo, ci_hi, pi_lo, pi_hi, NG, 0.6,  6.9, 0.95, NULL};
    stagecal_plot_fit_data fdf = {"F-factor [Pa^0.5]",
                                  f,
                                  st,
                                  grp,
                                  NS,
                                  runs,
                                  3,
                                  NULL,
                                  NULL,
                                  NULL,
                                  NULL,
                                  NULL,
                                  NULL,
                                  0,
                                  0.9,
                                  1.4,
                                  0.95,
                                  "Stages against vapour load"};
    stagecal_plot_resid_data rd = {fitted, res, NULL, grp, NS, runs, 3, NULL};
    stagecal_plot_resid_data rdt = {fitted, res, t, grp, NS, runs, 3, NULL};

    double tt[NT], ts[NT], lt[2], ln[2], ft[4], fc[4], flo[4], fhi[4];
    int alarm[NT] = {0};
    for (int i = 0; i < NT; i++) {
        tt[i] = 1.73e9 + 30.4 * 86400.0 * i;
        ts[i] = 9.3 - 0.11 * i + 0.12 * sin(2.1 * i);
        alarm[i] = i >= NT - 2;
    }
    lt[0] = tt[0], lt[1] = tt[NT - 1], ln[0] = 9.3, ln[1] = 9.3 - 0.11 * (NT - 1);
    for (int i = 0; i < 4; i++) {
        ft[i] = tt[NT - 1] + 45 * 86400.0 * i;
        fc[i] = ln[1] - 0.11 * 1.5 * i;
        flo[i] = fc[i] - 0.15 * (i + 1), fhi[i] = fc[i] + 0.15 * (i + 1);
    }
    stagecal_plot_trend_data td = {tt,   ts, NT, alarm, lt,  ln, 2,   8.65,
                                   9.75, ft, fc, flo,   fhi, 4,  7.8, NULL};

    double bt[NB], xd[NB], xdl[NB], xdh[NB], xb[NB];
    for (int i = 0; i < NB; i++) {
        bt[i] = 900.0 * i;
        double u = i / (double)(NB - 1);
        xd[i] = 0.985 - 0.25 * pow(u, 4);
        xdl[i] = xd[i] - 0.02 * u * u, xdh[i] = fmin(1.0, xd[i] + 0.02 * u * u);
        xb[i] = 0.45 * exp(-2.2 * u);
    }
    stagecal_plot_batch_curve curves[2] = {{"distillate xD", xd, xdl, xdh},
                                           {"pot xB", xb, NULL, NULL}};
    stagecal_plot_batch_data bd = {
        bt, NB, curves, 2, "mole fraction of the light component [mol/mol]", 0.95, NULL};

    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.4, &err);
    stagecal_plot_chart *ch[7] = {0};
    int rc = vle ? STAGECAL_OK : err.code;
    if (!rc)
        rc = stagecal_plot_mccabe_condition(vle, 0.96, NAN, 3.0, 7.0, 0.8, &ch[0], &err);
    if (!rc)
        rc = stagecal_plot_fit(&fd, &ch[1], &err);
    if (!rc)
        rc = stagecal_plot_fit(&fdf, &ch[2], &err);
    if (!rc)
        rc = stagecal_plot_resid(&rd, &ch[3], &err);
    if (!rc)
        rc = stagecal_plot_resid(&rdt, &ch[4], &err);
    if (!rc)
        rc = stagecal_plot_trend(&td, &ch[5], &err);
    if (!rc)
        rc = stagecal_plot_batch(&bd, &ch[6], &err);
    if (rc) {
        fprintf(stderr, "bench_report: %s\n", err.text);
        return 2;
    }
    stagecal_report_figure figs[7] = {
        {ch[0], "McCabe\xe2\x80\x93Thiele diagram at R = 3, E_MV = 0.8, 7 stages incl. pot."},
        {ch[1], "Window stage counts against reflux ratio with the fit and its 95 % bands."},
        {ch[2], "The same stage counts against the F-factor."},
        {ch[3], "Residuals against fitted stages."},
        {ch[4], "Residuals against sample time."},
        {ch[5], "Stages at the reference condition over the fictional campaigns."},
        {ch[6], "Predicted distillate and pot compositions over a batch, with bands."}};

    stagecal_report_item job[] = {
        {"column", "D-101 at Demo Works (fictional)"},
        {"system", "light / heavy, constant relative volatility 2.4 (invented)"},
        {"stage convention", "stages include the pot; column stages = stages \xe2\x88\x92 1"},
        {"correlation", "saturating: stages = a\xc2\xb7(1 \xe2\x88\x92 exp(\xe2\x88\x92"
                        "b\xc2\xb7"
                        "R))"},
        {"fitted", "2026-11-30T14:02:11Z by stagecal 0.1.0, seed 12345"},
        {"evidence", "12 windows from 3 runs (36 samples)"}};
    const char *in_head[] = {"file", "SHA-256", "rows"};
    const char *in_cells[] = {"datasets/demo/run_a.csv",
                              "0f1e2d3c4b5a69788796a5b4c3d2e1f00f1e2d3c4b5a69788796a5b4c3d2e1f0",
                              "412",
                              "datasets/demo/run_b.csv",
                              "1a2b3c4d5e6f708192a3b4c5d6e7f8091a2b3c4d5e6f708192a3b4c5d6e7f809",
                              "388"};
    stagecal_report_table inputs = {"Input files (invented checksums)", in_head, 3, in_cells, 2};
    const char *findings[] = {"run_a.csv:57: xB above xD, row skipped",
                              "run_b.csv: 3 gaps longer than 10 min split windows",
                              "mass balance (Rayleigh) closes within 2.1 % on every run"};
    const char *w_head[] = {"window", "run", "from", "to", "R [-]", "stages [-]", "u [-]"};
    const char *w_cells[] = {"1", "A", "08:10", "09:05", "1.2", "4.3", "0.2",
                             "2", "A", "10:20", "11:40", "2.5", "6.7", "0.3",
                             "3", "B", "07:45", "08:30", "3.1", "7.5", "0.3",
                             "4", "C", "13:00", "14:10", "inf", "9.1", "0.4"};
    stagecal_report_table windows = {NULL, w_head, 7, w_cells, 4};
    const char *f_head[] = {"parameter", "value", "std. error", "95 % CI"};
    const char *f_cells[] = {"a",       "9.20",  "0.21",  "[8.76, 9.64]",
                             "b [1/R]", "0.550", "0.041", "[0.465, 0.635]"};
    stagecal_report_table fit = {"Parameters", f_head, 4, f_cells, 2};
    stagecal_report_item summary[] = {{"residual \xcf\x83", "0.30 stages, 10 dof"},
                                      {"envelope", "R 0.6 \xe2\x80\x93 6.9 and total reflux"}};
    stagecal_report_item hetp[] = {{"packed height", "4.20 m"},
                                   {"HETP at R = 3", "0.52 m (95 % CI 0.47 \xe2\x80\x93 0.58 m)"}};
    stagecal_report_item trend[] = {
        {"stage loss", "0.11 stages per month (95 % CI 0.06 \xe2\x80\x93 0.16)"},
        {"alarm", "last two calibrations below the lower control limit"},
        {"forecast", "below 7.8 stages (product specification) in about 9 months"}};
    const char *warnings[] = {"R = 8.0 lies above the fitted envelope (0.6 \xe2\x80\x93 6.9): "
                              "extrapolation"};
    stagecal_report rep = {
        .title = "Stage calibration report \xe2\x80\x94 D-101 (demo)",
        .subtitle = "column D-101 \xc2\xb7 fitted 2026-11-30T14:02:11Z",
        .demo_notice = "Demo data: the site, column, campaigns and numbers are invented.",
        .job = job,
        .n_job = sizeof job / sizeof job[0],
        .inputs = &inputs,
        .findings = findings,
        .n_findings = 3,
        .windows = &windows,
        .fit = &fit,
        .fit_summary = summary,
        .n_fit_summary = 2,
        .figures = figs,
        .n_figures = 7,
        .hetp = hetp,
        .n_hetp = 2,
        .trend = trend,
        .n_trend = 3,
        .warnings = warnings,
        .n_warnings = 1,
    };

    double *times = calloc((size_t)repeats, sizeof *times);
    if (!times)
        return 2;
    stagecal_report_params par = stagecal_report_default_params();
    for (int k = 0; k < repeats && !rc; k++) {
        double t0 = now_s();
        rc = stagecal_report_write(&rep, &par, out, &err);
        times[k] = now_s() - t0;
    }
    for (int i = 0; i < 7; i++)
        stagecal_plot_chart_free(ch[i]);
    stagecal_vle_free(vle);
    if (rc) {
        fprintf(stderr, "bench_report: %s\n", err.text);
        free(times);
        return 2;
    }
    qsort(times, (size_t)repeats, sizeof *times, cmp_double);
    double median = times[repeats / 2];
    printf("bench_report: full demo report (7 charts) -> %s\n", out);
    printf("bench_report: %d renderings, best %.3f s, median %.3f s (target < %.1f s)\n", repeats,
           times[0], median, TARGET_S);
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("bench_report: %.2f reports/s (%d samples each); peak RSS %.1f MB\n", 1.0 / median, NS,
           ru.ru_maxrss / 1024.0);
    free(times);
    return median < TARGET_S ? 0 : 1;
}
