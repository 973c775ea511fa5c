/*
 * tool_demo_windows.c — per-window errors of the README quick start's calibration on
 * replicate data sets of the demo scenario (tests/tool_demodata.c, included), with the
 * generator's effects switched off one at a time: what makes a window's stage count or its
 * compositions read off the generator's truth. A diagnostic for studies, not a test.
 *
 *   usage: tool_demo_windows COLUMN.json REPLICATIONS SEED0 [NOISE TAU_MIN CLIP STEP TOBIT HOLDUP]
 *   NOISE: times the stated analyser noise (1); TAU_MIN: the distillate's lag (20 min);
 *   CLIP, STEP, TOBIT: 0/1 (1, 1, 0); HOLDUP: -1 auto (default), 0 none, 1 lag.
 *
 * Per window: the truth is the generator's steady stage count at the window's rows
 * (truth.csv, stages_true), its steady distillate the one a steady column of that count
 * holds over the true pot (the generator's steady_xd), and the true pot composition. Prints,
 * per reflux ratio and by minutes since the last reflux change, the mean error of the
 * window's stage count, its median z, and the mean errors of the window's xD (after the
 * holdup compensation) and xB; the root mean square of the window means' actual errors over
 * their stated u_xd, u_xb (xD z, xB z); and the composition fit's standardised window
 * residual at the true count ("comp z": its pot prediction from every carried xD with the
 * fit's convexity term, over the fit's scale u_xb, g·u_xd with the carried-samples factor,
 * both copied from src/regress_composition.c) — the weights the model file's fit gives.
 * Window statistics: the 11th argument, 0 line (default), 1 quad, 2 smoother, 3 qstats.
 * Diagnostic switches (environment): DEMOW_TOBIT=0|1 only the windows without / with a Tobit
 * trend; DEMOW_G2=1 the xD part of comp z's scale by the second-order delta method,
 * Var f(x + e) = f'²σ² + ½f''²σ⁴ for Gaussian e (σ = sd_xd); DEMOW_GSAMPLE=1 by the
 * forward map's slope at every carried sample (root mean square); DEMOW_EMP=RHO|own the
 * scale from the residual's own series (pot predicted from each carried xD less its xB) by
 * stagecal_evidence_mean_quad at that ρ; DEMOW_LIST=1 one line per window.
 */
#define DEMODATA_MAIN demodata_main
int demodata_main(int argc, char **argv);
#include "tool_demodata.c"

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <unistd.h>

#include "evidence_internal.h"
#include "stagecal/calibrate.h"

#define MAXW 200000
struct wrow {
    double r, since_min, err, z, exd, exb, ntrue, cz, zd, zb;
    int tobit;
};

static double logit_(double x)
{
    return log(x / (1 - x));
}

/* The pot composition a steady column of n stages at reflux r under distillate xd holds
 * (the generator's forward map), NAN at a pinch. */
static double fwd_xb(double xd, double r, double n)
{
    double xb = NAN;
    size_t len;
    int status;
    if (stagecal_stages_step(g_col->system.vle, xd, r, n, 1.0, NULL, &xb, NULL, 0, &len, &status,
                             NULL) != STAGECAL_OK ||
        status != STAGECAL_STAGES_OK)
        return NAN;
    return xb;
}

/* The composition fit's standardised window residual at the generator's true count (with
 * its convexity term), its weight as the fit takes it: NAN when a sample pinches. */
static double comp_z(const stagecal_evidence *e, double nt)
{
    double spd = 0, sm = 0, h = 1e-6, dser[64];
    for (size_t j = 0; j < e->m; j++) {
        double x = e->s_xd[j], xb = fwd_xb(x, e->r, nt);
        if (!isfinite(xb))
            return NAN;
        /* the fit's convexity correction (pot_corrected in src/regress_composition.c) */
        double hc = fmin(e->sd_xd, 0.5 * (1 - x));
        if (!e->xd_tobit && hc > 0 && x - hc > 0) {
            double fp = fwd_xb(x + hc, e->r, nt), fm = fwd_xb(x - hc, e->r, nt);
            if (isfinite(fp) && isfinite(fm))
                xb -= 0.5 * (fp - 2 * xb + fm);
        }
        spd += xb / (double)e->m;
        sm += e->s_xb[j] / (double)e->m;
        if (j < 64)
            dser[j] = xb - e->s_xb[j];
    }
    if (getenv("DEMOW_EMP") && !e->xd_tobit && e->m >= 3 && e->m <= 64) {
        /* diagnostics: the error of the residual's own series, d_j = corrected x̂B(x_j) − xB_j
         * at the carried samples, by the quadratic detrend with AR(1) moments (ρ: DEMOW_EMP's
         * value, or the window's own when it is "own") */
        double mean, se, rho;
        const char *v = getenv("DEMOW_EMP");
        double rin = strcmp(v, "own") == 0 ? NAN : atof(v);
        if (stagecal_evidence_mean_quad(e->s_t, dser, e->m, 0, rin, &mean, &se, &rho, NULL, NULL) !=
            STAGECAL_OK)
            return NAN;
        return (logit_(spd) - logit_(sm)) / (se / (spd * (1 - spd)));
    }
    double lp = fwd_xb(e->xd + h, e->r, nt), lm = fwd_xb(e->xd - h, e->r, nt);
    if (!isfinite(lp) || !isfinite(lm) || e->m == 0)
        return NAN;
    double g = (logit_(lp) - logit_(lm)) / (2 * h);
    if (getenv("DEMOW_G2") && !e->xd_tobit) {
        /* diagnostics: second-order delta method, Var f(x + e) = f'² σ² + ½ f''² σ⁴ (Gaussian
         * e), σ the reading noise (sd_xd), the step of the fit's convexity correction */
        double x = e->xd, hs = fmin(e->sd_xd, 0.5 * (1 - x));
        if (hs > 0 && x - hs > 0) {
            double f0 = fwd_xb(x, e->r, nt), fp = fwd_xb(x + hs, e->r, nt),
                   fm = fwd_xb(x - hs, e->r, nt);
            if (isfinite(fp) && isfinite(fm)) {
                double d1 = (fp - fm) / (2 * hs), d2 = (fp - 2 * f0 + fm) / (hs * hs);
                double sg = e->sd_xd;
                g = sqrt(d1 * d1 + 0.5 * d2 * d2 * sg * sg) / (f0 * (1 - f0));
            }
        }
    }
    if (getenv("DEMOW_GSAMPLE") && !e->xd_tobit) {
        /* diagnostics: the xD part from the forward map's slope at every carried sample, the
         * mean pot composition's (d mean x̂B / d x_j = f'(x_j)/m) taken to log-odds */
        double g2 = 0, pm = spd;
        for (size_t j = 0; j < e->m; j++) {
            double x = e->s_xd[j], hh = 1e-6 * (1 - x) + 1e-9;
            double a = fwd_xb(fmin(x + hh, 1 - 1e-12), e->r, nt), b = fwd_xb(x - hh, e->r, nt);
            if (!isfinite(a) || !isfinite(b))
                return NAN;
            double d = (a - b) / (fmin(x + hh, 1 - 1e-12) - (x - hh));
            g2 += d * d / (double)e->m;
        }
        g = sqrt(g2) / (pm * (1 - pm));
    }
    double lx = e->u_xb * regress_carried_factor(e, e->rho_xb, e->m_xb) / (e->xb * (1 - e->xb));
    double ld = g * e->u_xd * regress_carried_factor(e, e->rho_xd, e->m_xd);
    return (logit_(spd) - logit_(sm)) / sqrt(lx * lx + ld * ld);
}
static struct wrow rows[MAXW];
static size_t nrows;

struct trow {
    double n, xd, xb, r;
};

static size_t read_truth(const char *dir, struct trow *t, size_t cap)
{
    char p[1200], line[512];
    snprintf(p, sizeof p, "%s/truth.csv", dir);
    FILE *f = fopen(p, "r");
    size_t n = 0;
    if (!f)
        return 0;
    if (!fgets(line, sizeof line, f)) {
        fclose(f);
        return 0;
    }
    while (n < cap && fgets(line, sizeof line, f)) {
        char *fld[10];
        size_t k = 0;
        for (char *s = strtok(line, ","); s && k < 10; s = strtok(NULL, ","))
            fld[k++] = s;
        if (k < 9)
            continue;
        t[n].n = atof(fld[3]);
        t[n].xd = atof(fld[4]);
        t[n].xb = atof(fld[5]);
        t[n].r = strcmp(fld[6], "inf") == 0 ? INFINITY : atof(fld[6]);
        n++;
    }
    fclose(f);
    return n;
}

static void summary(const char *label, int (*keep)(const struct wrow *, double), double arg)
{
    static double z[MAXW];
    double sx = 0, sb = 0, se = 0, cz2 = 0, cz1 = 0, zd2 = 0, zb2 = 0;
    size_t m = 0, mc = 0;
    for (size_t i = 0; i < nrows; i++)
        if (keep(&rows[i], arg)) {
            z[m] = rows[i].z;
            zd2 += rows[i].zd * rows[i].zd, zb2 += rows[i].zb * rows[i].zb;
            if (isfinite(rows[i].cz))
                cz1 += rows[i].cz, cz2 += rows[i].cz * rows[i].cz, mc++;
            se += rows[i].err, sx += rows[i].exd, sb += rows[i].exb;
            m++;
        }
    if (m < 2)
        return;
    double sdz = gsl_stats_sd(z, 1, m);
    gsl_sort(z, 1, m);
    double iqr = gsl_stats_quantile_from_sorted_data(z, 1, m, 0.75) -
                 gsl_stats_quantile_from_sorted_data(z, 1, m, 0.25);
    printf("  %-14s %6zu  mean err %+7.4f  med z %+6.2f  sd z %5.2f  iqr/1.349 %5.2f  xD err "
           "%+9.2e  xB err %+9.2e  comp z mean %+5.2f rms %5.2f (%zu)  xD z rms %5.2f  xB z rms "
           "%5.2f\n",
           label, m, se / m, gsl_stats_median_from_sorted_data(z, 1, m), sdz, iqr / 1.349, sx / m,
           sb / m, mc ? cz1 / mc : NAN, mc ? sqrt(cz2 / mc) : NAN, mc, sqrt(zd2 / m),
           sqrt(zb2 / m));
}

static int by_r(const struct wrow *w, double r)
{
    return isinf(r) ? isinf(w->r) : fabs(w->r - r) < 1e-6;
}
static int by_since(const struct wrow *w, double lo)
{
    return isfinite(w->r) && w->since_min >= lo && w->since_min < lo + 30;
}

int main(int argc, char **argv)
{
    if (argc < 4) {
        fprintf(stderr, "usage: tool_demo_windows COLUMN.json REPS SEED0 [NOISE TAU CLIP STEP "
                        "TOBIT HOLDUP NOISE(0 line, 1 quad, 2 smoother, 3 qstats)]\n");
        return 1;
    }
    long reps = strtol(argv[2], NULL, 10);
    unsigned long seed0 = strtoul(argv[3], NULL, 10);
    demo_noise_scale = argc > 4 ? atof(argv[4]) : 1.0;
    demo_tau_min = argc > 5 ? atof(argv[5]) : 20.0;
    demo_clip = argc > 6 ? atoi(argv[6]) : 1;
    demo_step = argc > 7 ? atoi(argv[7]) : 1;
    int tobit = argc > 8 ? atoi(argv[8]) : 0;
    int holdup = argc > 9 ? atoi(argv[9]) : -1;
    int nmode = argc > 10 ? atoi(argv[10]) : 0;
    gsl_set_error_handler_off();
    demo_quiet = 1;
    static struct trow tr[20000];
    stagecal_column col;
    if (stagecal_column_load(argv[1], &col, NULL) != STAGECAL_OK)
        return 1;
    g_col = &col;
    for (long rep = 0; rep < reps; rep++) {
        char dir[] = "/tmp/stagecal-demow-XXXXXX", seed[32];
        if (!mkdtemp(dir))
            return 1;
        snprintf(seed, sizeof seed, "%lu", seed0 + (unsigned long)rep);
        char prog[] = "tool_demodata", three[] = "3", loss[] = "0";
        char *gargv[] = {prog, argv[1], dir, seed, three, loss, NULL};
        if (demodata_main(6, gargv) != 0)
            return 1;
        g_col = &col; /* demodata_main freed its own */
        size_t nt = read_truth(dir, tr, 20000);
        char p[3][1200];
        const char *logs[3];
        for (int i = 0; i < 3; i++) {
            snprintf(p[i], sizeof p[i], "%s/logs/2025-0%d.csv", dir, i + 1);
            logs[i] = p[i];
        }
        stagecal_calibrate_params par = stagecal_calibrate_default_params();
        par.form = "saturating-load";
        par.evidence.tobit_means = tobit;
        par.evidence.holdup = holdup;
        par.evidence.noise = nmode == 3   ? STAGECAL_EVIDENCE_NOISE_QUAD_STATS
                             : nmode == 1 ? STAGECAL_EVIDENCE_NOISE_QUAD_POOLED
                             : nmode == 2 ? STAGECAL_EVIDENCE_NOISE_SMOOTHER
                                          : STAGECAL_EVIDENCE_NOISE_LINE_POOLED;
        stagecal_calibration cal;
        stagecal_error err;
        int rc = stagecal_calibrate(argv[1], logs, 3, &par, &cal, &err);
        demo_remove_set(dir, 3);
        if (rc != STAGECAL_OK) {
            fprintf(stderr, "seed %s: %s\n", seed, err.text);
            stagecal_calibration_free(&cal);
            continue;
        }
        const stagecal_runlog *log = cal.log;
        if (log->n != nt) {
            fprintf(stderr, "seed %s: %zu log rows, %zu truth rows\n", seed, log->n, nt);
            stagecal_calibration_free(&cal);
            continue;
        }
        for (size_t k = 0; k < cal.evidence.n && nrows < MAXW; k++) {
            const stagecal_evidence *e = &cal.evidence.ev[k];
            if (!e->stages_ok || (par.evidence.skip_run && 0))
                continue;
            int skip = 0;
            for (size_t f = 0; f < cal.nflagged; f++)
                skip |= cal.flagged[f].run == e->run && cal.flagged[f].left_out;
            if (skip)
                continue;
            double sn = 0, sxd = 0, sxb = 0;
            size_t m = 0;
            for (size_t i = e->first; i <= e->last; i++) {
                double xss = steady_xd(tr[i].xb, tr[i].r, tr[i].n);
                sn += tr[i].n, sxd += xss, sxb += tr[i].xb, m++;
            }
            size_t a = e->first, r0 = log->runs[e->run].first;
            while (a > r0 && (log->r[a - 1] == log->r[e->first] ||
                              (isinf(log->r[a - 1]) && isinf(log->r[e->first]))))
                a--;
            struct wrow *w = &rows[nrows++];
            w->r = e->r;
            w->since_min = (log->t_s[e->first] - log->t_s[a]) / 60.0;
            w->ntrue = sn / m;
            w->err = e->stages - w->ntrue;
            w->z = w->err / e->se_stages;
            w->exd = e->xd - sxd / m;
            w->exb = e->xb - sxb / m;
            w->cz = comp_z(e, w->ntrue);
            w->zd = w->exd / e->u_xd; /* the window means' actual errors over their stated */
            w->zb = w->exb / e->u_xb;
            w->tobit = e->xd_tobit;
            if (getenv("DEMOW_TOBIT") && atoi(getenv("DEMOW_TOBIT")) != w->tobit)
                nrows--; /* diagnostics: only the windows with (1) or without (0) a Tobit trend */
            if (getenv("DEMOW_LIST"))
                printf("W %s run %zu R %g since %.0f rows %zu-%zu n %.3f est %.3f se %.3f xd "
                       "%.6f true %.6f xb %.5f true %.5f tobit %d tau %.0f (%d) pooled %.0f\n",
                       seed, e->run, e->r, w->since_min, e->first, e->last, w->ntrue, e->stages,
                       e->se_stages, e->xd, sxd / m, e->xb, sxb / m, e->xd_tobit,
                       cal.evidence.tau ? cal.evidence.tau[e->run].tau_s : NAN,
                       cal.evidence.tau ? cal.evidence.tau[e->run].ok : -1,
                       cal.evidence.tau_pooled.tau_s);
        }
        stagecal_calibration_free(&cal);
    }
    printf("demo windows: %ld sets from seed %lu, noise x%g, tau %g min, clip %d, step %d, tobit "
           "%d, holdup %d\n",
           reps, seed0, demo_noise_scale, demo_tau_min, demo_clip, demo_step, tobit, holdup);
    static const double rs[] = {1.5, 2.0, 2.5, 3.0, 4.0, 5.0, INFINITY};
    for (size_t i = 0; i < sizeof rs / sizeof *rs; i++) {
        char lab[32];
        snprintf(lab, sizeof lab, "R=%g", rs[i]);
        summary(lab, by_r, rs[i]);
    }
    for (double lo = 0; lo < 540; lo += 30) {
        char lab[32];
        snprintf(lab, sizeof lab, "since %3.0f min", lo);
        summary(lab, by_since, lo);
    }
    stagecal_column_free(&col);
    return 0;
}
