/*
 * test_scatter.c — the scatter function of one new window's stage count (src/scatter.c)
 * and its use by model files (format version 4) and their bands.
 *
 * Sources of truth: closed forms derived here. Windows whose standard errors follow
 * ln se = a + b·λ + c·λ² exactly and whose residuals are ±k·se give the polynomial back
 * with ln s = ln k + ½·ln(m/(m − p)) on c0 and a zero least-squares covariance; a constant
 * (degree 0) fit of three windows is the residuals' root mean square with the variance of
 * a mean of ln se; the
 * prediction band is se_pred² = se_fit² + σ(R)² (Seber & Wild 1989, Nonlinear Regression,
 * §5.1 — from memory) with the Welch–Satterthwaite dof of its two parts (Satterthwaite
 * 1946, Biometrics Bulletin 2, 110–114 — from memory). The coverage of these bands is a
 * study, not a test: tests/tool_coverage.c ... predict (docs/calibration.md).
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_cdf.h>

#include "model_internal.h"
#include "stagecal/model.h"
#include "stagecal/scatter.h"
#include "stagecal/vle.h"
#include "testutil.h"

static const double rs[12] = {1.2, 1.6, 2.0, 2.5, 3.0, 4.0, 5.0, 6.5, 8.0, 10.0, 15.0, INFINITY};

static double lv(double r)
{
    return isinf(r) ? 1.0 : r / (r + 1.0);
}

/* m windows at rs[], the constant form at θ = 5: stages = 5 + sign·k·se, se = exp(a + bλ
 * + cλ²) */
static void windows(stagecal_evidence *ev, size_t m, double a, double b, double c, double k)
{
    memset(ev, 0, m * sizeof *ev);
    for (size_t i = 0; i < m; i++) {
        double l = lv(rs[i]);
        ev[i].r = rs[i];
        ev[i].total_reflux = isinf(rs[i]);
        ev[i].f_load = NAN;
        ev[i].stages_ok = 1;
        ev[i].se_stages = exp(a + b * l + c * l * l);
        ev[i].stages = 5 + (i % 2 ? -1 : 1) * k * ev[i].se_stages;
    }
}

/* Tolerances: 1e-9 absolute on the coefficients (a least-squares fit of 12 points in a
 * centred basis expanded back, the coefficients O(10), rounding ~1e-13); the covariance of
 * an exact fit is the least-squares rounding, below 1e-20. */
static void scatter_fit_recovers_an_exact_variance_function(void **state)
{
    (void)state;
    stagecal_form form;
    stagecal_evidence ev[12];
    stagecal_scatter s;
    stagecal_error err;
    double theta[1] = {5};
    const double a = -2.0, b = -4.5, c = 3.9, k = 1.3;
    assert_int_equal(stagecal_form_parse("constant", &form, &err), STAGECAL_OK);
    windows(ev, 12, a, b, c, k);
    assert_int_equal(stagecal_scatter_fit(ev, 12, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 3);
    double ln_s = log(k) + 0.5 * log(12.0 / 11.0); /* Σz² = 12k², on 12 − 1 dof */
    assert_abs(s.c[0], a + ln_s, 1e-9, "c0 = a + ln s");
    /* var_ratio: Σ z² / (m − p) = 12k²/11 (the closed form above) over the windows' mean
     * stated variance relative to the shape, 1 here (every se on the shape); tolerance 1e-9
     * relative, the residuals divided by the fitted shape, whose coefficients hold to 1e-9 */
    assert_rel(s.var_ratio, 12 * k * k / 11, 1e-9, "var_ratio = s^2");
    assert_abs(s.c[1], b, 1e-9, "c1");
    assert_abs(s.c[2], c, 1e-9, "c2");
    assert_rel(s.lv_lo, 1.2 / 2.2, 1e-15, "range low");
    assert_rel(s.lv_hi, 1.0, 1e-15, "range high");
    /* σ(R) = s·se(R) inside the range; clamped outside it */
    for (double r = 1.3; r < 40; r *= 1.7) {
        double l = lv(r), want = exp(ln_s + a + b * l + c * l * l);
        assert_rel(stagecal_scatter_sd(&s, r), want, 1e-9, "sd inside the range");
    }
    assert_rel(stagecal_scatter_sd(&s, 0.3), stagecal_scatter_sd(&s, 1.2), 1e-15,
               "below the range: the value at its low end");
    /* the polynomial's part of the covariance is 0 (an exact fit): the dof of σ² is that
     * of s², m − p = 11, at every R */
    assert_abs(s.cov[0], 1.0 / 22.0, 1e-12, "Var(c0) = Var(ln s) = 1/(2(m-p))");
    for (size_t i = 1; i < 9; i++)
        assert_abs(s.cov[i], 0, 1e-12, "covariance of an exact polynomial");
    assert_rel(stagecal_scatter_dof(&s, 3.0), 11, 1e-9, "dof of sigma^2");
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_OK);
    s.var_ratio = -1; /* 0 is "not known"; below it is damage */
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "var_ratio -1"));
    s.var_ratio = 0;
}

/* Degree 0 with 3 windows: one σ for every R, the residuals' root mean square on m − p
 * dof: c0 = ½·ln(Σr²/(m − p)) whatever the windows' se; Var(c0) = Σ(ln se − mean)²/(3·2)
 * (the variance of a mean) + 1/(2(m − p)). Degree by the windows: 5 windows (5 distinct
 * λ) on a straight line in ln se: linear; 8 windows at two λ: linear; 8 at one λ:
 * constant; 2 windows, or as many windows as parameters: none. Windows without a count or
 * with se = 0 take no part. */
static void scatter_fit_degree_and_closed_forms(void **state)
{
    (void)state;
    stagecal_form form, line;
    stagecal_evidence ev[12];
    stagecal_scatter s;
    stagecal_error err;
    double theta[2] = {5, 0};
    assert_int_equal(stagecal_form_parse("constant", &form, &err), STAGECAL_OK);
    windows(ev, 3, -3, 1.0, 0, 1);
    ev[0].stages = 5 + 0.5 * ev[0].se_stages; /* z = 0.5, −1, 1 */
    assert_int_equal(stagecal_scatter_fit(ev, 3, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 1);
    double l[3], mean = 0, ss = 0;
    for (int i = 0; i < 3; i++)
        l[i] = log(ev[i].se_stages), mean += l[i] / 3;
    for (int i = 0; i < 3; i++)
        ss += (l[i] - mean) * (l[i] - mean);
    double rr = 0;
    for (int i = 0; i < 3; i++)
        rr += (ev[i].stages - 5) * (ev[i].stages - 5);
    assert_abs(s.c[0], 0.5 * log(rr / 2.0), 1e-12, "c0 of a constant: the residuals' rms");
    assert_abs(s.cov[0], ss / 6.0 + 1.0 / 4.0, 1e-12, "Var(c0) of a constant");
    /* var_ratio of a constant shape: s² = Σ r²/g² / (m − p) over k = Σ se²/g² / m, g =
     * exp(mean ln se) the geometric mean of the windows' se — σ² over the windows' mean stated
     * variance, Σ r²/(m − p) over Σ se²/m (closed form derived here); 1e-12 relative, sums of
     * three terms */
    double zz = 0, kk = 0;
    for (int i = 0; i < 3; i++) {
        zz += (ev[i].stages - 5) * (ev[i].stages - 5) / exp(2 * mean);
        kk += ev[i].se_stages * ev[i].se_stages / exp(2 * mean) / 3;
    }
    assert_rel(s.var_ratio, zz / 2.0 / kk, 1e-12, "var_ratio of a constant shape");
    assert_rel(s.var_ratio, rr / 2.0 / (kk * exp(2 * mean)), 1e-12,
               "var_ratio: the residual variance over the mean stated variance");

    windows(ev, 5, -3, 1.0, 0, 1);
    assert_int_equal(stagecal_scatter_fit(ev, 5, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 2);
    windows(ev, 8, -3, 1.0, 0.5, 1);
    for (size_t i = 0; i < 8; i++) {
        ev[i].r = i % 2 ? 2.0 : 5.0;
        ev[i].se_stages = exp(-3 + lv(ev[i].r));
    }
    assert_int_equal(stagecal_scatter_fit(ev, 8, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 2);
    for (size_t i = 0; i < 8; i++)
        ev[i].r = 3.0;
    assert_int_equal(stagecal_scatter_fit(ev, 8, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 1);
    assert_rel(stagecal_scatter_sd(&s, INFINITY), stagecal_scatter_sd(&s, 0.1), 1e-15,
               "one lambda: the same sigma everywhere");

    windows(ev, 12, -3, 1.0, 0.5, 1);
    assert_int_equal(stagecal_scatter_fit(ev, 2, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 0);
    assert_true(isnan(stagecal_scatter_sd(&s, 2.0)));
    assert_true(isnan(stagecal_scatter_dof(&s, 2.0)));
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &line, &err), STAGECAL_OK);
    for (size_t i = 4; i < 12; i++) /* no count (4, 5), or a count with se = 0 (6 on) */
        ev[i].stages_ok = i >= 6, ev[i].se_stages = i < 6 ? ev[i].se_stages : 0;
    assert_int_equal(stagecal_scatter_fit(ev, 12, &line, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 2); /* the first 4 windows: linear */
    assert_rel(s.lv_hi, 2.5 / 3.5, 1e-15, "range of the windows that take part");
    ev[2].stages_ok = ev[3].stages_ok = 0; /* 2 windows for 2 parameters: none */
    assert_int_equal(stagecal_scatter_fit(ev, 12, &line, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 0);
}

/* The run-to-run part of σ(R) (stagecal_scatter_process_factor): √max(0, w² − 1/v), v =
 * var_ratio, closed forms derived here from σ(R)² = τ(R)² + σ(R)²/v (include/stagecal/scatter.h;
 * the floor of a
 * variance component's generalised pivotal quantity, Weerahandi 1993, JASA 88, 899–905 — from
 * memory). Tolerance 1e-15 relative: one subtraction and a square root of exact binary
 * numbers. Not known (no function, var_ratio 0, a bad w²): NAN. */
static void scatter_process_factor_closed_forms(void **state)
{
    (void)state;
    stagecal_scatter s = {1, {-3, 0, 0}, 0.5, 1.0, {0.01, 0, 0, 0, 0, 0, 0, 0, 0}, 4.0};
    assert_rel(stagecal_scatter_process_factor(&s, 1.0), sqrt(0.75), 1e-15, "s2 = 4, w2 = 1");
    assert_rel(stagecal_scatter_process_factor(&s, 2.25), sqrt(2.0), 1e-15, "s2 = 4, w2 = 9/4");
    s.var_ratio = 0.5; /* the windows' residuals below their stated errors: no process part */
    assert_true(stagecal_scatter_process_factor(&s, 1.0) == 0.0);
    assert_rel(stagecal_scatter_process_factor(&s, 3.0), 1.0, 1e-15, "s2 = 1/2, w2 = 3");
    s.var_ratio = 1.0;
    assert_true(stagecal_scatter_process_factor(&s, 1.0) == 0.0);
    s.var_ratio = 0; /* not known */
    assert_true(isnan(stagecal_scatter_process_factor(&s, 1.0)));
    s.var_ratio = 4;
    assert_true(isnan(stagecal_scatter_process_factor(&s, 0.0)));
    assert_true(isnan(stagecal_scatter_process_factor(&s, INFINITY)));
    assert_true(isnan(stagecal_scatter_process_factor(NULL, 1.0)));
    s.n = 0;
    assert_true(isnan(stagecal_scatter_process_factor(&s, 1.0)));
}

/* The refusals of stagecal_scatter_check, each with its message. */
/* The shape's window errors (stagecal_scatter_window_se): the window's own errors times
 * quadratic/straight line on its carried samples. A total-reflux window (α = 2.5) whose xD and
 * xB readings are straight lines in time plus an alternating ±1e-4 (lag-1 autocorrelation −1:
 * ρ clipped at 0 by both) has residuals of σ ≈ 1e-4 below the stated floor u = 0.002 after
 * either detrend, so both state u/√m (the straight line max(s, u)/√n_eff, the quadratic
 * u·√(1ᵀΣ(0)1)/m: include/stagecal/evidence.h) and the ratio is 1: the count's error is then
 * Fenske's first-order propagation of the window's own u_xd = u_xb = 0.01 at its means:
 * N = ln[(xD/(1 − xD))·((1 − xB)/xB)]/ln α (Fenske 1932, from memory), ∂N/∂xD = 1/(xD(1 − xD)
 * ln α), ∂N/∂xB = −1/(xB(1 − xB) ln α). Tolerance 1e-6 relative: the inversion's sensitivities
 * at the means (observed below 1e-9). The same window curving (a pot's trajectory): the
 * straight line leaves the curvature in its residuals and the quadratic does not, so the
 * error comes out smaller than the window's own. A window that carries no samples keeps its
 * own se_stages. With these errors in place of the windows' own, stagecal_scatter_fit_se
 * takes its shape from them (the exact variance function above, the windows' own se all 1). */
static void scatter_window_se_detrends_a_curving_pot(void **state)
{
    (void)state;
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.5, NULL);
    assert_non_null(vle);
    enum { M = 12 };
    double t[M], xd[M], xb[M], cxd[M], cxb[M], mxd = 0, mxb = 0;
    for (int i = 0; i < M; i++) {
        double u = i / (M - 1.0), alt = i % 2 ? -1e-4 : 1e-4;
        t[i] = 60.0 * i;
        xd[i] = 0.95 - 0.01 * u + alt;
        xb[i] = 0.30 - 0.05 * u + alt;
        cxd[i] = xd[i] - 0.02 * u * u; /* curving */
        cxb[i] = xb[i] - 0.04 * u * u;
        mxd += xd[i] / M, mxb += xb[i] / M;
    }
    stagecal_evidence ev[3];
    memset(ev, 0, sizeof ev);
    for (int k = 0; k < 3; k++) {
        ev[k].r = INFINITY;
        ev[k].total_reflux = 1;
        ev[k].xd = mxd, ev[k].xb = mxb;
        ev[k].u_xd = ev[k].u_xb = 0.01;
        ev[k].stages_ok = 1;
        ev[k].stages = 4;
        ev[k].se_stages = 0.7;
    }
    ev[0].m = M, ev[0].s_t = t, ev[0].s_xd = xd, ev[0].s_xb = xb;
    ev[1].m = M, ev[1].s_t = t, ev[1].s_xd = cxd, ev[1].s_xb = cxb;
    double uf[3] = {0.002, 0.002, 0.002}, se[3];
    stagecal_error err;
    /* one at a time: ρ is pooled over the windows of a call */
    stagecal_evidence one[2] = {ev[0], ev[2]};
    assert_int_equal(stagecal_scatter_window_se(vle, 1.0, one, 2, uf, uf, se, &err), STAGECAL_OK);
    se[2] = se[1];
    assert_int_equal(stagecal_scatter_window_se(vle, 1.0, ev + 1, 1, uf, uf, se + 1, &err),
                     STAGECAL_OK);
    double la = log(2.5), gd = 1 / (mxd * (1 - mxd) * la), gb = -1 / (mxb * (1 - mxb) * la);
    double want = sqrt(gd * gd + gb * gb) * 0.01;
    assert_rel(se[0], want, 1e-6, "Fenske's propagation of the window's own errors");
    assert_true(se[1] < 0.9 * se[0]); /* the curvature no longer reads as noise */
    assert_rel(se[2], 0.7, 0, "no samples: the window's own");
    assert_int_equal(stagecal_scatter_window_se(NULL, 1.0, ev, 3, uf, uf, se, &err),
                     STAGECAL_EINVAL);
    stagecal_vle_free(vle);

    /* the shape from se, not from the windows' own */
    stagecal_form form;
    stagecal_evidence w12[12];
    stagecal_scatter s;
    double theta[1] = {5}, se12[12];
    const double a = -2.0, b = -4.5, c = 3.9, k = 1.3;
    assert_int_equal(stagecal_form_parse("constant", &form, &err), STAGECAL_OK);
    windows(w12, 12, a, b, c, k);
    for (int i = 0; i < 12; i++) {
        se12[i] = w12[i].se_stages;
        w12[i].se_stages = 1; /* what the windows state themselves */
    }
    assert_int_equal(stagecal_scatter_fit_se(w12, 12, se12, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 3);
    /* tolerance: as scatter_fit_recovers_an_exact_variance_function, 1e-9 */
    assert_abs(s.c[0], a + log(k) + 0.5 * log(12.0 / 11.0), 1e-9, "c0 from se");
    assert_abs(s.c[1], b, 1e-9, "c1 from se");
    assert_abs(s.c[2], c, 1e-9, "c2 from se");
    assert_int_equal(stagecal_scatter_fit_se(w12, 12, NULL, &form, theta, &s, &err), STAGECAL_OK);
    assert_int_equal(s.n, 1); /* the windows' own se, all equal: one σ */
}

static void scatter_check_refuses(void **state)
{
    (void)state;
    stagecal_scatter s = {2, {-3, 1, 0}, 0.5, 1.0, {0.1, 0.01, 0.01, 0.2}, 0};
    stagecal_error err;
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_OK);
    s.c[1] = NAN;
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "scatter: coefficient 1 is nan (expected a finite number)");
    s.c[1] = 1;
    s.lv_hi = 1.2;
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_EINVAL);
    assert_string_equal(err.text, "scatter: range [0.5, 1.2] of R/(R+1) (expected 0 <= low <= "
                                  "high <= 1)");
    s.lv_hi = 1;
    s.cov[1] = 0.02;
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "expected a finite symmetric matrix"));
    s.cov[1] = 0.01;
    s.c[0] = 800; /* exp(800) overflows */
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "expected a finite positive number"));
    s.c[0] = -3;
    s.n = 4;
    assert_int_equal(stagecal_scatter_check(&s, &err), STAGECAL_EINVAL);
}

/* A small valid model: constant α, the form linear:1+1/R. */
static void small_model(stagecal_model *m)
{
    stagecal_error err;
    const double alpha = 2.4;
    stagecal_model_init(m);
    snprintf(m->column_id, sizeof m->column_id, "K-3.demo");
    snprintf(m->light, sizeof m->light, "benzene");
    snprintf(m->heavy, sizeof m->heavy, "toluene");
    snprintf(m->vle_kind, sizeof m->vle_kind, "alpha");
    assert_int_equal(stagecal_model_add_vle_param(m, "alpha", &alpha, 1, &err), STAGECAL_OK);
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &m->form, &err), STAGECAL_OK);
    m->theta[0] = 9.5;
    m->theta[1] = -3.0;
    m->cov[0] = 0.04, m->cov[1] = m->cov[2] = -0.03, m->cov[3] = 0.05;
    m->sigma = 0.2;
    m->dof = 10;
    m->level = 0.95;
    m->method = STAGECAL_MODEL_COMPOSITION_SPACE;
    m->n_windows = 12;
    m->n_runs = 3;
    m->r_min = 1.2;
    m->r_max = INFINITY;
    snprintf(m->fitted_utc, sizeof m->fitted_utc, "2026-12-03T17:00:00Z");
    m->scatter = (stagecal_scatter){3,
                                    {-2.2, -3.1, 2.9},
                                    1.2 / 2.2,
                                    1.0,
                                    {0.05, -0.01, 0.002, -0.01, 0.03, -0.004, 0.002, -0.004, 0.01},
                                    1.7};
}

/* Evaluation with a scatter function: se_pred² − se_fit² = σ(R)², the prediction dof the
 * Welch–Satterthwaite combination of the band's and σ(R)'s (with a design), t at the
 * smaller of the model's and σ(R)'s dof (without one); the file round trip keeps every bit
 * and says version 4; a damaged scatter member is refused naming it. */
static void model_eval_uses_the_scatter_function(void **state)
{
    (void)state;
    stagecal_model m, back;
    stagecal_model_point pt;
    stagecal_error err;
    small_model(&m);
    assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_OK);
    for (double r = 0.8; r < 60; r *= 1.9) {
        assert_int_equal(stagecal_model_eval(&m, r, NAN, 0.95, &pt, &err), STAGECAL_OK);
        double sd = stagecal_scatter_sd(&m.scatter, r), nu = stagecal_scatter_dof(&m.scatter, r);
        double l = fmin(fmax(lv(r), 1.2 / 2.2), 1.0);
        assert_rel(sd, exp(-2.2 - 3.1 * l + 2.9 * l * l), 1e-13, "sigma(R)");
        double g[3] = {1, l, l * l}, v = 0;
        for (int i = 0; i < 3; i++)
            for (int k = 0; k < 3; k++)
                v += g[i] * m.scatter.cov[3 * i + k] * g[k];
        assert_rel(nu, 1 / (2 * v), 1e-12, "dof of sigma(R)^2");
        assert_rel(pt.se_pred * pt.se_pred - pt.se_fit * pt.se_fit, sd * sd, 1e-9,
                   "se_pred^2 - se_fit^2 = sigma(R)^2");
        double d = fmin(nu, m.dof);
        assert_rel(pt.dof_pred, d, 1e-12, "no design: prediction dof");
        assert_rel(pt.pi_high - pt.stages, gsl_cdf_tdist_Pinv(0.975, d) * pt.se_pred, 1e-12,
                   "no design: prediction half-width");
        assert_rel(pt.ci_high - pt.stages, gsl_cdf_tdist_Pinv(0.975, m.dof) * pt.se_fit, 1e-12,
                   "no design: the confidence band keeps the model's dof");
    }
    /* with a design: Welch–Satterthwaite of se_fit² (its Bell–McCaffrey dof) and σ(R)² */
    double x[2 * 12];
    for (size_t i = 0; i < 12; i++)
        x[2 * i] = 1, x[2 * i + 1] = isinf(rs[i]) ? 0 : 1 / rs[i];
    assert_int_equal(stagecal_model_set_design(&m, x, 12, &err), STAGECAL_OK);
    assert_int_equal(stagecal_model_eval(&m, 3.0, NAN, 0.95, &pt, &err), STAGECAL_OK);
    double vf = pt.se_fit * pt.se_fit, sd = stagecal_scatter_sd(&m.scatter, 3.0);
    double vo = sd * sd, nu = fmin(stagecal_scatter_dof(&m.scatter, 3.0), m.dof);
    double ws = (vf + vo) * (vf + vo) / (vf * vf / pt.dof_fit + vo * vo / nu);
    assert_rel(pt.dof_pred, ws, 1e-12, "design: prediction dof, Welch-Satterthwaite");

    /* the file: version 4, every bit back */
    char *text = model_render(&m);
    assert_non_null(text);
    assert_non_null(strstr(text, "\"version\": 4"));
    stagecal_model_init(&back);
    assert_int_equal(stagecal_model_parse(text, strlen(text), "m.json", &back, &err), STAGECAL_OK);
    assert_int_equal(back.scatter.n, 3);
    assert_memory_equal(&back.scatter, &m.scatter, sizeof m.scatter);
    stagecal_model_free(&back);
    free(text);
    /* without a scatter function the file stays at version 3 (the design) */
    m.scatter.n = 0;
    text = model_render(&m);
    assert_non_null(text);
    assert_non_null(strstr(text, "\"version\": 3"));
    assert_null(strstr(text, "scatter"));
    free(text);
    /* a damaged member: refused, named (the checksum is recomputed by the writer, so the
     * damage is made before rendering and the check is the loader's) */
    m.scatter.n = 3;
    m.scatter.lv_lo = -0.5;
    assert_int_equal(stagecal_model_check(&m, &err), STAGECAL_EINVAL);
    assert_non_null(strstr(err.text, "scatter: range [-0.5, 1]"));
    stagecal_model_free(&m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(scatter_fit_recovers_an_exact_variance_function),
        cmocka_unit_test(scatter_fit_degree_and_closed_forms),
        cmocka_unit_test(scatter_window_se_detrends_a_curving_pot),
        cmocka_unit_test(scatter_process_factor_closed_forms),
        cmocka_unit_test(scatter_check_refuses),
        cmocka_unit_test(model_eval_uses_the_scatter_function),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
