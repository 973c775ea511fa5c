/*
 * tool_censor_study.c — coverage study of the censored errors-in-variables fit
 * (src/censor.c) in the high-purity regime, over synthetic data sets from a simulator
 * written here.
 *
 * Simulator (invented column): a binary of constant relative volatility α = 2.0 (a
 * high-purity duty of the methanol/water kind; the number is invented), 26 equilibrium
 * stages including the pot (25 column stages), total condenser, E_MV = 1. Each data set
 * has 5 quasi-steady windows at R = 6, 8, 10, 12, 15 whose true distillate is
 * xD = 1 − h with h drawn uniformly in [0.5, 2]·10⁻⁶ (xD ≈ 0.999999); the true pot
 * composition is Smoker's closed-form inverse for 26 stages (tests/oracle_smoker.h, not
 * the stepping code under test). Each window carries 12 samples; the pot analyser reads
 * xB + N(0, 0.003²). The distillate analyser, by regime:
 *   clip-fs   reads xD + N(0, 0.0002²); at or above 0.9999 it reports ">0.9999"
 *   clip-1    the same analyser, but it reports 1.00000 (censored at 1) for readings ≥ 1
 *   ppm       reads the impurity h·(1 + 0.05·ε), ε ~ N(0, 1) (5 % relative), as xD_heavy
 * The fit (form constant, 1 to 200 stages, level 0.95) sees the readings with their
 * censoring and the stated uncertainties. Printed per regime: how often the lower end
 * holds (truth ≥ low), how often an end is left open ("at least N"), the two-sided
 * coverage, and the median of z = (N̂ − 26)/se with se = (high − low)/(2·1.96) where both
 * ends exist.
 *
 *   tool_censor_study [datasets per regime (1000)] [seed (1)] [regime 0-2 (all)]
 * With a regime given, the running figures are printed every 250 data sets.
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "oracle_smoker.h"
#include "stagecal/censor.h"

#define ALPHA 2.0
#define N_TRUE 26.0
#define NWIN 5
#define M 12

enum { CLIP_FS, CLIP_1, PPM, NREG };
static const char *const reg_name[NREG] = {"clip-fs (>0.9999)", "clip-1 (1.00000)",
                                           "ppm (5 % rel.)"};

/* One table row: the running figures of a regime (medians of copies: the arrays keep
 * filling). */
static void report(int reg, long ok, long holds, long open_hi, long both, long covers,
                   const double *z, long nz, const double *lows, long nlow, long failed)
{
    double *zs = malloc((size_t)(nz + 1) * sizeof *zs),
           *ls = malloc((size_t)(nlow + 1) * sizeof *ls);
    memcpy(zs, z, (size_t)nz * sizeof *zs);
    memcpy(ls, lows, (size_t)nlow * sizeof *ls);
    gsl_sort(zs, 1, (size_t)nz);
    gsl_sort(ls, 1, (size_t)nlow);
    printf("%-20s %5ld  %6.3f  %9.3f  %9.3f  %6.3f  %8.3f  %10.2f%s\n", reg_name[reg], ok,
           (double)holds / ok, (double)open_hi / ok, (double)both / ok,
           both ? (double)covers / both : NAN,
           nz ? gsl_stats_median_from_sorted_data(zs, 1, (size_t)nz) : NAN,
           nlow ? gsl_stats_median_from_sorted_data(ls, 1, (size_t)nlow) : NAN,
           failed ? " (some fits failed)" : "");
    fflush(stdout);
    free(zs);
    free(ls);
}

int main(int argc, char **argv)
{
    long nsets = argc > 1 ? atol(argv[1]) : 1000;
    unsigned long seed = argc > 2 ? strtoul(argv[2], NULL, 10) : 1;
    int only = argc > 3 ? atoi(argv[3]) : -1;
    if (nsets < 1)
        return 2;
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    stagecal_column col;
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(ALPHA, NULL);
    stagecal_form form;
    stagecal_error err;
    if (!col.system.vle || stagecal_form_parse("constant", &form, &err) != STAGECAL_OK)
        return 70;
    static const double rr[NWIN] = {6, 8, 10, 12, 15};
    double sxd[NWIN][M], sxb[NWIN][M];
    unsigned char scens[NWIN][M];
    stagecal_evidence ev[NWIN];
    double *z = malloc((size_t)nsets * sizeof *z);
    printf("regime               sets  low<=N  open-high  both-ends  covers  median z  "
           "median low\n");
    for (int reg = 0; reg < NREG; reg++) {
        if (only >= 0 && reg != only)
            continue;
        if (reg == PPM) {
            col.u.xd = 1e-9; /* floor: 0.001 ppm */
            col.u.xd_heavy_rel = 0.05;
        } else {
            col.u.xd = 0.0002;
            col.u.xd_heavy_rel = 0;
        }
        col.u.xb = 0.003;
        long holds = 0, open_hi = 0, both = 0, covers = 0, nz = 0, failed = 0;
        double *lows = malloc((size_t)nsets * sizeof *lows);
        long nlow = 0;
        for (long s = 0; s < nsets; s++) {
            for (int w = 0; w < NWIN; w++) {
                double h = gsl_ran_flat(rng, 0.5e-6, 2e-6), xd = 1 - h;
                double xb = oracle_smoker_xb(ALPHA, rr[w], xd, N_TRUE);
                for (int j = 0; j < M; j++) {
                    unsigned char c = 0;
                    double y;
                    if (reg == PPM) {
                        y = 1 - h * (1 + 0.05 * gsl_ran_gaussian(rng, 1));
                    } else {
                        y = xd + gsl_ran_gaussian(rng, 0.0002);
                        if (reg == CLIP_FS && y >= 0.9999) {
                            y = 0.9999;
                            c = STAGECAL_EVIDENCE_XD_ABOVE;
                        } else if (reg == CLIP_1 && y >= 1) {
                            y = 1;
                            c = STAGECAL_EVIDENCE_XD_ABOVE;
                        }
                    }
                    sxd[w][j] = y;
                    sxb[w][j] = xb + gsl_ran_gaussian(rng, 0.003);
                    scens[w][j] = c;
                }
                memset(&ev[w], 0, sizeof ev[w]);
                ev[w].r = rr[w];
                ev[w].m = M;
                ev[w].s_xd = sxd[w];
                ev[w].s_xb = sxb[w];
                ev[w].s_cens = scens[w];
            }
            stagecal_censored_fit fit;
            if (stagecal_fit_censored(&col, 1.0, ev, NWIN, &form, NULL, 0.95, 1.0, 200.0, &fit,
                                      &err) != STAGECAL_OK) {
                failed++;
                continue;
            }
            if (getenv("CENSOR_STUDY_PROFILE") && reg == PPM && s == 0)
                for (double th = 20; th < 200; th *= 1.15) {
                    double ll;
                    stagecal_censored_loglik(&col, 1.0, ev, NWIN, &form, &th, &ll, NULL);
                    fprintf(stderr, "theta %.3f ll %.6g\n", th, ll);
                }
            if (getenv("CENSOR_STUDY_VERBOSE"))
                fprintf(stderr, "%d %ld: %.4f [%.4f, %.4f] %d %d\n", reg, s, fit.theta[0],
                        fit.par[0].low, fit.par[0].high, fit.par[0].low_bounded,
                        fit.par[0].high_bounded);
            holds += !fit.par[0].low_bounded || fit.par[0].low <= N_TRUE;
            if (fit.par[0].low_bounded)
                lows[nlow++] = fit.par[0].low;
            open_hi += !fit.par[0].high_bounded;
            if (fit.par[0].low_bounded && fit.par[0].high_bounded) {
                both++;
                covers += fit.par[0].low <= N_TRUE && N_TRUE <= fit.par[0].high;
                double se = (fit.par[0].high - fit.par[0].low) / (2 * 1.959963984540054);
                z[nz++] = (fit.theta[0] - N_TRUE) / se;
            }
            if (isatty(2) && s % 50 == 0)
                fprintf(stderr, "\r%s %ld/%ld", reg_name[reg], s, nsets);
            if (only >= 0 && (s + 1) % 250 == 0 && s + 1 < nsets)
                report(reg, s + 1 - failed, holds, open_hi, both, covers, z, nz, lows, nlow, 0);
        }
        if (isatty(2))
            fprintf(stderr, "\r%40s\r", "");
        report(reg, nsets - failed, holds, open_hi, both, covers, z, nz, lows, nlow, failed);
        free(lows);
    }
    free(z);
    stagecal_vle_free(col.system.vle);
    gsl_rng_free(rng);
    return 0;
}
