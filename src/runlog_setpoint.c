/*
 * runlog_setpoint.c — reflux set points from a logged R that may be a measured ratio
 * (see stagecal_runlog_setpoints in stagecal/runlog.h, docs/runlog.md "Reflux set points").
 *
 * A flow-ratio reading scatters about its set point; taking every change of the reading as a
 * new set point ends a quasi-steady window at every row. The set points are found instead by
 * binary segmentation (Vostrikova 1981, "Detecting 'disorder' in multidimensional random
 * processes", Soviet Math. Dokl. 24:55-59): the stretch is split where the standardised
 * difference of the means on either side is largest — the likelihood-ratio (CUSUM) statistic
 * of one change in the mean of independent normal readings with known variances (Hinkley 1970,
 * "Inference about the change-point in a sequence of random variables", Biometrika
 * 57(1):1-17) — when that maximum exceeds the normal quantile at α/(2(n − 1)) (a Bonferroni
 * bound over the n − 1 split points, so a steady stretch is split with probability ≤ α), and
 * each part is tested again.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "runlog_internal.h"

/* Stretches of more rows than this estimate the reading noise from their successive
 * differences as well (common practice, no source: the median of 20 differences ignores up to
 * 9 set-point changes among them). */
#define SETPOINT_MIN_NOISE_ROWS 20

/* Stated standard uncertainty of one R reading. */
static double u_stated(const stagecal_column *col, double r)
{
    if (!col)
        return 0.0;
    return hypot(col->u.r, col->u.r_rel * r);
}

/* Reading noise of R over x[0..n) from the successive differences (robust to the few
 * set-point changes among them): 1.4826·median|Δx|/√2; 0 when most differences are 0. */
static double diff_noise(const double *x, size_t n, double *tmp)
{
    if (n < 3)
        return 0.0;
    for (size_t i = 0; i + 1 < n; i++)
        tmp[i] = fabs(x[i + 1] - x[i]);
    /* the median of the sorted differences, by selection: the same double (no NaN: x is
     * finite; no −0: absolute values) */
    return 1.4826 * runlog_median(tmp, n - 1) / M_SQRT2;
}

/* Splits x[a..b) (weights w = 1/σ²) recursively; marks a segment start in cut[]. */
static void segment(const double *x, const double *w, size_t a, size_t b, double alpha,
                    unsigned char *cut)
{
    size_t n = b - a;
    if (n < 2)
        return;
    double sw = 0, swx = 0;
    int same = 1;
    for (size_t i = a; i < b; i++) {
        sw += w[i], swx += w[i] * x[i];
        same &= x[i] == x[a];
    }
    if (same)
        return;
    double lw = 0, lwx = 0, best = 0;
    size_t at = 0;
    for (size_t k = a + 1; k < b; k++) { /* left [a, k), right [k, b) */
        lw += w[k - 1], lwx += w[k - 1] * x[k - 1];
        double rw = sw - lw, d = lwx / lw - (swx - lwx) / rw;
        double t = fabs(d) / sqrt(1 / lw + 1 / rw);
        if (t > best)
            best = t, at = k;
    }
    double crit = gsl_cdf_ugaussian_Qinv(alpha / (2.0 * (double)(n - 1)));
    if (!(best > crit))
        return;
    cut[at] = 1;
    segment(x, w, a, at, alpha, cut);
    segment(x, w, at, b, alpha, cut);
}

/* Set point of the segment x[0..n) and its standard uncertainty (see runlog.h). */
static void segment_value(const stagecal_column *col, const double *x, size_t n, double *r,
                          double *u)
{
    int same = 1;
    for (size_t i = 1; i < n; i++)
        same &= x[i] == x[0];
    if (same) { /* R logged as a set point: that value, taken as exact for its windows (the
                   stated u(R) still enters each row's u(N), runlog_invert.c) */
        *r = x[0];
        *u = 0.0;
        return;
    }
    double m = gsl_stats_mean(x, 1, n), s = gsl_stats_sd_m(x, 1, n, m);
    double rho = n > 2 ? gsl_stats_lag1_autocorrelation_m(x, 1, n, m) : 0.0;
    rho = isfinite(rho) ? fmin(fmax(rho, 0.0), 0.99) : 0.0;
    double neff = fmax(1.0, (double)n * (1 - rho) / (1 + rho));
    *r = m;
    *u = fmax(s, u_stated(col, m)) / sqrt(neff);
}

int runlog_setpoints_run(stagecal_runlog *log, size_t k, const stagecal_column *col)
{
    if (runlog_ensure_optional(log, &log->r_set) || runlog_ensure_optional(log, &log->u_r_set))
        return -1;
    const stagecal_runlog_run *run = &log->runs[k];
    size_t first = run->first, end = first + run->n;
    double *w = malloc((run->n ? run->n : 1) * sizeof *w);
    unsigned char *cut = calloc(run->n ? run->n : 1, 1);
    if (!w || !cut) {
        free(w), free(cut);
        return -1;
    }
    for (size_t a = first; a < end;) {
        double ra = log->r[a];
        if (!(isfinite(ra) && ra > 0)) { /* total reflux (inf), R = 0 (no reflux) or missing
                                            (NaN): a row of its own, as logged */
            log->r_set[a] = ra;
            log->u_r_set[a] = isinf(ra) || ra == 0 ? 0.0 : NAN;
            a++;
            continue;
        }
        size_t b = a + 1;
        while (b < end && isfinite(log->r[b]) && log->r[b] > 0)
            b++;
        const double *x = log->r + a;
        size_t n = b - a;
        /* R logged as set points: most successive readings are equal (a measured ratio is
         * never equal to 6 digits twice running), so every change of the value is a change of
         * set point, whatever u(R) the column file states */
        size_t same = 0;
        for (size_t i = 1; i < n; i++)
            same += x[i] == x[i - 1];
        int exact = 2 * same >= n - 1;
        memset(cut, 0, n);
        if (!exact) { /* the weights of the segmentation (a logged set point needs none) */
            /* the reading noise from the data only where the differences are many enough for
             * their median to ignore the set-point changes among them */
            double noise = n > SETPOINT_MIN_NOISE_ROWS ? diff_noise(x, n, w) : 0.0;
            double umin = HUGE_VAL;
            for (size_t i = 0; i < n; i++) {
                w[i] = fmax(noise, u_stated(col, x[i]));
                umin = w[i] > 0 ? fmin(umin, w[i]) : umin;
            }
            exact = !(umin < HUGE_VAL);
            double swxx = 0;
            for (size_t i = 0; i < n; i++) { /* a row without a stated u takes the least */
                double s = w[i] > 0 ? w[i] : umin;
                w[i] = 1 / (s * s);
                swxx += w[i] * x[i] * x[i];
            }
            /* sums the segmentation cannot form (R near 1e308 overflows them: the means came
             * out NaN and a row logged at R = 5 took a set point of 4e307): every change of the
             * value is a set point, as for a logged set point */
            exact |= !isfinite(swxx);
        }
        if (exact) /* nothing says the readings scatter: a set point changes with the value */
            for (size_t i = 1; i < n; i++)
                cut[i] = !(x[i] == x[i - 1]);
        else
            segment(x, w, 0, n, STAGECAL_SETPOINT_ALPHA, cut);
        for (size_t s = 0; s < n;) {
            size_t e = s + 1;
            while (e < n && !cut[e])
                e++;
            double r, u;
            segment_value(col, x + s, e - s, &r, &u);
            for (size_t i = s; i < e; i++) {
                log->r_set[a + i] = r;
                log->u_r_set[a + i] = u;
            }
            s = e;
        }
        a = b;
    }
    free(w), free(cut);
    return 0;
}

int stagecal_runlog_setpoints(stagecal_runlog *log, const stagecal_column *col, stagecal_error *err)
{
    for (size_t k = 0; k < log->nruns; k++)
        if (runlog_setpoints_run(log, k, col) != 0)
            return error_set(err, STAGECAL_ENOMEM, "out of memory");
    return STAGECAL_OK;
}
