/*
 * test_history.c — the history fit (include/stagecal/history.h).
 *
 * Sources of truth:
 *   - statsmodels 0.13 WLS(..., cov_type='HC2') on the straight line that the fit
 *     reduces to for the form "constant" and one window per run (numbers frozen below,
 *     computed by the script in the comment of test_line_hc2);
 *   - an independent numpy implementation of the CR2 sandwich and of the Bell–McCaffrey
 *     dof in the eigenvalue form of Imbens & Kolesár (2016) for clustered windows;
 *   - the closed-form crossing of a noise-free line;
 *   - a small coverage study on tests/synth_history.h (the full one is
 *     tests/tool_history.c, figures in docs/hetp-trend.md §9).
 */
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "testutil.h"
#include "synth_history.h"
#include "stagecal/history.h"

#define MONTH STAGECAL_TREND_MONTH_S

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* The data of the oracle script:
 *   tau = [0, .7, .75, 1.6, 2.5, 2.55, 3.7, 4.6, 5.4, 5.5, 6.8] months
 *   y = [9.02, 8.95, 9.10, 8.81, 8.86, 8.70, 8.62, 8.58, 8.41, 8.55, 8.37]
 *   se = [.3, .4, .35, .3, .5, .45, .3, .4, .35, .3, .5]
 *   run = [1, 2, 2, 3, 4, 4, 5, 6, 7, 7, 8]
 * import numpy as np, statsmodels.api as sm
 * X = np.column_stack([np.ones_like(tau), tau]); w = 1/se**2
 * sm.WLS(y, X, weights=w).fit(cov_type='HC2')        -> params, bse
 * CR2: Xt = X·sqrt(w), B = inv(Xt'Xt), H = Xt B Xt', A_g = (I − H_gg)^−½ (eigh),
 *      meat = Σ (Xt_g' A_g e_g)(…)', V = B meat B;
 * BM:  G_g = (I − H)[:, g] A_g Xt_g B c, λ = eig(G'G), dof = (Σλ)²/Σλ².
 * Σ w r² = 0.392 < n − 2 = 9, so the moment estimate of the excess variance is 0 and
 * the weights are 1/se², as in the script. */
static const double TAU[] = {0.0, 0.7, 0.75, 1.6, 2.5, 2.55, 3.7, 4.6, 5.4, 5.5, 6.8};
static const double Y[] = {9.02, 8.95, 9.10, 8.81, 8.86, 8.70, 8.62, 8.58, 8.41, 8.55, 8.37};
static const double SE[] = {0.3, 0.4, 0.35, 0.3, 0.5, 0.45, 0.3, 0.4, 0.35, 0.3, 0.5};
static const long RUN[] = {1, 2, 2, 3, 4, 4, 5, 6, 7, 7, 8};
#define NLINE 11
#define T0 1735689600.0

static void line_points(stagecal_history_point *p, int singletons)
{
    for (size_t i = 0; i < NLINE; i++) {
        p[i].t_s = T0 + TAU[i] * MONTH;
        p[i].run = singletons ? (long)i : RUN[i];
        p[i].r = 3;
        p[i].f_load = NAN;
        p[i].stages = Y[i];
        p[i].se = SE[i];
    }
}

static void fit_line(int singletons, stagecal_history_fit *fit)
{
    stagecal_history_point p[NLINE];
    stagecal_form form;
    stagecal_error err;
    line_points(p, singletons);
    assert_int_equal(stagecal_form_parse("constant", &form, &err), 0);
    stagecal_history_params par = stagecal_history_default_params();
    par.r_ref = 3;
    int rc = stagecal_history_fit_points(&form, p, NLINE, NULL, 0, "c", &par, fit, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, 0);
    assert_abs(fit->tau2, 0.0, 0.0, "excess variance");
}

/* One window per run: the CR2 sandwich is HC2. Tolerance 1e-7 relative: the trust
 * region stops at 1e-10 relative steps. */
static void test_line_hc2(void **state)
{
    (void)state;
    stagecal_history_fit fit;
    fit_line(1, &fit);
    const stagecal_history_segment *s = &fit.segments[0];
    assert_rel(s->start.value, 9.037079900601803, 1e-7, "intercept (statsmodels)");
    assert_rel(s->loss.value, 0.10195382504778128, 1e-7, "loss = -slope (statsmodels)");
    assert_rel(s->loss.se, 0.011132305763372818, 1e-7, "HC2 se of the slope (statsmodels)");
    assert_rel(s->start.se, 0.041908416205083905, 1e-7, "HC2 se of the intercept (statsmodels)");
    assert_true(s->loss.determined);
    stagecal_history_free(&fit);
}

/* Windows clustered by run: CR2 and the Bell–McCaffrey dof (numpy, see above). */
static void test_line_cr2_bm(void **state)
{
    (void)state;
    stagecal_history_fit fit;
    fit_line(0, &fit);
    const stagecal_history_segment *s = &fit.segments[0];
    assert_int_equal(fit.n_runs, 8);
    assert_rel(s->loss.se, 0.008226644896773005, 1e-7, "CR2 se of the slope (numpy)");
    assert_rel(s->loss.dof, 3.461412566408334, 1e-6, "Bell-McCaffrey dof (numpy)");
    assert_true(s->loss.high - s->loss.value > 1.96 * s->loss.se); /* t at 3.46 dof > z */
    stagecal_history_free(&fit);
}

/* A noise-free line a·(1 − k·τ): the crossing of `required` lies at τ* = (1 − req/a)/k
 * exactly (closed form). Tolerance 1e-6 months. */
static void test_crossing_closed_form(void **state)
{
    (void)state;
    const double a = 9.0, k = 0.02, req = 7.5;
    stagecal_history_point p[12];
    for (size_t i = 0; i < 12; i++) {
        double tau = 0.5 * (double)i;
        p[i] = (stagecal_history_point){T0 + tau * MONTH, (long)i, 2, NAN, a * (1 - k * tau), 0.2};
    }
    stagecal_form form;
    stagecal_error err;
    stagecal_form_parse("constant", &form, &err);
    stagecal_history_params par = stagecal_history_default_params();
    par.r_ref = 2;
    par.required = req;
    stagecal_history_fit fit;
    assert_int_equal(stagecal_history_fit_points(&form, p, 12, NULL, 0, "c", &par, &fit, &err), 0);
    assert_true(fit.has_crossing);
    double tau_star = (1 - req / a) / k;
    assert_abs((fit.crossing.t_cross_s - T0) / MONTH, tau_star, 1e-6, "crossing (closed form)");
    assert_rel(fit.segments[0].loss.value, a * k, 1e-9, "loss rate a*k");
    stagecal_history_free(&fit);
}

/* Before/after a repack from noise-free lines (closed form): the old bed 9·(1 − 0.02·τ)
 * for 6 months, repacked at 6.5 months to 9.3·(1 − 0.01·τ). before = 9·(1 − 0.02·6.5),
 * after = 9.3, change = after − before, old bed new = 9, ln ratio of column stages
 * (total condenser) = ln(8/8.3). Tolerance 1e-9 relative (exact data). */
static void test_repack_closed_form(void **state)
{
    (void)state;
    stagecal_history_point p[24];
    const double ev_tau = 6.5;
    for (size_t i = 0; i < 24; i++) {
        double tau = 0.5 * (double)i;
        double y = tau < ev_tau ? 9 * (1 - 0.02 * tau) : 9.3 * (1 - 0.01 * (tau - ev_tau));
        p[i] = (stagecal_history_point){T0 + tau * MONTH, (long)i, 2, NAN, y, 0.2};
    }
    stagecal_trend_event ev;
    memset(&ev, 0, sizeof ev);
    ev.t_s = T0 + ev_tau * MONTH;
    ev.kind = STAGECAL_EVENT_REPACK;
    snprintf(ev.column_id, sizeof ev.column_id, "c");
    stagecal_form form;
    stagecal_error err;
    stagecal_form_parse("constant", &form, &err);
    stagecal_history_params par = stagecal_history_default_params();
    par.r_ref = 2;
    stagecal_history_fit fit;
    assert_int_equal(stagecal_history_fit_points(&form, p, 24, &ev, 1, "c", &par, &fit, &err), 0);
    stagecal_history_repack rp;
    assert_int_equal(stagecal_history_repack_at(&fit, 1, 2, NAN, 1, &rp, &err), 0);
    double before = 9 * (1 - 0.02 * ev_tau);
    assert_rel(rp.before.value, before, 1e-9, "before");
    assert_rel(rp.after.value, 9.3, 1e-9, "after");
    assert_rel(rp.change.value, 9.3 - before, 1e-9, "change");
    assert_rel(rp.old_new.value, 9.0, 1e-9, "old bed new");
    assert_rel(rp.log_ratio.value, log(8.0 / 8.3), 1e-9, "ln HETP ratio");
    assert_rel(fit.segments[1].rel_loss.value, 0.01, 1e-9, "relative loss after");
    assert_int_equal(stagecal_history_repack_at(&fit, 0, 2, NAN, 1, &rp, &err), STAGECAL_EINVAL);
    stagecal_history_free(&fit);
}

/* Events split; a segment with too few runs and a segment without evidence are
 * reported as not determined, with the reason in words. */
static void test_segments_not_determined(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 7);
    synth_history_cfg cfg = synth_history_default();
    cfg.months = 12;
    static stagecal_history_point p[800];
    synth_history_truth tr;
    size_t n = synth_history_make(rng, &cfg, p, 800, &tr);
    gsl_rng_free(rng);
    /* a maintenance event one day before the last window leaves one run after it, and a
     * repack after all data leaves the current segment empty */
    stagecal_trend_event ev[3];
    memset(ev, 0, sizeof ev);
    const char *id = "sim";
    ev[0].t_s = tr.repack_s;
    ev[0].kind = STAGECAL_EVENT_REPACK;
    ev[1].t_s = tr.last_s - 0.5 * 86400;
    ev[1].kind = STAGECAL_EVENT_MAINTENANCE;
    ev[2].t_s = tr.last_s + 86400;
    ev[2].kind = STAGECAL_EVENT_REPACK;
    for (int i = 0; i < 3; i++)
        snprintf(ev[i].column_id, sizeof ev[i].column_id, "%s", id);
    stagecal_form form;
    stagecal_error err;
    stagecal_form_parse("saturating", &form, &err);
    stagecal_history_params par = stagecal_history_default_params();
    par.r_ref = 3;
    par.required = 7;
    par.now_s = tr.last_s + 10 * 86400;
    stagecal_history_fit fit;
    assert_int_equal(stagecal_history_fit_points(&form, p, n, ev, 3, id, &par, &fit, &err), 0);
    assert_int_equal(fit.n_segments, 4);
    assert_int_equal(fit.current, 3);
    assert_true(fit.segments[0].fitted && fit.segments[1].fitted);
    assert_false(fit.segments[2].fitted);
    assert_false(fit.segments[2].loss.determined);
    assert_non_null(strstr(fit.segments[2].loss.reason, "not determined"));
    assert_false(fit.segments[3].fitted);
    assert_false(fit.now.determined);
    assert_non_null(strstr(fit.now.reason, "not determined"));
    assert_false(fit.has_crossing);
    /* events of another column do not split */
    stagecal_history_free(&fit);
    assert_int_equal(stagecal_history_fit_points(&form, p, n, ev, 3, "other", &par, &fit, &err), 0);
    assert_int_equal(fit.n_segments, 1);
    stagecal_history_free(&fit);
}

/* The honesty rule of stagecal_history_check. */
static void test_check(void **state)
{
    (void)state;
    stagecal_history_estimate e = {1, 8.0, 0.1, 1.0, 7.0, 9.0, ""};
    assert_false(stagecal_history_check(&e, 1, INFINITY, "stages"));
    assert_non_null(strstr(e.reason, "degree"));
    stagecal_history_estimate w = {1, 8.0, 3.0, 10.0, -6116333.6, 6116349.8, ""};
    assert_false(stagecal_history_check(&w, 1, INFINITY, "stages"));
    assert_non_null(strstr(w.reason, "physical range"));
    stagecal_history_estimate ok = {1, 8.0, 0.1, 10.0, 7.8, 8.2, ""};
    assert_true(stagecal_history_check(&ok, 1, INFINITY, "stages"));
    assert_string_equal(ok.reason, "");
}

/* Small fast coverage study: 120 synthetic histories (tests/synth_history.h). The 95 %
 * intervals of the loss rate and of the current stages must cover in [0.89, 0.995]
 * (3 binomial sd at n = 120 around 0.95). The full study is tests/tool_history.c. */
static void test_coverage_small(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 11);
    synth_history_cfg cfg = synth_history_default();
    static stagecal_history_point p[2000];
    stagecal_form form;
    stagecal_error err;
    stagecal_form_parse("saturating", &form, &err);
    int n_hist = 120, c_loss = 0, c_now = 0;
    for (int h = 0; h < n_hist; h++) {
        cfg.months = 12 + (int)gsl_rng_uniform_int(rng, 13);
        synth_history_truth tr;
        size_t n = synth_history_make(rng, &cfg, p, 2000, &tr);
        stagecal_trend_event ev = synth_history_repack(&tr);
        stagecal_history_params par = stagecal_history_default_params();
        par.r_ref = 3;
        stagecal_history_fit fit;
        assert_int_equal(stagecal_history_fit_points(&form, p, n, &ev, 1, "sim", &par, &fit, &err),
                         0);
        double hr = cfg.a * (1 - exp(-cfg.b * 3));
        double tau_now = (tr.last_s - tr.repack_s) / MONTH;
        const stagecal_history_segment *cur = &fit.segments[fit.current];
        c_loss += cur->loss.low <= hr * cfg.k && hr * cfg.k <= cur->loss.high;
        double now = hr * (1 - cfg.k * tau_now);
        c_now += fit.now.low <= now && now <= fit.now.high;
        stagecal_history_free(&fit);
    }
    gsl_rng_free(rng);
    double cl = (double)c_loss / n_hist, cn = (double)c_now / n_hist;
    print_message("coverage over %d histories: loss %.3f, now %.3f\n", n_hist, cl, cn);
    assert_true(cl >= 0.89 && cl <= 0.995);
    assert_true(cn >= 0.89 && cn <= 0.995);
}

static void test_bad_input(void **state)
{
    (void)state;
    stagecal_history_point p[NLINE];
    line_points(p, 0);
    stagecal_form form;
    stagecal_error err;
    stagecal_form_parse("constant", &form, &err);
    stagecal_history_params par = stagecal_history_default_params();
    stagecal_history_fit fit;
    /* no stated condition */
    assert_int_equal(stagecal_history_fit_points(&form, p, NLINE, NULL, 0, "c", &par, &fit, &err),
                     STAGECAL_EINVAL);
    stagecal_history_free(&fit);
    par.r_ref = 3;
    p[4].se = 0;
    assert_int_equal(stagecal_history_fit_points(&form, p, NLINE, NULL, 0, "c", &par, &fit, &err),
                     STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "window 5"));
    stagecal_history_free(&fit);
    /* two runs only: nothing can be fitted */
    line_points(p, 0);
    assert_int_equal(stagecal_history_fit_points(&form, p, 3, NULL, 0, "c", &par, &fit, &err),
                     STAGECAL_EDATA);
    stagecal_history_free(&fit);
}

/* Windows of an evidence set become points: only those with a stage count (the rule of
 * evidence.h), time = mid time, run = run index. Checked against the hand-made set. */
static void test_points_from_evidence(void **state)
{
    (void)state;
    stagecal_evidence ev[3];
    memset(ev, 0, sizeof ev);
    for (size_t i = 0; i < 3; i++) {
        ev[i].run = 10 + i;
        ev[i].r = 2.0 + (double)i;
        ev[i].stages_ok = i != 1;
        ev[i].stages = 8.0 + (double)i;
        ev[i].se_stages = 0.1;
        ev[i].t_mid_s = T0 + 1000.0 * (double)i;
    }
    ev[2].has_load = 1;
    ev[2].f_load = 1.3;
    stagecal_evidence_set set = {.ev = ev, .n = 3};
    stagecal_history_point p[3];
    assert_int_equal(stagecal_history_points_from_evidence(&set, p), 2);
    assert_int_equal(p[1].run, 12);
    assert_abs(p[1].t_s, T0 + 2000.0, 0, "time");
    assert_abs(p[1].f_load, 1.3, 0, "F");
    assert_true(isnan(p[0].f_load));
    assert_abs(p[0].stages, 8.0, 0, "stages");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_line_hc2),
        cmocka_unit_test(test_line_cr2_bm),
        cmocka_unit_test(test_crossing_closed_form),
        cmocka_unit_test(test_repack_closed_form),
        cmocka_unit_test(test_segments_not_determined),
        cmocka_unit_test(test_check),
        cmocka_unit_test(test_coverage_small),
        cmocka_unit_test(test_bad_input),
        cmocka_unit_test(test_points_from_evidence),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
