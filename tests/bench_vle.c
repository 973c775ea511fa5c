/*
 * bench_vle.c — speed of y*(x) and x*(y) for the NRTL-A ethanol–water model (the
 * activity-model hot path of stage inversion) and of the model's alloc.
 *
 * Target (issue 2): 2·10⁵ stage inversions/s on one core, each doing 10–30 calls of
 * y*(x) or x*(y), i.e. ≤ ~170 ns per call. Prints ns per call and the inversion rate
 * that 30 calls per inversion would allow. Not run by ctest.
 */
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_rng.h>

#include "stagecal/vle.h"

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts); /* CPU time: the machine may be shared */
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

int main(void)
{
    gsl_set_error_handler_off();
    const stagecal_antoine ant[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                     {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    stagecal_error err;
    double t0 = now();
    stagecal_vle *v =
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ant, p, 5, 101325.0, NULL, &err);
    double t_alloc = now() - t0;
    if (!v) {
        fprintf(stderr, "bench_vle: %s\n", err.text);
        return 1;
    }
    enum { N = 1 << 20, REP = 8 };
    double *u = malloc(N * sizeof *u);
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    if (!u || !r)
        return 1;
    gsl_rng_set(r, 12345);
    for (size_t i = 0; i < N; i++)
        u[i] = gsl_rng_uniform(r);
    double sink = 0.0, out;
    t0 = now();
    for (int k = 0; k < REP; k++)
        for (size_t i = 0; i < N; i++) {
            stagecal_vle_ystar(v, u[i], &out);
            sink += out;
        }
    double t_y = (now() - t0) / ((double)N * REP);
    t0 = now();
    for (int k = 0; k < REP; k++)
        for (size_t i = 0; i < N; i++) {
            stagecal_vle_xstar(v, u[i], &out);
            sink += out;
        }
    double t_x = (now() - t0) / ((double)N * REP);
    double worst = t_y > t_x ? t_y : t_x;
    printf("nrtl alloc (2049 nodes): %.2f ms\n", 1e3 * t_alloc);
    printf("ystar: %.1f ns/call\nxstar: %.1f ns/call\n", 1e9 * t_y, 1e9 * t_x);
    printf("inversions/s at 30 calls each: %.3g (target 2e5)\n", 1.0 / (30.0 * worst));
    printf("(checksum %.6f)\n", sink);
    gsl_rng_free(r);
    free(u);
    stagecal_vle_free(v);
    return 0;
}
