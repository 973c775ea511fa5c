/*
 * test_runlog_setpoint.c — reflux set points from a measured R (src/runlog_setpoint.c,
 * stagecal_runlog_setpoints in stagecal/runlog.h) and the propagation of the set point's
 * uncertainty into a window's stage count (evidence.c).
 *
 * External references: the Bonferroni bound on the false-split rate of a steady stretch
 * (the test splits with probability ≤ α = STAGECAL_SETPOINT_ALPHA, Hinkley 1970 statistic);
 * the binomial spread of a count (common practice, no source); Smoker's closed form
 * (tests/oracle_smoker.h) for ∂N/∂R by finite differences, independent of the stepping code.
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "testutil.h"
#include "stagecal/calibrate.h"
#include "stagecal/evidence.h"
#include "stagecal/runlog.h"
#include "synth_runlog.h"

static stagecal_column col; /* α = 2, u(xD) 0.0015, u(xB) 0.0025, u(R) 0.02 */

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(2.0, NULL);
    col.system.p_pa = 101325;
    col.u.xd = 0.0015;
    col.u.xb = 0.0025;
    col.u.r = 0.02;
    snprintf(col.id, sizeof col.id, "synthetic");
    return col.system.vle ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    stagecal_vle_free(col.system.vle);
    return 0;
}

static stagecal_runlog *read_csv(const char *csv, size_t len, const stagecal_column *c)
{
    stagecal_runlog *log = stagecal_runlog_alloc();
    assert_non_null(log);
    assert_int_equal(stagecal_runlog_read_buffer(log, csv, len, "s.csv", c, NULL, NULL, NULL), 0);
    assert_non_null(log->r_set);
    return log;
}

/* Segments of run k: how many, and where the first change is (0: none). */
static size_t segments(const stagecal_runlog *log, size_t k, size_t *first_change)
{
    size_t f = log->runs[k].first, n = 1;
    *first_change = 0;
    for (size_t i = f + 1; i < f + log->runs[k].n; i++)
        if (!(log->r_set[i] == log->r_set[i - 1])) {
            n++;
            if (!*first_change)
                *first_change = i - f;
        }
    return n;
}

/* R logged as set points without a stated u: every change of the value is a change of set
 * point, each row keeps its logged value exactly, and the set points are exact. */
static void setpoint_logged_values_are_set_points(void **state)
{
    (void)state;
    stagecal_column c = col;
    c.u.r = 0;
    const char *csv = "time[min],W[mol],xD[mol/mol],xB[mol/mol],R[-]\n"
                      "0,100,0.9,0.4,inf\n1,100,0.9,0.4,inf\n2,99,0.9,0.4,2.5\n"
                      "3,98,0.9,0.4,2.5\n4,97,0.9,0.4,2.6\n5,96,0.9,0.4,2.6\n6,95,0.9,0.4,0\n"
                      "7,94,0.9,0.4,\n8,93,0.9,0.4,2.6\n";
    stagecal_runlog *log = read_csv(csv, strlen(csv), &c);
    for (size_t i = 0; i < log->n; i++) {
        if (isnan(log->r[i]))
            assert_true(isnan(log->r_set[i]));
        else
            assert_true(log->r_set[i] == log->r[i]); /* exact: the logged value */
        if (isfinite(log->r[i]))
            assert_true(log->u_r_set[i] == 0.0);
    }
    size_t at;
    assert_int_equal(segments(log, 0, &at), 6); /* inf | 2.5 | 2.6 | 0 | NaN | 2.6 */
    assert_int_equal(at, 2);
    stagecal_runlog_free(log);
}

/* R near the largest double (a fuzzed log held 1e308): the segmentation's weighted sums
 * overflowed, the means came out NaN and a row logged at R = 5 took a set point of ~4e307
 * with an infinite uncertainty (its stage count was the total-reflux one, its u(N) NaN with
 * status ok). Every row keeps its own logged value as its set point, with a finite u. */
static void setpoint_huge_r_keeps_values(void **state)
{
    (void)state;
    const char *csv = "time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-]\n"
                      "0,10,0.9,0.5,3\n1,9,0.9,0.5,1e308\n2,8,0.9,0.5,1e308\n"
                      "3,7,0.9,0.5,5\n4,6,0.9,0.5,1e300\n5,5,0.9,0.5,1e200\n";
    stagecal_runlog *log = read_csv(csv, strlen(csv), &col);
    for (size_t i = 0; i < log->n; i++) {
        assert_true(log->r_set[i] == log->r[i]);
        assert_true(isfinite(log->u_r_set[i]) && log->u_r_set[i] >= 0);
    }
    stagecal_runlog_result res;
    assert_int_equal(stagecal_runlog_analyse(log, &col, NULL, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, &col, 1.0, NULL, &res, NULL), 0);
    for (size_t i = 0; i < log->n; i++)
        if (res.status[i] == STAGECAL_STAGES_OK)
            assert_true(isfinite(res.u_stages[i]));
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
}

/* The same with u(R) relative (the demo column's r_rel 0.03): a lone row at R = 1e308 has
 * u(R) = 3e306, u(R)² overflows and ∂N/∂R underflows to 0, so the product of the two was NaN
 * and the row's u(N) NaN with status ok (found by fuzz_runlog's property check). Its u(N) is
 * finite and, with xD and xB as the only other terms, at least their contribution. */
static void setpoint_huge_r_relative_u_finite(void **state)
{
    (void)state;
    stagecal_column c = col;
    c.u.r = 0;
    c.u.r_rel = 0.03;
    const char *csv = "time[s],W[mol],xD[mol/mol],xB[mol/mol],R[-]\n0,1,0.9,0.5,1e308\n";
    stagecal_runlog *log = read_csv(csv, strlen(csv), &c);
    stagecal_runlog_result res;
    assert_int_equal(stagecal_runlog_analyse(log, &c, NULL, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, &c, 1.0, NULL, &res, NULL), 0);
    assert_int_equal(res.status[0], STAGECAL_STAGES_OK);
    assert_true(isfinite(res.stages[0]));
    assert_true(isfinite(res.u_stages[0]) && res.u_stages[0] > 0);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
}

/* A CSV of nruns runs of n readings each: N(r1, sd) for the first `split` rows, then
 * N(r2, sd). */
static char *noisy_r_csv(gsl_rng *rng, size_t nruns, size_t n, size_t split, double r1, double r2,
                         double sd, size_t *len)
{
    size_t cap = 64 + nruns * n * 48, m = 0;
    char *s = malloc(cap);
    assert_non_null(s);
    m += (size_t)snprintf(s, cap, "run,time[min],W[mol],xD[mol/mol],xB[mol/mol],R[-]\n");
    for (size_t k = 0; k < nruns; k++)
        for (size_t i = 0; i < n; i++)
            m += (size_t)snprintf(s + m, cap - m, "r%zu,%zu,%zu,0.9,0.4,%.6f\n", k, i, 1000 - i,
                                  (i < split ? r1 : r2) + gsl_ran_gaussian(rng, sd));
    *len = m;
    return s;
}

/* A measured R that scatters by its stated u (0.02) about 2.5, then 4.0: two set points,
 * split at the true row, each the mean of its readings with u = 0.02/√60 (the readings are
 * white). Tolerances: the mean within 4 standard errors (a 6e-5 chance to fail); the stated
 * standard error within ±50 % of 0.02/√60 (an sd estimate from 60 readings has a relative
 * sd of 1/√118 ≈ 9 %). */
static void setpoint_measured_r_two_set_points(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 13);
    size_t len;
    char *csv = noisy_r_csv(rng, 1, 120, 60, 2.5, 4.0, 0.02, &len);
    stagecal_runlog *log = read_csv(csv, len, &col);
    size_t at;
    assert_int_equal(segments(log, 0, &at), 2);
    assert_int_equal(at, 60);
    double se = 0.02 / sqrt(60.0);
    assert_abs(log->r_set[0], 2.5, 4 * se, "set point 1 within 4 se");
    assert_abs(log->r_set[119], 4.0, 4 * se, "set point 2 within 4 se");
    assert_abs(log->u_r_set[0], se, 0.5 * se, "u of the mean of 60 white readings");
    assert_abs(log->u_r_set[119], se, 0.5 * se, "u of the mean of 60 white readings");
    stagecal_runlog_free(log);
    free(csv);
    gsl_rng_free(rng);
}

/* Steady stretches are split with probability ≤ α = 0.01 (the Bonferroni bound): at most
 * 10 + 3·√10 ≈ 20 of 1000 stretches of 100 readings (3 binomial sds above the bound). A step
 * of two reading sds in the middle is split off once, within 5 rows of its place, in ≥ 192 of
 * 200 stretches: the argmax of the statistic (2·√25 = 10 at the step against a critical value
 * of 3.9) lies within 5 rows in 99.2 % and at the row itself in 63 % (numpy cross-check, 2000
 * draws, of the same statistic — a known spread of a change-point estimate), and a second
 * split of either side happens with probability ≤ 2α; 192 is 4 binomial sds below 198. */
static void setpoint_false_splits_and_power(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 5);
    stagecal_column c = col;
    c.u.r = 0.05;
    size_t len, at, split = 0, found = 0;
    char *csv = noisy_r_csv(rng, 1000, 100, 100, 3.0, 3.0, 0.05, &len);
    stagecal_runlog *log = read_csv(csv, len, &c);
    for (size_t k = 0; k < log->nruns; k++)
        split += segments(log, k, &at) > 1;
    print_message("steady stretches split: %zu of 1000\n", split);
    assert_true(split <= 20);
    stagecal_runlog_free(log);
    free(csv);
    csv = noisy_r_csv(rng, 200, 100, 50, 3.0, 3.1, 0.05, &len);
    log = read_csv(csv, len, &c);
    for (size_t k = 0; k < log->nruns; k++)
        found += segments(log, k, &at) == 2 && at >= 45 && at <= 55;
    print_message("steps found within 5 rows: %zu of 200\n", found);
    assert_true(found >= 192);
    stagecal_runlog_free(log);
    free(csv);
    gsl_rng_free(rng);
}

/* The case: one run of 390 rows at five set points whose R reading scatters by
 * 0.02. With the set points from the test, calibrate finds a window at each set point and
 * the saturating fit succeeds; taking every reading as a set point (the behaviour before)
 * leaves fewer than 3 windows, too few for a fit. */
static void setpoint_measured_log_calibrates(void **state)
{
    (void)state;
    static const double rset[] = {1.5, 2.5, 4.0, 6.0, 10.0};
    size_t len = 0;
    char *csv = srl_measured_r_csv(1, 3, &len);
    assert_non_null(csv);
    stagecal_runlog *log = read_csv(csv, len, &col);
    assert_int_equal(log->n, 390);
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "saturating";
    par.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE; /* the simulator has no holdup */
    stagecal_calibration cal;
    stagecal_error err;
    int rc = stagecal_calibrate_data(&col, NULL, log, &par, &cal, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, 0);
    size_t finite = 0, per_set[5] = {0};
    for (size_t k = 0; k < cal.evidence.n; k++) {
        const stagecal_evidence *e = &cal.evidence.ev[k];
        if (!isfinite(e->r))
            continue;
        finite++;
        assert_true(e->u_r > 0 && e->u_r < 0.02); /* the mean of many readings */
        for (size_t j = 0; j < 5; j++)            /* its set point, within 5 u of the mean */
            per_set[j] += fabs(e->r - rset[j]) < 5 * e->u_r;
    }
    print_message("windows at finite R: %zu\n", finite);
    /* a reading that scatters is not an analyser drift or a gross error */
    assert_false(cal.res.closures[0].drift);
    assert_false(cal.res.closures[0].gross);
    for (size_t j = 0; j < 5; j++)
        assert_true(per_set[j] >= 1); /* a window at every set point */
    stagecal_calibration_free(&cal);
    /* every reading a set point, as before the set points were tested for */
    free(log->r_set), free(log->u_r_set);
    log->r_set = log->u_r_set = NULL;
    rc = stagecal_calibrate_data(&col, NULL, log, &par, &cal, &err);
    print_message("readings as set points: rc %d, %zu windows\n", rc, cal.res.nwindows);
    assert_true(rc != 0 || cal.res.nwindows < 3);
    stagecal_calibration_free(&cal);
    stagecal_runlog_free(log);
    free(csv);
}

/* One run of the constant-α = 2 column with the saturating law (synth_runlog.h): n1 rows at
 * R = r1, then n2 at r2, a minute apart, the R reading scattering by 0.02; the distillate
 * reaches its new steady value after the change through a first-order lag of tau rows (0: at
 * once, as in srl_csv); u(xD) 0.0015, u(xB) 0.0025 white; 300 mol at xB 0.35 drawn at 0.002
 * mol/s (Rayleigh, one Euler step a row). */
static char *step_csv(gsl_rng *rng, double r1, double r2, size_t n1, size_t n2, double tau,
                      size_t *len)
{
    const struct srl_spec sp = {srl_smoker_pot_a2,
                                NULL,
                                srl_sat_law,
                                1,
                                NULL,
                                0,
                                0,
                                60.0,
                                0.02,
                                0.0015,
                                0.0025,
                                300.0,
                                0.35,
                                0.002,
                                NULL};
    size_t cap = 128 + (n1 + n2) * 96, m = 0;
    char *s = malloc(cap);
    assert_non_null(s);
    m += (size_t)snprintf(s, cap, "run,time[s],W[mol],xD[mol/mol],xB[mol/mol],R[-]\n");
    double w = sp.w0_mol, xb = sp.xb0, xd = NAN;
    for (size_t i = 0; i < n1 + n2; i++) {
        double r = i < n1 ? r1 : r2, xss = srl_xd_of(&sp, r, xb, srl_sat_law(NULL, r), NAN);
        xd = tau > 0 && i >= n1 ? xss + (xd - xss) * exp(-1 / tau) : xss;
        m += (size_t)snprintf(s + m, cap - m, "S1,%.1f,%.6f,%.6f,%.6f,%.6f\n", 60.0 * (double)i, w,
                              xd + gsl_ran_gaussian(rng, sp.u_xd),
                              xb + gsl_ran_gaussian(rng, sp.u_xb),
                              r + gsl_ran_gaussian(rng, sp.r_noise));
        double dd = sp.d_mol_s * sp.dt_s;
        xb = (w * xb - xd * dd) / (w - dd);
        w -= dd;
    }
    *len = m;
    return s;
}

/* After a change of the reflux set point the steady test starts afresh: its statistics are
 * restarted a warm-up (15 samples) after the change, as after the start of a run. A step of the
 * stage count from 4.1 (R = 1.5) to 7.9 (R = 10) with white noise and no lag: the window starts
 * at the fifteenth sample after the change in most logs, whatever the noise. Carried through
 * the change, the filters remembered the old level for tens of samples and the window began
 * where the noise pointed back towards it, so its first samples were chosen by the sign of
 * their noise (the measured-R study read a and N(5) low by 0.13 and 0.11 standard errors,
 * docs/calibration.md §5). The restart's 6 white samples read steady (R-statistic below 1.44)
 * in 37 of these 40 logs (seed 29; the rest enter later, as the filters decide); carried
 * through, 0 of 40 windows started there and all 40 after the twenty-fifth sample. The bounds
 * (at least 20 at the fifteenth sample, at most 4 after the twenty-fifth) are far from both
 * (common practice, no source). Then a step whose distillate follows a lag of 8 samples: no
 * sample whose stage count is more than 3 u(N) from the new set point's law is flagged steady.
 */
static void setpoint_change_restarts_steady_test(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 29);
    size_t at_restart = 0, late = 0;
    for (int rep = 0; rep < 40; rep++) {
        size_t len, c;
        char *csv = step_csv(rng, 1.5, 10.0, 40, 60, 0, &len);
        stagecal_runlog *log = read_csv(csv, len, &col);
        assert_int_equal(segments(log, 0, &c), 2);
        assert_int_equal(c, 40);
        stagecal_runlog_result res;
        assert_int_equal(stagecal_runlog_analyse(log, &col, NULL, &res, NULL), 0);
        assert_int_equal(stagecal_runlog_invert(log, &col, 1.0, NULL, &res, NULL), 0);
        size_t first = log->n;
        for (size_t i = c; i < log->n && first == log->n; i++)
            if (res.flags[i] & STAGECAL_SAMPLE_STEADY)
                first = i;
        at_restart += first == c + 15;
        late += first > c + 25;
        for (size_t i = c; i < c + 15; i++) /* never before the restart */
            assert_false(res.flags[i] & STAGECAL_SAMPLE_STEADY);
        stagecal_runlog_result_free(&res);
        stagecal_runlog_free(log);
        free(csv);
    }
    print_message("window after the change starts at its fifteenth sample in %zu of 40 logs, "
                  "after the twenty-fifth in %zu\n",
                  at_restart, late);
    assert_true(at_restart >= 20);
    assert_true(late <= 4);
    size_t len, c, off = 0, missed = 0;
    char *csv = step_csv(rng, 1.5, 10.0, 40, 60, 8.0, &len);
    stagecal_runlog *log = read_csv(csv, len, &col);
    assert_int_equal(segments(log, 0, &c), 2);
    stagecal_runlog_result res;
    assert_int_equal(stagecal_runlog_analyse(log, &col, NULL, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, &col, 1.0, NULL, &res, NULL), 0);
    for (size_t i = c; i < log->n; i++) {
        int bad = res.status[i] != STAGECAL_STAGES_OK ||
                  fabs(res.stages[i] - srl_sat_law(NULL, 10.0)) > 3.0 * res.u_stages[i];
        off += bad;
        missed += bad && (res.flags[i] & STAGECAL_SAMPLE_STEADY);
    }
    print_message("lagged step: %zu samples off, %zu of them flagged steady\n", off, missed);
    assert_true(off > 15); /* the transient outlasts the restart */
    assert_int_equal(missed, 0);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
    free(csv);
    gsl_rng_free(rng);
}

/* N with smoker(R, xd, N) = xb (bisection to 1e-13 stages). */
static double smoker_n(double r, double xd, double xb)
{
    double lo = 1, hi = 60;
    while (hi - lo > 1e-13) {
        double mid = 0.5 * (lo + hi);
        if (oracle_smoker_xb(2.0, r, xd, mid) > xb)
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi);
}

/* A window's stage count carries its set point's uncertainty: with exact compositions the
 * standard error is |∂N/∂R|·u(R), ∂N/∂R from Smoker's closed form by central differences
 * (h = 1e-4; truncation ~h²·N''' ≈ 1e-8, far inside the 1e-4 relative tolerance that the
 * tangent-linear sensitivity of the inversion is held to). */
static void setpoint_uncertainty_enters_stage_se(void **state)
{
    (void)state;
    double r = 2.0, xd = 0.95, n = 6.3, h = 1e-4;
    double xb = oracle_smoker_xb(2.0, r, xd, n);
    double dndr = (smoker_n(r + h, xd, xb) - smoker_n(r - h, xd, xb)) / (2 * h);
    stagecal_evidence e;
    memset(&e, 0, sizeof e);
    e.r = r;
    e.u_r = 0.05;
    e.xd = xd;
    e.xb = xb;
    e.n_ok = 3;
    assert_int_equal(stagecal_evidence_stages(col.system.vle, 1.0, &e, NULL), 0);
    assert_true(e.stages_ok);
    assert_abs(e.stages, n, 1e-6, "Smoker round trip");
    assert_rel(e.se_stages, fabs(dndr) * 0.05, 1e-4, "|dN/dR|·u(R)");
    e.u_r = 0;
    assert_int_equal(stagecal_evidence_stages(col.system.vle, 1.0, &e, NULL), 0);
    assert_false(e.stages_ok); /* no stated uncertainty at all: no standard error */
}

/* The composition-space fit weighs a window by its whole effective variance, u(R) included:
 * three windows of a constant 6 stages (exact Smoker compositions at R = 1.5, 3, 6) of which
 * the one at R = 1.5 has its pot composition moved to what 6.5 stages give. With exact
 * reflux ratios the fit is pulled up by that window; when that window's set point carries
 * u(R) = 0.3 (a measured R that scatters), its log-odds variance grows by (∂logit/∂R·u)² —
 * about 10³ times its analyser part — and the estimate comes back to within a tenth of the
 * pull. (Exact compositions: the two other windows alone give 6 to the stepping's 1e-9.) */
static void setpoint_uncertainty_weights_composition_fit(void **state)
{
    (void)state;
    static const double rs[3] = {1.5, 3.0, 6.0};
    stagecal_evidence ev[3];
    memset(ev, 0, sizeof ev);
    for (int i = 0; i < 3; i++) {
        ev[i].r = rs[i];
        ev[i].xd = 0.95;
        ev[i].xb = oracle_smoker_xb(2.0, rs[i], 0.95, i == 0 ? 6.5 : 6.0);
        ev[i].u_xd = 1e-4;
        ev[i].u_xb = 1e-3;
        ev[i].n_samples = ev[i].n_ok = 10;
    }
    stagecal_form form;
    assert_int_equal(stagecal_form_parse("constant", &form, NULL), 0);
    double theta0 = 6.0, est[2];
    for (int k = 0; k < 2; k++) {
        ev[0].u_r = k ? 0.3 : 0.0;
        stagecal_regress_result res;
        stagecal_error err;
        int rc =
            stagecal_fit_composition(col.system.vle, 1.0, ev, 3, &form, &theta0, NULL, &res, &err);
        if (rc)
            print_error("%s\n", err.text);
        assert_int_equal(rc, 0);
        est[k] = res.theta[0];
        stagecal_regress_result_free(&res);
    }
    print_message("exact R: %.6f, u(R) = 0.3 on the moved window: %.6f\n", est[0], est[1]);
    assert_true(est[0] - 6.0 > 0.02); /* the moved window pulls (0.036 measured) */
    assert_true(fabs(est[1] - 6.0) < 0.1 * (est[0] - 6.0));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(setpoint_logged_values_are_set_points),
        cmocka_unit_test(setpoint_huge_r_keeps_values),
        cmocka_unit_test(setpoint_huge_r_relative_u_finite),
        cmocka_unit_test(setpoint_measured_r_two_set_points),
        cmocka_unit_test(setpoint_false_splits_and_power),
        cmocka_unit_test(setpoint_measured_log_calibrates),
        cmocka_unit_test(setpoint_change_restarts_steady_test),
        cmocka_unit_test(setpoint_uncertainty_enters_stage_se),
        cmocka_unit_test(setpoint_uncertainty_weights_composition_fit),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
