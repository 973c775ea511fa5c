/*
 * tool_drift_study.c — does the two-signature drift test (src/runlog_drift.c) name the
 * drifting analyser, and how often does it flag a clean run?
 *
 *   usage: tool_drift_study [RUNS [SEED]]     (default 200 runs per regime, seed 1)
 *
 * Simulator: tests/sim_dynamic.h, an independent stage-by-stage dynamic batch rectifier
 * (constant α = 2.4, constant molar overflow, constant boil-up, its own equations and GSL's
 * ODE integrator; no library code). Each run: N = 6, 7 or 8 stages incl. the pot, charge
 * 22.5–27.5 kmol at xB0 0.45–0.55, V 0.7–1.3 mol/s, R one of 1.5, 2, 2.5, 3, 4, 60 min of
 * total-reflux start-up, production to 10 h or xB = 0.08, a row every 10 min (the demo
 * data's logging). The simulator's rows are noise-free; this tool adds Gaussian analyser
 * noise u(xD) = 0.002, u(xB) = 0.003 and, in the drift regimes, a drift that grows linearly
 * from 0 at the run's first row to ±20 u of the analyser at its last (sign drawn; readings
 * are clipped to [0, 1] as an analyser would, a clipped reading is censored).
 *
 * Regimes, each RUNS runs:
 *   lag         clean: column holdup 1 % of the charge and a reflux drum whose residence
 *               time is 20 min (the demo's first-order lag of the distillate);
 *   holdup      clean: column holdup 2–6 % of the charge, no drum (the column file states
 *               the holdup, as tool_holdup_coverage.c does);
 *   xd-drift    the lag regime with a drifting distillate analyser;
 *   xb-drift    the lag regime with a drifting pot analyser.
 * Each run is read, analysed and inverted by the library (stagecal_runlog_analyse,
 * stagecal_runlog_invert); the run's closure says which analyser the test named. Printed:
 * per regime the share named xD, xB, unattributed and none (Wilson 95 % interval on the
 * share that matters), the gross-error and boil-up-mismatch rates, the positive drifts named
 * correctly, and the share right among the runs where fewer than half of the production xD
 * readings sit at the analyser's limit (a positive drift on a distillate near 1 drives the
 * readings to 1, where no analyser shows it). Exploring: STUDY_REGIME (one regime, 0-3),
 * STUDY_DT (row spacing [s]), STUDY_NOISE (noise scale), STUDY_DRIFT_T (drift_t),
 * STUDY_VERBOSE, STUDY_DUMP,
 * STUDY_DYNAMIC, STUDY_NO_HOLDUP. Progress on stderr when it is a terminal. Not run by ctest
 * (minutes of CPU).
 */
#define _GNU_SOURCE
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "sim_dynamic.h"
#include "stagecal/column.h"
#include "stagecal/runlog.h"

#define MAXROWS 400
#define COLUMN_FMT                                                                                 \
    "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"drift-study\","                        \
    "\"description\":\"SYNTHETIC: study column for tests/tool_drift_study.c\","                    \
    "\"condenser\":\"total\",\"system\":{\"light\":{\"name\":\"light\"},"                          \
    "\"heavy\":{\"name\":\"heavy\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.4}},"                \
    "\"uncertainty\":{\"xd\":0.002,\"xb\":0.003,\"v_mol_s\":0.01}%s}"

enum { REG_LAG, REG_HOLDUP, REG_XD, REG_XB, NREG };
static const char *const reg_name[NREG] = {"lag (clean)", "holdup (clean)", "xd-drift", "xb-drift"};

struct tally {
    int n, named[4], gross, boilup, pos_ok, pos_n, obs_ok, obs_n;
};

struct row {
    double t_h, w, xd, xb, r, v;
};

/* Noise-free rows of one simulated run (the simulator writes CSV; read it back). */
static int simulate(const sim_dyn_params *p, gsl_rng *rng, struct row *rows)
{
    char *buf = NULL;
    size_t len = 0;
    FILE *f = open_memstream(&buf, &len);
    if (!f)
        return -1;
    int n = sim_dyn_run(p, rng, f, "S", 0.0);
    fclose(f);
    int k = 0;
    char *line = buf, *next;
    for (; line && *line && k < MAXROWS && k < n; line = next) {
        next = strchr(line, '\n');
        if (next)
            *next++ = '\0';
        char r[32];
        struct row *o = &rows[k];
        if (sscanf(line, "S,%lf,%lf,%lf,%lf,%31[^,],%lf", &o->t_h, &o->w, &o->xd, &o->xb, r,
                   &o->v) == 6) {
            o->r = strcmp(r, "inf") == 0 ? INFINITY : atof(r);
            k++;
        }
    }
    free(buf);
    return n < 0 ? -1 : k;
}

static double clip01(double x)
{
    return x < 0 ? 0 : x > 1 ? 1 : x;
}

/* Quasi-steady simulator with a first-order distillate lag (the construction of the demo
 * data, tests/tool_demodata.c, with its own constant-α stepping): the column of n stages
 * (incl. the pot) is at steady state at every instant; the steady distillate xs(xB) is the
 * root (bisection) of step(xs) = xB, where step goes down n − 1 column stages on the
 * operating line and one pot stage; the drawn and logged distillate follows xs with a
 * first-order lag τ; the pot balance d(W·xB) = xD·dW is integrated every 10 s with the
 * lagged xD. Start-up at total reflux (no draw) for t_startup, then production at R. */
static double qs_step(double alpha, int n, double r, double xd)
{
    double lv = isinf(r) ? 1.0 : r / (r + 1), x = 0;
    double y = xd;
    for (int k = 0; k < n; k++) {
        x = y / (alpha - (alpha - 1) * y); /* liquid in equilibrium with y */
        y = lv * x + (1 - lv) * xd;        /* vapour from below */
    }
    return x; /* the pot liquid after n equilibrium stages */
}

static double qs_xd(double alpha, int n, double r, double xb)
{
    double lo = xb, hi = 1 - 1e-15;
    if (qs_step(alpha, n, r, hi) < xb) /* the line pinches before xB: as pure as it gets */
        return hi;
    for (int it = 0; it < 200; it++) {
        double mid = 0.5 * (lo + hi);
        if (qs_step(alpha, n, r, mid) < xb)
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi);
}

static int simulate_qs(const sim_dyn_params *p, double tau_s, struct row *rows)
{
    double w = p->charge_mol, xb = p->xb0, t = 0, h = 10.0;
    double xd = p->xb0; /* the lagged distillate starts at the charge */
    int k = 0;
    for (int step = 0; k < MAXROWS; step++) {
        t = step * h;
        if (t > p->t_end_s || xb < p->xb_stop)
            break;
        int prod = t >= p->t_startup_s;
        double r = prod ? p->reflux : INFINITY;
        if (step % (int)(p->dt_log_s / h) == 0)
            rows[k++] = (struct row){t / 3600.0, w, xd, xb, r, p->v_mol_s};
        double xs = qs_xd(p->alpha, p->n_stages, r, xb);
        double d = prod ? p->v_mol_s / (p->reflux + 1) : 0;
        double dw = d * h;
        xb = (w * xb - xd * dw) / (w - dw);
        w -= dw;
        xd += (xs - xd) * (1 - exp(-h / tau_s));
    }
    return k;
}

/* One run of regime reg: simulate, add noise and drift, analyse; tally. */
static int one_run(int reg, gsl_rng *rng, struct tally *ty)
{
    static const double rs[] = {1.5, 2.0, 2.5, 3.0, 4.0};
    double dt_log = getenv("STUDY_DT") ? atof(getenv("STUDY_DT")) : 600;
    double v = 0.7 + 0.6 * gsl_rng_uniform(rng);
    double charge = 25000 * (0.9 + 0.2 * gsl_rng_uniform(rng));
    double hold = reg == REG_HOLDUP ? 0.02 + 0.04 * gsl_rng_uniform(rng) : 0.01;
    double drum = reg == REG_HOLDUP ? 0 : 1200.0 * v / charge; /* 20-min residence time */
    sim_dyn_params p = {2.4,
                        6 + (int)gsl_rng_uniform_int(rng, 3),
                        charge,
                        0.45 + 0.1 * gsl_rng_uniform(rng),
                        hold,
                        drum,
                        v,
                        3600,
                        rs[gsl_rng_uniform_int(rng, 5)],
                        10 * 3600.0,
                        dt_log,
                        0,
                        0,
                        0.08};
    struct row rows[MAXROWS];
    int qs = reg != REG_HOLDUP && getenv("STUDY_DYNAMIC") == NULL;
    if (qs)
        p.t_end_s = 10 * 3600.0;
    int n = qs ? simulate_qs(&p, 1200.0, rows) : simulate(&p, rng, rows);
    if (n < 10)
        return -1;
    double sign = gsl_rng_uniform(rng) < 0.5 ? -1 : 1;
    double span = rows[n - 1].t_h - rows[0].t_h;
    double dxd = reg == REG_XD ? sign * 20 * 0.002 / span : 0;
    double dxb = reg == REG_XB ? sign * 20 * 0.003 / span : 0;
    char *csv = NULL;
    size_t len = 0;
    FILE *f = open_memstream(&csv, &len);
    if (!f)
        return -1;
    fprintf(f, "time[h],W[mol],xD[mol/mol],xB[mol/mol],R[-],V[mol/s]\n");
    int nprod = 0, nclip = 0; /* production rows, and those with xD at the analyser's limit */
    /* exploring: STUDY_NOISE scales the analyser noise */
    double noise = getenv("STUDY_NOISE") ? atof(getenv("STUDY_NOISE")) : 1.0;
    for (int k = 0; k < n; k++) {
        const struct row *o = &rows[k];
        double dt = o->t_h - rows[0].t_h;
        double xd = clip01(o->xd + noise * gsl_ran_gaussian(rng, 0.002) + dxd * dt);
        double xb = clip01(o->xb + noise * gsl_ran_gaussian(rng, 0.003) + dxb * dt);
        nprod += isfinite(o->r), nclip += isfinite(o->r) && (xd >= 1 || xd <= 0);
        fprintf(f, "%.6f,%.4f,%.6f,%.6f,", o->t_h, o->w, xd, xb);
        if (isinf(o->r))
            fprintf(f, "inf,");
        else
            fprintf(f, "%.4g,", o->r);
        fprintf(f, "%.5f\n", o->v);
    }
    fclose(f);
    if (getenv("STUDY_DUMP")) {
        FILE *d = fopen(getenv("STUDY_DUMP"), "w");
        if (d)
            fwrite(csv, 1, len, d), fclose(d);
    }

    char coltext[1024];
    char hold_member[64] = "";
    if (!qs && getenv("STUDY_NO_HOLDUP") == NULL)
        snprintf(hold_member, sizeof hold_member,
                 ",\"holdup\":{\"column_mol\":%.1f,\"reflux_drum_mol\":%.1f}", hold * charge,
                 drum * charge);
    snprintf(coltext, sizeof coltext, COLUMN_FMT, hold_member);
    stagecal_column col;
    stagecal_error err;
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_runlog_result res;
    int rc = -1;
    memset(&res, 0, sizeof res);
    if (log && stagecal_column_parse(coltext, strlen(coltext), "study.json", &col, &err) == 0) {
        /* exploring: STUDY_DRIFT_T sets the flag's threshold drift_t (default 4) */
        stagecal_runlog_analysis_params ap = stagecal_runlog_analysis_default_params();
        if (getenv("STUDY_DRIFT_T"))
            ap.drift_t = atof(getenv("STUDY_DRIFT_T"));
        if (stagecal_runlog_read_buffer(log, csv, len, "study.csv", &col, NULL, NULL, &err) == 0 &&
            stagecal_runlog_analyse(log, &col, &ap, &res, &err) == 0 &&
            stagecal_runlog_invert(log, &col, 1.0, &ap, &res, &err) == 0 && res.nruns == 1) {
            const stagecal_runlog_closure *c = &res.closures[0];
            ty->n++;
            if (getenv("STUDY_VERBOSE"))
                fprintf(stderr,
                        "%s N=%d R=%g rows=%d clip=%d/%d win=%zu | xD bal %+.2e±%.1e stg "
                        "%+.2e±%.1e T %.1f Q "
                        "%.1f | xB bal %+.2e±%.1e stg %+.2e±%.1e T %.1f Q %.1f | z_limit %.2f "
                        "z_bound %.2f "
                        "sign %+.0f -> %s | free %+.2e±%.1e Tn %.1f | %+.2e±%.1e Tn %.1f\n",
                        reg_name[reg], p.n_stages, p.reflux, n, nclip, nprod, res.nwindows,
                        c->sig[0].d_bal, c->sig[0].se_bal, c->sig[0].d_stg, c->sig[0].se_stg,
                        c->sig[0].t_stat, c->sig[0].q_stat, c->sig[1].d_bal, c->sig[1].se_bal,
                        c->sig[1].d_stg, c->sig[1].se_stg, c->sig[1].t_stat, c->sig[1].q_stat,
                        c->z_limit, c->z_bound, sign,
                        stagecal_drift_analyser_name(c->drift_analyser), c->sig[0].d_free,
                        c->sig[0].se_free, c->sig[0].t_name, c->sig[1].d_free, c->sig[1].se_free,
                        c->sig[1].t_name);
            ty->named[c->drift_analyser]++;
            ty->gross += c->gross;
            ty->boilup += c->boilup_mismatch;
            /* observable: at least half the production readings of xD below the limit */
            if (2 * nclip < nprod) {
                ty->obs_n++;
                ty->obs_ok += (reg == REG_XD && c->drift_analyser == STAGECAL_DRIFT_DISTILLATE) ||
                              (reg == REG_XB && c->drift_analyser == STAGECAL_DRIFT_POT) ||
                              (reg < REG_XD && c->drift_analyser == STAGECAL_DRIFT_NONE);
            }
            if (sign > 0) {
                ty->pos_n++;
                ty->pos_ok += (reg == REG_XD && c->drift_analyser == STAGECAL_DRIFT_DISTILLATE) ||
                              (reg == REG_XB && c->drift_analyser == STAGECAL_DRIFT_POT);
            }
            rc = 0;
        } else {
            fprintf(stderr, "run failed: %s\n", err.text);
        }
        stagecal_runlog_result_free(&res);
        stagecal_column_free(&col);
    } else {
        fprintf(stderr, "column: %s\n", err.text);
    }
    stagecal_runlog_free(log);
    free(csv);
    return rc;
}

static void wilson(int k, int n, double *lo, double *hi)
{
    double z = 1.959963984540054, p = n ? (double)k / n : 0, d = 1 + z * z / n;
    double c = (p + z * z / (2.0 * n)) / d,
           h = z * sqrt(p * (1 - p) / n + z * z / (4.0 * n * n)) / d;
    *lo = c - h;
    *hi = c + h;
}

int main(int argc, char **argv)
{
    int runs = argc > 1 ? atoi(argv[1]) : 200;
    unsigned long seed = argc > 2 ? strtoul(argv[2], NULL, 10) : 1;
    if (runs < 1)
        return 2;
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    int tty = isatty(2);
    printf("two-signature drift test, %d runs per regime, seed %lu (tests/sim_dynamic.h)\n", runs,
           seed);
    printf("%-16s %5s %7s %7s %7s %7s  %-22s %6s %6s\n", "regime", "runs", "xD", "xB", "unattr",
           "none", "target share [95% CI]", "gross", "boilup");
    const char *only = getenv("STUDY_REGIME"); /* one regime by its index (0-3) */
    for (int reg = 0; reg < NREG; reg++) {
        if (only && atoi(only) != reg)
            continue;
        struct tally ty;
        memset(&ty, 0, sizeof ty);
        int failed = 0;
        for (int k = 0; k < runs; k++) {
            if (one_run(reg, rng, &ty) != 0 && ++failed < 50)
                k--; /* a failed simulation is redrawn (at most 50 times in all) */
            if (tty)
                fprintf(stderr, "\r%s %d/%d", reg_name[reg], k + 1, runs);
        }
        if (tty)
            fprintf(stderr, "\n");
        int target = reg == REG_XD   ? ty.named[STAGECAL_DRIFT_DISTILLATE]
                     : reg == REG_XB ? ty.named[STAGECAL_DRIFT_POT]
                                     : ty.n - ty.named[STAGECAL_DRIFT_NONE];
        double lo, hi;
        wilson(target, ty.n, &lo, &hi);
        printf("%-16s %5d %7.3f %7.3f %7.3f %7.3f  %.3f [%.3f, %.3f] %6.3f %6.3f\n", reg_name[reg],
               ty.n, (double)ty.named[1] / ty.n, (double)ty.named[2] / ty.n,
               (double)ty.named[3] / ty.n, (double)ty.named[0] / ty.n, (double)target / ty.n, lo,
               hi, (double)ty.gross / ty.n, (double)ty.boilup / ty.n);
        if (reg >= REG_XD)
            printf("%-16s positive drift: %d of %d named correctly\n", "", ty.pos_ok, ty.pos_n);
        wilson(ty.obs_ok, ty.obs_n, &lo, &hi);
        printf("%-16s runs with < half of the xD readings at the analyser's limit: %d of %d right "
               "(%.3f [%.3f, %.3f])\n",
               "", ty.obs_ok, ty.obs_n, ty.obs_n ? (double)ty.obs_ok / ty.obs_n : 0, lo, hi);
        fflush(stdout);
    }
    printf("target share: clean regimes the false-alarm rate (any drift flagged); drift regimes "
           "the share named correctly\n");
    gsl_rng_free(rng);
    return 0;
}
