/*
 * tool_boot_coverage.c — coverage study of `calibrate --bootstrap`'s percentile intervals
 * when the windows of one run share an offset: windows resampled as independent (case) against
 * whole runs resampled (run), on the same data sets, beside the stage-space fit's own t
 * intervals with the HC2 sandwich (hc2-bm) and with the CR2 sandwich clustered by run
 * (cr2-run).
 *
 * Usage: tool_boot_coverage REPLICATIONS SEED TAU [B] [dump]
 *   TAU   sd of the per-run random effect on the stage count [stages], ≥ 0
 *   B     bootstrap resamples per interval (default 999)
 *   dump  one line per data set on stderr: "ds REP a_hat b_hat" then low, high of a and b for
 *         case, run, hc2-bm, cr2-run
 *
 * What it simulates (per data set; one GSL mt19937 stream seeded with SEED): the column and
 * logs of tests/synth_batch.h — constant α = 1.6, mean law N(R) = 10·(1 − e^(−0.45 R)), each
 * of 8 runs with its own count N(R) + δ_k, δ_k ~ N(0, τ²) — drawing the stream in
 * tool_batch_coverage's order (the 8 δ_k, the new batch's δ, the logs), so that a seed gives
 * that study's data sets. Then calibrate's whole chain (stagecal_calibrate_data: reading,
 * windows, evidence; --method stage, form saturating, holdup compensation off, bootstrap off)
 * and, on the stage-space fit's points (stagecal_evidence_points, each window's run as its
 * cluster, as calibrate passes them), two fits with B resamples each, seed REP + 1 for both:
 * case resampling with the hc2-bm covariance and run resampling with the cr2-run covariance.
 * Data set 0 checks that this is calibrate's own bootstrap: calibrate with --resample run
 * gives the same doubles (otherwise exit 1).
 *
 * The target is the mean law's (a, b) = (10, 0.45) of the saturating form a·(1 − e^(−bR)):
 * E δ_k = 0, so the runs' mean law is in the form. It prints the coverage of each 95 %
 * interval of a and b with its Wilson 95 % interval (Wilson 1927, JASA 22, 209; from memory),
 * the mean width, and how many resamples failed. Data sets the calibration refuses are
 * counted and left out. Exit status 0, or 1 on bad arguments, a set-up failure or a failed
 * check.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "stagecal/calibrate.h"
#include "stagecal/column.h"
#include "stagecal/evidence.h"
#include "synth_batch.h"

#define BT_NI 4 /* intervals: case, run, hc2-bm, cr2-run */

static void wilson(long k, long n, double *lo, double *hi)
{
    double z = gsl_cdf_ugaussian_Pinv(0.975), p = (double)k / (double)n, z2n = z * z / (double)n;
    double centre = (p + z2n / 2) / (1 + z2n);
    double half = z / (1 + z2n) * sqrt(p * (1 - p) / (double)n + z2n / (4.0 * (double)n));
    *lo = centre - half, *hi = centre + half;
}

/* The stage-space fit of calibrate's points with B resamples of kind `kind`. */
static int fit(const stagecal_regress_data *d, const size_t *run, size_t B, unsigned long seed,
               stagecal_boot_kind kind, stagecal_cov_kind cov, stagecal_regress_result *res)
{
    stagecal_form form;
    stagecal_regress_params rp = stagecal_regress_default_params();
    rp.level = 0.95;
    rp.bootstrap = B;
    rp.seed = seed;
    rp.boot_kind = kind;
    rp.cov_kind = cov;
    rp.cluster = run;
    if (stagecal_form_parse("saturating", &form, NULL) != STAGECAL_OK)
        return STAGECAL_EINVAL;
    return stagecal_regress_fit(d, &form, &rp, res, NULL);
}

int main(int argc, char **argv)
{
    int dump = 0;
    if (argc > 4 && strcmp(argv[argc - 1], "dump") == 0)
        dump = 1, argc--;
    char *e1 = NULL, *e3 = NULL, *e4 = NULL;
    long reps = argc >= 4 ? strtol(argv[1], &e1, 10) : 0;
    unsigned long seed = argc >= 4 ? strtoul(argv[2], NULL, 10) : 0;
    double tau = argc >= 4 ? strtod(argv[3], &e3) : NAN;
    long B = argc >= 5 ? strtol(argv[4], &e4, 10) : 999;
    if (argc < 4 || argc > 5 || *e1 || *e3 || (e4 && *e4) || reps < 1 || !(tau >= 0) || B < 2) {
        fprintf(stderr, "usage: tool_boot_coverage REPLICATIONS SEED TAU [B] [dump]\n");
        return 1;
    }
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    stagecal_column col;
    if (bc_column(&col) != 0 || !rng) {
        fprintf(stderr, "tool_boot_coverage: set-up failed\n");
        return 1;
    }
    gsl_rng_set(rng, seed);
    static const char *iname[BT_NI] = {"bootstrap, case", "bootstrap, run", "t, hc2-bm",
                                       "t, cr2-run"};
    static const double truth[2] = {BC_A, BC_B};
    long hit[BT_NI][2] = {{0}}, n_ok = 0, refused = 0, fitfail = 0, boot_short[2] = {0, 0};
    long both_miss[2] = {0, 0}, case_only[2] = {0, 0}, run_only[2] = {0, 0};
    double width[BT_NI][2] = {{0}}, sum_windows = 0, sum_runs = 0;
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    for (long rep = 0; rep < reps; rep++) {
        double delta[BC_RUNS];
        for (int k = 0; k < BC_RUNS; k++)
            delta[k] = tau > 0 ? gsl_ran_gaussian(rng, tau) : 0.0;
        if (tau > 0) /* the new batch's δ of tool_batch_coverage: the same stream */
            (void)gsl_ran_gaussian(rng, tau);
        size_t len = 0;
        char *csv = bc_log(rng, delta, &len);
        stagecal_runlog *log = stagecal_runlog_alloc();
        if (!csv || !log ||
            stagecal_runlog_read_buffer(log, csv, len, "synthetic.csv", &col, NULL, NULL, NULL)) {
            fprintf(stderr, "tool_boot_coverage: replication %ld: log failed\n", rep);
            return 1;
        }
        free(csv);
        stagecal_calibrate_params par = stagecal_calibrate_default_params();
        par.form = "saturating";
        par.method = STAGECAL_CAL_STAGE;
        par.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE;
        stagecal_calibration cal;
        if (stagecal_calibrate_data(&col, NULL, log, &par, &cal, NULL) != STAGECAL_OK) {
            refused++;
            stagecal_runlog_free(log);
            continue;
        }
        /* calibrate's stage-space points and their runs (src/calibrate.c, run_fits) */
        size_t nev = cal.evidence.n, np = 0;
        double *arr = malloc((nev ? nev : 1) * 4 * sizeof *arr);
        size_t *run = malloc((nev ? nev : 1) * sizeof *run);
        stagecal_regress_data d;
        if (!arr || !run) {
            fprintf(stderr, "tool_boot_coverage: out of memory\n");
            return 1;
        }
        stagecal_evidence_points(cal.evidence.ev, nev, arr, &d);
        for (size_t i = 0; i < nev; i++)
            if (cal.evidence.ev[i].stages_ok)
                run[np++] = cal.evidence.ev[i].run;
        stagecal_regress_result res[2];
        memset(res, 0, sizeof res);
        int rc0 = fit(&d, run, (size_t)B, (unsigned long)rep + 1, STAGECAL_BOOT_CASE,
                      STAGECAL_COV_HC2_BM, &res[0]);
        int rc1 = rc0 ? rc0
                      : fit(&d, run, (size_t)B, (unsigned long)rep + 1, STAGECAL_BOOT_RUN,
                            STAGECAL_COV_CR2_RUN, &res[1]);
        if (rc0 || rc1 || res[1].boot_kind != STAGECAL_BOOT_RUN ||
            res[1].cov_kind != STAGECAL_COV_CR2_RUN) {
            fitfail++;
            if (!rc0)
                stagecal_regress_result_free(&res[0]);
            free(arr), free(run);
            stagecal_calibration_free(&cal);
            stagecal_runlog_free(log);
            continue;
        }
        if (memcmp(res[0].theta, cal.stage_fit.theta, 2 * sizeof(double)) != 0) {
            fprintf(stderr, "tool_boot_coverage: replication %ld: the fit is not calibrate's\n",
                    rep);
            return 1;
        }
        if (rep == 0) { /* calibrate's own run bootstrap: the same doubles */
            stagecal_calibration c2;
            par.bootstrap = (size_t)B;
            par.seed = 1;
            par.boot_kind = STAGECAL_BOOT_RUN;
            if (stagecal_calibrate_data(&col, NULL, log, &par, &c2, NULL) != STAGECAL_OK ||
                c2.stage_fit.boot_kind != STAGECAL_BOOT_RUN ||
                memcmp(c2.stage_fit.boot_low, res[1].boot_low, 2 * sizeof(double)) != 0 ||
                memcmp(c2.stage_fit.boot_high, res[1].boot_high, 2 * sizeof(double)) != 0) {
                fprintf(stderr, "tool_boot_coverage: calibrate --resample run differs\n");
                return 1;
            }
            stagecal_calibration_free(&c2);
        }
        n_ok++;
        sum_windows += (double)np;
        sum_runs += (double)res[1].boot_clusters;
        boot_short[0] += res[0].boot_ok < (size_t)B;
        boot_short[1] += res[1].boot_ok < (size_t)B;
        double lo[BT_NI][2], hi[BT_NI][2];
        for (int k = 0; k < 2; k++) {
            lo[0][k] = res[0].boot_low[k], hi[0][k] = res[0].boot_high[k];
            lo[1][k] = res[1].boot_low[k], hi[1][k] = res[1].boot_high[k];
            lo[2][k] = res[0].ci_low[k], hi[2][k] = res[0].ci_high[k];
            lo[3][k] = res[1].ci_low[k], hi[3][k] = res[1].ci_high[k];
            int in[BT_NI];
            for (int j = 0; j < BT_NI; j++) {
                in[j] = lo[j][k] <= truth[k] && truth[k] <= hi[j][k];
                hit[j][k] += in[j];
                width[j][k] += hi[j][k] - lo[j][k];
            }
            both_miss[k] += !in[0] && !in[1];
            case_only[k] += in[0] && !in[1];
            run_only[k] += !in[0] && in[1];
        }
        if (dump) {
            fprintf(stderr, "ds %ld %.6g %.6g", rep, res[0].theta[0], res[0].theta[1]);
            for (int j = 0; j < BT_NI; j++)
                fprintf(stderr, " %.6g %.6g %.6g %.6g", lo[j][0], hi[j][0], lo[j][1], hi[j][1]);
            fprintf(stderr, "\n");
        }
        stagecal_regress_result_free(&res[0]);
        stagecal_regress_result_free(&res[1]);
        free(arr), free(run);
        stagecal_calibration_free(&cal);
        stagecal_runlog_free(log);
    }
    clock_gettime(CLOCK_MONOTONIC, &t1);
    printf("coverage of the stage-space fit's 95 %% intervals: %ld data sets, seed %lu, tau %g "
           "stages, B %ld (%.1f s)\n",
           reps, seed, tau, B,
           (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec));
    printf("  calibration refused %ld, fit failed %ld, used %ld; mean windows %.1f, runs %.2f; "
           "data sets with a resample not refitted: case %ld, run %ld\n",
           refused, fitfail, n_ok, n_ok ? sum_windows / (double)n_ok : NAN,
           n_ok ? sum_runs / (double)n_ok : NAN, boot_short[0], boot_short[1]);
    for (int k = 0; k < 2 && n_ok > 0; k++) {
        for (int j = 0; j < BT_NI; j++) {
            double wl, wh;
            wilson(hit[j][k], n_ok, &wl, &wh);
            printf("  %s = %-5g %-16s %.3f [%.3f, %.3f]  mean width %.4g\n", k ? "b" : "a",
                   truth[k], iname[j], (double)hit[j][k] / (double)n_ok, wl, wh,
                   width[j][k] / (double)n_ok);
        }
        printf("  %s: case covers and run misses %ld, run covers and case misses %ld, both "
               "miss %ld\n",
               k ? "b" : "a", case_only[k], run_only[k], both_miss[k]);
    }
    stagecal_vle_free(col.system.vle);
    gsl_rng_free(rng);
    return 0;
}
