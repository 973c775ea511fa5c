/*
 * synth_batch.h — the batch-level studies' simulator (tests/tool_batch_coverage.c,
 * tests/tool_boot_coverage.c): a column of constant α = 1.6 whose mean law is
 * N(R) = 10·(1 − exp(−0.45 R)) stages (pot included) and whose production run k has its own
 * count N(R) + δ_k; 8 runs' logs from tests/synth_runlog.h, each a 50-row total-reflux
 * start-up and then 50 rows at each of two set points, run k at R = {1.5, 2.5, 4, 6,
 * 10}[2k mod 5] and [(2k + 1) mod 5], one row a minute; the pot follows the Rayleigh balance
 * from 300 mol at xB = 0.35 (0.002 mol/s distillate); white analyser noise u(xD) = 0.0015,
 * u(xB) = 0.0025; R logged as its set point; runs labelled S1..S8.
 */
#ifndef STAGECAL_SYNTH_BATCH_H
#define STAGECAL_SYNTH_BATCH_H

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "synth_runlog.h"

#define BC_ALPHA 1.6
#define BC_A 10.0
#define BC_B 0.45
#define BC_RUNS 8
#define BC_ROWS 50

/* The study's column: constant α = BC_ALPHA at 101.325 kPa, u(xD) 0.0015, u(xB) 0.0025,
 * u(R) 2 % (invented). 0 on success; col->system.vle is the caller's to free. */
static int bc_column(stagecal_column *col)
{
    memset(col, 0, sizeof *col);
    col->system.vle = stagecal_vle_alloc_alpha(BC_ALPHA, NULL);
    col->system.p_pa = 101325;
    col->u.xd = 0.0015;
    col->u.xb = 0.0025;
    col->u.r = 0.02;
    snprintf(col->id, sizeof col->id, "synthetic");
    return col->system.vle ? 0 : -1;
}

static double bc_law(double r)
{
    return isinf(r) ? BC_A : BC_A * (1 - exp(-BC_B * r));
}

static double bc_pot(void *ctx, double r, double xd, double n, double p)
{
    (void)ctx, (void)p;
    return oracle_smoker_xb(BC_ALPHA, r, xd, n);
}

static double bc_run_law(void *ctx, double r)
{
    return bc_law(r) + *(const double *)ctx; /* this run's δ */
}

/* The 8-run log as CSV (malloc'd) with per-run offsets delta[]. */
static char *bc_log(gsl_rng *rng, const double *delta, size_t *len)
{
    static const double rs[5] = {1.5, 2.5, 4.0, 6.0, 10.0};
    size_t cap = 256 + (size_t)BC_RUNS * 3 * BC_ROWS * 80, n = 0;
    char *out = malloc(cap);
    if (!out)
        return NULL;
    out[0] = '\0';
    for (int k = 0; k < BC_RUNS; k++) {
        double rset[3] = {INFINITY, rs[(2 * k) % 5], rs[(2 * k + 1) % 5]}, d = delta[k];
        struct srl_spec sp = {bc_pot, &d,     bc_run_law, 1,     rset, 3,     BC_ROWS, 60.0,
                              0.0,    0.0015, 0.0025,     300.0, 0.35, 0.002, NULL};
        size_t l = 0;
        char *csv = srl_csv(&sp, rng, &l);
        if (!csv) {
            free(out);
            return NULL;
        }
        const char *p = csv;
        if (k > 0) /* one header */
            p = strchr(csv, '\n') + 1;
        while (*p) {
            const char *e = strchr(p, '\n');
            size_t ll = e ? (size_t)(e - p) + 1 : strlen(p);
            if (n + ll + 8 >= cap) {
                free(csv);
                free(out);
                return NULL;
            }
            if (p[0] == 'S' && p[1] == '1' && p[2] == ',') { /* relabel the run */
                n += (size_t)snprintf(out + n, cap - n, "S%d", k + 1);
                p += 2, ll -= 2;
            }
            memcpy(out + n, p, ll);
            n += ll;
            p += ll;
        }
        out[n] = '\0';
        free(csv);
    }
    *len = n;
    return out;
}

#endif
