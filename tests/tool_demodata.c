/*
 * tool_demodata.c — writes the invented demo run logs of datasets/demo/ from a
 * stated true stage law, reproducibly (GSL mt19937, fixed seed).
 *
 *   usage: tool_demodata COLUMN.json OUTDIR [SEED MONTHS LOSS_PER_MONTH]
 *   (the committed data: tool_demodata datasets/columns/demo_benzene_toluene.json
 *    datasets/demo — seed 20250106, 14 months, 0.012; other seeds give replicate data sets of
 *    the same scenario for studies, tests/tool_demo_coverage.c, which includes this file with
 *    DEMODATA_MAIN defined to call it as a function)
 *
 * INVENTED SCENARIO. "Larkspur Valley Solvents" (fictional), solvent-recovery
 * column K-7 (the demo column file demo-bt-K-7: benzene–toluene, ideal VLE,
 * 4.5 m × 0.20 m packing), 14 months of production, 6 runs a month.
 *
 * True stage law (stages including the pot):
 *     N = a(t)·(1 − exp(−b·R))·g(F),   N at total reflux = a(t)·g(F)
 *     b = 0.9,  g(F) = 1 − 0.06·(F − 1.3)²  (F in Pa^0.5, flat mid-range)
 *     a(t) = 9.5·(1 − 0.012·months since packing)  — fouling, 1.2 %/month
 *     the bed is repacked at month 9 (a back to 9.5).
 * Each run: 60 min of start-up at total reflux (no distillate; xD climbs to its
 * total-reflux value with a 20-min first-order lag), then production at the run's
 * reflux ratio (some runs step R after 4 h), boil-up V per run; the pot balance
 * d(W·xB) = xD·dW is integrated every minute with the lagged xD (what is actually
 * drawn), and a row is logged every 10 minutes with noise of the column file's
 * stated standard uncertainties. Planted: 4 gross errors in xB (+0.05), one run
 * with an xB analyser drifting +0.004/h, a few blank cells.
 *
 * Outputs: OUTDIR/logs/YYYY-MM.csv (one file per month, several runs each, ISO 8601
 * timestamps, kmol, mol/mol, kmol/h, kPa) and OUTDIR/truth.csv (per logged row: the
 * true stage count of the steady column at that row's conditions, the true xD and
 * xB, and whether the row lies in a planted transient).
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

#include "stagecal/column.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"

static unsigned long demo_seed = 20250106UL;
static int demo_months = 14;
static int demo_quiet; /* 1: no "wrote" lines */
/* knobs for studies that switch one effect off at a time (tests/tool_demo_windows.c); the
 * defaults are the scenario */
static double demo_noise_scale = 1.0; /* times the stated analyser noise */
static double demo_tau_min = 20.0;    /* the distillate's lag [min] */
static int demo_clip = 1;             /* 1: readings clipped to [0, 1] */
static int demo_step = 1;             /* 1: every 4th run steps R after 4 h */
#define RUNS_PER_MONTH 6
#define A0 9.5
#define B_LAW 0.9
static double demo_loss = 0.012; /* a(t): loss per month since packing */
#define REPACK_MONTH 9
#define DT_LOG_MIN 10
#define START_EPOCH 1736150400.0 /* 2025-01-06T08:00:00Z */

static const stagecal_column *g_col;

static double law_g(double f)
{
    return 1.0 - 0.06 * (f - 1.3) * (f - 1.3);
}

static double law_a(double month)
{
    double since = month < REPACK_MONTH ? month : month - REPACK_MONTH;
    return A0 * (1.0 - demo_loss * since);
}

static double true_stages(double month, double r, double f)
{
    double sat = isinf(r) ? 1.0 : 1.0 - exp(-B_LAW * r);
    return law_a(month) * sat * law_g(f);
}

struct xd_ctx {
    double xb, r, n;
};

static double f_xd(double xd, void *p)
{
    const struct xd_ctx *c = p;
    double xb = 0;
    size_t len;
    int status;
    if (stagecal_stages_step(g_col->system.vle, xd, c->r, c->n, 1.0, NULL, &xb, NULL, 0, &len,
                             &status, NULL) != STAGECAL_OK ||
        status != STAGECAL_STAGES_OK)
        return -c->xb; /* a pinch: the column cannot get there, treat as below */
    return xb - c->xb;
}

/* The distillate a steady column of n stages at reflux r holds over a pot at xb. */
static double steady_xd(double xb, double r, double n)
{
    struct xd_ctx c = {xb, r, n};
    gsl_function fn = {f_xd, &c};
    double lo = xb + 1e-9, hi = 1.0 - 1e-9;
    if (f_xd(hi, &c) < 0)
        return hi;
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    gsl_root_fsolver_set(s, &fn, lo, hi);
    double x = 0.5 * (lo + hi);
    for (int it = 0; it < 100; it++) {
        gsl_root_fsolver_iterate(s);
        x = gsl_root_fsolver_root(s);
        if (gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s), 1e-12,
                                   0) == GSL_SUCCESS)
            break;
    }
    gsl_root_fsolver_free(s);
    return x;
}

/* F-factor of boil-up v at the top, for the model's bubble point of xd. */
static double f_factor(double v_mol_s, double xd)
{
    const stagecal_system *sys = &g_col->system;
    double t, f;
    if (stagecal_vle_tbubble(sys->vle, xd, &t) != STAGECAL_OK)
        t = 353.0;
    stagecal_runlog_f_factor(v_mol_s, xd * sys->m_light + (1 - xd) * sys->m_heavy, sys->p_pa, t,
                             g_col->diameter_m, &f, NULL);
    return f;
}

static void iso(double t, char *buf, size_t len)
{
    time_t tt = (time_t)llround(t);
    struct tm tm;
    gmtime_r(&tt, &tm);
    strftime(buf, len, "%Y-%m-%dT%H:%M:%SZ", &tm);
}

#ifndef DEMODATA_MAIN
#define DEMODATA_MAIN main
#else
/* For a program that includes this file and runs DEMODATA_MAIN: removes what a run of
 * `months` months wrote under dir (the month logs, truth.csv, the folders). */
static void demo_remove_set(const char *dir, int months)
{
    char p[1200], stamp[40];
    for (int mo = 0; mo < months; mo++) {
        iso(START_EPOCH + mo * 30.4375 * 86400.0, stamp, sizeof stamp);
        snprintf(p, sizeof p, "%s/logs/%.7s.csv", dir, stamp);
        remove(p);
    }
    snprintf(p, sizeof p, "%s/truth.csv", dir);
    remove(p);
    snprintf(p, sizeof p, "%s/logs", dir);
    remove(p);
    remove(dir);
}
#endif
int DEMODATA_MAIN(int argc, char **argv)
{
    if (argc == 6) {
        char *e1, *e2, *e3;
        demo_seed = strtoul(argv[3], &e1, 10);
        demo_months = (int)strtol(argv[4], &e2, 10);
        demo_loss = strtod(argv[5], &e3);
        if (*e1 || *e2 || *e3 || demo_months < 1 || demo_months > 14 || !(demo_loss >= 0))
            argc = 0;
    }
    if (argc != 3 && argc != 6) {
        fprintf(stderr, "usage: tool_demodata COLUMN.json OUTDIR [SEED MONTHS(1-14) "
                        "LOSS_PER_MONTH]\n");
        return 2;
    }
    gsl_set_error_handler_off();
    stagecal_column col;
    stagecal_error err;
    if (stagecal_column_load(argv[1], &col, &err) != STAGECAL_OK) {
        fprintf(stderr, "tool_demodata: %s\n", err.text);
        return 66;
    }
    g_col = &col;
    char path[1024];
    snprintf(path, sizeof path, "%s/logs", argv[2]);
    mkdir(argv[2], 0777);
    mkdir(path, 0777);
    snprintf(path, sizeof path, "%s/truth.csv", argv[2]);
    FILE *truth = fopen(path, "w");
    if (!truth) {
        fprintf(stderr, "tool_demodata: cannot create '%s'\n", path);
        return 73;
    }
    fprintf(truth, "file,line,run,stages_true,xD_true,xB_true,R,F_true,transient\n");
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, demo_seed);
    const stagecal_uncertainty *u = &col.u;
    static const double reflux_choices[] = {1.5, 2.0, 2.5, 3.0, 4.0};
    static const double v_choices[] = {0.7, 0.9, 1.1, 1.3}; /* mol/s */
    int run_no = 0, gross_left = 4;
    for (int mo = 0; mo < demo_months; mo++) {
        char fname[64];
        double month_start = START_EPOCH + mo * 30.4375 * 86400.0;
        char stamp[40];
        iso(month_start, stamp, sizeof stamp);
        snprintf(fname, sizeof fname, "%.7s.csv", stamp);
        snprintf(path, sizeof path, "%s/logs/%s", argv[2], fname);
        FILE *out = fopen(path, "w");
        if (!out) {
            fprintf(stderr, "tool_demodata: cannot create '%s'\n", path);
            return 73;
        }
        fprintf(out, "run,time[iso8601],W[kmol],xD[mol/mol],xB[mol/mol],R[-],V[kmol/h],P[kPa]\n");
        long line = 1;
        for (int k = 0; k < RUNS_PER_MONTH; k++, run_no++) {
            double t0 =
                month_start + (k * (27.0 / RUNS_PER_MONTH) + gsl_rng_uniform(rng)) * 86400.0;
            double month = (t0 - START_EPOCH) / (30.4375 * 86400.0);
            double r1 = reflux_choices[gsl_rng_uniform_int(rng, 5)];
            double r2 = (demo_step && run_no % 4 == 1) ? r1 + 1.0 : r1; /* reflux step after 4 h */
            double v = v_choices[gsl_rng_uniform_int(rng, 4)] * (0.95 + 0.1 * gsl_rng_uniform(rng));
            double w = 25000.0 * (0.9 + 0.2 * gsl_rng_uniform(rng)); /* mol */
            double xb0 = 0.45 + 0.1 * gsl_rng_uniform(rng);
            double h = w * xb0;                        /* light holdup in the pot, mol */
            double drift = run_no == 17 ? 0.004 : 0.0; /* per hour */
            char run[32];
            snprintf(run, sizeof run, "K7-%03d", run_no + 1);
            /* total-reflux start */
            double f0 = f_factor(v, 0.95);
            double xd_state = xb0;
            int minutes = 0, total = 60 + 9 * 60;
            double n_now = 0, r_now = INFINITY, xd_ss = 0;
            int seg = -1;
            for (minutes = 0; minutes <= total; minutes++) {
                double xb = h / w;
                int s = minutes < 60 ? 0 : (minutes < 300 ? 1 : 2);
                if (s != seg) { /* new segment: its steady stage count */
                    seg = s;
                    r_now = s == 0 ? INFINITY : (s == 1 ? r1 : r2);
                    n_now = true_stages(month, r_now, f0);
                }
                if (minutes % 2 == 0 || minutes < 2) /* the pot moves slowly: every 2 min */
                    xd_ss = steady_xd(xb, r_now, n_now);
                /* lagged distillate */
                xd_state += (xd_ss - xd_state) * (1.0 - exp(-1.0 / demo_tau_min));
                if (minutes % DT_LOG_MIN == 0) {
                    double t = t0 + 60.0 * minutes;
                    char ts[40];
                    iso(t, ts, sizeof ts);
                    double xd_m = xd_state + demo_noise_scale * gsl_ran_gaussian(rng, u->xd);
                    double xb_m = xb + demo_noise_scale * gsl_ran_gaussian(rng, u->xb) +
                                  drift * minutes / 60.0;
                    double r_m = r_now; /* a set point, logged as is */
                    double v_m = v + gsl_ran_gaussian(rng, u->v_mol_s);
                    double w_m = w + (u->w_mol > 0 ? gsl_ran_gaussian(rng, u->w_mol) : 0);
                    if (gross_left > 0 && (run_no % 11) == 3 && minutes == 200) {
                        xb_m += 0.05;
                        gross_left--;
                    }
                    if (demo_clip) {
                        xd_m = fmin(1.0, fmax(0.0, xd_m));
                        xb_m = fmin(1.0, fmax(0.0, xb_m));
                    }
                    line++;
                    fprintf(out, "%s,%s,%.4f,", run, ts, w_m / 1000.0);
                    if (run_no % 7 == 5 && minutes == 320)
                        fprintf(out, ","); /* analyser down: blank */
                    else
                        fprintf(out, "%.5f,", xd_m);
                    fprintf(out, "%.5f,", xb_m);
                    if (isinf(r_m))
                        fprintf(out, "inf,");
                    else
                        fprintf(out, "%.2f,", r_m);
                    fprintf(out, "%.4f,101.3\n", v_m * 3.6);
                    int transient = fabs(xd_state - xd_ss) > u->xd;
                    char rtxt[16];
                    snprintf(rtxt, sizeof rtxt, isinf(r_now) ? "inf" : "%.2f", r_now);
                    fprintf(truth, "%s,%ld,%s,%.6f,%.6f,%.6f,%s,%.4f,%d\n", fname, line, run, n_now,
                            xd_state, xb, rtxt, f0, transient);
                }
                /* pot balance over one minute (explicit step; the xD used is the drawn one) */
                double d = isinf(r_now) ? 0.0 : v / (r_now + 1.0); /* mol/s */
                h -= d * 60.0 * xd_state;
                w -= d * 60.0;
                if (h / w < 0.08)
                    break; /* cut: the pot is exhausted of the light component */
            }
        }
        fclose(out);
        if (!demo_quiet)
            fprintf(stderr, "wrote %s\n", path);
    }
    fclose(truth);
    gsl_rng_free(rng);
    stagecal_column_free(&col);
    return 0;
}
