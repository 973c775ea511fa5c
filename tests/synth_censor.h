/*
 * synth_censor.h — run logs of an invented high-purity column for the censored-likelihood
 * tests (tests/test_censor.c) and study (tests/tool_censor_study.c), written as CSV text
 * and read by the real run-log reader.
 *
 * Simulator: a binary of constant relative volatility α = 2.0 (a high-purity duty of the
 * methanol/water kind; the number is invented), 26 equilibrium stages including the pot,
 * total condenser, E_MV = 1. Five runs, one quasi-steady window each, at R = 6, 8, 10, 12,
 * 15: the true distillate is xD = 1 − h with h drawn uniformly in [0.5, 2]·10⁻⁶ per run;
 * the true pot composition is Smoker's closed-form inverse for 26 stages
 * (tests/oracle_smoker.h, not the stepping code under test), steady over the run; 60 rows
 * every 6 min; the pot holdup falls from 1000 kmol by D = 2/(R + 1) kmol/h (a large pot:
 * its composition stays within the analyser noise). The pot analyser reads
 * xB + N(0, 0.003²). The distillate analyser, by regime:
 *   SC_CLIP_FS  xD + N(0, 0.0002²); at or above 0.9999 it reports ">0.9999"
 *   SC_CLIP_1   the same analyser, which reports 1.00000 (censored at 1) for readings ≥ 1
 *   SC_PPM      the impurity h·(1 + 0.05·ε), ε ~ N(0, 1) (5 % relative), as
 *               xD_heavy[ppm], "<0.6" below its detection limit of 0.6 ppm
 * The column file states u(xD) = 0.0002 (SC_PPM: 1e-9 and xd_heavy_rel 0.05) and
 * u(xB) = 0.003.
 */
#ifndef STAGECAL_SYNTH_CENSOR_H
#define STAGECAL_SYNTH_CENSOR_H

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "oracle_smoker.h"

#define SC_ALPHA 2.0
#define SC_NTRUE 26.0
#define SC_ROWS 60

enum { SC_CLIP_FS, SC_CLIP_1, SC_PPM, SC_NREG };

static const double sc_r[5] = {6, 8, 10, 12, 15};

/* The column file of a regime (static text). */
static inline const char *sc_column(int reg)
{
    return reg == SC_PPM
               ? "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"synth-hp\","
                 "\"description\":\"INVENTED: a high-purity study column (fictional)\","
                 "\"trays\":25,\"condenser\":\"total\",\"system\":{\"light\":{\"name\":\"light\"},"
                 "\"heavy\":{\"name\":\"heavy\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.0}},"
                 "\"uncertainty\":{\"xd\":1e-9,\"xd_heavy_rel\":0.05,\"xb\":0.003}}"
               : "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"synth-hp\","
                 "\"description\":\"INVENTED: a high-purity study column (fictional)\","
                 "\"trays\":25,\"condenser\":\"total\",\"system\":{\"light\":{\"name\":\"light\"},"
                 "\"heavy\":{\"name\":\"heavy\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.0}},"
                 "\"uncertainty\":{\"xd\":0.0002,\"xb\":0.003}}";
}

/* One data set's run log as CSV text (malloc'd, *len bytes); NULL when out of memory. */
static inline char *sc_log(gsl_rng *rng, int reg, size_t *len)
{
    size_t cap = 5 * SC_ROWS * 64 + 128, n = 0;
    char *s = malloc(cap);
    if (!s)
        return NULL;
    n += (size_t)snprintf(s + n, cap - n, "run,time[h],W[kmol],%s,xB[mol/mol],R[-]\n",
                          reg == SC_PPM ? "xD_heavy[ppm]" : "xD[mol/mol]");
    for (int k = 0; k < 5; k++) {
        double r = sc_r[k], h = gsl_ran_flat(rng, 0.5e-6, 2e-6), xd = 1 - h;
        double xb = oracle_smoker_xb(SC_ALPHA, r, xd, SC_NTRUE), w = 1000, d = 2 / (r + 1);
        for (int j = 1; j <= SC_ROWS; j++) {
            char cell[32];
            w -= d * 0.1;
            double yb = xb + gsl_ran_gaussian(rng, 0.003);
            if (reg == SC_PPM) {
                double v = h * 1e6 * (1 + 0.05 * gsl_ran_gaussian(rng, 1));
                if (v >= 0.6)
                    snprintf(cell, sizeof cell, "%.5f", v);
                else
                    snprintf(cell, sizeof cell, "<0.6");
            } else {
                double y = xd + gsl_ran_gaussian(rng, 0.0002);
                if (reg == SC_CLIP_FS && y >= 0.9999)
                    snprintf(cell, sizeof cell, ">0.9999");
                else if (reg == SC_CLIP_1 && y >= 1)
                    snprintf(cell, sizeof cell, "1.00000");
                else
                    snprintf(cell, sizeof cell, "%.6f", y);
            }
            n += (size_t)snprintf(s + n, cap - n, "R%g,%.2f,%.4f,%s,%.6f,%g\n", r, 0.1 * j, w, cell,
                                  yb, r);
        }
    }
    *len = n;
    return s;
}

#endif
