/*
 * tool_censor_study.c — coverage study of calibration with censored readings, through the
 * real path: each synthetic data set is a CSV run log (tests/synth_censor.h: the
 * simulator, an invented 26-stage high-purity column, and the three analyser regimes),
 * read by the run-log reader and calibrated by stagecal_calibrate_data with
 * method = STAGECAL_CAL_CENSORED (`calibrate --method censored`).
 *
 * Printed per regime, for the fit the model file carries:
 *   one-sided   share of data sets whose answer is "at least N stages"
 *   holds       share whose lower end (the bound, or the interval's low end) is at or
 *               below the true 26 stages
 *   two-sided   share with both ends; cover: the share of those whose 95 % interval
 *               holds the truth — for the parameters by the profile likelihood (what the
 *               summary prints), for the stages at R = 6, 10, 15 by the model file's
 *               covariance (what `predict` uses); median z = (estimate − truth)/se
 * With --form linear:1+1/R the truth is a = 26, b (the 1/R term) = 0.
 *
 *   tool_censor_study [datasets per regime (1000)] [seed (1)] [regime 0-2 (all)] [form]
 * Progress on stderr when it is a terminal. Not run by ctest (minutes of CPU).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <unistd.h>

#include "stagecal/calibrate.h"
#include "synth_censor.h"

static const char *const reg_name[SC_NREG] = {"clip-fs (>0.9999)", "clip-1 (1.00000)",
                                              "ppm (5 % rel., DL)"};
#define NQ 5 /* a, b, stages at R = 6, 10, 15 */
static const double q_r[3] = {6, 10, 15};

struct tally {
    long sets, failed, one_sided, holds, two, cover[NQ], nz[NQ];
    double *z[NQ];
};

static double median(double *v, long n)
{
    if (n == 0)
        return NAN;
    gsl_sort(v, 1, (size_t)n);
    return gsl_stats_median_from_sorted_data(v, 1, (size_t)n);
}

static void report(int reg, struct tally *t, size_t p)
{
    long ok = t->sets - t->failed;
    printf("%-20s %5ld  %9.3f  %6.3f  %9.3f", reg_name[reg], ok, (double)t->one_sided / ok,
           (double)t->holds / ok, (double)t->two / ok);
    for (size_t q = 0; q < NQ; q++) {
        if (q == 1 && p < 2)
            continue;
        printf("  %s %.3f / %+.3f",
               q == 0   ? "a"
               : q == 1 ? "b"
               : q == 2 ? "N(6)"
               : q == 3 ? "N(10)"
                        : "N(15)",
               t->two ? (double)t->cover[q] / t->two : NAN, median(t->z[q], t->nz[q]));
    }
    printf("%s\n", t->failed ? "  (some fits failed)" : "");
    fflush(stdout);
}

/* One data set into t; 0, or −1 when the calibration failed. */
static int one(gsl_rng *rng, int reg, const stagecal_column *col, const char *form, struct tally *t)
{
    size_t len = 0;
    char *csv = sc_log(rng, reg, &len);
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_calibration cal;
    stagecal_error err;
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.method = STAGECAL_CAL_CENSORED;
    par.form = form;
    memset(&cal, 0, sizeof cal);
    int rc = !csv || !log
                 ? STAGECAL_ENOMEM
                 : stagecal_runlog_read_buffer(log, csv, len, "synth.csv", col, NULL, NULL, &err);
    if (rc == STAGECAL_OK)
        rc = stagecal_calibrate_data(col, NULL, log, &par, &cal, &err);
    if (rc != STAGECAL_OK) {
        if (getenv("CENSOR_STUDY_VERBOSE"))
            fprintf(stderr, "failed: %s\n", err.text);
    } else {
        const stagecal_model *mo = &cal.model;
        const stagecal_censored_fit *c = &cal.cens;
        double truth[2] = {SC_NTRUE, 0};
        t->one_sided += mo->one_sided;
        t->holds += mo->one_sided ? mo->theta[0] <= SC_NTRUE
                                  : c->par[0].low_bounded && c->par[0].low <= SC_NTRUE;
        if (!mo->one_sided) {
            t->two++;
            for (size_t j = 0; j < c->p && j < 2; j++) {
                t->cover[j] += c->par[j].low <= truth[j] && truth[j] <= c->par[j].high;
                t->z[j][t->nz[j]++] = (c->theta[j] - truth[j]) / sqrt(mo->cov[j * c->p + j]);
            }
            for (int k = 0; k < 3; k++) {
                stagecal_model_point pt;
                if (stagecal_model_eval(mo, q_r[k], NAN, 0, &pt, NULL) != STAGECAL_OK)
                    continue;
                t->cover[2 + k] += pt.ci_low <= SC_NTRUE && SC_NTRUE <= pt.ci_high;
                t->z[2 + k][t->nz[2 + k]++] = (pt.stages - SC_NTRUE) / pt.se_fit;
            }
        }
    }
    stagecal_calibration_free(&cal);
    stagecal_runlog_free(log);
    free(csv);
    return rc == STAGECAL_OK ? 0 : -1;
}

int main(int argc, char **argv)
{
    long nsets = argc > 1 ? atol(argv[1]) : 1000;
    unsigned long seed = argc > 2 ? strtoul(argv[2], NULL, 10) : 1;
    int only = argc > 3 ? atoi(argv[3]) : -1;
    const char *form = argc > 4 ? argv[4] : "constant";
    if (nsets < 1)
        return 2;
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    printf("form %s, %ld data sets per regime, seed %lu\n", form, nsets, seed);
    printf("regime                sets  one-sided   holds  two-sided  cover / median z ...\n");
    for (int reg = 0; reg < SC_NREG; reg++) {
        if (only >= 0 && reg != only)
            continue;
        stagecal_column col;
        stagecal_error err;
        const char *ct = sc_column(reg);
        if (stagecal_column_parse(ct, strlen(ct), "synth-column", &col, &err) != STAGECAL_OK) {
            fprintf(stderr, "%s\n", err.text);
            return 70;
        }
        struct tally t;
        memset(&t, 0, sizeof t);
        for (int q = 0; q < NQ; q++)
            t.z[q] = malloc((size_t)nsets * sizeof(double));
        for (long s = 0; s < nsets; s++) {
            t.sets++;
            if (one(rng, reg, &col, form, &t))
                t.failed++;
            if (isatty(2) && s % 20 == 0)
                fprintf(stderr, "\r%s %ld/%ld", reg_name[reg], s, nsets);
        }
        if (isatty(2))
            fprintf(stderr, "\r%40s\r", "");
        stagecal_form f;
        stagecal_form_parse(form, &f, NULL);
        report(reg, &t, f.p);
        for (int q = 0; q < NQ; q++)
            free(t.z[q]);
        stagecal_column_free(&col);
    }
    gsl_rng_free(rng);
    return 0;
}
