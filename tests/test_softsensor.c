/*
 * test_softsensor.c — compositions from temperatures (stagecal/softsensor.h) and the run-log
 * reader's soft sensor: the inversion against the forward bubble point, the curves against an
 * independent Raoult solve (tests/synth_runlog.h, Newton on the NIST Antoine sets) and its
 * closed-form slope, censoring near the pure ends and at an azeotrope, the fill of a log with
 * lab samples, and the consistency check with an injected sensor offset.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_errno.h>

#include "stagecal/column.h"
#include "stagecal/runlog.h"
#include "stagecal/softsensor.h"
#include "stagecal/vle.h"
#include "synth_runlog.h"
#include "testutil.h"

/* NIST Chemistry WebBook Antoine sets (log10(P/bar) = A − B/(T + C)): benzene and toluene
 * after Williamham, Taylor, Pignocco & Rossini 1945; ethanol after Ambrose & Sprake 1970,
 * water after Bridgeman & Aldrich 1964. NRTL ethanol(1)–water(2) after Gmehling & Onken 1977
 * (DECHEMA Chemistry Data Series I/1; as tests/test_vle.c). */
static const stagecal_antoine BT[2] = {{4.01814, 1203.835, -53.226, 287.70, 354.07},
                                       {4.07827, 1343.943, -53.773, 308.52, 384.66}};
static const stagecal_antoine EW[2] = {{5.24677, 1598.673, -46.424, 292.77, 366.63},
                                       {5.08354, 1663.125, -45.622, 344.0, 373.0}};
static const double NRTL_A[5] = {-0.8009, 246.18, 3.4578, -586.0809, 0.3};

/* Raoult bubble point by Newton, independent of src/ (tests/synth_runlog.h). */
static double raoult_tbubble(double p, double x, double *dtdx)
{
    return srl_raoult_tbubble(&srl_benzene, &srl_toluene, p, x, dtdx);
}

static void soft_bubble_inversion_roundtrip(void **state)
{
    (void)state;
    stagecal_error e;
    stagecal_vle *bt =
        stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, BT, NULL, 0, 101325, NULL, &e);
    stagecal_vle *vac =
        stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, BT, NULL, 0, 20000, NULL, &e);
    stagecal_vle *ew =
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, EW, NRTL_A, 5, 101325, NULL, &e);
    assert_non_null(bt);
    assert_non_null(vac);
    assert_non_null(ew);
    const stagecal_vle *m[3] = {bt, vac, ew};
    double xe_ew;
    assert_int_equal(stagecal_vle_azeotropes(ew, &xe_ew, 1), 1);
    for (int k = 0; k < 3; k++) {
        double xe = k == 2 ? xe_ew : 1.0;
        for (int i = 0; i <= 40; i++) {
            double x0 = xe * (0.0007 + 0.9986 * i / 40.0), t, x, dtdx, y0, y, t2;
            assert_int_equal(stagecal_softsensor_bubble_t(m[k], x0, &t, NULL, &e), STAGECAL_OK);
            assert_int_equal(stagecal_softsensor_bubble_x(m[k], t, &x, &dtdx, &e), STAGECAL_OK);
            /* the must-show: inversion agrees with the forward bubble point to 1e-9 in x */
            assert_abs(x, x0, 1e-9, "x of T_bubble(x)");
            /* dew side: the vapour whose dew point is T is y*(x0) */
            assert_int_equal(stagecal_vle_ystar_exact(m[k], x0, &y0, &t2), STAGECAL_OK);
            assert_int_equal(stagecal_softsensor_dew_y(m[k], t, &y, NULL, &e), STAGECAL_OK);
            assert_abs(y, y0, 1e-9, "y of T_dew(y)");
        }
    }
    stagecal_vle_free(bt);
    stagecal_vle_free(vac);
    stagecal_vle_free(ew);
}

static void soft_curves_match_raoult(void **state)
{
    (void)state;
    stagecal_error e;
    double p = 101325;
    stagecal_vle *bt = stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, BT, NULL, 0, p, NULL, &e);
    assert_non_null(bt);
    for (int i = 1; i < 20; i++) {
        double x = i / 20.0, want_d, want = raoult_tbubble(p, x, &want_d), t, d;
        assert_int_equal(stagecal_softsensor_bubble_t(bt, x, &t, &d, &e), STAGECAL_OK);
        /* both solve the same equation: 1e-8 K covers the two solvers' tolerances */
        assert_abs(t, want, 1e-8, "T_bubble vs Newton on Raoult's law");
        /* closed-form slope (implicit differentiation); GSL's central difference with
         * h = 1e-4 is accurate to ~1e-8 relative; 1e-6 leaves room */
        assert_rel(d, want_d, 1e-6, "dT/dx vs the closed form");
        /* dew point: the liquid srl_raoult_x gives for vapour y boils at the dew point */
        double y = x, xl = srl_raoult_x(&srl_benzene, &srl_toluene, p, y), dd, td;
        double tdew = raoult_tbubble(p, xl, &dd);
        assert_int_equal(stagecal_softsensor_dew_t(bt, y, &td, NULL, &e), STAGECAL_OK);
        /* srl_raoult_x stops at a Newton step of 1e-10 K: 1e-7 K */
        assert_abs(td, tdew, 1e-7, "T_dew vs Raoult");
    }
    stagecal_vle_free(bt);
}

static void soft_infer_censors_unresolved(void **state)
{
    (void)state;
    stagecal_error e;
    stagecal_vle *bt =
        stagecal_vle_alloc_activity(STAGECAL_VLE_IDEAL, BT, NULL, 0, 101325, NULL, &e);
    assert_non_null(bt);
    double tl, th, d;
    assert_int_equal(stagecal_softsensor_bubble_t(bt, 1, &tl, NULL, &e), 0);
    assert_int_equal(stagecal_softsensor_bubble_t(bt, 0, &th, NULL, &e), 0);
    stagecal_reading r;
    int st;
    /* mid-range pot: resolved, u = u(T)/|dT/dx| */
    double t05;
    assert_int_equal(stagecal_softsensor_bubble_t(bt, 0.5, &t05, &d, &e), 0);
    assert_int_equal(stagecal_softsensor_infer(bt, t05, 0.1, 0, NULL, &r, &st, &e), 0);
    assert_int_equal(st, STAGECAL_SOFT_RESOLVED);
    assert_abs(r.value, 0.5, 1e-9, "pot at x = 0.5");
    /* the slope is taken again at the inverted x (within 1e-12 of 0.5): 1e-8 */
    assert_rel(r.u, 0.1 / fabs(d), 1e-8, "u(x) = u(T)/|dT/dx| (GUM first order)");
    /* top at the light component's boiling point: at least the composition 1.645·0.1 K
     * hotter (a one-sided 95 % bound), censored above, never a value */
    assert_int_equal(stagecal_softsensor_infer(bt, tl + 0.05, 0.1, 1, NULL, &r, &st, &e), 0);
    assert_int_equal(st, STAGECAL_SOFT_CENSORED);
    assert_int_equal(r.censor, STAGECAL_CENSOR_ABOVE);
    double yb;
    assert_int_equal(
        stagecal_softsensor_dew_y(bt, tl + 0.05 + 0.1 * STAGECAL_RUNLOG_BOUND_Z, &yb, NULL, &e), 0);
    assert_abs(r.value, yb, 1e-12, "the censored limit");
    assert_true(r.value < 1);
    /* pot at the heavy end: at most */
    assert_int_equal(stagecal_softsensor_infer(bt, th - 0.01, 0.1, 0, NULL, &r, &st, &e), 0);
    assert_int_equal(st, STAGECAL_SOFT_CENSORED);
    assert_int_equal(r.censor, STAGECAL_CENSOR_BELOW);
    assert_true(r.value > 0 && r.value < 0.02);
    /* a pot colder than the light component boils: nothing */
    assert_int_equal(stagecal_softsensor_infer(bt, tl - 3, 0.1, 0, NULL, &r, &st, &e), 0);
    assert_int_equal(st, STAGECAL_SOFT_OUTSIDE);
    assert_true(isnan(r.value));
    /* beyond the curve: EDATA from the plain inversion */
    assert_int_equal(stagecal_softsensor_bubble_x(bt, th + 5, &d, NULL, &e), STAGECAL_EDATA);
    stagecal_vle_free(bt);
}

static void soft_infer_azeotrope(void **state)
{
    (void)state;
    stagecal_error e;
    stagecal_vle *ew =
        stagecal_vle_alloc_activity(STAGECAL_VLE_NRTL, EW, NRTL_A, 5, 101325, NULL, &e);
    assert_non_null(ew);
    double xa, ta;
    assert_int_equal(stagecal_vle_azeotropes(ew, &xa, 1), 1);
    assert_int_equal(stagecal_softsensor_bubble_t(ew, xa, &ta, NULL, &e), 0);
    /* the top at the azeotrope's temperature: the bubble curve is flat there (dT/dx = 0 at a
     * minimum-boiling azeotrope, Gibbs–Konovalov), so the distillate is censored "at least" */
    stagecal_reading r;
    int st;
    assert_int_equal(stagecal_softsensor_infer(ew, ta + 0.01, 0.1, 1, NULL, &r, &st, &e), 0);
    assert_int_equal(st, STAGECAL_SOFT_CENSORED);
    assert_int_equal(r.censor, STAGECAL_CENSOR_ABOVE);
    assert_true(r.value < xa);
    stagecal_vle_free(ew);
}

/* A benzene–toluene column at 101.325 kPa with 0.1 K sensors; the log below has lab rows 2 and
 * 5 (both compositions) and temperatures on every row. */
#define COLUMN                                                                                     \
    "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"soft-test\","                     \
    " \"description\": \"INVENTED: a column for the soft-sensor tests\","                          \
    " \"condenser\": \"total\", \"pressure_pa\": 101325,"                                          \
    " \"system\": {\"light\": {\"name\": \"benzene\", \"molar_mass_kg_mol\": 0.078112,"            \
    "   \"antoine\": {\"a\": 4.01814, \"b\": 1203.835, \"c\": -53.226}},"                          \
    "  \"heavy\": {\"name\": \"toluene\", \"molar_mass_kg_mol\": 0.092138,"                        \
    "   \"antoine\": {\"a\": 4.07827, \"b\": 1343.943, \"c\": -53.773}},"                          \
    "  \"latent_heat_j_mol\": 32000, \"model\": {\"kind\": \"ideal\"}},"                           \
    " \"uncertainty\": {\"xd\": 0.002, \"xb\": 0.002, \"t_top\": 0.1, \"t_pot\": 0.1}}"

/* The log's CSV: six rows with true xD 0.9, xB 0.4 − 0.01·i, temperatures from
 * raoult_tbubble (independent of src/) plus offset_k on T_pot. */
static size_t soft_csv(char *buf, size_t cap, double offset_k)
{
    size_t n = (size_t)snprintf(buf, cap,
                                "time[min],W[mol],xD[mol/mol],xB[mol/mol],R[-],"
                                "T_top[K],T_pot[K]\n");
    for (int i = 0; i < 6; i++) {
        double xb = 0.4 - 0.01 * i, d, tp = raoult_tbubble(101325, xb, &d) + offset_k;
        double xl = srl_raoult_x(&srl_benzene, &srl_toluene, 101325, 0.9);
        double tt = raoult_tbubble(101325, xl, &d);
        if (i == 2 || i == 5)
            n += (size_t)snprintf(buf + n, cap - n, "%d,%g,0.9,%.6f,3,%.6f,%.6f\n", i, 100.0 - i,
                                  xb, tt, tp);
        else
            n += (size_t)snprintf(buf + n, cap - n, "%d,%g,,,3,%.6f,%.6f\n", i, 100.0 - i, tt, tp);
    }
    return n;
}

static void soft_reader_fills_and_marks(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error e;
    assert_int_equal(stagecal_column_parse(COLUMN, strlen(COLUMN), "c.json", &col, &e), 0);
    assert_abs(col.u.t_pot_k, 0.1, 0, "uncertainty.t_pot read");
    assert_abs(col.u.t_top_k, 0.1, 0, "uncertainty.t_top read");
    char csv[4096];
    size_t len = soft_csv(csv, sizeof csv, 0);
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(50);
    assert_int_equal(stagecal_runlog_read_buffer(log, csv, len, "s.csv", &col, NULL, f, &e), 0);
    assert_int_equal(f->n_errors, 0);
    assert_non_null(log->u_xd_inf);
    assert_non_null(log->u_xb_inf);
    assert_int_equal(log->soft.xd_inferred, 4);
    assert_int_equal(log->soft.xb_inferred, 4);
    for (size_t i = 0; i < 6; i++) {
        int lab = i == 2 || i == 5;
        /* the temperatures were written with 6 decimals (1e-6 K): |dT/dx| ≥ 8 K per unit
         * mole fraction here, so 1e-6 in x */
        assert_abs(log->xb[i], 0.4 - 0.01 * (double)i, 1e-6, "xB from T_pot");
        assert_abs(log->xd[i], 0.9, 1e-6, "xD from T_top");
        assert_int_equal(isnan(log->u_xb_inf[i]), lab);
        stagecal_reading r = stagecal_runlog_reading(log, &col, i, STAGECAL_RL_XB);
        if (lab)
            assert_abs(r.u, 0.002, 0, "a lab reading keeps the column's u");
        else
            assert_true(r.u > 0.002 && r.u < 0.01); /* 0.1 K / ~25 K per unit */
    }
    /* consistent temperatures: no warning about a sensor */
    assert_int_equal(log->soft.checks, 2);
    assert_int_equal(log->soft.inconsistent, 0);
    stagecal_runlog_free(log);
    stagecal_findings_free(f);

    /* a 1 K offset on the pot sensor is found */
    len = soft_csv(csv, sizeof csv, 1.0);
    log = stagecal_runlog_alloc();
    f = stagecal_findings_alloc(50);
    assert_int_equal(stagecal_runlog_read_buffer(log, csv, len, "s.csv", &col, NULL, f, &e), 0);
    assert_int_equal(log->soft.inconsistent, 1);
    int found = 0;
    for (size_t k = 0; k < f->n; k++)
        found |= strstr(f->items[k].text, "T_pot reads +1.00 K") != NULL;
    assert_true(found);

    /* switched off: nothing inferred, the blanks stay missing */
    stagecal_runlog_params par = stagecal_runlog_default_params();
    par.infer = 0;
    stagecal_runlog *plain = stagecal_runlog_alloc();
    assert_int_equal(stagecal_runlog_read_buffer(plain, csv, len, "s.csv", &col, &par, NULL, &e),
                     0);
    assert_null(plain->u_xb_inf);
    assert_true(isnan(plain->xb[0]));
    stagecal_runlog_free(plain);
    stagecal_runlog_free(log);
    stagecal_findings_free(f);
    stagecal_column_free(&col);
}

/* Reads that share the soft sensor's models (params.soft_physics, as calibrate and the
 * streaming reader share them across logs) infer what a reader with its own infers: the
 * same Raoult's-law compositions (raoult_tbubble, independent of src/; 1e-6 as above) and
 * bit for bit what its own models give (a model at a pressure does not depend on what was
 * asked before it). */
static void soft_reader_shared_physics(void **state)
{
    (void)state;
    stagecal_column col;
    stagecal_error e;
    assert_int_equal(stagecal_column_parse(COLUMN, strlen(COLUMN), "c.json", &col, &e), 0);
    char csv[4096];
    size_t len = soft_csv(csv, sizeof csv, 0);
    stagecal_runlog *own = stagecal_runlog_alloc();
    assert_int_equal(stagecal_runlog_read_buffer(own, csv, len, "s.csv", &col, NULL, NULL, &e), 0);
    stagecal_runlog_params par = stagecal_runlog_default_params();
    par.soft_physics = stagecal_runlog_soft_physics_alloc(&col, &e);
    assert_non_null(par.soft_physics);
    for (int pass = 0; pass < 2; pass++) { /* the second read finds the models built */
        stagecal_runlog *log = stagecal_runlog_alloc();
        assert_int_equal(stagecal_runlog_read_buffer(log, csv, len, "s.csv", &col, &par, NULL, &e),
                         0);
        assert_int_equal(log->soft.xb_inferred, 4);
        for (size_t i = 0; i < 6; i++) {
            assert_abs(log->xb[i], 0.4 - 0.01 * (double)i, 1e-6, "xB from T_pot");
            assert_true(log->xb[i] == own->xb[i] && log->xd[i] == own->xd[i]);
            assert_true(isnan(own->u_xb_inf[i]) ? isnan(log->u_xb_inf[i])
                                                : log->u_xb_inf[i] == own->u_xb_inf[i]);
        }
        stagecal_runlog_free(log);
    }
    stagecal_physics_free(par.soft_physics);
    stagecal_runlog_free(own);
    stagecal_column_free(&col);
}

/* The smoother against closed forms of the random walk plus noise (the local-level model). */
static void soft_smoother_closed_forms(void **state)
{
    (void)state;
    enum { N = 400 };
    double t[N], z[N], u[N], xs[N], us[N];
    double sum = 0;
    for (int i = 0; i < N; i++) {
        t[i] = 60.0 * i;
        z[i] = 0.3 + 0.004 * sin(1.7 * i); /* deterministic "noise" */
        u[i] = i % 7 == 3 ? NAN : 0.004;   /* some rows without a reading */
        if (isfinite(u[i]))
            sum += z[i];
    }
    int m = 0;
    for (int i = 0; i < N; i++)
        m += isfinite(u[i]);
    stagecal_softsensor_smooth_info info;
    stagecal_error e;
    /* q → 0: a constant, the plain mean of the readings with u/√m (equal weights) */
    assert_int_equal(stagecal_softsensor_smooth(t, z, u, N, 1e-30, xs, us, &info, &e), 0);
    assert_int_equal(info.n_used, (size_t)m);
    for (int i = 0; i < N; i += 37) {
        /* q·T = 1e-30·24000 s: far below u²/m; 1e-9 relative covers the sums' rounding */
        assert_rel(xs[i], sum / m, 1e-9, "q -> 0: the mean");
        assert_rel(us[i], 0.004 / sqrt(m), 1e-6, "q -> 0: u/sqrt(m)");
    }
    /* q huge: the readings themselves */
    assert_int_equal(stagecal_softsensor_smooth(t, z, u, N, 1e6, xs, us, NULL, &e), 0);
    for (int i = 0; i < N; i++)
        if (isfinite(u[i])) {
            assert_abs(xs[i], z[i], 1e-12, "q -> inf: the readings");
            assert_rel(us[i], 0.004, 1e-9, "q -> inf: u");
        }
    /* the filter's steady state at the last reading (the smoother's last value is the
     * filter's): with readings every dt, P⁻ solves P⁻² − qdt·P⁻ − qdt·r = 0 and
     * P = P⁻r/(P⁻ + r) (the Riccati equation of the local-level model; Harvey 1989,
     * "Forecasting, structural time series models and the Kalman filter", CUP, §3.3, from
     * memory). Every reading present, 400 steps: converged to rounding. */
    for (int i = 0; i < N; i++)
        u[i] = 0.004;
    double q = 1e-9, qd = q * 60, r = 0.004 * 0.004;
    double pm = 0.5 * (qd + sqrt(qd * qd + 4 * qd * r)), pf = pm * r / (pm + r);
    assert_int_equal(stagecal_softsensor_smooth(t, z, u, N, q, xs, us, NULL, &e), 0);
    assert_rel(us[N - 1], sqrt(pf), 1e-9, "steady-state filter variance");
    assert_true(us[N / 2] < us[N - 1]); /* the smoother uses both sides */
    /* too few readings */
    for (int i = 1; i < N; i++)
        u[i] = NAN;
    assert_int_equal(stagecal_softsensor_smooth(t, z, u, N, 0, xs, us, NULL, &e), STAGECAL_EDATA);
}

int main(void)
{
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(soft_bubble_inversion_roundtrip),
        cmocka_unit_test(soft_curves_match_raoult),
        cmocka_unit_test(soft_infer_censors_unresolved),
        cmocka_unit_test(soft_infer_azeotrope),
        cmocka_unit_test(soft_reader_fills_and_marks),
        cmocka_unit_test(soft_reader_shared_physics),
        cmocka_unit_test(soft_smoother_closed_forms),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
