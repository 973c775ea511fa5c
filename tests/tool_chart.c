/*
 * tool_chart.c — run-length study of the control charts (include/stagecal/chart.h and
 * the EWMA of trend.h).
 *
 * Simulator: a sequence of points x_i = μ + e_i, e_i ~ N(0, φ·s_i²), with stated
 * errors s_i uniform in [0.1, 0.4] stages and a true scale φ (1: the stated errors are
 * right; 1.25²: they are 25 % too small); μ = 8 stages. In-control run lengths count
 * points from the first charted one (the self-starting charts chart from the third
 * point); a run is cut at 20 000 points. Shifts of δ·sqrt(φ)·s_i (δ = 1, 2) start after
 * PRE in-control charted points; their run length counts from the shift, over
 * sequences without an earlier alarm.
 *
 * Charts: (1) the self-starting EWMA and CUSUM on Q statistics (chart.h);
 * (2) the former chart for comparison: EWMA of z = (x − b)/sqrt(s² + s_b²) with the
 * baseline b the weighted mean of the first 3 points (stagecal_trend_ewma).
 *
 * usage: tool_chart [REPS [SEED [PRE]]]   (defaults 2000, 1, 10; PRE ≤ 60 in-control points
 * before a shift)
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "stagecal/chart.h"

#define CAP 20000
#define PRE_MAX 60
static size_t PRE = 10;

static stagecal_trend_point pts[CAP + PRE_MAX + 3];
static stagecal_chart_point cp[CAP + PRE_MAX + 3];
static stagecal_trend_ewma_point ep[CAP + PRE_MAX + 3];

/* Fills n points; the shift (in σ of each point) starts at index `from`. */
static void make(gsl_rng *rng, size_t n, double phi, double shift, size_t from)
{
    for (size_t i = 0; i < n; i++) {
        double s = 0.1 + 0.3 * gsl_rng_uniform(rng), sd = sqrt(phi) * s;
        pts[i].t_s = (double)i;
        pts[i].se = s;
        pts[i].value = 8 + gsl_ran_gaussian(rng, sd) + (i >= from ? shift * sd : 0);
    }
}

/* First alarm index at or after `from` of chart `which` (0 EWMA-Q, 1 CUSUM-Q, 2 old
 * EWMA), −1 none; *early = 1 when an alarm came before `from`. */
static long first_alarm(int which, size_t n, size_t from, int *early)
{
    *early = 0;
    for (size_t i = 0; i < n; i++) {
        int a = which == 0 ? cp[i].ewma_alarm : which == 1 ? cp[i].cusum_alarm : ep[i].alarm;
        if (!a)
            continue;
        if (i < from) {
            *early = 1;
            return -1;
        }
        return (long)i;
    }
    return -1;
}

static void run_charts(size_t n)
{
    stagecal_chart_params par = stagecal_chart_default_params();
    stagecal_trend_ewma_params ew = stagecal_trend_ewma_default_params();
    stagecal_chart_selfstart(pts, n, &par, cp, NULL, NULL);
    double sw = 0, swx = 0;
    for (size_t i = 0; i < 3; i++) {
        double w = 1 / (pts[i].se * pts[i].se);
        sw += w;
        swx += w * pts[i].value;
    }
    stagecal_trend_ewma(pts + 3, n - 3, swx / sw, 1 / sqrt(sw), &ew, ep + 3, NULL, NULL);
    for (size_t i = 0; i < 3; i++)
        ep[i].alarm = 0;
}

int main(int argc, char **argv)
{
    int reps = argc > 1 ? atoi(argv[1]) : 2000;
    unsigned long seed = argc > 2 ? strtoul(argv[2], NULL, 10) : 1;
    if (argc > 3 && atoi(argv[3]) > 0 && atoi(argv[3]) <= PRE_MAX)
        PRE = (size_t)atoi(argv[3]);
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    stagecal_chart_params par = stagecal_chart_default_params();
    stagecal_trend_ewma_params ew = stagecal_trend_ewma_default_params();
    double d_ewma[3], d_cusum[3];
    const double shifts[3] = {0, 1, 2};
    for (int s = 0; s < 3; s++) {
        stagecal_trend_ewma_arl(&ew, shifts[s], 201, &d_ewma[s], NULL);
        stagecal_chart_cusum_arl(par.k, par.h, shifts[s], 201, &d_cusum[s], NULL);
    }
    const char *names[3] = {"self-starting EWMA on Q (lambda 0.2, L 2.962)",
                            "self-starting CUSUM on Q (k 0.5, h 5)",
                            "former EWMA, baseline = mean of 3 points"};
    printf("chart run-length study: %d sequences per cell, seed %lu, cut at %d points, shifts "
           "after %zu in-control points\n",
           reps, seed, CAP, PRE);
    printf("| chart | stated se | ARL0 design | ARL0 simulated | ARL 1 sigma (design) | ARL 2 "
           "sigma (design) |\n|---|---|---|---|---|---|\n");
    const double phis[2] = {1.0, 1.25 * 1.25};
    for (int c = 0; c < 3; c++) {
        for (int f = 0; f < 2; f++) {
            double arl[3];
            for (int s = 0; s < 3; s++) {
                double sum = 0, cnt = 0;
                for (int r = 0; r < reps; r++) {
                    size_t from = s == 0 ? 2 : 2 + PRE, n = from + (s == 0 ? CAP : 400);
                    make(rng, n, phis[f], shifts[s], s == 0 ? n : from);
                    run_charts(n);
                    int early;
                    long a = first_alarm(c, n, c == 2 && s == 0 ? 3 : from, &early);
                    if (early)
                        continue;
                    long start = (long)(c == 2 && s == 0 ? 3 : from);
                    sum += a < 0 ? (double)(n - (size_t)start) : (double)(a - start + 1);
                    cnt++;
                }
                arl[s] = cnt > 0 ? sum / cnt : NAN;
            }
            const double *d = c == 1 ? d_cusum : d_ewma;
            printf("| %s | %s | %.0f | %.0f | %.1f (%.1f) | %.2f (%.2f) |\n", names[c],
                   f == 0 ? "right" : "25 % too small", d[0], arl[0], arl[1], d[1], arl[2], d[2]);
        }
    }
    gsl_rng_free(rng);
    return 0;
}
