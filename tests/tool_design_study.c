/*
 * tool_design_study.c — does `stagecal probe` propose tests that pay off? A study over
 * synthetic calibrations where the truth is known (built, not run by ctest).
 *
 * Simulator (window evidence, not raw logs): a true correlation
 *   saturating:       N = a·(1 − exp(−b·R)),             a ~ U(8, 11), b ~ U(0.6, 1.1)
 *   saturating-load:  N = a·(1 − exp(−b·R))·(1 − 0.06·(F − 1.3)²)  (the demo's law shape)
 * and quasi-steady windows whose stage counts scatter about it with a window-level
 * standard error se_i = 0.3·U(0.7, 1.3) stages (Gaussian), each window carrying its se as
 * the calibration's evidence does. The initial design is concentrated at the common
 * production condition: 12 windows at R = 4.5, 5 at R = 4, 3 at R = 3 (each ±0.05; F
 * 1.3 ± 0.15 for the load form). It is fitted by weighted least squares
 * (stagecal_regress_fit, covariance scaled by the residual variance, the calibration's
 * stage-space fit), giving a model (θ, C, σ of one window, dof).
 *
 * Per trial: probe proposes K = 4 tests in R 1.5..8 (F 0.7..1.6) for the conditions of
 * interest R = 2 and 2.5 (F = 1.3), equal weights. Two continuations are simulated:
 * the 4 proposed windows, and 4 windows at the most common production condition
 * (R = 4.5, F = 1.3); both are refitted with all windows. Reported: how often the
 * proposed tests give the narrower band (mean half-width of the 95 % confidence interval
 * over the conditions of interest), and achieved / expected half-width after the tests.
 *
 * The covariance of the fits (environment STUDY_COV): model (default: s²(JᵀWJ)⁻¹, t at the
 * file's dof), hc2-bm (calibrate's default: the model carries the design, each band's t at
 * its contrast's Bell–McCaffrey dof) or cr2-run (clustered by run: the initial windows
 * dealt to STUDY_RUNS runs (5), window i to run i mod STUDY_RUNS, each continuation's K
 * windows one new run, or with STUDY_NEW=each K new runs; the errors stay independent). Every band
 * — before, expected after, achieved — is the fit's or the model's own
 * (stagecal_regress_result_band, stagecal_model_eval's through probe), so its covariance and dof
 * are of one kind. With a design, probe credits the new windows no dof; the line "expected, t at n
 * - p + K" gives what the half-width after was before 4 December 2026 (t at σ's dof + K).
 *
 * usage: tool_design_study [TRIALS (400)] [i|d (i)] [saturating|load (saturating)] [SEED (7)]
 */
#include <gsl/gsl_cdf.h>
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

#include "stagecal/design.h"
#include "stagecal/model.h"
#include "stagecal/regress.h"

#define N0 20
#define K 4
#define NMAX (N0 + K)
#define NAT 2
#define SIGMA_W 0.3

struct truth {
    double a, b;
    int load;
};

static double n_true(const struct truth *t, double r, double f)
{
    double n = t->a * (1 - exp(-t->b * r));
    return t->load ? n * (1 - 0.06 * (f - 1.3) * (f - 1.3)) : n;
}

struct windows {
    size_t n;
    double r[NMAX], f[NMAX], y[NMAX], se[NMAX];
    size_t run[NMAX];
};

static stagecal_cov_kind study_cov = STAGECAL_COV_MODEL;
static size_t study_runs = 5;
static int new_run_each; /* STUDY_NEW=each: every continuation window its own new run */

static void add_window(struct windows *w, const struct truth *t, gsl_rng *rng, double r, double f)
{
    double se = SIGMA_W * gsl_ran_flat(rng, 0.7, 1.3);
    w->r[w->n] = r;
    w->f[w->n] = f;
    w->se[w->n] = se;
    w->y[w->n] = n_true(t, r, f) + gsl_ran_gaussian(rng, se);
    /* the initial windows dealt to the runs; each continuation's windows one new run */
    w->run[w->n] = w->n < N0 ? w->n % study_runs : study_runs + (new_run_each ? w->n - N0 : 0);
    w->n++;
}

/* Weighted fit of the windows; 0 on success. */
static int fit(struct windows *w, const stagecal_form *form, int load, stagecal_regress_result *res)
{
    stagecal_regress_data d;
    stagecal_regress_params par = stagecal_regress_default_params();
    par.band_points = 0;
    par.cov_kind = study_cov;
    par.cluster = w->run;
    d.n = w->n;
    d.r = w->r;
    d.f_load = load ? w->f : NULL;
    d.stages = w->y;
    d.sigma = w->se;
    memset(res, 0, sizeof *res);
    return stagecal_regress_fit(&d, form, &par, res, NULL);
}

/* Mean half-width of the confidence band over the conditions of interest. */
static double mean_half(const stagecal_regress_result *r, const stagecal_design_point *at)
{
    double s = 0;
    for (size_t j = 0; j < NAT; j++) {
        stagecal_band b;
        if (stagecal_regress_result_band(r, at[j].r, at[j].f_load, 1.0, &b, NULL))
            return NAN;
        s += 0.5 * (b.ci_high - b.ci_low) / NAT;
    }
    return s;
}

int main(int argc, char **argv)
{
    size_t trials = argc > 1 ? (size_t)strtoul(argv[1], NULL, 10) : 400;
    int crit_d = argc > 2 && strcmp(argv[2], "d") == 0;
    int load = argc > 3 && strcmp(argv[3], "load") == 0;
    unsigned long seed = argc > 4 ? strtoul(argv[4], NULL, 10) : 7;
    int tty = isatty(2);
    const char *cov = getenv("STUDY_COV"), *runs = getenv("STUDY_RUNS");
    if (cov && strcmp(cov, "hc2-bm") == 0)
        study_cov = STAGECAL_COV_HC2_BM;
    else if (cov && strcmp(cov, "cr2-run") == 0)
        study_cov = STAGECAL_COV_CR2_RUN;
    else if (cov && strcmp(cov, "model") != 0)
        return 2;
    if (runs && !((study_runs = strtoul(runs, NULL, 10)) >= 1 && study_runs <= N0))
        return 2;
    new_run_each = getenv("STUDY_NEW") && strcmp(getenv("STUDY_NEW"), "each") == 0;
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    stagecal_form form;
    if (stagecal_form_parse(load ? "saturating-load" : "saturating", &form, NULL))
        return 1;
    stagecal_design_point at[NAT] = {{2, 1.3, 1}, {2.5, 1.3, 1}};
    size_t done = 0, failed = 0, wins = 0, within20 = 0, cover_n = 0, cover_hit = 0;
    double sum_ratio = 0, sum_absdev = 0, sum_gain = 0, sum_exp = 0, sum_ach = 0, sum_base = 0;
    double sum_before = 0, sum_ratio_old = 0;
    size_t n_cov_kind = 0;
    size_t low_tests = 0, proposed = 0, wins_naive = 0; /* proposed: trials with K tests */
    double sum_naive = 0;
    /* per-trial values for medians */
    double *v_before = calloc(trials, sizeof(double)), *v_exp = calloc(trials, sizeof(double));
    double *v_ach = calloc(trials, sizeof(double)), *v_base = calloc(trials, sizeof(double));
    double *v_ratio = calloc(trials, sizeof(double)),
           *v_ratio_base = calloc(trials, sizeof(double));
    size_t n_base = 0;
    if (!v_before || !v_exp || !v_ach || !v_base || !v_ratio || !v_ratio_base)
        return 1;

    for (size_t tr = 0; tr < trials; tr++) {
        struct truth t = {gsl_ran_flat(rng, 8, 11), gsl_ran_flat(rng, 0.6, 1.1), load};
        struct windows w0 = {0};
        for (size_t i = 0; i < N0; i++) {
            double rc = i < 12 ? 4.5 : i < 17 ? 4.0 : 3.0;
            add_window(&w0, &t, rng, rc + gsl_ran_flat(rng, -0.05, 0.05),
                       1.3 + gsl_ran_flat(rng, -0.15, 0.15));
        }
        stagecal_regress_result r0, r1, r2;
        if (fit(&w0, &form, load, &r0)) {
            failed++;
            continue;
        }
        stagecal_model m;
        stagecal_model_init(&m);
        m.form = form;
        memcpy(m.theta, r0.theta, sizeof r0.theta);
        memcpy(m.cov, r0.cov, sizeof r0.cov);
        m.sigma = r0.sigma_obs;
        m.dof = r0.dof;
        m.n_windows = N0;
        m.n_samples = 40 * N0;
        /* the design and its runs go along, as calibrate writes them */
        if (r0.design && (stagecal_model_set_design(&m, r0.design, r0.n, NULL) ||
                          stagecal_model_set_design_run(&m, r0.cluster, NULL)))
            return 1;
        stagecal_design_problem pb;
        stagecal_design_params par = stagecal_design_default_params();
        par.criterion = crit_d ? STAGECAL_DESIGN_D : STAGECAL_DESIGN_I;
        par.tests = K;
        par.r_lo = 1.5;
        par.r_hi = 8;
        par.f_lo = 0.7;
        par.f_hi = 1.6;
        par.starts = 12;
        stagecal_design_result res;
        stagecal_design_at out[NAT];
        stagecal_error err;
        if (stagecal_design_from_model(&m, &pb, &err) ||
            stagecal_design_propose(&pb, at, NAT, &par, NAN, NAN, NAN, NAN, &res, out, &err)) {
            fprintf(stderr, "trial %zu: %s\n", tr, err.text);
            stagecal_regress_result_free(&r0);
            failed++;
            continue;
        }
        struct windows w1 = w0, w2 = w0, w3 = w0;
        for (size_t k = 0; k < K; k++) {
            add_window(&w1, &t, rng, res.tests[k].r, load ? res.tests[k].f_load : 1.3);
            add_window(&w2, &t, rng, 4.5, 1.3);
            add_window(&w3, &t, rng, at[k % NAT].r, at[k % NAT].f_load);
            if (res.tests[k].r <= 2.5)
                low_tests++;
        }
        proposed++;
        int ok1 = fit(&w1, &form, load, &r1) == 0, ok2 = fit(&w2, &form, load, &r2) == 0;
        stagecal_regress_result r3;
        int ok3 = fit(&w3, &form, load, &r3) == 0;
        if (ok1 && ok2 && ok3) {
            double naive = mean_half(&r3, at);
            wins_naive += mean_half(&r1, at) < naive;
            sum_naive += naive;
            double ach = mean_half(&r1, at), base = mean_half(&r2, at), exp_after = 0, before = 0;
            double exp_old = 0;
            n_cov_kind += r0.cov_kind == study_cov && r1.cov_kind == study_cov;
            for (size_t j = 0; j < NAT; j++) {
                exp_after += out[j].half_after / NAT;
                exp_old += gsl_cdf_tdist_Pinv(0.975, r0.dof + K) * out[j].se_after / NAT;
                before += out[j].half_before / NAT;
                stagecal_band b;
                if (!stagecal_regress_result_band(&r1, at[j].r, at[j].f_load, 1.0, &b, NULL)) {
                    double truth = n_true(&t, at[j].r, at[j].f_load);
                    cover_n++;
                    cover_hit += b.ci_low <= truth && truth <= b.ci_high;
                }
            }
            double ratio = ach / exp_after;
            sum_ratio_old += ach / exp_old;
            /* the same expectation for the comparison design (K windows at R = 4.5) */
            stagecal_design_test common[K];
            stagecal_design_result ev;
            stagecal_design_at eo[NAT];
            for (size_t k = 0; k < K; k++)
                common[k] = (stagecal_design_test){4.5, 1.3, 0};
            if (!stagecal_design_evaluate(&pb, common, K, at, NAT, par.criterion, &ev, eo, NULL)) {
                double e2 = 0;
                for (size_t j = 0; j < NAT; j++)
                    e2 += eo[j].half_after / NAT;
                v_ratio_base[n_base++] = base / e2;
            }
            v_before[done] = before;
            v_exp[done] = exp_after;
            v_ach[done] = ach;
            v_base[done] = base;
            v_ratio[done] = ratio;
            done++;
            wins += ach < base;
            sum_ratio += ratio;
            sum_absdev += fabs(ratio - 1);
            within20 += fabs(ratio - 1) <= 0.2;
            sum_gain += ach / base;
            sum_exp += exp_after;
            sum_ach += ach;
            sum_base += base;
            sum_before += before;
        } else {
            failed++;
        }
        if (ok1)
            stagecal_regress_result_free(&r1);
        if (ok2)
            stagecal_regress_result_free(&r2);
        if (ok3)
            stagecal_regress_result_free(&r3);
        stagecal_regress_result_free(&r0);
        stagecal_model_free(&m);
        if (tty && (tr + 1) % 20 == 0)
            fprintf(stderr, "\r%zu/%zu trials", tr + 1, trials);
    }
    if (tty)
        fprintf(stderr, "\n");
    double nd = done ? (double)done : 1;
    gsl_sort(v_before, 1, done);
    gsl_sort(v_exp, 1, done);
    gsl_sort(v_ach, 1, done);
    gsl_sort(v_base, 1, done);
    gsl_sort(v_ratio, 1, done);
    gsl_sort(v_ratio_base, 1, n_base);
    printf("design study: form %s, criterion %s, %zu trials (%zu completed, %zu failed fits), "
           "seed %lu\n",
           form.name, crit_d ? "D" : "I", trials, done, failed, seed);
    printf("  covariance %s (%zu runs for cr2-run, the K new windows in %s; %zu of %zu trials' "
           "fits got it)\n",
           stagecal_regress_cov_name(study_cov), study_runs,
           new_run_each ? "K new runs" : "one new run", n_cov_kind, done);
    printf("  initial design: %d windows (12 at R=4.5, 5 at R=4, 3 at R=3), sigma_w %.2f; "
           "K = %d tests in R 1.5..8; interest R = 2, 2.5\n",
           N0, SIGMA_W, K);
    printf("  half-width [stages], mean and median over trials:\n");
    printf("    before                                    %.4f  %.4f\n", sum_before / nd,
           gsl_stats_median_from_sorted_data(v_before, 1, done));
    printf("    after, expected                           %.4f  %.4f\n", sum_exp / nd,
           gsl_stats_median_from_sorted_data(v_exp, 1, done));
    printf("    after, achieved (proposed tests)          %.4f  %.4f\n", sum_ach / nd,
           gsl_stats_median_from_sorted_data(v_ach, 1, done));
    printf("    after, K windows at R = 4.5               %.4f  %.4f\n", sum_base / nd,
           gsl_stats_median_from_sorted_data(v_base, 1, done));
    printf("  proposed narrower than K at R = 4.5         %.1f %% of trials (%zu/%zu)\n",
           100.0 * (double)wins / nd, wins, done);
    printf("  mean half-width, K windows split over the conditions of interest  %.4f\n",
           sum_naive / nd);
    printf("  proposed narrower than that                 %.1f %% of trials\n",
           100.0 * (double)wins_naive / nd);
    printf("  achieved/baseline half-width, mean          %.3f\n", sum_gain / nd);
    printf("  achieved/expected half-width, mean          %.3f (median %.3f, 5-95 %% %.3f-%.3f)\n",
           sum_ratio / nd, gsl_stats_median_from_sorted_data(v_ratio, 1, done),
           gsl_stats_quantile_from_sorted_data(v_ratio, 1, done, 0.05),
           gsl_stats_quantile_from_sorted_data(v_ratio, 1, done, 0.95));
    if (n_base)
        printf("  the same for K at R = 4.5: median %.3f, 5-95 %% %.3f-%.3f (%zu trials)\n",
               gsl_stats_median_from_sorted_data(v_ratio_base, 1, n_base),
               gsl_stats_quantile_from_sorted_data(v_ratio_base, 1, n_base, 0.05),
               gsl_stats_quantile_from_sorted_data(v_ratio_base, 1, n_base, 0.95), n_base);
    printf("  achieved/expected, t at n - p + K (old), mean %.3f\n", sum_ratio_old / nd);
    printf("  |achieved/expected - 1|, mean               %.3f\n", sum_absdev / nd);
    printf("  |achieved/expected - 1| <= 0.2              %.1f %% of trials\n",
           100.0 * (double)within20 / nd);
    printf("  tests proposed at R <= 2.5                  %.1f %%\n",
           100.0 * (double)low_tests / ((proposed ? (double)proposed : 1) * K));
    printf("  95 %% CI after the proposed tests covers the truth: %.3f (%zu intervals)\n",
           cover_n ? (double)cover_hit / (double)cover_n : NAN, cover_n);
    gsl_rng_free(rng);
    free(v_before);
    free(v_exp);
    free(v_ach);
    free(v_base);
    free(v_ratio);
    free(v_ratio_base);
    return 0;
}
