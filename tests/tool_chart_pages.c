/*
 * tool_chart_pages.c — writes the charts of stagecal as two HTML pages for the headless
 * Chromium test (tests/chart_render.sh): every chart once with its legend and once
 * without, in the same order and size, so that the legend is exactly where the two
 * screenshots differ.
 *
 * Charts: the report's (the run chart of all runs, stages against R with bands and
 * envelope, residuals, the McCabe–Thiele stepping at R = 3, xD = 0.95) from a calibration
 * of the invented demo logs; the run chart of the left-out run K7-018; a trend chart and
 * a batch chart on invented numbers; the trend-over-time chart of `trend` (16 invented
 * fits, a repack, a forecast) and the predicted batch of `trajectory` (partly beyond the
 * fitted envelope); the self-starting EWMA/CUSUM chart of `history` (30
 * invented runs with a step loss); the McCabe–Thiele chart at 30 stages (zoomed inset of
 * the top section, pinch marked); the chart of `probe` (where to run the next tests) for
 * the demo calibration; and a known case for the
 * legend test: vermilion markers that fill three quarters of the plot box (top left,
 * bottom left, bottom right) and leave the top-right quarter empty, so a legend that
 * covers no data has exactly one corner to go to.
 *
 * usage: tool_chart_pages COLUMN.json OUTDIR LOG.csv...
 * writes OUTDIR/on.html, OUTDIR/off.html and OUTDIR/names.txt: one line a chart, "name
 * inside lx0 lx1 ly0 ly1 n bx0 bx1 by0 by1 ..." — whether the renderer put the legend
 * inside a plot box (1) or outside them (0), the legend's box and the n plot boxes in
 * fractions of the drawing (y upwards), from stagecal_plot_layout.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/batch.h"
#include "stagecal/calibrate.h"
#include "stagecal/chart.h"
#include "stagecal/design.h"
#include "stagecal/plot.h"
#include "stagecal/report.h"
#include "stagecal/trend.h"
#include "stagecal/vle.h"

#define MAXC 20
#define NK 60 /* markers in each filled quarter of the known case */

static int fail(const char *what, const stagecal_error *err)
{
    fprintf(stderr, "tool_chart_pages: %s: %s\n", what, err->text);
    return 1;
}

int main(int argc, char **argv)
{
    if (argc < 4) {
        fprintf(stderr, "usage: tool_chart_pages COLUMN.json OUTDIR LOG.csv...\n");
        return 2;
    }
    const char *column = argv[1], *outdir = argv[2];
    stagecal_error err;
    stagecal_calibration cal;
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "saturating"; /* fixed: the condition below states no vapour load, whatever
                                form AICc ranks first */
    if (stagecal_calibrate(column, (const char *const *)argv + 3, (size_t)(argc - 3), &par, &cal,
                           &err))
        return fail("calibrate", &err);
    double *buf = malloc((cal.evidence.n + 1) * 4 * sizeof *buf);
    stagecal_regress_data pts;
    if (!buf)
        return 1;
    stagecal_evidence_points(cal.evidence.ev, cal.evidence.n, buf, &pts);
    stagecal_report_doc *doc = NULL;
    if (stagecal_report_from_model(&cal.model, &pts, &doc, &err) ||
        stagecal_report_doc_add_condition(doc, &cal.model, NULL, 0.95, 3, NAN, &err))
        return fail("report", &err);

    stagecal_plot_chart charts[MAXC];
    const char *names[MAXC];
    stagecal_plot_chart *own[MAXC] = {0};
    size_t n = 0;
    static const char *const doc_names[] = {"fit", "residuals", "mccabe"};
    size_t height[MAXC] = {0};
    if (stagecal_plot_run_calibration(&cal, STAGECAL_PLOT_ALL_RUNS, &own[n], &err))
        return fail("run chart", &err);
    charts[n] = *own[n];
    height[n] = 880;
    names[n++] = "runs";
    for (size_t r = 0; r < cal.log->nruns; r++)
        if (strcmp(cal.log->runs[r].name, "K7-018") == 0) {
            if (stagecal_plot_run_calibration(&cal, r, &own[n], &err))
                return fail("run chart of K7-018", &err);
            charts[n] = *own[n];
            height[n] = 880;
            names[n++] = "run-K7-018";
        }
    for (size_t k = 0; k < 3 && stagecal_report_doc_chart(doc, k); k++) {
        charts[n] = *stagecal_report_doc_chart(doc, k);
        names[n++] = doc_names[k];
    }

    /* trend: twelve monthly calibrations losing 0.1 stage a month (invented), its line,
     * control limits, a forecast with band and the specification */
    double tt[12], ts[12], lt[2], ll[2], ft[6], fc[6], flo[6], fhi[6];
    int alarm[12] = {0};
    for (int i = 0; i < 12; i++) {
        tt[i] = 1735689600.0 + i * 30.4 * 86400; /* 2025-01-01 onwards */
        ts[i] = 9.0 - 0.1 * i + 0.15 * sin(1.7 * i);
    }
    alarm[11] = 1;
    lt[0] = tt[0], lt[1] = tt[11], ll[0] = 9.0, ll[1] = 7.9;
    for (int i = 0; i < 6; i++) {
        ft[i] = tt[11] + i * 30.4 * 86400;
        fc[i] = 7.9 - 0.1 * i;
        flo[i] = fc[i] - 0.1 - 0.08 * i;
        fhi[i] = fc[i] + 0.1 + 0.08 * i;
    }
    stagecal_plot_trend_data td = {tt,  ts, 12, alarm, lt,  ll, 2,   7.6,
                                   9.4, ft, fc, flo,   fhi, 6,  7.5, NULL};
    if (stagecal_plot_trend(&td, &own[n], &err))
        return fail("trend chart", &err);
    charts[n] = *own[n];
    names[n++] = "trend";

    /* batch: xD and xB of a 6 h batch with bands and a specification line (invented) */
    double bt[61], xd[61], xdl[61], xdh[61], xb[61], xbl[61], xbh[61];
    for (int i = 0; i < 61; i++) {
        double h = 0.1 * i;
        bt[i] = 3600 * h;
        xd[i] = 0.97 - 0.004 * h * h, xdl[i] = xd[i] - 0.01, xdh[i] = xd[i] + 0.01;
        xb[i] = 0.5 * exp(-0.2 * h), xbl[i] = xb[i] - 0.02, xbh[i] = xb[i] + 0.02;
    }
    stagecal_plot_batch_curve bc[2] = {{"xD", xd, xdl, xdh}, {"xB", xb, xbl, xbh}};
    stagecal_plot_batch_data bd = {bt, 61, bc, 2, "mole fraction of benzene [mol/mol]", 0.85, NULL};
    if (stagecal_plot_batch(&bd, &own[n], &err))
        return fail("batch chart", &err);
    charts[n] = *own[n];
    names[n++] = "batch";

    /* trend over time (`stagecal plot trend`): 16 monthly fits (invented) losing 0.12 stage
     * a month, a repack after the eighth, the forecast against a requirement of 7.5 stages */
    stagecal_trend_point tp[16];
    for (int i = 0; i < 16; i++)
        tp[i] = (stagecal_trend_point){
            1735689600.0 + i * 30.4 * 86400,
            (i < 8 ? 9.0 - 0.12 * i : 9.2 - 0.12 * (i - 8)) + 0.08 * sin(1.3 * i), 0.08};
    stagecal_trend_event ev = {1735689600.0 + 7.5 * 30.4 * 86400, "demo-bt-K-7",
                               STAGECAL_EVENT_REPACK, "bed repacked (invented)", 0};
    stagecal_trend_params tpar = stagecal_trend_default_params();
    tpar.required = 7.5;
    stagecal_trend_history th;
    memset(&th, 0, sizeof th);
    if (stagecal_trend_analyse(tp, 16, &ev, 1, "demo-bt-K-7", &tpar, &th, &err))
        return fail("trend analysis", &err);
    stagecal_plot_trend_history_data thd = {
        &th, &ev, 1, "demo-bt-K-7", "stages incl. pot at R = 3 [-]", NULL};
    if (stagecal_plot_trend_history(&thd, &own[n], &err))
        return fail("trend-over-time chart", &err);
    stagecal_trend_history_free(&th);
    charts[n] = *own[n];
    names[n++] = "trend-history";

    /* a predicted batch (`stagecal plot trajectory`): 25 kmol at xB 0.5 (alpha 2.4),
     * distillate held at 0.95 by raising R up to 8 — beyond the fitted envelope of the
     * calibration, so the late rows are an extrapolation — then a slop cut to xB 0.1 */
    stagecal_vle *bvle = stagecal_vle_alloc_alpha(2.4, &err);
    stagecal_batch_model_law law = {&cal.model, NULL, NAN};
    stagecal_batch_column bcol = {bvle, stagecal_batch_model_stages, &law, NULL, NULL};
    stagecal_batch_problem bpb;
    stagecal_batch_result bres;
    stagecal_batch_problem_init(&bpb);
    stagecal_batch_result_init(&bres);
    bpb.w0_mol = 25000, bpb.xb0 = 0.5, bpb.v_mol_s = 3600.0 / 3600;
    bpb.policy.kind = STAGECAL_BATCH_CONSTANT_DISTILLATE;
    bpb.policy.xd_set = 0.95, bpb.policy.reflux_max = 8;
    bpb.n_cuts = 2;
    bpb.cuts[0] = (stagecal_batch_cut_spec){"product", STAGECAL_BATCH_UNTIL_REFLUX, 8};
    bpb.cuts[1] = (stagecal_batch_cut_spec){"slop", STAGECAL_BATCH_UNTIL_POT_X, 0.1};
    if (!bvle || stagecal_batch_run(&bpb, &bcol, NULL, &bres, &err))
        return fail("batch prediction", &err);
    stagecal_plot_trajectory_data btd = {&bres, NULL, NULL};
    if (stagecal_plot_trajectory(&btd, &own[n], &err))
        return fail("trajectory chart", &err);
    stagecal_batch_result_free(&bres);
    stagecal_vle_free(bvle);
    charts[n] = *own[n];
    height[n] = 880;
    names[n++] = "trajectory";

    /* history: the self-starting EWMA and CUSUM charts of 30 weekly runs that lose 0.6
     * stage after the 15th (invented), as `stagecal plot history` draws them */
    stagecal_trend_point hp[30];
    stagecal_chart_point hc[30];
    stagecal_chart_params hpar = stagecal_chart_default_params();
    for (int i = 0; i < 30; i++)
        hp[i] = (stagecal_trend_point){1735689600.0 + 7 * 86400.0 * i,
                                       8.6 + ((i * 7) % 5 - 2) * 0.05 - (i >= 15 ? 0.6 : 0), 0.1};
    stagecal_plot_selfstart_data hd = {hp, hc, 30, hpar, NULL, NULL};
    if (stagecal_chart_selfstart(hp, 30, &hpar, hc, NULL, &err) ||
        stagecal_plot_selfstart(&hd, &own[n], &err))
        return fail("history chart", &err);
    charts[n] = *own[n];
    height[n] = 880;
    names[n++] = "history";

    /* McCabe-Thiele at 30 stages (alpha 2, xD 0.995, R 6): the top section zoomed in an
     * inset, the pinch marked, as `stagecal plot mccabe ... --stages 30` draws it */
    stagecal_vle *vle = stagecal_vle_alloc_alpha(2.0, &err);
    if (!vle || stagecal_plot_mccabe_condition(vle, 0.995, NAN, 6, 30, 1, &own[n], &err))
        return fail("McCabe-Thiele chart at 30 stages", &err);
    stagecal_vle_free(vle);
    charts[n] = *own[n];
    names[n++] = "mccabe-30";

    /* probe: where to run the next tests for this calibration at R = 2, 3 and 8 (8 lies
     * beyond the fitted envelope: dashed, lighter bands), as `stagecal probe --chart-out` */
    stagecal_design_problem dpb;
    stagecal_design_point dat[3] = {{2, NAN, 1}, {3, NAN, 1}, {8, NAN, 1}};
    stagecal_design_at dout[3];
    stagecal_design_result dres;
    stagecal_design_params dpar = stagecal_design_default_params();
    stagecal_design_curves *dc = malloc(sizeof *dc);
    if (!dc || stagecal_design_from_model(&cal.model, &dpb, &err) ||
        stagecal_design_propose(&dpb, dat, 3, &dpar, cal.model.r_min, cal.model.r_max, NAN, NAN,
                                &dres, dout, &err) ||
        stagecal_design_chart_curves(&cal.model, &dpb, &dres, dout, 3, dc, &err) ||
        stagecal_plot_design(dc, &own[n], &err))
        return fail("probe chart", &err);
    free(dc);
    charts[n] = *own[n];
    names[n++] = "probe";

    /* the known case: three quarters filled, the top-right quarter empty */
    static double kx[3 * NK], ky[3 * NK];
    for (int q = 0; q < 3; q++) {
        double x0 = q == 2 ? 5.5 : 0.5, y0 = q == 0 ? 5.5 : 0.5;
        for (int i = 0; i < NK; i++) {
            kx[q * NK + i] = x0 + 4.0 * (double)(i % 6) / 5.0;
            ky[q * NK + i] = y0 + 4.0 * (double)(i / 6) / 9.0;
        }
    }
    static const double lx[2] = {0, 10}, ly[2] = {0.2, 0.2};
    static stagecal_plot_series ks[2];
    ks[0] = (stagecal_plot_series){
        STAGECAL_PLOT_POINTS, "data (three quarters)", kx, ky, NULL, 3 * NK, 1, 0, 0, 0};
    ks[1] = (stagecal_plot_series){STAGECAL_PLOT_LINE, "base line", lx, ly, NULL, 2, 0, 1, 0, 0};
    memset(&charts[n], 0, sizeof charts[n]);
    charts[n].title = "Known case: the top-right quarter is empty";
    charts[n].x_label = "x [-]";
    charts[n].y_label = "y [-]";
    charts[n].x_min = 0, charts[n].x_max = 10, charts[n].y_min = 0, charts[n].y_max = 10;
    charts[n].legend = 1;
    charts[n].legend_pos = 0; /* tried first: a corner with data, so placement must move it */
    charts[n].series = ks;
    charts[n].n_series = 2;
    names[n++] = "known";

    /* the pages */
    stagecal_report_figure figs[MAXC];
    stagecal_plot_chart off[MAXC];
    for (size_t k = 0; k < n; k++) {
        charts[k].legend = 1;
        off[k] = charts[k];
        off[k].legend = 0;
    }
    stagecal_report page = {0};
    page.title = "stagecal charts (test page)";
    page.figures = figs;
    page.n_figures = n;
    page.figure_height = height;
    stagecal_report_params rp = stagecal_report_default_params();
    char path[1024];
    for (int pass = 0; pass < 2; pass++) {
        for (size_t k = 0; k < n; k++)
            figs[k] = (stagecal_report_figure){pass == 0 ? &charts[k] : &off[k], names[k]};
        snprintf(path, sizeof path, "%s/%s.html", outdir, pass == 0 ? "on" : "off");
        if (stagecal_report_write(&page, &rp, path, &err))
            return fail(path, &err);
    }
    snprintf(path, sizeof path, "%s/names.txt", outdir);
    FILE *f = fopen(path, "w");
    if (!f)
        return 1;
    for (size_t k = 0; k < n; k++) {
        /* where the renderer put the legend, drawn at the page's size */
        stagecal_plot_layout lay;
        stagecal_plot_params pp = rp.plot;
        char *svg = NULL;
        if (height[k])
            pp.height = height[k];
        pp.layout = &lay;
        if (stagecal_plot_svg(&charts[k], &pp, &svg, NULL, &err))
            return fail(names[k], &err);
        free(svg);
        fprintf(f, "%s %d %.5f %.5f %.5f %.5f %zu", names[k], lay.legend_inside, lay.legend.x0,
                lay.legend.x1, lay.legend.y0, lay.legend.y1, lay.n_panels);
        for (size_t p = 0; p < lay.n_panels; p++)
            fprintf(f, " %.5f %.5f %.5f %.5f", lay.box[p].x0, lay.box[p].x1, lay.box[p].y0,
                    lay.box[p].y1);
        fprintf(f, "\n");
    }
    fclose(f);
    for (size_t k = 0; k < n; k++)
        stagecal_plot_chart_free(own[k]);
    stagecal_report_doc_free(doc);
    free(buf);
    stagecal_calibration_free(&cal);
    return 0;
}
