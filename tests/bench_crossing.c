/*
 * bench_crossing.c — the crossing step of the table inversion (stages_step.c) one row at a time
 * (stepper_crossing) against four rows at a time (stepper_crossing4: the AVX2 lanes where the
 * processor has them), on the crossings of the NRTL benchmark's rows (tests/bench_invert.c
 * nrtl: ethanol–water NRTL-A, xD 0.80 → 0.70, xB what 5 stages at R = 4 reach plus Gaussian
 * noise; GSL mt19937, seed 1).
 *
 *   usage: bench_crossing [CROSSINGS] [REPEATS]     (defaults 100000, 20)
 *
 * The rows are generated until CROSSINGS of them cross (about nine in ten do).
 * Prints the CPU time of each way over REPEATS passes. For instruction counts, one pass under
 * callgrind with the timed function named, e.g.
 *   valgrind --tool=callgrind --toggle-collect=run_four build-rel/tests/bench_crossing 100000 1
 * (run_one for the per-row calls).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "stagecal/stages.h"
#include "stagecal/vle.h"
/* after every system header: banned.h redefines libc names */
#include "stages_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

#include "crossing_rows.h"

static double cpu(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static tl3 tl_of(const double *o)
{
    tl3 r = {o[0], {o[1], o[2], o[3]}};
    return r;
}

/* Each way reads the arguments from the rows' plain-double records (tab_cross), as the
 * inversion's crossing phase does. */
__attribute__((noinline)) static double run_one(const tab_cross *c, size_t n, tl3 *f)
{
    double s = 0.0;
    for (size_t i = 0; i < n; i++) {
        f[i] = stepper_crossing(tl_of(c[i].m), tl_of(c[i].b), tl_of(c[i].x_prev), tl_of(c[i].xn),
                                tl_of(c[i].yn), tl_of(c[i].x_target));
        s += f[i].v;
    }
    return s;
}

__attribute__((noinline)) static double run_four(const tab_cross *c, size_t n, tl3 *f, int avx2)
{
    double s = 0.0, o[4][4];
    size_t i = 0;
    for (; i + 4 <= n; i += 4) {
        stepper_crossing4(c + i, o, avx2);
        for (int j = 0; j < 4; j++) {
            tl3 x = {o[j][0], {o[j][1], o[j][2], o[j][3]}};
            f[i + (size_t)j] = x;
            s += x.v;
        }
    }
    for (; i < n; i++) {
        tl3 x = stepper_crossing(tl_of(c[i].m), tl_of(c[i].b), tl_of(c[i].x_prev), tl_of(c[i].xn),
                                 tl_of(c[i].yn), tl_of(c[i].x_target));
        f[i] = x;
        s += x.v;
    }
    return s;
}

int main(int argc, char **argv)
{
    size_t rows = argc > 1 ? (size_t)strtoul(argv[1], NULL, 10) : 100000;
    int reps = argc > 2 ? (int)strtol(argv[2], NULL, 10) : 20;
    if (rows < 100 || reps < 1) {
        fprintf(stderr, "usage: %s [CROSSINGS >= 100] [REPEATS >= 1]\n", argv[0]);
        return 64;
    }
    gsl_set_error_handler_off();
    const stagecal_antoine ew[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    stagecal_error err;
    stagecal_vle *v =
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, p, 5, 101325.0, NULL, &err);
    if (!v) {
        fprintf(stderr, "bench_crossing: %s\n", err.text);
        return 70;
    }
    crossing_args *a = malloc(rows * sizeof *a);
    tab_cross *c = malloc(rows * sizeof *c);
    tl3 *f1 = malloc(rows * sizeof *f1), *f4 = malloc(rows * sizeof *f4);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    if (!a || !c || !f1 || !f4 || !rng)
        return 70;
    gsl_rng_set(rng, 1);
    size_t per_run = rows / 100, n = 0;
    for (size_t i = 0; n < rows && i < 4 * rows; i++) {
        double d = 0.80 - 0.10 * (double)(i % per_run) / (double)per_run, b = NAN;
        size_t len;
        int status;
        stagecal_stages_step(v, d, 4.0, 5.0, 1.0, NULL, &b, NULL, 0, &len, &status, NULL);
        double xd = d + gsl_ran_gaussian(rng, 0.002), xb = b + gsl_ran_gaussian(rng, 0.005);
        n += (size_t)crossing_of_row(v, xd, xb, 4.0, &a[n]);
    }
    for (size_t i = 0; i < n; i++)
        crossing_put(&c[i], &a[i]);
    int avx2 = stages_have_avx2();
    double s1 = 0.0, s4 = 0.0, t0 = cpu();
    for (int r = 0; r < reps; r++)
        s1 += run_one(c, n, f1);
    double t1 = cpu();
    for (int r = 0; r < reps; r++)
        s4 += run_four(c, n, f4, avx2);
    double t4 = cpu() - t1;
    t1 -= t0;
    size_t differ = 0;
    for (size_t i = 0; i < n; i++)
        differ += memcmp(&f1[i], &f4[i], sizeof f1[i]) != 0;
    printf("bench_crossing: %zu crossings, %d passes, AVX2 %s\n", n, reps, avx2 ? "yes" : "no");
    printf("one row a call   %.4f s CPU  %.1f ns a crossing\n", t1,
           1e9 * t1 / (double)reps / (double)n);
    printf("four rows a call %.4f s CPU  %.1f ns a crossing  (%.2fx)\n", t4,
           1e9 * t4 / (double)reps / (double)n, t1 / t4);
    printf("results differing: %zu (checksums %.17g %.17g)\n", differ, s1, s4);
    gsl_rng_free(rng);
    free(a), free(c), free(f1), free(f4);
    stagecal_vle_free(v);
    return differ ? 1 : 0;
}
