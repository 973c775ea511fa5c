/*
 * bench_invert.c — speed of the per-row inversion with its uncertainty, the compute part
 * of run-log mode, for constant α and for an NRTL model; writes the matching run log for
 * the whole-process comparison with the numpy peers (tests/peers/, docs/performance.md).
 *
 *   usage: bench_invert alpha|nrtl [ROWS] [LOG.csv]
 *
 * Data (invented, deterministic): 100 runs; xD falls linearly through each run (α:
 * 0.95 → 0.88, NRTL ethanol–water: 0.80 → 0.70), xB is the pot that 5 stages at R = 4
 * reach from it (α: Smoker's closed form, tests/oracle_smoker.h; NRTL: stagecal's
 * forward stepping), both with Gaussian noise (σ 0.002 on xD, 0.005 on xB; GSL mt19937,
 * seed 1). Models: α = 2.5 (datasets/columns/demo_alpha.json); NRTL-A ethanol–water at
 * 101.325 kPa (datasets/columns/kestrel_c3_ethanol_water.json).
 *
 * Per row: stages and u(N)² = (∂N/∂xD·u_xD)² + (∂N/∂xB·u_xB)² + (∂N/∂R·u_R)², with the
 * column files' uncertainties. The rows go through stages_invert_many_quiet (src/internal.h) 128
 * at a time: the call run-log mode makes (runlog_invert.c, row_block_batched: the plain rows of a
 * block together, without the reason texts of the rows that are not ok, which run-log mode never
 * reads; stagecal_stages_invert_many is the same call with them). For constant α at E_MV = 1 the
 * closed form takes four rows at a time where the processor has AVX2.
 * Timed three ways in one run, CPU time of the process (CLOCK_PROCESS_CPUTIME_ID, which a
 * loaded machine does not inflate):
 *   now      default parameters: closed form for α (E_MV = 1), tangent-linear ∂;
 *   step     closed_form = 0: stepping, tangent-linear ∂;
 *   before   closed_form = 0, want_sensitivities = 2: stepping and central differences
 *            (what run-log mode did before).
 * Prints rows/s and the peak resident set size (getrusage). With LOG.csv it also writes
 * the rows as a run log (columns run, time[s], W (falling 10 → 8 kmol through each run),
 * xD, xB, R, and for α V and T_top as in tests/bench_runlog.c; the NRTL log has no V, so
 * no F-factor is asked for).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include "oracle_smoker.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

static double cpu(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Rows per call, as run-log mode inverts them (runlog_invert.c, INVERT_BATCH_ROWS). */
#define PART 128

/* Inverts every row with par the way run-log mode does: parts of PART rows through
 * stages_invert_many_quiet, its call; returns the CPU seconds and the sum of stages + u(N) (so the
 * work cannot be optimised away) and counts the ok rows. */
static double run(const stagecal_vle *v, const double *xd, const double *xb, size_t n,
                  const stagecal_stages_params *par, const double u[3], double *sum, size_t *ok)
{
    stagecal_stages_result res[PART];
    double r[PART];
    for (size_t j = 0; j < PART; j++)
        r[j] = 4.0;
    double c0 = cpu(), s = 0;
    size_t k = 0;
    for (size_t i0 = 0; i0 < n; i0 += PART) {
        size_t m = n - i0 < PART ? n - i0 : PART;
        stages_invert_many_quiet(v, m, xd + i0, xb + i0, r, 1.0, par, res, NULL, NULL);
        for (size_t j = 0; j < m; j++) {
            const stagecal_stages_result *e = &res[j];
            if (e->status != STAGECAL_STAGES_OK) /* (also every row whose call failed) */
                continue;
            double a = e->dstages_dxd * u[0], b = e->dstages_dxb * u[1], c = e->dstages_dr * u[2];
            s += e->stages + sqrt(a * a + b * b + c * c);
            k++;
        }
    }
    *sum = s;
    *ok = k;
    return cpu() - c0;
}

int main(int argc, char **argv)
{
    if (argc < 2 || (strcmp(argv[1], "alpha") != 0 && strcmp(argv[1], "nrtl") != 0)) {
        fprintf(stderr, "usage: %s alpha|nrtl [ROWS] [LOG.csv]\n", argv[0]);
        return 2;
    }
    int nrtl = strcmp(argv[1], "nrtl") == 0;
    size_t rows = argc > 2 ? (size_t)strtoul(argv[2], NULL, 10) : (nrtl ? 100000 : 1000000);
    gsl_set_error_handler_off();
    stagecal_error err;
    const stagecal_antoine ew[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                    {5.08354, 1663.125, -45.622, 344.0, 373.0}};
    const double p[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};
    double c0 = cpu();
    stagecal_vle *v =
        nrtl ? stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, ew, p, 5, 101325.0, NULL, &err)
             : stagecal_vle_alloc_alpha(2.5, &err);
    if (!v) {
        fprintf(stderr, "bench_invert: %s\n", err.text);
        return 70;
    }
    double t_alloc = cpu() - c0;
    /* u(xD), u(xB), u(R) = r_rel·R of the two column files */
    const double u[3] = {nrtl ? 0.003 : 0.002, nrtl ? 0.005 : 0.004, (nrtl ? 0.02 : 0.03) * 4.0};
    double *xd = malloc(rows * sizeof *xd), *xb = malloc(rows * sizeof *xb);
    if (!xd || !xb)
        return 70;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 1);
    size_t per_run = rows / 100 ? rows / 100 : rows;
    double hi = nrtl ? 0.80 : 0.95, span = nrtl ? 0.10 : 0.07;
    for (size_t i = 0; i < rows; i++) {
        double d = hi - span * (double)(i % per_run) / (double)per_run, b = NAN;
        if (nrtl) {
            size_t len;
            int status;
            stagecal_stages_step(v, d, 4.0, 5.0, 1.0, NULL, &b, NULL, 0, &len, &status, NULL);
        } else {
            b = oracle_smoker_xb(2.5, 4.0, d, 5.0);
        }
        xd[i] = d + gsl_ran_gaussian(rng, 0.002);
        xb[i] = b + gsl_ran_gaussian(rng, 0.005);
    }
    gsl_rng_free(rng);
    if (argc > 3) {
        FILE *f = fopen(argv[3], "w");
        if (!f) {
            fprintf(stderr, "bench_invert: cannot create %s\n", argv[3]);
            return 73;
        }
        fputs(nrtl ? "run,time[s],W[kmol],xD[mol/mol],xB[mol/mol],R[-]\n"
                   : "run,time[s],W[kmol],xD[mol/mol],xB[mol/mol],R[-],V[kmol/h],T_top[C]\n",
              f);
        for (size_t i = 0; i < rows; i++) {
            size_t k = i % per_run;
            double w = 10.0 - 2.0 * (double)k / (double)per_run; /* pot falls 10 → 8 kmol */
            fprintf(f,
                    nrtl ? "r%zu,%zu,%.4f,%.6f,%.6f,4\n" : "r%zu,%zu,%.4f,%.6f,%.6f,4,3.6,80.1\n",
                    i / per_run, 10 * k, w, xd[i], xb[i]);
        }
        if (fclose(f) != 0)
            return 73;
    }

    stagecal_stages_params now = stagecal_stages_default_params(), step = now, before = now;
    now.want_sensitivities = step.want_sensitivities = 1;
    step.closed_form = before.closed_form = 0;
    before.want_sensitivities = 2;
    double s_now, s_step, s_before;
    size_t ok_now, ok_step, ok_before;
    /* BENCH_ONLY=now runs the first way alone (for a profiler) */
    const char *only = getenv("BENCH_ONLY");
    int all = !(only && strcmp(only, "now") == 0);
    double t_now = run(v, xd, xb, rows, &now, u, &s_now, &ok_now);
    double t_step = all ? run(v, xd, xb, rows, &step, u, &s_step, &ok_step) : t_now;
    double t_before = all ? run(v, xd, xb, rows, &before, u, &s_before, &ok_before) : t_now;
    if (!all)
        s_step = s_before = s_now, ok_step = ok_before = ok_now;
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("model %s, %zu rows (%zu ok), table built in %.3f s CPU; rows timed through "
           "stages_invert_many_quiet, %d a call (run-log mode's call)\n",
           nrtl ? "nrtl" : "alpha", rows, ok_now, t_alloc, PART);
    printf("now    (%s, tangent-linear): %.3f s CPU, %.0f rows/s\n",
           nrtl ? "stepping" : "closed form", t_now, (double)rows / t_now);
    printf("step   (stepping, tangent-linear): %.3f s CPU, %.0f rows/s\n", t_step,
           (double)rows / t_step);
    printf("before (stepping, finite differences): %.3f s CPU, %.0f rows/s\n", t_before,
           (double)rows / t_before);
    printf("speed-up now/before %.1fx; mean N + u(N): %.9g / %.9g / %.9g; peak RSS %.1f MB\n",
           t_before / t_now, s_now / (double)ok_now, s_step / (double)ok_step,
           s_before / (double)ok_before, (double)ru.ru_maxrss / 1024.0);
    free(xd);
    free(xb);
    stagecal_vle_free(v);
    return ok_now == ok_step && ok_now == ok_before ? 0 : 1;
}
