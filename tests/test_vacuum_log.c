/*
 * test_vacuum_log.c — run logs of a vacuum column whose top pressure varies between runs
 * (12–35 kPa), through the whole chain: the rows' equilibrium at their logged pressure
 * (physics.h) in the inversion, the windows, the drift signatures (runlog_drift.c) and the
 * calibration.
 *
 * External reference: the whole-stage Raoult stepper of tests/synth_runlog.h with the NIST
 * WebBook Antoine sets of benzene and toluene (after Williamham, Taylor, Pignocco & Rossini
 * 1945), its own dew-point solver — independent of src/vle*.c and src/stages*.c. The study
 * over many data sets is tests/tool_vacuum_coverage.c.
 */
#include <gsl/gsl_errno.h>
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
#include "stagecal/column.h"
#include "synth_runlog.h"

static double law(void *ctx, double r)
{
    (void)ctx, (void)r;
    return 6;
}

/* Four runs at 12, 19, 27, 35 kPa, R = 1.2, 1.5, 2, 3, 50 rows each; calibrated with the
 * constant form. */
static void calibrate_vacuum(double u_xd, double u_xb, stagecal_calibration *cal,
                             stagecal_column *col, stagecal_runlog **log)
{
    static const double rset[] = {1.2, 1.5, 2.0, 3.0}, p[] = {12000, 19000, 27000, 35000};
    struct srl_spec s = {srl_bt_pot, NULL, law,  4,     rset, 4,     50, 60.0,
                         0.0,        u_xd, u_xb, 300.0, 0.30, 0.002, p};
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 11);
    size_t len = 0;
    char *csv = srl_csv(&s, rng, &len);
    assert_non_null(csv);
    char column_json[2048];
    int clen = snprintf(column_json, sizeof column_json, SRL_BT_COLUMN_FMT, 101325.0);
    assert_true(clen > 0 && (size_t)clen < sizeof column_json);
    assert_int_equal(stagecal_column_parse(column_json, (size_t)clen, "v.json", col, NULL), 0);
    *log = stagecal_runlog_alloc();
    assert_int_equal(stagecal_runlog_read_buffer(*log, csv, len, "v.csv", col, NULL, NULL, NULL),
                     0);
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "constant";
    par.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE; /* no holdup simulated */
    stagecal_error err;
    int rc = stagecal_calibrate_data(col, NULL, *log, &par, cal, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, 0);
    free(csv);
    gsl_rng_free(rng);
}

static void release(stagecal_calibration *cal, stagecal_column *col, stagecal_runlog *log)
{
    stagecal_calibration_free(cal);
    stagecal_runlog_free(log);
    stagecal_column_free(col);
}

/* Noise-free logs give the true 6 stages back, to 1e-4 (measured: 5.9999995; the stepper's
 * dew points and the library's stepping are both converged far below that, and a logged
 * pressure is rounded to 1 Pa before a model is built, physics.h, which moves a count by up to
 * ~2e-5); the windows of all four pressures are in the fit. */
static void vacuum_noise_free_gives_truth(void **state)
{
    (void)state;
    stagecal_calibration cal;
    stagecal_column col;
    stagecal_runlog *log;
    calibrate_vacuum(0, 0, &cal, &col, &log);
    const stagecal_regress_result *f = &cal.comp_fit;
    print_message("noise-free: %.9f over %zu windows\n", f->theta[0], cal.evidence.n);
    assert_abs(f->theta[0], 6.0, 1e-4, "whole-stage Raoult stepper, 6 stages");
    assert_true(cal.evidence.n >= 12);
    release(&cal, &col, log);
}

/* With analyser noise no run is flagged for drift or a gross error, and none is left out: the
 * drift signature in distillate space steps each row at its own logged pressure (before,
 * at the column file's 101.3 kPa: every run of such a log was flagged and the calibration
 * refused for want of windows). The 95 % interval covers the truth. */
static void vacuum_runs_not_flagged(void **state)
{
    (void)state;
    stagecal_calibration cal;
    stagecal_column col;
    stagecal_runlog *log;
    calibrate_vacuum(0.002, 0.003, &cal, &col, &log);
    for (size_t k = 0; k < cal.res.nruns; k++) {
        assert_false(cal.res.closures[k].drift);
        assert_false(cal.res.closures[k].gross);
    }
    const stagecal_regress_result *f = &cal.comp_fit;
    print_message("noisy: %.4f [%.4f, %.4f]\n", f->theta[0], f->ci_low[0], f->ci_high[0]);
    assert_true(f->ci_low[0] <= 6.0 && 6.0 <= f->ci_high[0]);
    release(&cal, &col, log);
}

int main(void)
{
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(vacuum_noise_free_gives_truth),
        cmocka_unit_test(vacuum_runs_not_flagged),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
