/*
 * test_evidence.c — the unit of evidence (src/evidence.c): a window's autocorrelation-aware
 * mean and standard error, the pooling of the autocorrelation, the builder that turns a run
 * log's windows into evidence, and a window's stage count.
 *
 * Sources of truth: the variance of the mean of an AR(1) series (closed form), exact
 * arithmetic of the pooling rule, and Fenske's closed form (Fenske 1932, "Fractionation of
 * straight-run Pennsylvania gasoline", Ind. Eng. Chem. 24, citation from memory) for the stage
 * count of a window at total reflux.
 */
#define _GNU_SOURCE 1 /* open_memstream */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multimin.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/evidence.h"
#include "stagecal/runlog.h"
#include "synth_calibration.h"
#include "testutil.h"

/* Constant α = 2.5 and stated analyser uncertainties; no load (no F-factor needed). */
static stagecal_column test_col;

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    memset(&test_col, 0, sizeof test_col);
    test_col.system.vle = stagecal_vle_alloc_alpha(2.5, NULL);
    test_col.u = (stagecal_uncertainty){.xd = 0.002, .xb = 0.005, .w_mol = 5.0};
    return test_col.system.vle ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    stagecal_vle_free(test_col.system.vle);
    return 0;
}

/* The standard error from stagecal_evidence_mean tracks the true standard deviation
 * of a window mean of autocorrelated noise, where the naive s/√n is far too small. */
static void evidence_se_matches_ar1(void **state)
{
    (void)state;
    enum { N = 60, REPS = 4000 };
    const double sigma = 1.0, rho = 0.7;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261201);
    double t[N], y[N], se_sum = 0, naive_sum = 0;
    for (size_t i = 0; i < N; i++)
        t[i] = 60.0 * (double)i;
    for (int r = 0; r < REPS; r++) {
        double mean, se, neff;
        synth_ar1(rng, y, N, sigma, rho);
        assert_int_equal(stagecal_evidence_mean(t, y, N, 0, &mean, &se, &neff, NULL), STAGECAL_OK);
        se_sum += se;
        double ss = 0, m = 0;
        for (size_t i = 0; i < N; i++)
            m += y[i] / N;
        for (size_t i = 0; i < N; i++)
            ss += (y[i] - m) * (y[i] - m);
        naive_sum += sqrt(ss / (N - 1) / N);
    }
    /* The detrending removes a little variance (the slope), so compare with the
     * closed form to 20 %: the AR(1) n_eff is an approximation (finite n, estimated ρ
     * biased low in short series). The naive s/√n is ~2.4 times too small here. */
    double truth = sqrt(synth_ar1_var_mean(sigma, rho, N));
    assert_rel(se_sum / REPS, truth, 0.20, "AR(1) window-mean standard error");
    assert_true(naive_sum / REPS < 0.6 * truth);
    gsl_rng_free(rng);
}

static void evidence_needs_three(void **state)
{
    (void)state;
    double t[3] = {0, 1, 2}, y[3] = {1, NAN, 2}, m, se;
    stagecal_error err;
    assert_int_equal(stagecal_evidence_mean(t, y, 3, 0, &m, &se, NULL, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "window mean needs at least 3 finite samples, got 2");
}

/* Pooling: the ρ of each analyser becomes the lag-pair-weighted mean, and each standard
 * error is rescaled from s/√n_eff(ρ_own) to s/√n_eff(ρ_pooled) with the AR(1) n_eff =
 * m(1 − ρ)/(1 + ρ) (Wilks 2011, eq. 5.12 — from memory). Windows: m = 41 and 21 (40 and 20
 * lag pairs), ρ = 0.1 and 0.7 → pooled (40·0.1 + 20·0.7)/60 = 0.3. Exact arithmetic, so
 * 1e-12 relative. A window without samples (m = 0) is left alone. */
static void evidence_pool_rho_rescales(void **state)
{
    (void)state;
    stagecal_evidence ev[3];
    memset(ev, 0, sizeof ev);
    ev[0].m_xd = ev[0].m_xb = 41, ev[0].rho_xd = ev[0].rho_xb = 0.1;
    ev[1].m_xd = ev[1].m_xb = 21, ev[1].rho_xd = ev[1].rho_xb = 0.7;
    ev[2].m_xd = 0, ev[2].m_xb = 0, ev[2].rho_xd = ev[2].rho_xb = 0.9;
    for (int k = 0; k < 3; k++)
        ev[k].u_xd = 0.001 * (k + 1), ev[k].u_xb = 0.002 * (k + 1);
    stagecal_evidence_pool_rho(ev, 3);
    const double pooled = (40 * 0.1 + 20 * 0.7) / 60.0;
    double n0 = 41 * (1 - 0.1) / 1.1, n0p = 41 * (1 - pooled) / (1 + pooled);
    double n1 = 21 * (1 - 0.7) / 1.7, n1p = 21 * (1 - pooled) / (1 + pooled);
    assert_rel(ev[0].rho_xd, pooled, 1e-12, "pooled rho, xD");
    assert_rel(ev[1].rho_xb, pooled, 1e-12, "pooled rho, xB");
    assert_rel(ev[0].u_xd, 0.001 * sqrt(n0 / n0p), 1e-12, "u_xd window 0");
    assert_rel(ev[1].u_xd, 0.002 * sqrt(n1 / n1p), 1e-12, "u_xd window 1");
    assert_rel(ev[0].u_xb, 0.002 * sqrt(n0 / n0p), 1e-12, "u_xb window 0");
    assert_rel(ev[2].rho_xd, 0.9, 0, "no samples: untouched");
    assert_rel(ev[2].u_xd, 0.003, 0, "no samples: untouched");
}

/* A run log of 60 samples at a logged R = 3 whose W does not fall (no distillate): the
 * column runs at total reflux. The pot composition is the one Fenske gives for N = 5 at
 * xD = 0.95 (Fenske 1932: xB/(1 − xB) = (xD/(1 − xD))/α^N), so the window's stage count is
 * 5. Moved here from test_runlog.c (runlog_no_distillate_counts_at_total_reflux), where it
 * read the run-log window's own mean (a second definition of a window's stage count, now
 * gone). Tolerance: 4 of the window's standard
 * errors plus the xB noise's own bias, a loose 0.2 stages (common practice, no source). */
static char *no_distillate_log_censored(size_t *len, int every);
static char *no_distillate_log(size_t *len)
{
    return no_distillate_log_censored(len, 0);
}

/* The same log with every `every`-th xD written as 1, the physical bound (0: none): a
 * censored reading "xD at or above 1" (docs/runlog.md). */
static char *no_distillate_log_censored(size_t *len, int every)
{
    const double xd = 0.95, q = (xd / (1 - xd)) / pow(2.5, 5.0), xb = q / (1 + q);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 7);
    char *buf = NULL;
    FILE *out = open_memstream(&buf, len);
    fprintf(out, "time[min],W[kmol],xD[mol/mol],xB[mol/mol],R[-]\n");
    for (int i = 0; i < 60; i++) {
        double w = 10 + gsl_ran_gaussian(rng, 0.005), d = xd + gsl_ran_gaussian(rng, test_col.u.xd);
        double b = xb + gsl_ran_gaussian(rng, 0.001);
        if (every > 0 && i % every == 0)
            fprintf(out, "%d,%.6f,1,%.6f,3\n", 10 * i, w, b);
        else
            fprintf(out, "%d,%.6f,%.6f,%.6f,3\n", 10 * i, w, d, b);
    }
    fclose(out);
    gsl_rng_free(rng);
    return buf;
}

/* The no-distillate log read, analysed and inverted; free with stagecal_runlog_free and
 * stagecal_runlog_result_free. */
static stagecal_runlog *no_distillate_analysed(stagecal_runlog_result *res)
{
    size_t len = 0;
    char *buf = no_distillate_log(&len);
    stagecal_runlog *log = stagecal_runlog_alloc();
    assert_int_equal(
        stagecal_runlog_read_buffer(log, buf, len, "nd.csv", &test_col, NULL, NULL, NULL), 0);
    free(buf);
    assert_int_equal(stagecal_runlog_analyse(log, &test_col, NULL, res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, &test_col, 1.0, NULL, res, NULL), 0);
    assert_true(res->nwindows >= 1);
    return log;
}

static void evidence_no_distillate_window_reads_fenske(void **state)
{
    (void)state;
    stagecal_runlog_result res;
    stagecal_evidence_set set;
    stagecal_runlog *log = no_distillate_analysed(&res);
    assert_int_equal(stagecal_evidence_build(log, &res, &test_col, 1.0, NULL, &set, NULL),
                     STAGECAL_OK);
    /* the run log's part: the stretch is flagged and noted as total reflux */
    const stagecal_runlog_window *w = &res.windows[0];
    assert_int_equal(w->total_reflux, 1);
    assert_true(res.flags[w->first] & STAGECAL_SAMPLE_TOTAL_REFLUX);
    assert_string_equal(stagecal_runlog_note_text(res.note[w->first]),
                        "no distillate drawn: counted at total reflux");
    const stagecal_evidence *e = stagecal_evidence_find(&set, 0);
    assert_non_null(e);
    assert_int_equal(e->window, 0);
    assert_int_equal(e->total_reflux, 1);
    assert_true(isinf(e->r));
    assert_true(e->stages_ok);
    print_message("no distillate: window of %zu, stages %.4f ± %.4f\n", e->n_samples, e->stages,
                  e->se_stages);
    assert_abs(e->stages, 5.0, 0.2, "stages at total reflux (Fenske N = 5)");
    /* the carried samples are evenly thinned to max_samples (default 24) */
    assert_int_equal(e->m, 24);
    assert_null(e->s_cens);
    stagecal_evidence_set_free(&set);
    stagecal_evidence_set_free(NULL);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
}

/* The builder's refusals, each with its whole message (evidence.h contract). */
static void evidence_build_refusals(void **state)
{
    (void)state;
    stagecal_runlog_result res;
    stagecal_evidence_set set;
    stagecal_error err;
    stagecal_runlog *log = no_distillate_analysed(&res);
    stagecal_column novle = test_col;
    novle.system.vle = NULL;
    assert_int_equal(stagecal_evidence_build(log, &res, &novle, 1.0, NULL, &set, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "evidence: needs a run log, its analysis and a column with an "
                                  "equilibrium model");
    stagecal_evidence_params par = stagecal_evidence_default_params();
    par.max_samples = 65;
    assert_int_equal(stagecal_evidence_build(log, &res, &test_col, 1.0, &par, &set, &err),
                     STAGECAL_EINVAL);
    assert_string_equal(err.text, "evidence: max_samples 65 (expected 1 to 64)");
    /* min_ok above the window's ok samples: the window stays evidence, without a count */
    par = stagecal_evidence_default_params();
    par.min_ok = 1000;
    assert_int_equal(stagecal_evidence_build(log, &res, &test_col, 1.0, &par, &set, &err),
                     STAGECAL_OK);
    assert_true(set.n >= 1);
    assert_false(set.ev[0].stages_ok);
    assert_null(stagecal_evidence_find(&set, res.nwindows)); /* no such window */
    stagecal_evidence_set_free(&set);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
}

/* Window statistics from the smoother's residuals (stagecal_evidence_window_stats) on white
 * analyser noise riding on a curved batch trajectory, at irregular sampling times: the
 * standard error of a window's plain mean must be σ/√m (the closed form for independent
 * samples) whatever the trajectory, because the local quadratic follows the curve. The
 * straight-line detrend (stagecal_evidence_mean) reads the curvature as noise and its
 * autocorrelation, and states a much larger error. 12 windows of 40 samples per data set,
 * 200 data sets; tolerance 10 % on the mean standard error (the estimate of σ² has about
 * 12·20 residual degrees of freedom per data set, and ρ̂ is clipped at 0 from below: a small
 * upward bias; common practice, no source). */
static void evidence_smoother_stats_follow_a_curved_pot(void **state)
{
    (void)state;
    enum { NW = 12, NS = 40, REPS = 200 };
    const double sigma = 0.0015;
    static double t[NW][NS], y[NW][NS], yb[NW][NS];
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261202);
    double sum_smoother = 0, sum_line = 0;
    for (int rep = 0; rep < REPS; rep++) {
        stagecal_evidence ev[NW];
        for (int w = 0; w < NW; w++) {
            t[w][0] = 0;
            for (int i = 1; i < NS; i++)
                t[w][i] = t[w][i - 1] + gsl_ran_exponential(rng, 60.0);
            for (int i = 0; i < NS; i++) {
                double s = t[w][i] / t[w][NS - 1];
                y[w][i] = 0.93 - 0.03 * s * (1 + s) / 2 + gsl_ran_gaussian(rng, sigma);
                yb[w][i] = 0.30 - 0.10 * s * s + gsl_ran_gaussian(rng, sigma);
            }
            memset(&ev[w], 0, sizeof ev[w]);
            ev[w].m = NS;
            ev[w].s_t = t[w];
            ev[w].s_xd = y[w];
            ev[w].s_xb = yb[w];
            double mean, se;
            assert_int_equal(stagecal_evidence_mean(t[w], y[w], NS, 0, &mean, &se, NULL, NULL),
                             STAGECAL_OK);
            sum_line += se / (NW * REPS);
        }
        assert_int_equal(stagecal_evidence_window_stats(ev, NW, 0, 0, NULL), STAGECAL_OK);
        for (int w = 0; w < NW; w++) {
            sum_smoother += ev[w].u_xd / (NW * REPS);
            assert_true(ev[w].se_sxd > 0);
        }
    }
    double truth = sigma / sqrt(NS);
    print_message("window se: smoother %.3g, straight line %.3g, closed form %.3g\n", sum_smoother,
                  sum_line, truth);
    assert_rel(sum_smoother, truth, 0.10, "window se from the smoother's residuals");
    assert_true(sum_line > 1.5 * truth); /* the straight line's error, for contrast */
    gsl_rng_free(rng);
}

/* stagecal_evidence_mean_quad (quadratic detrend, ρ and σ from the AR(1) moments of its
 * residuals). Truth: the closed-form variance of the mean of an AR(1) series
 * (synth_ar1_var_mean) and σ/√m for white noise. (1) One window of 60 samples of AR(1) noise,
 * ρ = 0.7, 4000 data sets (the series of evidence_se_matches_ar1): the median standard error
 * within 10 % of the closed form (measured −7 %; the plain estimator with this detrend was 25 %
 * low on average), the mean above it but within 30 % (measured +21 %: the error grows steeply
 * as a window's own ρ̂ nears 1, a convex tail — why the builder pools ρ; tolerances common
 * practice, no source).
 * (2) 12 windows of 40 samples, ρ = 0.6 per sample, ρ pooled (the mean of the windows' own,
 * then each window again at it), 500 data sets: within 5 %. (3) White noise on the curved pot
 * of the smoother test, irregular times: within 10 % of σ/√m, where the straight line states
 * more than 1.5 times it. (4) Noise-free quadratic: the floor alone, u_floor·√(1ᵀΣ(ρ)1)/m
 * at a given ρ, to 1e-12 relative. */
static void evidence_quad_matches_ar1_and_follows_a_curve(void **state)
{
    (void)state;
    enum { N = 60, REPS = 4000, NW = 12, NS = 40, R2 = 500, R3 = 200 };
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261201);
    double t[N], y[N], sum = 0;
    static double ses[REPS];
    for (size_t i = 0; i < N; i++)
        t[i] = 60.0 * (double)i;
    for (int r = 0; r < REPS; r++) {
        double mean, se, rho;
        size_t m;
        synth_ar1(rng, y, N, 1.0, 0.7);
        assert_int_equal(stagecal_evidence_mean_quad(t, y, N, 0, NAN, &mean, &se, &rho, &m, NULL),
                         STAGECAL_OK);
        assert_int_equal(m, N);
        sum += se / REPS;
        ses[r] = se;
    }
    gsl_sort(ses, 1, REPS);
    double med1 = gsl_stats_median_from_sorted_data(ses, 1, REPS);
    double truth1 = sqrt(synth_ar1_var_mean(1.0, 0.7, N));
    /* (2) pooled */
    static double tw[NW][NS], yw[NW][NS];
    double sum2 = 0;
    for (int r = 0; r < R2; r++) {
        double rho_pool = 0, mean, se, rho;
        for (int w = 0; w < NW; w++) {
            for (int i = 0; i < NS; i++)
                tw[w][i] = 60.0 * i;
            synth_ar1(rng, yw[w], NS, 1.0, 0.6);
            assert_int_equal(
                stagecal_evidence_mean_quad(tw[w], yw[w], NS, 0, NAN, &mean, &se, &rho, NULL, NULL),
                STAGECAL_OK);
            rho_pool += rho / NW;
        }
        for (int w = 0; w < NW; w++) {
            assert_int_equal(stagecal_evidence_mean_quad(tw[w], yw[w], NS, 0, rho_pool, &mean, &se,
                                                         &rho, NULL, NULL),
                             STAGECAL_OK);
            assert_true(rho == rho_pool);
            sum2 += se / (NW * R2);
        }
    }
    double truth2 = sqrt(synth_ar1_var_mean(1.0, 0.6, NS));
    /* (3) white noise on a curved pot */
    const double sigma = 0.0015;
    double sum3 = 0, sum3_line = 0;
    for (int r = 0; r < R3; r++) {
        double tc[NS], yc[NS], mean, se, rho;
        tc[0] = 0;
        for (int i = 1; i < NS; i++)
            tc[i] = tc[i - 1] + gsl_ran_exponential(rng, 60.0);
        for (int i = 0; i < NS; i++) {
            double s = tc[i] / tc[NS - 1];
            yc[i] = 0.93 - 0.03 * s * (1 + s) / 2 + gsl_ran_gaussian(rng, sigma);
        }
        assert_int_equal(
            stagecal_evidence_mean_quad(tc, yc, NS, 0, NAN, &mean, &se, &rho, NULL, NULL),
            STAGECAL_OK);
        sum3 += se / R3;
        assert_int_equal(stagecal_evidence_mean(tc, yc, NS, 0, &mean, &se, NULL, NULL),
                         STAGECAL_OK);
        sum3_line += se / R3;
    }
    double truth3 = sigma / sqrt(NS);
    print_message("quad se: AR(1) 0.7 n=60 mean %.4f median %.4f (closed form %.4f); pooled 0.6 "
                  "n=40 %.4f (%.4f); "
                  "white on a curve %.3g (%.3g; straight line %.3g)\n",
                  sum, med1, truth1, sum2, truth2, sum3, truth3, sum3_line);
    assert_rel(med1, truth1, 0.10, "AR(1) window-mean se (median), quadratic detrend");
    assert_true(sum > truth1 && sum < 1.3 * truth1); /* the convex tail of a window's own rho */
    assert_rel(sum2, truth2, 0.05, "AR(1) window-mean se, rho pooled");
    assert_rel(sum3, truth3, 0.10, "white noise on a curved pot, quadratic detrend");
    assert_true(sum3_line > 1.5 * truth3);
    /* (4) noise-free: the floor at a given rho */
    double mean, se, rho;
    for (size_t i = 0; i < N; i++)
        y[i] = 0.4 + 1e-5 * (double)i - 3e-8 * (double)(i * i);
    assert_int_equal(stagecal_evidence_mean_quad(t, y, N, 0.002, 0.5, &mean, &se, &rho, NULL, NULL),
                     STAGECAL_OK);
    assert_rel(se, sqrt(synth_ar1_var_mean(0.002, 0.5, N)), 1e-12, "floor at rho 0.5");
    assert_int_equal(stagecal_evidence_mean_quad(t, y, 2, 0, NAN, &mean, &se, &rho, NULL, NULL),
                     STAGECAL_EINVAL);
    gsl_rng_free(rng);
}

/* The reading noise for the composition fit's convexity correction
 * (stagecal_evidence_noise_sd): (1) white noise of σ = 0.0015 on the curved pot of the test
 * above, 12 windows of 40 samples, 100 data sets: the mean σ̂ within 5 % of σ (about 12·20
 * residual degrees of freedom per data set, so the mean's sampling error is below 1 %;
 * common practice, no source), and the standard errors are left as they were (u_xd stays
 * 0); (2) a noise-free whole batch in each window (xD 0.95 → 0.55 along an exponential,
 * 24 samples): the local quadratics miss the trajectory by about 1e-3, which must not be
 * read as noise — σ̂ below 1e-4 (what the quartic fallback gives; the round-trip logs of
 * tests/cli/test_roundtrip.sh need it for their 1e-5 recovery of the law). */
static void evidence_noise_sd_reads_noise_not_trajectory(void **state)
{
    (void)state;
    enum { NW = 12, NS = 40, NB = 24, REPS = 100 };
    const double sigma = 0.0015;
    static double t[NW][NS], y[NW][NS], yb[NW][NS];
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261203);
    double sum = 0;
    stagecal_evidence ev[NW];
    for (int rep = 0; rep < REPS; rep++) {
        for (int w = 0; w < NW; w++) {
            t[w][0] = 0;
            for (int i = 1; i < NS; i++)
                t[w][i] = t[w][i - 1] + gsl_ran_exponential(rng, 60.0);
            for (int i = 0; i < NS; i++) {
                double s = t[w][i] / t[w][NS - 1];
                y[w][i] = 0.93 - 0.03 * s * (1 + s) / 2 + gsl_ran_gaussian(rng, sigma);
                yb[w][i] = 0.30 - 0.10 * s * s + gsl_ran_gaussian(rng, sigma);
            }
            memset(&ev[w], 0, sizeof ev[w]);
            ev[w].m = NS;
            ev[w].s_t = t[w];
            ev[w].s_xd = y[w];
            ev[w].s_xb = yb[w];
        }
        assert_int_equal(stagecal_evidence_noise_sd(ev, NW, NULL), STAGECAL_OK);
        for (int w = 0; w < NW; w++) {
            assert_true(ev[w].sd_xd == ev[0].sd_xd); /* one σ per analyser */
            assert_true(ev[w].u_xd == 0 && ev[w].se_sxd == 0);
        }
        sum += ev[0].sd_xd / REPS;
    }
    print_message("reading noise: mean estimate %.4g, truth %.4g\n", sum, sigma);
    assert_rel(sum, sigma, 0.05, "reading noise from the smoother's residuals");
    for (int w = 0; w < NW; w++) {
        for (int i = 0; i < NB; i++) {
            double s = (double)i / (NB - 1);
            t[w][i] = 360.0 * i;
            y[w][i] = 0.95 - 0.4 * expm1(4 * s) / expm1(4.0);
            yb[w][i] = 0.45 - 0.37 * s;
        }
        memset(&ev[w], 0, sizeof ev[w]);
        ev[w].m = NB;
        ev[w].s_t = t[w];
        ev[w].s_xd = y[w];
        ev[w].s_xb = yb[w];
    }
    assert_int_equal(stagecal_evidence_noise_sd(ev, NW, NULL), STAGECAL_OK);
    print_message("noise-free batch: reading noise %.3g\n", ev[0].sd_xd);
    assert_true(ev[0].sd_xd < 1e-4);
    gsl_rng_free(rng);
}

/* Censored readings (xD at the bound 1) with tobit_means = 0 stay in the window but out of
 * its means: the window counts them, carries none, and its stage count still reads Fenske's
 * 5 within the tolerance above (the censored rows only remove samples). The counts are what the
 * rows say: every 4th of the 60 rows, i.e. those of the 60 inside the window. */
static void evidence_counts_censored_readings(void **state)
{
    (void)state;
    size_t len = 0;
    char *buf = no_distillate_log_censored(&len, 4);
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_runlog_result res;
    stagecal_evidence_set set;
    assert_int_equal(
        stagecal_runlog_read_buffer(log, buf, len, "nd.csv", &test_col, NULL, NULL, NULL), 0);
    free(buf);
    assert_int_equal(stagecal_runlog_analyse(log, &test_col, NULL, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, &test_col, 1.0, NULL, &res, NULL), 0);
    assert_true(res.nwindows >= 1);
    /* tobit_means (the default) takes the readings at 1 as censored observations (every 4th
     * one at 1 while the others read 0.95 ± 0.002: data no noise model gives, so the Tobit
     * level moves up and the window's count with it); tobit_means = 0 leaves them out and
     * keeps Fenske's count */
    stagecal_evidence_params par = stagecal_evidence_default_params();
    par.tobit_means = 1;
    assert_int_equal(stagecal_evidence_build(log, &res, &test_col, 1.0, &par, &set, NULL),
                     STAGECAL_OK);
    const stagecal_evidence *e = stagecal_evidence_find(&set, 0);
    assert_non_null(e);
    assert_true(e->xd_tobit);
    assert_true(e->xd > 0.951 && e->xd < 1);
    for (size_t j = 0; j < e->m; j++)
        assert_true(e->s_xd[j] < 1); /* the trend, not a bound, is carried */
    stagecal_evidence_set_free(&set);
    par.tobit_means = 0;
    assert_int_equal(stagecal_evidence_build(log, &res, &test_col, 1.0, &par, &set, NULL),
                     STAGECAL_OK);
    e = stagecal_evidence_find(&set, 0);
    assert_non_null(e);
    assert_false(e->xd_tobit);
    size_t want = 0;
    for (size_t i = e->first; i <= e->last; i++)
        want += (log->line[i] - 2) % 4 == 0; /* data rows start on line 2 */
    assert_true(want > 0);
    assert_int_equal(e->n_cens_xd, want);
    assert_int_equal(e->n_cens_xb, 0);
    for (size_t j = 0; j < e->m; j++)
        assert_true(e->s_xd[j] < 1); /* no censored reading carried */
    assert_true(e->stages_ok);
    assert_abs(e->stages, 5.0, 0.2, "stages at total reflux with censored xD (Fenske N = 5)");
    stagecal_evidence_set_free(&set);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
}

/* ---- censored readings as censored observations (stagecal_evidence_tobit) ---------------- */

/* The Tobit log-likelihood of a line a + b·u (u the centred time) with σ = exp(ls), written
 * here from its definition (Tobin 1958, Econometrica 26(1):24-36 — from memory): a value
 * contributes log φ((y − μ)/σ) − log σ, a reading clipped at its top bound L log Q((L − μ)/σ). */
struct tobit_data {
    const double *u, *y;
    const signed char *d;
    size_t m, q;
};

static double tobit_negll(const gsl_vector *x, void *par)
{
    const struct tobit_data *td = par;
    double a = gsl_vector_get(x, 0), b = td->q > 1 ? gsl_vector_get(x, 1) : 0;
    double ls = gsl_vector_get(x, td->q), sig = exp(ls), ll = 0;
    for (size_t i = 0; i < td->m; i++) {
        double mu = a + b * td->u[i];
        if (td->d[i])
            ll += log(gsl_cdf_ugaussian_Q((td->y[i] - mu) / sig));
        else
            ll += log(gsl_ran_ugaussian_pdf((td->y[i] - mu) / sig)) - ls;
    }
    return -ll;
}

/* The level and log σ of the Tobit line by GSL's Nelder–Mead simplex (an optimizer that
 * knows nothing of the EM iteration), from the naive fit. */
static void tobit_simplex(struct tobit_data *td, double a0, double s0, double *a, double *ls)
{
    size_t k = td->q + 1;
    gsl_multimin_function fn = {tobit_negll, k, td};
    gsl_vector *x = gsl_vector_alloc(k), *step = gsl_vector_alloc(k);
    gsl_vector_set(x, 0, a0);
    gsl_vector_set(step, 0, 0.5 * s0);
    if (td->q > 1) {
        gsl_vector_set(x, 1, 0);
        gsl_vector_set(step, 1, 0.5 * s0 / fabs(td->u[td->m - 1]));
    }
    gsl_vector_set(x, td->q, log(s0));
    gsl_vector_set(step, td->q, 0.2);
    gsl_multimin_fminimizer *mn =
        gsl_multimin_fminimizer_alloc(gsl_multimin_fminimizer_nmsimplex2, k);
    gsl_multimin_fminimizer_set(mn, &fn, x, step);
    for (int it = 0; it < 20000; it++) {
        if (gsl_multimin_fminimizer_iterate(mn))
            break;
        if (gsl_multimin_test_size(gsl_multimin_fminimizer_size(mn), 1e-13) == GSL_SUCCESS)
            break;
    }
    *a = gsl_vector_get(mn->x, 0);
    *ls = gsl_vector_get(mn->x, td->q);
    gsl_multimin_fminimizer_free(mn);
    gsl_vector_free(x);
    gsl_vector_free(step);
}

/* A window of 40 readings of a distillate analyser clipped at 1 (true level 0.998 at the
 * window's mid time, a drift of 0.001 over the window, white noise σ = 0.002: 16 % of the
 * readings read 1.00000 and are censored there). */
#define TOB_M 40
static size_t tobit_window(gsl_rng *rng, double *t, double *y, signed char *d)
{
    size_t nc = 0;
    for (size_t i = 0; i < TOB_M; i++) {
        t[i] = 60.0 * (double)i;
        double x = 0.998 + 0.001 * ((double)i / (TOB_M - 1) - 0.5) + gsl_ran_gaussian(rng, 0.002);
        d[i] = x >= 1.0;
        y[i] = d[i] ? 1.0 : x;
        nc += d[i] != 0;
    }
    return nc;
}

static void evidence_tobit_level_unbiased(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20261203);
    enum { DRAWS = 4000 };
    double t[TOB_M], y[TOB_M], yc[TOB_M], tr[TOB_M], yn[TOB_M];
    signed char d[TOB_M];
    double *lev = malloc(DRAWS * sizeof *lev), se2 = 0, drop = 0, share = 0;
    for (int r = 0; r < DRAWS; r++) {
        share += (double)tobit_window(rng, t, y, d) / TOB_M / DRAWS;
        double ratio;
        assert_int_equal(stagecal_evidence_tobit(t, y, d, TOB_M, 2, yc, tr, &ratio, NULL),
                         STAGECAL_OK);
        double mean, se;
        assert_int_equal(stagecal_evidence_mean(t, yc, TOB_M, 0.002, &mean, &se, NULL, NULL), 0);
        lev[r] = mean;
        /* the stated error: white noise σ = 0.002 (the floor) over √m, times the censoring's
         * information cost; ρ of the completed residuals is clipped at 0 or small here */
        se2 += 0.002 * 0.002 / TOB_M * ratio / DRAWS;
        for (size_t i = 0; i < TOB_M; i++)
            yn[i] = d[i] ? NAN : y[i];
        double dm, ds;
        assert_int_equal(stagecal_evidence_mean(t, yn, TOB_M, 0.002, &dm, &ds, NULL, NULL), 0);
        drop += (dm - 0.998) / DRAWS;
    }
    double bias = gsl_stats_mean(lev, 1, DRAWS) - 0.998, sd = gsl_stats_sd(lev, 1, DRAWS);
    print_message("Tobit level over %d windows: bias %.3g (sd %.3g), stated se/sd %.3f, "
                  "clipped share %.4f; left out: bias %.3g\n",
                  DRAWS, bias, sd, sqrt(se2) / sd, share, drop);
    /* 16 % clipped: Q(1) = 0.1587 (normal tables); 4000·40 Bernoulli draws give ±0.002 (2 se) */
    assert_abs(share, 0.1587, 0.004, "share of readings clipped at 1");
    /* Unbiased: the MLE's finite-sample bias is O(σ/m) (≈ 5e-5 at most here; Schmee & Hahn 1979
     * found the EM estimates close to unbiased at 10-30 % censoring — from memory); the
     * Monte Carlo error of the mean of 4000 levels is sd/√4000 ≈ 5e-6. Tolerance 4e-5 =
     * 0.12 of one window's sd: far below the bias of leaving the clipped readings out
     * (checked next, about −0.0006 = −1.8 sd). */
    assert_abs(bias, 0.0, 4e-5, "Tobit level, mean over 4000 windows minus truth");
    assert_true(drop < -0.0004); /* the estimator before: clipped readings left out */
    /* The stated error matches the spread: Monte Carlo error of an sd from 4000 draws ≈ 1.1 %;
     * the observed information at 40 readings (16 % censored) is a large-sample variance,
     * tolerance 10 % */
    assert_abs(sqrt(se2) / sd, 1.0, 0.10, "stated se / sd of the Tobit level");
    free(lev);
    gsl_rng_free(rng);
}

/* The EM's fixed point is the likelihood's maximum: the same level and σ as an independent
 * simplex maximisation of the Tobit log-likelihood (constant mean and line); and mirroring the
 * data (y → −y, a top bound → a bottom bound) mirrors the level exactly (the likelihood's
 * symmetry). */
static void evidence_tobit_matches_simplex(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 77);
    double t[TOB_M], y[TOB_M], yc[TOB_M], tr[TOB_M], u[TOB_M], ym[TOB_M];
    signed char d[TOB_M], dm[TOB_M];
    for (int r = 0; r < 6; r++) {
        size_t nc = tobit_window(rng, t, y, d);
        assert_true(nc > 0);
        for (size_t q = 1; q <= 2; q++) {
            double ratio, ratio_m;
            assert_int_equal(stagecal_evidence_tobit(t, y, d, TOB_M, q, yc, tr, &ratio, NULL),
                             STAGECAL_OK);
            double lev = gsl_stats_mean(yc, 1, TOB_M);
            double tbar = gsl_stats_mean(t, 1, TOB_M), s0 = gsl_stats_sd(y, 1, TOB_M);
            for (size_t i = 0; i < TOB_M; i++)
                u[i] = t[i] - tbar;
            struct tobit_data td = {u, y, d, TOB_M, q};
            double a, ls;
            tobit_simplex(&td, gsl_stats_mean(y, 1, TOB_M), s0, &a, &ls);
            /* both maximise one smooth likelihood: agreement to 1e-4 σ (the simplex's size
             * tolerance 1e-13 in the level, EM's 1e-10 σ) */
            assert_abs(lev, a, 1e-4 * exp(ls), "Tobit level: EM vs simplex");
            /* the trend's centred intercept is the level (orthogonal columns) */
            double tm = 0.5 * (tr[TOB_M / 2 - 1] + tr[TOB_M / 2]);
            assert_abs(tm, lev, 1e-12, "trend at the mid time = level");
            assert_true(ratio >= 1.0);
            for (size_t i = 0; i < TOB_M; i++)
                ym[i] = -y[i], dm[i] = (signed char)-d[i];
            assert_int_equal(stagecal_evidence_tobit(t, ym, dm, TOB_M, q, yc, tr, &ratio_m, NULL),
                             0);
            assert_abs(gsl_stats_mean(yc, 1, TOB_M), -lev, 1e-9, "mirrored level");
            assert_abs(ratio_m, ratio, 1e-6 * ratio, "mirrored information ratio");
        }
    }
    /* all but two readings at the bound: only a bound, refused */
    for (size_t i = 0; i < TOB_M; i++)
        d[i] = i > 1, y[i] = i > 1 ? 1.0 : 0.999;
    double ratio;
    assert_int_equal(stagecal_evidence_tobit(t, y, d, TOB_M, 2, yc, tr, &ratio, NULL),
                     STAGECAL_EDATA);
    gsl_rng_free(rng);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(evidence_se_matches_ar1),
        cmocka_unit_test(evidence_needs_three),
        cmocka_unit_test(evidence_pool_rho_rescales),
        cmocka_unit_test(evidence_no_distillate_window_reads_fenske),
        cmocka_unit_test(evidence_build_refusals),
        cmocka_unit_test(evidence_counts_censored_readings),
        cmocka_unit_test(evidence_smoother_stats_follow_a_curved_pot),
        cmocka_unit_test(evidence_quad_matches_ar1_and_follows_a_curve),
        cmocka_unit_test(evidence_noise_sd_reads_noise_not_trajectory),
        cmocka_unit_test(evidence_tobit_level_unbiased),
        cmocka_unit_test(evidence_tobit_matches_simplex),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
