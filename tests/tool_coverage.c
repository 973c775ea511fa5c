/*
 * tool_coverage.c — coverage study of the calibration's 95 % intervals on the synthetic
 * calibrations of tests/synth_calibration.h (the law, windows and noise of
 * calibrate_intervals_cover_truth in tests/test_calibrate.c, over many more data sets).
 *
 * Usage: tool_coverage REPLICATIONS SEED [REGIME] [known-se | per-window-rho | smoother | quad]
 *        [predict | dump] [scatter-quad]
 *        tool_coverage REPLICATIONS SEED measured-r [measured | set-point | readings] [diag] [quad]
 *        tool_coverage REPLICATIONS SEED measured-r MODE [diag] refit | fixedwin S
 * (whole run logs from tests/synth_runlog.h through the whole chain; see measured_r_study;
 * refit and fixedwin print the diagnostic fits beside the model file's, see mr_refit and
 * mr_settle)
 * Regimes (struct synth_regime in tests/synth_calibration.h): steady, white, drift,
 * drift-ar, irregular, short, long, purity. Diagnostics: known-se gives the windows their true
 * standard errors instead of the estimated ones (fixed instead of estimated weights);
 * per-window-rho gives each window the n_eff of its own lag-1 autocorrelation, as the calibration
 * did before it pooled the autocorrelation; smoother takes σ and ρ from the residuals of the stage
 * count's own local smoother (stagecal_evidence_window_stats, an option of the builder; see enum
 * synth_se_mode and docs/calibration.md §5); quad detrends each window by a quadratic in time
 * with ρ and σ from the AR(1) moments of its residuals, ρ pooled (stagecal_evidence_mean_quad,
 * the builder's STAGECAL_EVIDENCE_NOISE_QUAD_POOLED).
 *
 * The synthetic regimes also print the runs-differ test's rejections (stagecal_run_test_fit
 * on the stage-space fit, the windows dealt to STUDY_RUNS runs, default 4; the errors are
 * independent, so every rejection is a false alarm; Wilson 95 % interval).
 *
 * For each fit (stage space, composition space) and each quantity (a, b, confidence band
 * at R = 1.5, 5, ∞) it prints
 *   - the coverage k/n of the 95 % interval with its Wilson score 95 % interval
 *     (Wilson, JASA 22 (1927) 209; Brown, Cai & DasGupta, Stat. Sci. 16 (2001) 101 —
 *     citations from memory), normal quantile from GSL;
 *   - se/sd: the root mean square of the reported standard errors over the empirical sd
 *     of the estimates across replications. For a linear model with correct relative
 *     weights, E[s²] = σ², so this is 1 up to its sampling error (relative sd of an sd
 *     estimate ≈ 1/√(2n), common practice, no source); below 1 means the se is too small;
 *   - bias/sd: (mean estimate − truth) over the empirical sd;
 *   - med z: the median of (estimate − truth)/se over the data sets (0 for an unbiased,
 *     symmetric estimate; the bias criterion is |med z| ≤ 0.1);
 *   - width: the mean width of the 95 % interval (hi − lo);
 *   - cov(sd): the fraction with |estimate − truth| ≤ z·sd (z the normal 97.5 % quantile,
 *     sd the empirical sd) — what the coverage would be with an exact, known se; 0.95
 *     for unbiased normal estimates, so a shortfall there comes from bias or
 *     non-normal estimates, not from the se;
 * With predict, each data set also draws one new window at R = 1.5, 5 and ∞ (fresh samples
 * from the same regime, its count from its window means: synth_new_window) and counts how
 * often it falls inside the composition fit's 95 % prediction band, the model file's band
 * (σ the scatter function at R, stagecal/scatter.h), and inside the band with one σ for
 * every R (the window counts' root mean square about the curve, model format ≤ 3), with the
 * root mean square of the new count's distance from the fitted curve beside the bands' rms
 * se_pred. scatter-quad takes the scatter function's shape from the windows' errors
 * corrected by a quadratic detrend (stagecal_scatter_window_se, stagecal_scatter_fit_se)
 * instead of their own stated errors (stagecal_scatter_fit, calibrate's). dump (implies predict)
 * prints on stderr, per data set and R, the new count, the truth, the fitted curve, se_fit, σ(R),
 * its dof, the band and the scatter function's number of coefficients ("pi ..."), and per training
 * window its count − truth and stated se ("tr ..."). And per fit the mean t quantile of the
 * parameter intervals with their mean dof (each parameter's own under hc2-bm) beside n − p, and the
 * mean residual variance factor s² (1 when the windows' stated standard errors are right on
 * average). Exit status 0, or 1 on bad arguments or a library failure.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "synth_calibration.h"
#include "synth_runlog.h"

struct tally {
    int fits;
    int hits[SYNTH_NQ];
    double *est[SYNTH_NQ]; /* per successful fit */
    double *se[SYNTH_NQ];
    double *tq;
    double sum_dof, sum_pdof, sum_s2;
    double sum_width[SYNTH_NQ]; /* the intervals' widths hi − lo */
};

static int tally_alloc(struct tally *t, int reps)
{
    memset(t, 0, sizeof *t);
    t->tq = malloc((size_t)reps * sizeof *t->tq);
    int ok = t->tq != NULL;
    for (int q = 0; q < SYNTH_NQ; q++) {
        t->est[q] = malloc((size_t)reps * sizeof(double));
        t->se[q] = malloc((size_t)reps * sizeof(double));
        ok = ok && t->est[q] && t->se[q];
    }
    return ok ? 0 : -1;
}

static void tally_free(struct tally *t)
{
    for (int q = 0; q < SYNTH_NQ; q++) {
        free(t->est[q]);
        free(t->se[q]);
    }
    free(t->tq);
}

static void tally_add(struct tally *t, const struct synth_fit *f)
{
    if (!f->ok)
        return;
    for (int q = 0; q < SYNTH_NQ; q++) {
        t->hits[q] += synth_covers(f, q);
        t->est[q][t->fits] = f->est[q];
        t->se[q][t->fits] = f->se[q];
        t->sum_width[q] += f->hi[q] - f->lo[q];
    }
    t->tq[t->fits] = f->tq;
    t->sum_dof += f->dof;
    t->sum_pdof += f->pdof;
    t->sum_s2 += f->s2;
    t->fits++;
}

/* Wilson score interval for k successes in n trials at the normal quantile z. */
static void wilson(int k, int n, double z, double *lo, double *hi)
{
    double p = (double)k / n, z2n = z * z / n;
    double centre = (p + z2n / 2) / (1 + z2n);
    double half = z / (1 + z2n) * sqrt(p * (1 - p) / n + z2n / (4.0 * n));
    *lo = centre - half;
    *hi = centre + half;
}

static void report(const char *name, const struct tally *t, int reps)
{
    double z = gsl_cdf_ugaussian_Pinv(0.975), tq_mean = 0;
    int n = t->fits;
    if (n < 2) {
        printf("%s: %d of %d fits, too few for a study\n", name, n, reps);
        return;
    }
    for (int i = 0; i < n; i++)
        tq_mean += t->tq[i] / n;
    printf("%s: %d of %d fits, mean t quantile %.4f (mean parameter dof %.2f, n - p %.2f), "
           "mean s^2 %.3f\n",
           name, n, reps, tq_mean, t->sum_pdof / n, t->sum_dof / n, t->sum_s2 / n);
    printf("  %-11s %9s  %-17s %7s %8s %7s %7s %9s\n", "quantity", "coverage", "Wilson 95 %",
           "se/sd", "bias/sd", "med z", "cov(sd)", "width");
    double *zs = malloc((size_t)n * sizeof *zs);
    if (!zs)
        return;
    for (int q = 0; q < SYNTH_NQ; q++) {
        double m = 0, ss = 0, se2 = 0, lo, hi, tv = synth_truth(q);
        for (int i = 0; i < n; i++) {
            m += t->est[q][i] / n;
            se2 += t->se[q][i] * t->se[q][i] / n;
        }
        for (int i = 0; i < n; i++)
            ss += (t->est[q][i] - m) * (t->est[q][i] - m);
        double sd = sqrt(ss / (n - 1));
        int oracle = 0;
        for (int i = 0; i < n; i++)
            oracle += fabs(t->est[q][i] - tv) <= z * sd;
        for (int i = 0; i < n; i++)
            zs[i] = (t->est[q][i] - tv) / t->se[q][i];
        gsl_sort(zs, 1, (size_t)n);
        double medz = gsl_stats_median_from_sorted_data(zs, 1, (size_t)n);
        wilson(t->hits[q], n, z, &lo, &hi);
        printf("  %-11s %9.4f  [%.4f, %.4f] %7.3f %+8.3f %+7.3f %7.4f %9.4g\n", synth_what[q],
               (double)t->hits[q] / n, lo, hi, sqrt(se2) / sd, (m - tv) / sd, medz,
               (double)oracle / n, t->sum_width[q] / n);
    }
    free(zs);
}

/* ---- regime "measured-r": whole run logs whose R is a measured ratio ------------------ */

/* The simulator of tests/synth_runlog.h with the law of synth_calibration.h (a = 10,
 * b = 0.45) at constant α = 1.6 (Smoker's closed form): 2 runs per data set, each a 50-row
 * total-reflux start-up, then 50 rows at each of R = 1.5, 2.5, 4, 6, 10 (one row a minute);
 * u(xD) = 0.0015, u(xB) = 0.0025 white; the R reading scatters by 0.02 about its set point
 * (u(R) = 0.02 stated), or is the set point ("set-point", the control), or scatters with
 * every reading taken as a set point ("readings", the behaviour before set points were
 * tested for). The whole chain runs (stagecal_calibrate_data: reading, set points, windows,
 * evidence, both fits) and the fit the model file carries is scored: a, b, and the stage
 * count at R = 1.5, 5, inf from the model (stagecal_model_eval). No column holdup is
 * simulated, so the holdup compensation is off. */
#define MR_ALPHA 1.6

static double mr_pot(void *ctx, double r, double xd, double n, double p)
{
    (void)ctx, (void)p;
    return oracle_smoker_xb(MR_ALPHA, r, xd, n);
}

static double mr_law(void *ctx, double r)
{
    (void)ctx;
    return synth_law(SYNTH_A, SYNTH_B, r);
}

enum mr_mode { MR_MEASURED, MR_SETPOINT, MR_READINGS };

static long mr_comp; /* data sets whose model carries the composition-space fit */

/* "diag": per set point (index into rset), windows, Σ z and Σ z² of the window stage counts
 * against the true law at the set point, Σ samples. */
static int mr_diag;
static int mr_quad; /* measured-r ... quad: STAGECAL_EVIDENCE_NOISE_QUAD_POOLED */
static double logit_(double x)
{
    return log(x / (1 - x));
}
static double mr_dn[6], mr_dz[6], mr_dz2[6], mr_dm[6], mr_du[6], mr_dub[6], mr_cz[6], mr_cz2[6];
static double mr_lin[6], mr_ex[6], mr_st[6], mr_gd[6], mr_gs[6];
static double mr_ad[6], mr_ab[6], mr_sd[6], mr_sb[6];
static double mr_cc[6], mr_cc2[6], mr_sdx[6], mr_ed[6], mr_eb[6], mr_end[6];
/* "refit": the composition fit again on the same evidence (control) and with every window's
 * mean xD, which only its weight uses, replaced by the true mean (weights free of the noise) */
static int mr_refit;
static struct tally mr_t_orig, mr_t_true;
/* "fixedwin S": the evidence and both fits again with the steady test's windows (control) and
 * with windows fixed by the set points alone (each set point's rows after S settling rows, the
 * total-reflux start-up after 15): windows that no noise chooses */
static long mr_settle = -1;
static struct tally mr_t_sel, mr_t_fix, mr_t_moved;

/* The composition fit (started at the stage-space fit) on the evidence of res's windows. */
static void mr_fit_windows(const stagecal_runlog *log, const stagecal_column *col,
                           const stagecal_calibrate_params *par, stagecal_runlog_result *res,
                           struct tally *t)
{
    stagecal_evidence_set es;
    struct synth_fit g;
    memset(&g, 0, sizeof g);
    memset(&es, 0, sizeof es);
    stagecal_evidence_params ep = par->evidence;
    ep.skip_run = NULL;
    if (stagecal_evidence_build(log, res, col, par->murphree, &ep, &es, NULL) == STAGECAL_OK) {
        double *arr = malloc((es.n + 1) * 4 * sizeof *arr);
        stagecal_regress_data d;
        stagecal_form form;
        stagecal_regress_params rp = stagecal_regress_default_params();
        rp.level = par->level;
        rp.cov_kind = par->cov_kind;
        stagecal_regress_result rs, rc;
        memset(&rs, 0, sizeof rs);
        memset(&rc, 0, sizeof rc);
        if (arr && stagecal_form_parse("saturating", &form, NULL) == STAGECAL_OK) {
            stagecal_evidence_points(es.ev, es.n, arr, &d);
            if (stagecal_regress_fit(&d, &form, &rp, &rs, NULL) == STAGECAL_OK &&
                stagecal_fit_composition(col->system.vle, par->murphree, es.ev, es.n, &form,
                                         rs.theta, &rp, &rc, NULL) == STAGECAL_OK &&
                synth_fill(&form, &rc, 1.0, &g))
                g.ok = 0;
        }
        stagecal_regress_result_free(&rs);
        stagecal_regress_result_free(&rc);
        free(arr);
    }
    stagecal_evidence_set_free(&es);
    tally_add(t, &g);
}

static void mr_fixed_windows(const stagecal_runlog *log, const stagecal_column *col,
                             const stagecal_calibrate_params *par, stagecal_runlog_result *res)
{
    mr_fit_windows(log, col, par, res, &mr_t_sel);
    stagecal_runlog_window *keep = res->windows, *w = calloc(12, sizeof *w);
    size_t nkeep = res->nwindows;
    if (!w)
        return;
    for (size_t k = 0; k < 2; k++)
        for (size_t j = 0; j < 6; j++) {
            stagecal_runlog_window *x = &w[k * 6 + j];
            size_t base = (k * 6 + j) * 50;
            x->run = k;
            x->first = base + (j == 0 ? 15 : (size_t)mr_settle);
            x->last = base + 49;
            x->total_reflux = j == 0;
            x->r_median = j == 0 ? INFINITY : log->r_set[x->first];
            x->r_mean = log->r_set[x->first];
            x->u_r = j == 0 ? 0.0 : log->u_r_set[x->first];
            for (size_t i = x->first; i <= x->last; i++)
                x->n_ok += res->status[i] == 0;
        }
    res->windows = w, res->nwindows = 12;
    mr_fit_windows(log, col, par, res, &mr_t_fix);
    /* the steady test's windows, each moved to the end of its set point's stretch (the same
     * number and lengths, positions that no noise chooses) */
    stagecal_runlog_window *v = calloc(nkeep ? nkeep : 1, sizeof *v);
    for (size_t q = 0; v && q < nkeep; q++) {
        v[q] = keep[q];
        size_t len = keep[q].last - keep[q].first, end = keep[q].first / 50 * 50 + 49;
        v[q].last = end, v[q].first = end - len, v[q].n_ok = 0;
        for (size_t i = v[q].first; i <= v[q].last; i++)
            v[q].n_ok += res->status[i] == 0;
    }
    res->windows = v, res->nwindows = nkeep;
    if (v)
        mr_fit_windows(log, col, par, res, &mr_t_moved);
    res->windows = keep, res->nwindows = nkeep;
    free(w), free(v);
}

/* One data set; f->ok = 0 when the calibration refused (counted by the caller). Returns 0,
 * or the line of a failure that must not happen. */
static int mr_one(gsl_rng *rng, const stagecal_column *col, enum mr_mode mode, struct synth_fit *f,
                  size_t *nwin)
{
    static const double rset[] = {INFINITY, 1.5, 2.5, 4.0, 6.0, 10.0};
    struct srl_spec sp = {
        mr_pot, NULL,   mr_law, 2,    rset,  6,   50, 60.0, mode == MR_SETPOINT ? 0.0 : 0.02,
        0.0015, 0.0025, 300.0,  0.35, 0.002, NULL};
    size_t len = 0;
    char *csv = srl_csv(&sp, rng, &len);
    stagecal_runlog *log = stagecal_runlog_alloc();
    memset(f, 0, sizeof *f);
    *nwin = 0;
    if (!csv || !log ||
        stagecal_runlog_read_buffer(log, csv, len, "synthetic.csv", col, NULL, NULL, NULL))
        return __LINE__;
    free(csv);
    if (mode == MR_READINGS) { /* every reading its own set point */
        free(log->r_set), free(log->u_r_set);
        log->r_set = log->u_r_set = NULL;
    }
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.cov_kind = synth_cov_kind();
    par.form = "saturating";
    par.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE;
    if (mr_quad)
        par.evidence.noise = STAGECAL_EVIDENCE_NOISE_QUAD_POOLED;
    stagecal_calibration cal;
    int rc = stagecal_calibrate_data(col, NULL, log, &par, &cal, NULL);
    *nwin = cal.res.nwindows;
    for (size_t k = 0; mr_diag && rc == STAGECAL_OK && k < cal.evidence.n; k++) {
        const stagecal_evidence *e = &cal.evidence.ev[k];
        int c = 0;
        for (int j = 1; j < 6; j++)
            if (isfinite(e->r) && fabs(e->r - rset[j]) < 0.2)
                c = j;
        if (!e->stages_ok)
            continue;
        double z = (e->stages - synth_law(SYNTH_A, SYNTH_B, rset[c])) / e->se_stages;
        mr_dn[c] += 1, mr_dz[c] += z, mr_dz2[c] += z * z, mr_dm[c] += (double)e->n_samples;
        mr_du[c] += e->u_xd, mr_dub[c] += e->u_xb;
        /* the composition fit's standardised residual at the true law (no convexity term) */
        double nt = synth_law(SYNTH_A, SYNTH_B, rset[c]), spd = 0, sm = 0, h = 1e-6;
        for (size_t j = 0; j < e->m; j++) {
            spd += oracle_smoker_xb(MR_ALPHA, rset[c], e->s_xd[j], nt) / (double)e->m;
            sm += e->s_xb[j] / (double)e->m;
        }
        double lp = oracle_smoker_xb(MR_ALPHA, rset[c], e->xd + h, nt),
               lm = oracle_smoker_xb(MR_ALPHA, rset[c], e->xd - h, nt);
        double g = (logit_(lp) - logit_(lm)) / (2 * h);
        double lx = e->u_xb / (e->xb * (1 - e->xb)), ld = g * e->u_xd;
        double cz = (logit_(spd) - logit_(sm)) / sqrt(lx * lx + ld * ld);
        mr_cz[c] += cz, mr_cz2[c] += cz * cz;
        /* the same with the library's convexity correction (h = the window's sd_xd) */
        double spc = 0;
        for (size_t j = 0; j < e->m; j++) {
            double x = e->s_xd[j], hh = fmin(e->sd_xd, 0.5 * (1 - x));
            double f0 = oracle_smoker_xb(MR_ALPHA, rset[c], x, nt);
            if (hh > 0)
                f0 -= 0.5 * (oracle_smoker_xb(MR_ALPHA, rset[c], x + hh, nt) - 2 * f0 +
                             oracle_smoker_xb(MR_ALPHA, rset[c], x - hh, nt));
            spc += f0 / (double)e->m;
        }
        double czc = (logit_(spc) - logit_(sm)) / sqrt(lx * lx + ld * ld);
        mr_cc[c] += czc, mr_cc2[c] += czc * czc, mr_sdx[c] += e->sd_xd;
        /* the actual errors of the window means (the truth of every row kept by the simulator) */
        double ed, eb;
        srl_window_mean_error(log->xd, log->xb, e->first, e->last, &ed, &eb);
        double lin = g * ed - eb / (e->xb * (1 - e->xb));
        double exact = logit_(spd) - logit_(sm);
        mr_lin[c] += lin * lin, mr_ex[c] += exact * exact, mr_st[c] += lx * lx + ld * ld;
        mr_gd[c] += g * g * ed * ed, mr_gs[c] += ld * ld;
        mr_ed[c] += ed / e->u_xd, mr_eb[c] += eb / e->u_xb;
        mr_end[c] += (double)(e->last - e->first + 1) / 50.0;
        mr_ad[c] += ed * ed, mr_ab[c] += eb * eb, mr_sd[c] += e->u_xd * e->u_xd,
            mr_sb[c] += e->u_xb * e->u_xb;
    }
    if (mr_settle >= 0 && rc == STAGECAL_OK)
        mr_fixed_windows(log, col, &par, &cal.res);
    if (mr_refit && rc == STAGECAL_OK && cal.stage_status == STAGECAL_OK) {
        size_t n = cal.evidence.n;
        stagecal_evidence *ev = malloc(n * sizeof *ev);
        stagecal_regress_params rp = stagecal_regress_default_params();
        rp.level = par.level;
        rp.cov_kind = par.cov_kind;
        for (int pass = 0; ev && pass < 2; pass++) {
            memcpy(ev, cal.evidence.ev, n * sizeof *ev);
            for (size_t k = 0; pass == 1 && k < n; k++) {
                double st = 0;
                for (size_t i = ev[k].first; i <= ev[k].last; i++)
                    st += srl_truth_xd[i];
                ev[k].xd = st / (double)(ev[k].last - ev[k].first + 1);
            }
            stagecal_regress_result rr;
            struct synth_fit g;
            memset(&g, 0, sizeof g);
            if (stagecal_fit_composition(col->system.vle, par.murphree, ev, n, &cal.comp_fit.form,
                                         cal.stage_fit.theta, &rp, &rr, NULL) == STAGECAL_OK) {
                if (synth_fill(&rr.form, &rr, 1.0, &g))
                    g.ok = 0;
                stagecal_regress_result_free(&rr);
            }
            tally_add(pass ? &mr_t_true : &mr_t_orig, &g);
        }
        free(ev);
    }
    if (rc == STAGECAL_OK) {
        const stagecal_regress_result *res =
            cal.used == STAGECAL_MODEL_STAGE_SPACE ? &cal.stage_fit : &cal.comp_fit;
        mr_comp += cal.used == STAGECAL_MODEL_COMPOSITION_SPACE;
        f->ok = 1;
        synth_fill_params(res, f);
        for (int q = 0; q < 3 && f->ok; q++) {
            stagecal_model_point pt;
            if (stagecal_model_eval(&cal.model, synth_band_r[q], 0, 0.95, &pt, NULL)) {
                f->ok = 0;
                break;
            }
            f->est[2 + q] = pt.stages;
            f->se[2 + q] = pt.se_fit;
            f->lo[2 + q] = pt.ci_low;
            f->hi[2 + q] = pt.ci_high;
        }
    }
    stagecal_calibration_free(&cal);
    stagecal_runlog_free(log);
    return 0;
}

static int measured_r_study(long reps, unsigned long seed, const char *mode_name)
{
    enum mr_mode mode = strcmp(mode_name, "set-point") == 0  ? MR_SETPOINT
                        : strcmp(mode_name, "readings") == 0 ? MR_READINGS
                                                             : MR_MEASURED;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    stagecal_column col;
    struct tally tm;
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(MR_ALPHA, NULL);
    col.system.p_pa = 101325;
    col.u.xd = 0.0015;
    col.u.xb = 0.0025;
    col.u.r = 0.02;
    snprintf(col.id, sizeof col.id, "synthetic");
    if (!rng || !col.system.vle || tally_alloc(&tm, (int)reps) ||
        tally_alloc(&mr_t_orig, (int)reps) || tally_alloc(&mr_t_true, (int)reps) ||
        tally_alloc(&mr_t_sel, (int)reps) || tally_alloc(&mr_t_fix, (int)reps) ||
        tally_alloc(&mr_t_moved, (int)reps)) {
        fprintf(stderr, "tool_coverage: set-up failed\n");
        return 1;
    }
    gsl_rng_set(rng, seed);
    int rc = 0;
    double wins = 0;
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    for (long rep = 0; rep < reps && rc == 0; rep++) {
        struct synth_fit f;
        size_t nw;
        int line = mr_one(rng, &col, mode, &f, &nw);
        if (line) {
            fprintf(stderr, "tool_coverage: replication %ld failed at line %d\n", rep, line);
            rc = 1;
        }
        wins += (double)nw / (double)reps;
        tally_add(&tm, &f);
        if (isatty(2) && rep % 50 == 49)
            fprintf(stderr, "\r%ld of %ld", rep + 1, reps);
    }
    clock_gettime(CLOCK_MONOTONIC, &t1);
    if (isatty(2))
        fprintf(stderr, "\n");
    if (rc == 0) {
        printf("coverage of 95 %% intervals, %ld synthetic run logs (2 runs, 6 set points), "
               "regime measured-r (%s), seed %lu, mean %.1f windows, %ld composition-space "
               "(%.1f s)\n",
               reps, mode_name, seed, wins, mr_comp,
               (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec));
        report("the model file's fit", &tm, (int)reps);
        if (mr_settle >= 0) {
            report("steady-test windows, refitted (control)", &mr_t_sel, (int)reps);
            report("windows fixed by the set points", &mr_t_fix, (int)reps);
            report("the steady test's windows moved to their stretch's end", &mr_t_moved,
                   (int)reps);
        }
        if (mr_refit) {
            report("refit, same evidence (control)", &mr_t_orig, (int)reps);
            report("refit, weights at the true mean xD", &mr_t_true, (int)reps);
        }
        for (int c = 0; mr_diag && c < 6; c++)
            printf("  set point %d: composition z at the truth with the convexity correction: "
                   "mean %+.3f, rms %.3f; mean sd_xd %.3e\n",
                   c, mr_cc[c] / mr_dn[c], sqrt(mr_cc2[c] / mr_dn[c]), mr_sdx[c] / mr_dn[c]);
        for (int c = 0; mr_diag && c < 6; c++)
            printf("  set point %d: mean signed error of the window means over their stated se: "
                   "xD %+.3f, xB %+.3f; window rows / set-point rows %.3f\n",
                   c, mr_ed[c] / mr_dn[c], mr_eb[c] / mr_dn[c], mr_end[c] / mr_dn[c]);
        for (int c = 0; mr_diag && c < 6; c++)
            printf("  set point %d: %.0f windows, mean samples %.1f, window stage z: mean %+.3f, "
                   "rms %.3f; mean u(xD) %.2e u(xB) %.2e; composition z at the truth: mean %+.3f, "
                   "rms %.3f\n",
                   c, mr_dn[c], mr_dm[c] / mr_dn[c], mr_dz[c] / mr_dn[c],
                   sqrt(mr_dz2[c] / mr_dn[c]), mr_du[c] / mr_dn[c], mr_dub[c] / mr_dn[c],
                   mr_cz[c] / mr_dn[c], sqrt(mr_cz2[c] / mr_dn[c]));
        for (int c = 0; mr_diag && c < 6; c++)
            printf("  set point %d: rms stated / rms actual error of the window means: xD %.3f, "
                   "xB %.3f\n",
                   c, sqrt(mr_sd[c] / mr_ad[c]), sqrt(mr_sb[c] / mr_ab[c]));
        for (int c = 0; mr_diag && c < 6; c++)
            printf("  set point %d: rms stated logit / rms linearised actual %.3f, / rms exact "
                   "residual "
                   "%.3f; xD part stated/actual %.3f, xD share of stated variance %.2f\n",
                   c, sqrt(mr_st[c] / mr_lin[c]), sqrt(mr_st[c] / mr_ex[c]),
                   sqrt(mr_gs[c] / mr_gd[c]), mr_gs[c] / mr_st[c]);
    }
    tally_free(&tm);
    tally_free(&mr_t_orig);
    tally_free(&mr_t_true);
    tally_free(&mr_t_sel);
    tally_free(&mr_t_fix);
    tally_free(&mr_t_moved);
    stagecal_vle_free(col.system.vle);
    gsl_rng_free(rng);
    return rc;
}

static void usage(void)
{
    fprintf(stderr, "usage: tool_coverage REPLICATIONS(>=10) SEED [REGIME] [known-se | "
                    "per-window-rho | smoother | quad | predict | dump | scatter-quad]\nregimes:");
    for (int g = 0; g < SYNTH_NREGIMES; g++)
        fprintf(stderr, " %s", synth_regimes[g].name);
    fprintf(stderr, " (default steady)\n"
                    "       tool_coverage REPLICATIONS SEED measured-r [measured | set-point | "
                    "readings]\n");
}

int main(int argc, char **argv)
{
    char *end1 = NULL, *end2 = NULL;
    enum synth_se_mode mode = SYNTH_SE_ESTIMATED;
    const struct synth_regime *rg = &synth_regimes[0];
    int predict = 0; /* also the prediction bands against one new window each */
    int dump = 0;    /* predict, and one line per data set and R on stderr (below) */
    long pi_n[3] = {0}, pi_hit[3] = {0}, pi1_hit[3] = {0}, pi_nocount[3] = {0};
    double pi_e2[3] = {0}, pi_s2[3] = {0}, pi1_s2[3] = {0}; /* actual and stated se_pred² */
    if (argc >= 4 && strcmp(argv[3], "measured-r") == 0) {
        if (strcmp(argv[argc - 1], "quad") == 0) /* the builder's QUAD_POOLED window statistics */
            mr_quad = 1, argc--;
        if (argc > 5 && strcmp(argv[argc - 2], "fixedwin") == 0)
            mr_settle = strtol(argv[argc - 1], NULL, 10), argc -= 2;
        if (strcmp(argv[argc - 1], "refit") == 0)
            mr_refit = 1, argc--;
        if (strcmp(argv[argc - 1], "diag") == 0 || mr_refit) {
            mr_diag = mr_diag || strcmp(argv[argc - 1], "diag") == 0;
            if (mr_diag)
                argc--;
            srl_truth_xd = calloc(1000, sizeof(double));
            srl_truth_xb = calloc(1000, sizeof(double));
        }
        long n = strtol(argv[1], &end1, 10);
        if (*end1 || n < 10 || argc > 5) {
            usage();
            return 1;
        }
        gsl_set_error_handler_off();
        return measured_r_study(n, strtoul(argv[2], NULL, 10), argc == 5 ? argv[4] : "measured");
    }
    int args_ok = argc >= 3 && argc <= 6;
    for (int a = 3; a < argc && args_ok; a++) {
        int known = 0;
        for (int g = 0; g < SYNTH_NREGIMES; g++)
            if (strcmp(argv[a], synth_regimes[g].name) == 0)
                rg = &synth_regimes[g], known = 1;
        if (strcmp(argv[a], "known-se") == 0)
            mode = SYNTH_SE_KNOWN, known = 1;
        if (strcmp(argv[a], "per-window-rho") == 0)
            mode = SYNTH_SE_PER_WINDOW, known = 1;
        if (strcmp(argv[a], "diag") == 0)
            synth_diag_acc = calloc(1, sizeof *synth_diag_acc), known = 1;
        if (strcmp(argv[a], "smoother") == 0)
            mode = SYNTH_SE_SMOOTHER, known = 1;
        if (strcmp(argv[a], "quad") == 0)
            mode = SYNTH_SE_QUAD, known = 1;
        if (strcmp(argv[a], "predict") == 0)
            predict = 1, known = 1;
        if (strcmp(argv[a], "scatter-quad") == 0)
            synth_scatter_quad = 1, known = 1;
        if (strcmp(argv[a], "dump") == 0)
            predict = dump = 1, known = 1;
        args_ok = known;
    }
    long reps = args_ok ? strtol(argv[1], &end1, 10) : 0;
    unsigned long seed = args_ok ? strtoul(argv[2], &end2, 10) : 0;
    if (!args_ok || *end1 || *end2 || reps < 10 || reps > 10000000) {
        usage();
        return 1;
    }
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    stagecal_vle *vle = stagecal_vle_alloc_alpha(SYNTH_ALPHA, NULL);
    stagecal_form form;
    struct tally ts, tc;
    int rc = 0;
    if (!rng || !vle || stagecal_form_parse("saturating", &form, NULL) != STAGECAL_OK ||
        tally_alloc(&ts, (int)reps) || tally_alloc(&tc, (int)reps)) {
        fprintf(stderr, "tool_coverage: set-up failed\n");
        return 1;
    }
    struct timespec t0, t1;
    long rt_n = 0, rt_rej = 0; /* the runs-differ test: data sets tested, rejections */
    clock_gettime(CLOCK_MONOTONIC, &t0);
    for (long rep = 0; rep < reps && rc == 0; rep++) {
        struct synth_fit fs, fc;
        int line = synth_one(rng, vle, &form, rg, mode, &fs, &fc);
        if (line) {
            fprintf(stderr, "tool_coverage: replication %ld: library call failed at %s:%d\n", rep,
                    "synth_calibration.h", line);
            rc = 1;
        }
        tally_add(&ts, &fs);
        tally_add(&tc, &fc);
        rt_n += fs.ok && fs.rt_tested;
        rt_rej += fs.ok && fs.rt_tested && fs.rt_p < STAGECAL_RUN_TEST_ALPHA;
        for (int w = 0; w < 12 && dump && fc.pi_ok; w++) /* the training windows */
            fprintf(stderr, "tr %ld %d %.6g %.6g\n", rep, w, fc.tr_res[w], fc.tr_se[w]);
        for (int q = 0; q < 3 && predict && rc == 0 && fc.pi_ok; q++) {
            double count;
            if ((line = synth_new_window(rng, vle, rg, synth_band_r[q], &count))) {
                fprintf(stderr, "tool_coverage: replication %ld: new window failed at %s:%d\n", rep,
                        "synth_calibration.h", line);
                rc = 1;
            } else if (isnan(count)) {
                pi_nocount[q]++;
            } else {
                if (dump) /* rep, R, new count, truth, fitted curve, se_fit, σ(R), its dof,
                           * the band, the scatter function's coefficients */
                    fprintf(stderr, "pi %ld %g %.6g %.6g %.6g %.6g %.6g %.6g %.6g %.6g %d\n", rep,
                            synth_band_r[q], count, synth_truth(2 + q), fc.est[2 + q], fc.se[2 + q],
                            fc.pi_sigma[q], fc.pi_sdof[q], fc.pi_lo[q], fc.pi_hi[q], fc.pi_deg);
                pi_n[q]++;
                pi_hit[q] += fc.pi_lo[q] <= count && count <= fc.pi_hi[q];
                pi1_hit[q] += fc.pi1_lo[q] <= count && count <= fc.pi1_hi[q];
                double e = count - fc.est[2 + q];
                pi_e2[q] += e * e;
                pi_s2[q] += fc.pi_se[q] * fc.pi_se[q];
                pi1_s2[q] += fc.pi1_se[q] * fc.pi1_se[q];
            }
        }
    }
    clock_gettime(CLOCK_MONOTONIC, &t1);
    if (rc == 0) {
        printf("coverage of 95 %% intervals, %ld synthetic calibrations, regime %s, seed %lu%s "
               "(%.1f s)\n",
               reps, rg->name, seed,
               mode == SYNTH_SE_KNOWN        ? ", true window standard errors"
               : mode == SYNTH_SE_PER_WINDOW ? ", each window's own rho"
               : mode == SYNTH_SE_SMOOTHER   ? ", statistics from the smoother's residuals"
               : mode == SYNTH_SE_QUAD       ? ", quadratic detrend, AR(1) moments, rho pooled"
                                             : "",
               (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec));
        if (synth_diag_acc) { /* per window: stated over actual rms error of the means */
            const struct synth_diag *dg = synth_diag_acc;
            printf("window  u(xD)/err  u(xB)/err  logit/err  (rms stated se / rms actual error)\n");
            for (int w = 0; w < 12; w++)
                printf("  %2d  %9.3f  %9.3f  %9.3f\n", w + 1, sqrt(dg->su_xd[w] / dg->se_xd[w]),
                       sqrt(dg->su_xb[w] / dg->se_xb[w]), sqrt(dg->su_l[w] / dg->se_l[w]));
        }
        report("stage space", &ts, (int)reps);
        report("composition space", &tc, (int)reps);
        if (rt_n > 0) { /* the runs do not differ here: its rejections are false alarms */
            double lo, hi;
            wilson((int)rt_rej, (int)rt_n, gsl_cdf_ugaussian_Pinv(0.975), &lo, &hi);
            printf("  runs-differ test (calibrate's, %zu runs, errors independent): tested %ld, "
                   "rejected at %g: %ld = %.3f [%.3f, %.3f]\n",
                   synth_runs(), rt_n, STAGECAL_RUN_TEST_ALPHA, rt_rej,
                   (double)rt_rej / (double)rt_n, lo, hi);
        }
        for (int q = 0; q < 3 && predict; q++) {
            double lo, hi;
            if (pi_n[q] == 0)
                continue;
            wilson((int)pi_hit[q], (int)pi_n[q], gsl_cdf_ugaussian_Pinv(0.975), &lo, &hi);
            printf("  one new window at R = %g in the composition fit's 95 %% prediction band: "
                   "%ld of %ld (%.3f [%.3f, %.3f]); %ld new windows without a count\n",
                   synth_band_r[q], pi_hit[q], pi_n[q], (double)pi_hit[q] / (double)pi_n[q], lo, hi,
                   pi_nocount[q]);
            printf("    rms (new count - fitted curve) %.4f, rms se_pred %.4f\n",
                   sqrt(pi_e2[q] / (double)pi_n[q]), sqrt(pi_s2[q] / (double)pi_n[q]));
            wilson((int)pi1_hit[q], (int)pi_n[q], gsl_cdf_ugaussian_Pinv(0.975), &lo, &hi);
            printf("    with one sigma for every R: %ld (%.3f [%.3f, %.3f]), rms se_pred %.4f\n",
                   pi1_hit[q], (double)pi1_hit[q] / (double)pi_n[q], lo, hi,
                   sqrt(pi1_s2[q] / (double)pi_n[q]));
        }
    }
    tally_free(&ts);
    tally_free(&tc);
    stagecal_vle_free(vle);
    gsl_rng_free(rng);
    return rc;
}
