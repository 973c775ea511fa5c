/*
 * test_plot_run.c — the run chart (plot_run.c): the windows drawn are the evidence set's,
 * and the marks (censored readings, outliers, statuses, left-out runs) follow the run-log
 * analysis.
 */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "plot_testutil.h"
#include "stagecal/calibrate.h"
#include "stagecal/plot.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "testutil.h"

#define DEMO_COLUMN STAGECAL_DATASETS "/columns/demo_benzene_toluene.json"

/* The panel series labelled `label` of panel p (NULL when there is none). */
static const stagecal_plot_series *panel_series(const stagecal_plot_chart *c, size_t p,
                                                const char *label)
{
    for (size_t i = 0; i < c->panels[p].n_series; i++)
        if (c->panels[p].series[i].label && strcmp(c->panels[p].series[i].label, label) == 0)
            return &c->panels[p].series[i];
    return NULL;
}

/* The calibration of one demo month (the library's chain; the fit is not looked at). */
static void demo_calibration(const char *month, stagecal_calibration *cal)
{
    char path[512];
    const char *logs[1] = {path};
    stagecal_error err;
    snprintf(path, sizeof path, STAGECAL_DATASETS "/demo/logs/%s.csv", month);
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "constant";
    par.method = STAGECAL_CAL_STAGE;
    int rc = stagecal_calibrate(DEMO_COLUMN, logs, 1, &par, cal, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
}

/* The shaded windows are the evidence's windows, exactly: every window with a stage count
 * (ev->stages_ok) is one stripe from its first to its last row's time, and no other
 * stripe carries that label; the windows' stage levels are the evidence's numbers; the
 * stripes of a left-out run's windows are the run log's windows of that run. The check
 * is against the evidence set itself (the numbers the fits use), row times mapped with
 * stagecal_plot_run_hours. */
static void plot_run_windows_are_the_evidence(void **state)
{
    (void)state;
    static const char *const months[2] = {"2025-01", "2025-03"}; /* 03: K7-018 left out */
    size_t left_out_seen = 0;
    for (int mo = 0; mo < 2; mo++) {
        stagecal_calibration cal;
        stagecal_error err;
        stagecal_plot_chart *c = NULL;
        demo_calibration(months[mo], &cal);
        assert_int_equal(stagecal_plot_run_calibration(&cal, STAGECAL_PLOT_ALL_RUNS, &c, &err),
                         STAGECAL_OK);
        assert_int_equal(c->n_panels, 5);
        stagecal_plot_run_data d = {cal.log,     &cal.res,     &cal.evidence,
                                    cal.flagged, cal.nflagged, STAGECAL_PLOT_ALL_RUNS,
                                    NULL};
        size_t want = 0;
        for (size_t k = 0; k < cal.evidence.n; k++)
            want += cal.evidence.ev[k].stages_ok;
        assert_true(want > 0);
        for (size_t p = 0; p < c->n_panels; p++) {
            /* every panel shades the same windows (the label is in the first panel only) */
            const stagecal_plot_series *span = NULL;
            for (size_t i = 0; i < c->panels[p].n_series && !span; i++)
                if (c->panels[p].series[i].kind == STAGECAL_PLOT_SPAN &&
                    c->panels[p].series[i].colour == 0)
                    span = &c->panels[p].series[i];
            assert_non_null(span);
            if (p == 0)
                assert_string_equal(span->label, "window with a stage count");
            assert_int_equal(span->n, want);
            size_t j = 0;
            for (size_t k = 0; k < cal.evidence.n; k++) {
                const stagecal_evidence *ev = &cal.evidence.ev[k];
                if (!ev->stages_ok)
                    continue;
                const stagecal_runlog_window *w = &cal.res.windows[ev->window];
                double a, b;
                assert_true(stagecal_plot_run_hours(&d, w->first, &a));
                assert_true(stagecal_plot_run_hours(&d, w->last, &b));
                assert_true(span->x[j] == a); /* exactly: the same rows, the same mapping */
                assert_true(span->y[j] == b);
                j++;
            }
        }
        /* the windows' stage levels: two points per window at the evidence's count */
        const stagecal_plot_series *lev = panel_series(c, 4, "window's stages");
        assert_non_null(lev);
        assert_int_equal(lev->n, 3 * want);
        for (size_t k = 0, j = 0; k < cal.evidence.n; k++)
            if (cal.evidence.ev[k].stages_ok) {
                assert_true(lev->y[3 * j] == cal.evidence.ev[k].stages);
                assert_true(lev->y[3 * j + 1] == cal.evidence.ev[k].stages);
                j++;
            }
        /* runs left out of the fit: their windows shaded in vermillion, named "(left out)" */
        const stagecal_plot_series *lo = panel_series(c, 0, "window of a left-out run");
        size_t nlo = 0;
        for (size_t w = 0; w < cal.res.nwindows; w++)
            for (size_t f = 0; f < cal.nflagged; f++)
                nlo += cal.flagged[f].left_out && cal.flagged[f].run == cal.res.windows[w].run;
        assert_int_equal(lo ? lo->n : 0, nlo);
        left_out_seen += nlo;
        for (size_t f = 0; f < cal.nflagged; f++) {
            char name[96];
            snprintf(name, sizeof name, "%s (left out)", cal.log->runs[cal.flagged[f].run].name);
            assert_non_null(panel_series(c, 0, name));
        }
        stagecal_plot_chart_free(c);
        stagecal_calibration_free(&cal);
    }
    assert_true(left_out_seen > 0); /* the demo's K7-018 (pot analyser drift) */
}

/* Censored readings and bounds, outliers and samples without a count are marked at the
 * rows the analysis says, and one run alone is drawn from its own start. */
static void plot_run_marks_follow_the_analysis(void **state)
{
    (void)state;
    stagecal_calibration cal;
    stagecal_error err;
    stagecal_plot_chart *c = NULL;
    demo_calibration("2025-01", &cal);
    size_t above = 0, nocount = 0, ok = 0;
    for (size_t i = 0; i < cal.log->n; i++) {
        above += cal.log->xd_cens && cal.log->xd_cens[i] == STAGECAL_CENSOR_ABOVE;
        ok += cal.res.status[i] == STAGECAL_STAGES_OK;
        nocount += cal.res.status[i] != STAGECAL_STAGES_OK &&
                   !(cal.res.status[i] == STAGECAL_RUNLOG_CENSORED && isfinite(cal.res.stages[i]));
    }
    assert_int_equal(stagecal_plot_run_calibration(&cal, STAGECAL_PLOT_ALL_RUNS, &c, &err),
                     STAGECAL_OK);
    const stagecal_plot_series *s = panel_series(c, 0, "censored: at or above");
    assert_int_equal(s ? s->n : 0, above);
    assert_true(above > 0); /* the demo's distillate analyser reads 1 at full scale */
    s = panel_series(c, 4, "sample's stages");
    assert_non_null(s);
    assert_int_equal(s->n, ok);
    s = panel_series(c, 4, "sample's stages \xc2\xb1 2 u");
    assert_non_null(s);
    assert_int_equal(s->n, ok);
    for (size_t k = 0, i = 0; i < cal.log->n; i++)
        if (cal.res.status[i] == STAGECAL_STAGES_OK) {
            assert_abs(s->y_hi[k] - s->y[k], 4 * cal.res.u_stages[i], 1e-12, "bar = 2u each side");
            k++;
        }
    s = panel_series(c, 4, "no stage count (at the foot)");
    assert_int_equal(s ? s->n : 0, nocount);
    stagecal_plot_chart_free(c);
    /* one run: its hours from 0, its name in the title */
    assert_int_equal(stagecal_plot_run_calibration(&cal, 1, &c, &err), STAGECAL_OK);
    const stagecal_plot_series *line = &c->panels[2].series[c->panels[2].n_series - 1];
    assert_true(line->kind == STAGECAL_PLOT_LINE);
    assert_true(line->x[0] == 0);
    assert_int_equal(line->n, cal.log->runs[1].n + 1);
    assert_non_null(strstr(c->title, cal.log->runs[1].name));
    stagecal_plot_chart_free(c);
    c = NULL;
    assert_int_equal(stagecal_plot_run_calibration(&cal, cal.log->nruns, &c, &err),
                     STAGECAL_EINVAL);
    stagecal_plot_chart_free(c);
    stagecal_calibration_free(&cal);
}
/* A chart of many runs keeps every panel: 8 demo months (48 runs) gave 48 run names, each a
 * series, and the chart's 64-series limit dropped the stage panel's series (the report of
 * `calibrate` on those months failed: panel 5, "nothing to draw"). Now the names are thinned
 * to every k-th run plus the runs left out (plot_run.c, RUN_NAMES), the stage panel holds
 * every counted sample, and a chart that would pass the limit is an error, never drawn short. */
static void plot_run_many_runs_keep_every_panel(void **state)
{
    (void)state;
    char path[8][512];
    const char *logs[8];
    for (int m = 0; m < 8; m++) {
        snprintf(path[m], sizeof path[m], STAGECAL_DATASETS "/demo/logs/2025-%02d.csv", m + 1);
        logs[m] = path[m];
    }
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "constant";
    par.method = STAGECAL_CAL_STAGE;
    stagecal_calibration cal;
    stagecal_error err;
    stagecal_plot_chart *c = NULL;
    int rc = stagecal_calibrate(DEMO_COLUMN, logs, 8, &par, &cal, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    assert_true(cal.log->nruns >= 40); /* the demo's K7 campaigns: six runs a month */
    rc = stagecal_plot_run_calibration(&cal, STAGECAL_PLOT_ALL_RUNS, &c, &err);
    if (rc)
        print_error("%s\n", err.text);
    assert_int_equal(rc, STAGECAL_OK);
    size_t ok = 0, names = 0, left = 0;
    for (size_t i = 0; i < cal.log->n; i++)
        ok += cal.res.status[i] == STAGECAL_STAGES_OK;
    const stagecal_plot_series *s = panel_series(c, 4, "sample's stages");
    assert_non_null(s);
    assert_int_equal(s->n, ok);
    for (size_t i = 0; i < c->panels[0].n_series; i++)
        if (c->panels[0].series[i].kind == STAGECAL_PLOT_TEXT) {
            names++;
            left += strstr(c->panels[0].series[i].label, "(left out)") != NULL;
        }
    assert_non_null(panel_series(c, 0, cal.log->runs[0].name)); /* the first run is named */
    assert_in_range(names, 16, 24);
    size_t nleft = 0; /* every run left out of the fit is named (there are few) */
    for (size_t k = 0; k < cal.nflagged; k++)
        nleft += cal.flagged[k].left_out;
    assert_true(nleft < 8); /* (the demo's months hold a few) */
    assert_int_equal(left, nleft);
    stagecal_plot_chart_free(c);
    stagecal_calibration_free(&cal);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(plot_run_windows_are_the_evidence),
        cmocka_unit_test(plot_run_marks_follow_the_analysis),
        cmocka_unit_test(plot_run_many_runs_keep_every_panel),
    };
    return cmocka_run_group_tests(tests, group_setup, NULL);
}
