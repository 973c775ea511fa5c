/*
 * bench_runlog.c — speed and memory of the run-log path on a 10^6-row log:
 * read + validate (libcsv), closure and windows, per-row inversion with
 * uncertainty, CSV output. Target (issue 3): < 5 s and < 200 MB resident.
 *
 *   usage: bench_runlog [ROWS] [COLUMN.json]
 *
 * Writes bench_runlog.csv (ROWS rows, default 10^6, 100 runs, constant α = 2.5
 * data from Smoker's closed form, Smoker 1938, "Analytic determination of plates in fractionating
 * columns", Trans. AIChE 34, citation from memory) in the current directory, then times each phase
 * with CLOCK_MONOTONIC (and the whole with the process CPU clock, which a loaded shared machine
 * does not inflate) and reports the peak resident set size (getrusage). The model is constant α
 * = 2.5 unless a column file is given (its model then inverts the same α data; statuses will
 * differ, the timing is what counts). Measure the whole process with /usr/bin/time -v as well.
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

#include "stagecal/column.h"
#include "stagecal/runlog.h"
#include "oracle_smoker.h"

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

/* CPU time of this process: on a shared, loaded machine wall time overstates cost. */
static double cpu(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

int main(int argc, char **argv)
{
    size_t rows = argc > 1 ? (size_t)strtoul(argv[1], NULL, 10) : 1000000;
    const char *path = "bench_runlog.csv";
    gsl_set_error_handler_off();
    stagecal_column col;
    memset(&col, 0, sizeof col);
    stagecal_error err;
    if (argc > 2) {
        if (stagecal_column_load(argv[2], &col, &err) != STAGECAL_OK) {
            fprintf(stderr, "bench_runlog: %s\n", err.text);
            return 66;
        }
    } else {
        col.system.vle = stagecal_vle_alloc_alpha(2.5, NULL);
        col.system.m_light = 0.078112;
        col.system.m_heavy = 0.092138;
        col.system.p_pa = 101325;
        col.diameter_m = 0.2;
        col.u.xd = 0.002;
        col.u.xb = 0.005;
        col.u.w_mol = 5;
    }

    /* the log: 100 runs, 10-s samples, constant N = 5 at R = 4 */
    double t0 = now();
    FILE *out = fopen(path, "w");
    if (!out) {
        fprintf(stderr, "bench_runlog: cannot create %s\n", path);
        return 73;
    }
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 1);
    fprintf(out, "run,time[s],W[kmol],xD[mol/mol],xB[mol/mol],R[-],V[kmol/h],T_top[C]\n");
    size_t per_run = rows / 100 ? rows / 100 : rows;
    for (size_t i = 0; i < rows; i++) {
        size_t k = i % per_run;
        double xd = 0.95 - 0.07 * (double)k / (double)per_run;
        double xb = oracle_smoker_xb(2.5, 4.0, xd, 5.0);
        fprintf(out, "r%zu,%zu,%.6f,%.6f,%.6f,4,3.6,80.1\n", i / per_run, 10 * k,
                10.0 - 2.0 * (double)k / (double)per_run + gsl_ran_gaussian(rng, 0.005),
                xd + gsl_ran_gaussian(rng, 0.002), xb + gsl_ran_gaussian(rng, 0.005));
    }
    fclose(out);
    gsl_rng_free(rng);
    double t_gen = now() - t0;

    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(1000);
    stagecal_runlog_result res;
    double c0 = cpu();
    t0 = now();
    if (stagecal_runlog_read(log, path, &col, NULL, f, &err) != STAGECAL_OK) {
        fprintf(stderr, "bench_runlog: %s\n", err.text);
        return 65;
    }
    double t_read = now() - t0, c_read = cpu() - c0;
    t0 = now();
    if (stagecal_runlog_analyse(log, &col, NULL, &res, &err) != STAGECAL_OK) {
        fprintf(stderr, "bench_runlog: %s\n", err.text);
        return 70;
    }
    double t_an = now() - t0, c_an = cpu() - c0 - c_read;
    t0 = now();
    if (stagecal_runlog_invert(log, &col, 1.0, NULL, &res, &err) != STAGECAL_OK) {
        fprintf(stderr, "bench_runlog: %s\n", err.text);
        return 70;
    }
    double t_inv = now() - t0, c_inv = cpu() - c0 - c_read - c_an;
    t0 = now();
    FILE *sink = fopen("/dev/null", "w");
    stagecal_runlog_write_csv(log, &col, &res, sink, NULL);
    fclose(sink);
    double t_out = now() - t0;
    double c_all = cpu() - c0;

    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("rows %zu, runs %zu, findings %zu errors / %zu warnings\n", log->n, log->nruns,
           f->n_errors, f->n_warnings);
    printf("status: ok %zu, pinch %zu, azeotrope %zu, invalid %zu; windows %zu\n", res.count[0],
           res.count[1], res.count[2], res.count[3], res.nwindows);
    printf("generate %.2f s (not counted)\n", t_gen);
    printf("wall: read+check %.2f s, closure %.2f s, invert+windows %.2f s, csv out %.2f s\n",
           t_read, t_an, t_inv, t_out);
    printf("CPU:  read+check %.2f s, closure %.2f s, invert+windows %.2f s, csv out %.2f s\n",
           c_read, c_an, c_inv, c_all - c_read - c_an - c_inv);
    printf("total (check + invert + output) %.2f s wall, %.2f s CPU; peak RSS %.1f MB\n",
           t_read + t_an + t_inv + t_out, c_all, ru.ru_maxrss / 1024.0);
    stagecal_runlog_result_free(&res);
    stagecal_findings_free(f);
    stagecal_runlog_free(log);
    if (argc > 2)
        stagecal_column_free(&col);
    else
        stagecal_vle_free(col.system.vle);
    return 0;
}
