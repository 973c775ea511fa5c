/*
 * study_cov.h — the covariance of the coverage studies' fits (tests/tool_*coverage.c): a
 * knob of the studies, never set by the unit tests.
 */
#ifndef STAGECAL_STUDY_COV_H
#define STAGECAL_STUDY_COV_H

#include <stdlib.h>
#include <string.h>

#include "stagecal/calibrate.h"

/* calibrate's default, or STUDY_COV=model|hc2|hc3|hc2-bm|cr2-run. */
static inline stagecal_cov_kind synth_cov_kind(void)
{
    const char *s = getenv("STUDY_COV");
    if (s && strcmp(s, "model") == 0)
        return STAGECAL_COV_MODEL;
    if (s && strcmp(s, "hc2") == 0)
        return STAGECAL_COV_HC2;
    if (s && strcmp(s, "hc3") == 0)
        return STAGECAL_COV_HC3;
    if (s && strcmp(s, "hc2-bm") == 0)
        return STAGECAL_COV_HC2_BM;
    if (s && strcmp(s, "cr2-run") == 0)
        return STAGECAL_COV_CR2_RUN;
    return stagecal_calibrate_default_params().cov_kind;
}

/* The synthetic calibrations' runs (tests/synth_calibration.h): window w belongs to run
 * w mod STUDY_RUNS (default 4), so that each run spans the R range as a production run's
 * set points do; the errors stay independent (runs that do not differ). */
static inline size_t synth_runs(void)
{
    const char *s = getenv("STUDY_RUNS");
    long g = s ? strtol(s, NULL, 10) : 4;
    return g >= 1 ? (size_t)g : 4;
}

#endif
