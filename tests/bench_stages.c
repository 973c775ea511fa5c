/*
 * bench_stages.c — throughput of stagecal_stages_invert (not run by ctest).
 *
 * Two workloads, samples per second on one core (single thread):
 *   1. 10^6 constant-α samples: α in [1.5, 4], xD in [0.85, 0.995], R in [1.5, 20]
 *      (every tenth at total reflux), N in [2, 20] stages; xB comes from forward
 *      stepping (untimed) and is then perturbed by up to ±1 % so that a few samples
 *      are pinched or invalid, as logged data would be.
 *   2. 10^5 NRTL samples: ethanol–water, NRTL-A after Gmehling & Onken 1977 at 101.325 kPa,
 *      water Antoine Bridgeman–Aldrich and ethanol Ambrose–Sprake (NIST WebBook);
 *      xD in [0.6, 0.86], R in [2, 12], N in [2, 15], xB as above.
 * Also (no target): 10^5 of the constant-α samples with E_MV = 0.6.
 * Rates are given per wall second and per CPU second (the latter is the single-core
 * rate even on a shared machine).
 * Targets (issue 2): ≥ 2·10^6/s constant α, ≥ 2·10^5/s NRTL, Release build.
 * Usage: bench_stages [n_alpha [n_nrtl]]; fixed seed, output on stdout.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_rng.h>

#include "stagecal/stages.h"
#include "stagecal/vle.h"

typedef struct {
    double xd, xb, r;
} sample;

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* CPU time of this process: the rate per core even when the machine is shared. */
static double cpu_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Fill s[0..n) by forward stepping from random (xD, R, N); returns 0 on success. */
static int make_samples(const stagecal_vle *v, gsl_rng *rng, sample *s, size_t n, double xd_lo,
                        double xd_hi, double r_lo, double r_hi, double n_lo, double n_hi,
                        int with_inf)
{
    for (size_t i = 0; i < n; i++) {
        double xb = 0;
        size_t len;
        int status = -1;
        s[i].xd = xd_lo + (xd_hi - xd_lo) * gsl_rng_uniform(rng);
        s[i].r = (with_inf && i % 10 == 0) ? INFINITY : r_lo + (r_hi - r_lo) * gsl_rng_uniform(rng);
        double nst = n_lo + (n_hi - n_lo) * gsl_rng_uniform(rng);
        if (stagecal_stages_step(v, s[i].xd, s[i].r, nst, 1.0, NULL, &xb, NULL, 0, &len, &status,
                                 NULL) != STAGECAL_OK ||
            status != STAGECAL_STAGES_OK)
            return -1;
        s[i].xb = xb * (1.0 + 0.02 * (gsl_rng_uniform(rng) - 0.5));
    }
    return 0;
}

static void run(const char *name, const stagecal_vle *const *v, const sample *s, size_t n, double e)
{
    size_t count[4] = {0, 0, 0, 0}, errors = 0;
    double sum = 0.0;
    stagecal_stages_params par = stagecal_stages_default_params();
    double t0 = now_s(), c0 = cpu_s();
    for (size_t i = 0; i < n; i++) {
        stagecal_stages_result res;
        if (stagecal_stages_invert(v[i], s[i].xd, s[i].xb, s[i].r, e, &par, &res, NULL) !=
            STAGECAL_OK) {
            errors++;
            continue;
        }
        count[res.status & 3]++;
        sum += res.stages;
    }
    double dt = now_s() - t0, dc = cpu_s() - c0;
    printf("%-6s %8zu samples  wall %.3f s (%.3e /s)  cpu %.3f s (%.3e /s)\n"
           "       ok %zu pinch %zu azeotrope %zu invalid %zu errors %zu (mean stages of ok "
           "%.4f)\n",
           name, n, dt, (double)n / dt, dc, (double)n / dc, count[0], count[1], count[2], count[3],
           errors, count[0] ? sum / (double)count[0] : 0.0);
}

int main(int argc, char **argv)
{
    size_t na = argc > 1 ? strtoul(argv[1], NULL, 10) : 1000000;
    size_t nn = argc > 2 ? strtoul(argv[2], NULL, 10) : 100000;
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261201);

    /* Constant α: 64 models, drawn per sample, so the α varies without allocating. */
    enum { NMOD = 64 };
    stagecal_vle *mods[NMOD];
    for (size_t k = 0; k < NMOD; k++)
        mods[k] = stagecal_vle_alloc_alpha(1.5 + 2.5 * (double)k / (NMOD - 1), NULL);
    sample *s = malloc(na * sizeof *s);
    const stagecal_vle **vs = malloc((na > nn ? na : nn) * sizeof *vs);
    if (!s || !vs || !rng)
        return 1;
    for (size_t i = 0; i < na; i++) {
        vs[i] = mods[gsl_rng_uniform_int(rng, NMOD)];
        if (make_samples(vs[i], rng, s + i, 1, 0.85, 0.995, 1.5, 20.0, 2.0, 20.0, i % 10 == 0))
            return fprintf(stderr, "bench_stages: forward stepping failed\n"), 1;
    }
    run("alpha", vs, s, na, 1.0);
    /* Extra (no target): E_MV = 0.6 adds a bracketed GSL Brent solve per step. */
    run("a,E0.6", vs, s, na / 10, 0.6);

    const stagecal_antoine ant[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                     {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    stagecal_error err;
    double t0 = now_s();
    stagecal_vle *nrtl =
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ant, p, 5, 101325.0, NULL, &err);
    if (!nrtl)
        return fprintf(stderr, "bench_stages: %s\n", err.text), 1;
    printf("nrtl model alloc: %.3f ms\n", 1e3 * (now_s() - t0));
    for (size_t i = 0; i < nn; i++)
        vs[i] = nrtl;
    if (make_samples(nrtl, rng, s, nn, 0.6, 0.86, 2.0, 12.0, 2.0, 15.0, 0))
        return fprintf(stderr, "bench_stages: forward stepping failed (nrtl)\n"), 1;
    run("nrtl", vs, s, nn, 1.0);

    /* vle alone, to apportion the NRTL time: one x*(y) and one y*(x) per call. */
    t0 = now_s();
    double acc = 0.0;
    for (size_t i = 0; i < nn; i++) {
        double x, y;
        stagecal_vle_xstar(nrtl, 0.3 + 0.5 * (double)i / (double)nn, &x);
        stagecal_vle_ystar(nrtl, x, &y);
        acc += y;
    }
    double dt = now_s() - t0;
    printf("nrtl vle   x*(y)+y*(x) pairs: %.3e pairs/s (checksum %.6f)\n", (double)nn / dt,
           acc / (double)nn);

    stagecal_vle_free(nrtl);
    for (size_t k = 0; k < NMOD; k++)
        stagecal_vle_free(mods[k]);
    free(s);
    free(vs);
    gsl_rng_free(rng);
    return 0;
}
