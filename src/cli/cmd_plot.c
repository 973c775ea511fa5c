/*
 * cmd_plot.c — `stagecal plot`: charts as PNG, SVG or PDF (by the output's extension).
 *   plot mccabe      the McCabe–Thiele stage diagram of a condition (xD, R, stages) or a
 *                    sample (xD, xB, R → stages by inversion)
 *   plot model       stages against R from a model file with bands, envelope and points;
 *                    --residuals draws the residuals against fitted stages instead
 *   plot run         the raw runs of run logs against time: xD, xB, W, R and the stage
 *                    counts, windows shaded (the calibration chain's analysis and evidence)
 *   plot trend       `stagecal trend` with its chart (the options are trend's)
 *   plot history     `stagecal history` with its self-starting EWMA/CUSUM chart
 *   plot trajectory  `stagecal predict` with its chart (the options are predict's)
 * The charts are built and drawn by the plot and report modules; trend and trajectory run
 * their commands with ctx->chart set, and those commands hand their results to the chart
 * builders (cli_chart_write).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/calibrate.h"
#include "stagecal/model.h"
#include "stagecal/plot.h"
#include "stagecal/regress.h"
#include "stagecal/report.h"

static const struct cli_usage usage = {
    "usage: stagecal plot mccabe (--alpha A | --kvalue K | --column FILE) --xd XD\n"
    "                     --reflux R|inf (--stages N | --xb XB) [--murphree E]\n"
    "                     --output FILE [--chart-width W] [--chart-height H] [--json] [--quiet]\n"
    "       stagecal plot model MODEL.json [--points POINTS.csv] [--residuals]\n"
    "                     --output FILE [--chart-width W] [--chart-height H] [--json] [--quiet]\n"
    "       stagecal plot run LOG.csv... --column FILE [--run NAME] [--keep-flagged]\n"
    "                     [--warm-up TIME] [--min-window TIME] [--csv-dialect KIND]\n"
    "                     [--murphree E] --output FILE [--chart-width W] [--chart-height H]\n"
    "       stagecal plot trend <the options of 'stagecal trend'> --output FILE\n"
    "       stagecal plot history <the options of 'stagecal history'> --output FILE\n"
    "       stagecal plot trajectory <the options of 'stagecal predict'> --output FILE\n",
    "Draws a chart; the format follows the extension of FILE: .png, .svg or .pdf (SVG\n"
    "labels are text).\n"
    "\n"
    "mccabe: the McCabe-Thiele stage diagram: equilibrium curve, pseudo-equilibrium\n"
    "curve when E < 1, operating line, diagonal, the steps, the pinch. Give --stages\n"
    "for a condition, or --xb for a sample (stages from the inversion).\n"
    "model: stages against R from a model file, with confidence and prediction bands\n"
    "and the fitted envelope (--points, --residuals).\n"
    "run: the runs of the logs against time, in panels: xD, xB, W, R and the stage\n"
    "counts; the quasi-steady windows shaded, the samples' counts with bars, the\n"
    "windows' counts (what the fits use), censored readings, outliers and runs left\n"
    "out of the fit marked. The analysis is calibrate's, with the same settings.\n"
    "trend, history, trajectory: run 'stagecal trend', 'stagecal history' or 'stagecal\n"
    "predict' with the options given (the chart kind first) and draw their result: the\n"
    "fits over time with trend lines, alarms and forecast; the runs over time with the\n"
    "self-starting EWMA and CUSUM charts; the batch's compositions and cuts over time.\n"
    "Parts outside the fitted envelope are dashed and lighter.\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal,\n"
    "73 output cannot be written.\n"};

/* Options that belong to some chart kinds only: name and the kinds (bits of KIND_*). */
enum { KIND_MCCABE = 1, KIND_MODEL = 2, KIND_RUN = 4 };
static const struct {
    const char *name;
    unsigned kinds;
} kind_options[] = {
    {"alpha", KIND_MCCABE},
    {"kvalue", KIND_MCCABE},
    {"column", KIND_MCCABE | KIND_RUN},
    {"xd", KIND_MCCABE},
    {"reflux", KIND_MCCABE},
    {"stages", KIND_MCCABE},
    {"xb", KIND_MCCABE},
    {"murphree", KIND_MCCABE | KIND_RUN},
    {"points", KIND_MODEL},
    {"residuals", KIND_MODEL},
    {"run", KIND_RUN},
    {"keep-flagged", KIND_RUN},
    {"warm-up", KIND_RUN},
    {"min-window", KIND_RUN},
    {"csv-dialect", KIND_RUN},
};

static const char *kind_name(unsigned k)
{
    return k == KIND_MCCABE ? "mccabe" : k == KIND_MODEL ? "model" : "run";
}

static int print_result(const stagecal_plot_chart *draw, const char *kind, const char *output,
                        int json)
{
    if (!json) {
        printf("chart written to %s\n", output);
        return CLI_EXIT_OK;
    }
    json_t *names = json_array();
    for (size_t i = 0; i < draw->n_series; i++)
        json_array_append_new(names,
                              json_string(draw->series[i].label ? draw->series[i].label : ""));
    json_t *o = json_pack("{s:s, s:i, s:s, s:s, s:s, s:s, s:o, s:s}", "format",
                          "stagecal-plot-result", "version", 1, "status", "ok", "kind", kind,
                          "output", output, "title", draw->title ? draw->title : "", "series",
                          names, "caution", stagecal_caution_text());
    return o ? cli_json_print(o) : CLI_EXIT_SOFTWARE;
}

/* plot model: the model file (and points) through the report's chart builder. */
static int model_chart(const char *model_path, const char *points_path, stagecal_model *m,
                       stagecal_regress_data *pts, stagecal_report_doc **doc, stagecal_error *err)
{
    int rc = stagecal_model_load(model_path, m, err);
    if (rc == STAGECAL_OK && points_path)
        rc = stagecal_regress_data_read(points_path, pts, err);
    if (rc == STAGECAL_OK &&
        (rc = stagecal_report_from_model(m, points_path ? pts : NULL, doc, err)) &&
        err->code == STAGECAL_EINVAL)
        err->code = STAGECAL_EDATA; /* built from the files alone: their content */
    return rc;
}

/* plot run: the calibration chain's analysis and evidence (the fits themselves may fail:
 * the chart is what shows why), the run chosen by name. */
static int run_chart(const char *const *logs, size_t nlogs, const char *column,
                     const char *run_name, stagecal_calibrate_params *par,
                     stagecal_calibration *cal, stagecal_plot_chart **chart, stagecal_error *err)
{
    par->form = "constant"; /* the chart needs the windows, not a particular form */
    par->method = STAGECAL_CAL_STAGE;
    int rc = stagecal_calibrate(column, logs, nlogs, par, cal, err);
    if (rc != STAGECAL_OK && (!cal->log || cal->res.n != cal->log->n || cal->log->n == 0))
        return rc; /* not even the analysis: nothing to draw */
    if (rc != STAGECAL_OK)
        cli_warn("the calibration chain stopped: %s (the chart shows the runs and windows)",
                 err->text);
    size_t run = STAGECAL_PLOT_ALL_RUNS;
    if (run_name) {
        for (size_t r = 0; r < cal->log->nruns && run == STAGECAL_PLOT_ALL_RUNS; r++)
            if (strcmp(cal->log->runs[r].name, run_name) == 0)
                run = r;
        if (run == STAGECAL_PLOT_ALL_RUNS) {
            char names[256] = "";
            for (size_t r = 0; r < cal->log->nruns && strlen(names) < 200; r++)
                snprintf(names + strlen(names), sizeof names - strlen(names), "%s%s", r ? ", " : "",
                         cal->log->runs[r].name);
            err->code = STAGECAL_EDATA;
            snprintf(err->text, sizeof err->text,
                     "option '--run': the logs have no run '%s' (they have: %s)", run_name, names);
            return STAGECAL_EDATA;
        }
    }
    return stagecal_plot_run_calibration(cal, run, chart, err);
}

int cli_chart_write(cli_ctx *ctx, stagecal_plot_chart *chart, int rc, stagecal_error *err)
{
    if (rc == STAGECAL_OK) {
        stagecal_plot_params par = stagecal_plot_default_params();
        par.width = ctx->chart_width;
        par.height = ctx->chart_height;
        rc = stagecal_plot_write(chart, ctx->chart, &par, err);
    }
    stagecal_plot_chart_free(chart);
    if (rc != STAGECAL_OK)
        return cli_fail(err);
    if (!ctx->json)
        printf("chart written to %s\n", ctx->chart);
    return CLI_EXIT_OK;
}

/* plot trend | trajectory ARGS: the command with its own options, less the chart's
 * (--output/-o/--out FILE, --chart-width, --chart-height), which go into ctx. */
static int forward(int argc, char **argv, cli_ctx *ctx)
{
    const int trend = strcmp(argv[1], "trend") == 0, history = strcmp(argv[1], "history") == 0;
    const char *out = NULL;
    long width = 800, height = trend ? 560 : 720;
    char **av = calloc((size_t)argc + 1, sizeof *av);
    int ac = 0, rc;
    if (!av) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    av[ac++] = argv[1];
    for (int i = 2; i < argc; i++) {
        const char *a = argv[i];
        static const char *const with_value[] = {
            "--output", "-o", "--out", "--chart-width", "--width", "--chart-height", "--height"};
        int k = -1;
        size_t eq = 0;
        for (size_t j = 0; j < sizeof with_value / sizeof with_value[0] && k < 0; j++) {
            size_t n = strlen(with_value[j]);
            if (strcmp(a, with_value[j]) == 0)
                k = (int)j;
            else if (strncmp(a, with_value[j], n) == 0 && a[n] == '=' && n > 2)
                k = (int)j, eq = n + 1;
        }
        if (k < 0) {
            av[ac++] = argv[i];
            continue;
        }
        const char *v = eq ? a + eq : (i + 1 < argc ? argv[++i] : NULL);
        if (!v) {
            free(av);
            return cli_usage_error("option '%s' needs a value", a);
        }
        if (k <= 2) {
            out = v;
        } else if ((rc = cli_parse_long(with_value[k] + 2, v, 16, 20000,
                                        k <= 4 ? &width : &height))) {
            free(av);
            return rc;
        }
    }
    av[ac] = NULL;
    int help = 0;
    for (int i = 1; i < ac; i++)
        help |= strcmp(av[i], "--help") == 0 || strcmp(av[i], "-h") == 0;
    if (!out && !help) {
        free(av);
        return cli_usage_error("option '--output' is required: the chart file (.png, .svg or "
                               ".pdf)");
    }
    if (out) {
        stagecal_plot_format fmt;
        stagecal_error err;
        stagecal_error_clear(&err);
        if (stagecal_plot_format_from_path(out, &fmt, &err) != STAGECAL_OK) {
            free(av);
            return cli_usage_error("option '--output': %s", err.text);
        }
    }
    ctx->chart = out;
    ctx->chart_width = (size_t)width;
    ctx->chart_height = (size_t)height;
    rc = trend     ? cmd_trend(ac, av, ctx)
         : history ? cmd_history(ac, av, ctx)
                   : cmd_predict(ac, av, ctx);
    free(av);
    if (rc == CLI_EXIT_OK && !ctx->json && !ctx->data_on_stdout)
        cli_print_caution(); /* trend and predict print it as commands of their own */
    return rc;
}

/* The options of plot mccabe, model and run. */
struct plot_request {
    double xd, reflux, nstages, xb, murphree;
    const char *output, *points_path, *run_name;
    long width, height;
    int resid, dialect;
    stagecal_calibrate_params cpar;
};

/* The chart kind, argv[*first] (KIND_* in *k; *first moves past it), with no option given
 * that belongs to another kind. An exit code. */
static int pick_kind(int argc, char **argv, int *first, const struct cli_option *opts, int resid,
                     const char **kind, unsigned *k)
{
    /* The chart kind is the first argument; options may come before or after it. */
    if (*first >= argc)
        return cli_usage_error("a chart kind is required: 'mccabe', 'model', 'run', 'trend', "
                               "'history' or 'trajectory' (see 'stagecal plot --help')");
    *kind = argv[(*first)++];
    *k = strcmp(*kind, "mccabe") == 0  ? KIND_MCCABE
         : strcmp(*kind, "model") == 0 ? KIND_MODEL
         : strcmp(*kind, "run") == 0   ? KIND_RUN
                                       : 0;
    if (strcmp(*kind, "trend") == 0 || strcmp(*kind, "trajectory") == 0 ||
        strcmp(*kind, "history") == 0)
        return cli_usage_error("'plot %s' takes the chart kind first: 'stagecal plot %s "
                               "<options>'",
                               *kind, *kind);
    if (!*k)
        return cli_usage_error("unknown chart kind '%s' (expected 'mccabe', 'model', 'run', "
                               "'trend', 'history' or 'trajectory')",
                               *kind);
    for (size_t i = 0; i < sizeof kind_options / sizeof kind_options[0]; i++) {
        if (!(kind_options[i].kinds & *k) &&
            (cli_given(opts, kind_options[i].name) ||
             (strcmp(kind_options[i].name, "residuals") == 0 && resid))) {
            char owners[64] = "";
            for (unsigned b = 1; b <= KIND_RUN; b <<= 1)
                if (kind_options[i].kinds & b)
                    snprintf(owners + strlen(owners), sizeof owners - strlen(owners), "%s'plot %s'",
                             owners[0] ? " and " : "", kind_name(b));
            return cli_usage_error("option '--%s' belongs to %s", kind_options[i].name, owners);
        }
    }
    return 0;
}

/* --output: given, a chart format by its extension, and none of the inputs (the points, the
 * column file, the arguments args[0..nargs)). An exit code. */
static int check_output(const struct plot_request *q, const char *column_path, char **args,
                        int nargs)
{
    if (!q->output)
        return cli_usage_error("option '--output' is required (see 'stagecal plot --help')");
    stagecal_plot_format fmt;
    stagecal_error err;
    stagecal_error_clear(&err);
    if (stagecal_plot_format_from_path(q->output, &fmt, &err) != STAGECAL_OK)
        return cli_usage_error("option '--output': %s", err.text);
    const char **inputs = calloc((size_t)nargs + 3, sizeof *inputs);
    size_t ni = 0;
    if (!inputs) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    inputs[ni++] = q->points_path;
    inputs[ni++] = column_path;
    for (int i = 0; i < nargs; i++)
        inputs[ni++] = args[i];
    int rc = cli_check_output("output", q->output, inputs, ni);
    free(inputs);
    return rc;
}

/* What a chart is built from (by kind: the run logs' calibration, the McCabe-Thiele chart,
 * the model file, its points and the report's charts), freed together. */
struct chart_parts {
    stagecal_plot_chart *chart;
    stagecal_report_doc *doc;
    stagecal_model m;
    stagecal_regress_data pts;
    stagecal_calibration cal;
};

static void chart_parts_free(struct chart_parts *cp)
{
    stagecal_plot_chart_free(cp->chart);
    stagecal_report_doc_free(cp->doc);
    stagecal_regress_data_free(&cp->pts);
    stagecal_model_free(&cp->m);
    stagecal_calibration_free(&cp->cal);
}

/* The chart of kind k from the arguments args[0..nargs): a usage error comes back as its
 * exit code; else 0 with the builder's status in *status (and err). */
static int build_chart(unsigned k, struct plot_request *q, char **args, int nargs, cli_system *sys,
                       struct chart_parts *cp, int *status, stagecal_error *err)
{
    int rc;
    if (k == KIND_RUN) {
        if (nargs < 1)
            return cli_usage_error("at least one run log is required (see 'stagecal plot "
                                   "--help')");
        if (!sys->column_path)
            return cli_usage_error("option '--column' is required for 'plot run'");
        q->cpar.murphree = q->murphree;
        q->cpar.read.csv_separator = cli_csv_separator(q->dialect);
        *status = run_chart((const char *const *)args, (size_t)nargs, sys->column_path, q->run_name,
                            &q->cpar, &cp->cal, &cp->chart, err);
    } else if (k == KIND_MCCABE) {
        if (nargs > 0)
            return cli_usage_error("unexpected argument '%s' (plot mccabe takes options only)",
                                   args[0]);
        if ((rc = cli_require("xd", q->xd)) || (rc = cli_require("reflux", q->reflux)))
            return rc;
        if (isnan(q->nstages) == isnan(q->xb))
            return cli_usage_error("give exactly one of '--stages' (a condition) and '--xb' (a "
                                   "sample)");
        if (!isnan(q->xb) && !(q->xb > 0 && q->xb < q->xd))
            return cli_usage_error("option '--xb': %g is outside (0, xd) (expected the pot "
                                   "mole fraction)",
                                   q->xb);
        if ((rc = cli_system_open(sys)))
            return rc;
        *status = stagecal_plot_mccabe_condition(sys->vle, q->xd, q->xb, q->reflux, q->nstages,
                                                 q->murphree, &cp->chart, err);
    } else {
        if (nargs < 1)
            return cli_usage_error("a model file is required (see 'stagecal plot --help')");
        if (nargs > 1)
            return cli_usage_error("unexpected argument '%s' (plot model takes one model file)",
                                   args[1]);
        if (q->resid && !q->points_path)
            return cli_usage_error("option '--residuals' needs '--points'");
        *status = model_chart(args[0], q->points_path, &cp->m, &cp->pts, &cp->doc, err);
    }
    return 0;
}

int cmd_plot(int argc, char **argv, cli_ctx *ctx)
{
    if (argc >= 2 && (strcmp(argv[1], "trend") == 0 || strcmp(argv[1], "trajectory") == 0 ||
                      strcmp(argv[1], "history") == 0))
        return forward(argc, argv, ctx);
    cli_system *sys = &ctx->sys;
    struct plot_request q = {.xd = NAN, .reflux = NAN, .nstages = NAN, .xb = NAN, .murphree = 1.0};
    int first, rc, status = STAGECAL_OK;
    q.cpar = stagecal_calibrate_default_params();
    const struct cli_option opts[] = {
        OPT_GROUP("mccabe:"),
        OPT_SYSTEM(sys),
        OPT_XD(&q.xd),
        OPT_REFLUX(&q.reflux, "reflux ratio L/D >= 0, or 'inf' for total reflux"),
        OPT_STAGES(&q.nstages, "equilibrium stages including the pot, N >= 1"),
        OPT_XB(&q.xb),
        OPT_MURPHREE(&q.murphree),
        OPT_GROUP("model:"),
        OPT_POINTS(&q.points_path, "points (R,stages[,F,sigma]) drawn with the fit"),
        OPT_FLAG(0, "residuals", &q.resid,
                 "residuals of the points against fitted stages (needs --points)"),
        OPT_GROUP("run (and --column, --murphree above):"),
        OPT_STRING(0, "run", &q.run_name, "NAME", "draw this run only (default: every run)"),
        OPT_KEEP_FLAGGED(&q.cpar.keep_flagged),
        OPT_WARM_UP(&q.cpar.analysis.warmup_s),
        OPT_MIN_WINDOW(&q.cpar.analysis.min_window_s),
        OPT_CSV_DIALECT(&q.dialect),
        OPT_GROUP("every kind:"),
        OPT_OUTPUT(&q.output, "the chart file (.png, .svg or .pdf), required"),
        OPT_LONG("chart-width", &q.width, "W",
                 "chart width in pixels (PNG) or points (SVG, PDF), default 800\n(run: 900)", 16,
                 20000),
        OPT_LONG("chart-height", &q.height, "H", "chart height, default 560 (run: 1100)", 16,
                 20000),
        OPT_ALIAS("width", "chart-width"),
        OPT_ALIAS("height", "chart-height"),
        OPT_END_COMMON(ctx),
    };
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    int json = ctx->json;
    const char *kind = NULL;
    unsigned k = 0;
    if ((rc = pick_kind(argc, argv, &first, opts, q.resid, &kind, &k)))
        return rc;
    if (q.width == 0)
        q.width = k == KIND_RUN ? 900 : 800;
    if (q.height == 0)
        q.height = k == KIND_RUN ? 1100 : 560;
    if ((rc = check_output(&q, sys->column_path, argv + first, argc - first)))
        return rc;

    struct chart_parts cp;
    memset(&cp, 0, sizeof cp);
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_model_init(&cp.m);
    if ((rc = build_chart(k, &q, argv + first, argc - first, sys, &cp, &status, &err)))
        return rc;
    rc = status;
    const stagecal_plot_chart *draw =
        k != KIND_MODEL ? cp.chart : stagecal_report_doc_chart(cp.doc, q.resid);
    if (rc == STAGECAL_OK) {
        stagecal_plot_params par = stagecal_plot_default_params();
        par.width = (size_t)q.width;
        par.height = (size_t)q.height;
        rc = stagecal_plot_write(draw, q.output, &par, &err);
    }
    if (rc != STAGECAL_OK) {
        int code = cli_fail(&err);
        chart_parts_free(&cp);
        return code;
    }
    rc = print_result(draw, kind, q.output, json);
    if (!json) /* every chart: its numbers (stages, envelope, pinch) feed a decision too */
        cli_print_caution();
    chart_parts_free(&cp);
    return rc;
}
