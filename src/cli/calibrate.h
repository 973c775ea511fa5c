/*
 * calibrate.h — what `stagecal calibrate` (cmd_calibrate.c) shares with its helper
 * calibrate_run.c (the runs-differ test in the summary and --json). Not a command of its own.
 */
#ifndef STAGECAL_CLI_CALIBRATE_H
#define STAGECAL_CLI_CALIBRATE_H

#include <jansson.h>

#include "stagecal/calibrate.h"

/* The summary's "runs against windows" line: cal->run_test's F, dof and p, or why not tested. */
void calibrate_print_run_test(const stagecal_calibration *cal);
/* --json's "run_test" member: tested, f, dof1, dof2, p (null when not tested), windows, runs,
 * why (null when tested). */
json_t *calibrate_run_test_json(const stagecal_run_test *t);

#endif
