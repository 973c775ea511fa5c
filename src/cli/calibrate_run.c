/*
 * calibrate_run.c — `stagecal calibrate`'s runs-differ test in its outputs (calibrate.h): the
 * summary's line and the --json member. The test is the library's (stagecal_run_test_fit,
 * src/calibrate_runs.c); its warning is in the model's warnings.
 */
#include <stdio.h>

#include "calibrate.h"
#include "cli.h"

#include "banned.h" /* last: the system headers before it may use what it bans */

/* Do the runs differ beyond the windows' errors? (cal->run_test, stagecal/calibrate.h) */
void calibrate_print_run_test(const stagecal_calibration *cal)
{
    const stagecal_run_test *t = &cal->run_test;
    if (!t->tested) {
        printf("runs against windows: not tested (%s)\n", t->why);
        return;
    }
    const char *what = !(t->p < STAGECAL_RUN_TEST_ALPHA)
                           ? "no sign that the runs differ beyond the windows' errors"
                       : cal->used == STAGECAL_MODEL_CENSORED
                           ? "the runs differ beyond the windows' errors; the censored fit's "
                             "intervals take the windows as independent"
                       : stagecal_calibration_fit(cal)->cov_kind == STAGECAL_COV_CR2_RUN
                           ? "the runs differ beyond the windows' errors; the intervals cluster "
                             "by run (cr2-run)"
                           : "the runs differ beyond the windows' errors (see the warning)";
    printf("runs against windows: F = %.3g on %g and %g dof, p = %.2g (%zu windows with a stage "
           "count in %zu runs; the stage-space residuals over their stated errors, a common "
           "factor in those errors cancels): %s\n",
           t->f, t->dof1, t->dof2, t->p, t->windows, t->runs, what);
}

json_t *calibrate_run_test_json(const stagecal_run_test *t)
{
    return json_pack("{s:b,s:o,s:o,s:o,s:o,s:I,s:I,s:o}", "tested", t->tested, "f",
                     cli_json_real(t->f), "dof1", cli_json_real(t->dof1), "dof2",
                     cli_json_real(t->dof2), "p", cli_json_real(t->p), "windows",
                     (json_int_t)t->windows, "runs", (json_int_t)t->runs, "why",
                     t->tested ? json_null() : json_string(t->why));
}
