/*
 * cmd_plot.c — `stagecal plot`: charts as PNG, SVG or PDF (by the output's extension).
 *   plot mccabe  the McCabe–Thiele stage diagram of a condition (xD, R, stages) or a
 *                sample (xD, xB, R → stages by inversion)
 *   plot model   stages against R from a model file with bands, envelope and points;
 *                --residuals draws the residuals against fitted stages instead
 * The charts are built and drawn by the plot and report modules.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/model.h"
#include "stagecal/plot.h"
#include "stagecal/regress.h"
#include "stagecal/report.h"

static const struct cli_usage usage = {
    "usage: stagecal plot mccabe (--alpha A | --kvalue K | --column FILE) --xd XD\n"
    "                     --reflux R|inf (--stages N | --xb XB) [--murphree E]\n"
    "                     --output FILE [--chart-width W] [--chart-height H] [--json] [--quiet]\n"
    "       stagecal plot model MODEL.json [--points POINTS.csv] [--residuals]\n"
    "                     --output FILE [--chart-width W] [--chart-height H] [--json] [--quiet]\n",
    "Draws a chart; the format follows the extension of FILE: .png, .svg or .pdf.\n"
    "\n"
    "mccabe: the McCabe-Thiele stage diagram: equilibrium curve, pseudo-equilibrium\n"
    "curve when E < 1, operating line, diagonal, the steps, the pinch. Give --stages\n"
    "for a condition, or --xb for a sample (stages from the inversion).\n"
    "model: stages against R from a model file, with confidence and prediction bands\n"
    "and the fitted envelope (--points, --residuals).\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal,\n"
    "73 output cannot be written.\n"};

static const char *const mccabe_only[] = {"alpha",  "kvalue", "column",   "xd", "reflux",
                                          "stages", "xb",     "murphree", NULL};

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
    json_t *o = json_pack("{s:s, s:i, s:s, s:s, s:s, s:s, s:o}", "format", "stagecal-plot-result",
                          "version", 1, "status", "ok", "kind", kind, "output", output, "title",
                          draw->title ? draw->title : "", "series", names);
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

int cmd_plot(int argc, char **argv, cli_ctx *ctx)
{
    cli_system *sys = &ctx->sys;
    double xd = NAN, reflux = NAN, nstages = NAN, xb = NAN, murphree = 1.0;
    const char *output = NULL, *points_path = NULL;
    long width = 800, height = 560;
    int resid = 0, first, rc;
    const struct cli_option opts[] = {
        OPT_GROUP("mccabe:"),
        OPT_SYSTEM(sys),
        OPT_XD(&xd),
        OPT_REFLUX(&reflux, "reflux ratio L/D >= 0, or 'inf' for total reflux"),
        OPT_STAGES(&nstages, "equilibrium stages including the pot, N >= 1"),
        OPT_XB(&xb),
        OPT_MURPHREE(&murphree),
        OPT_GROUP("model:"),
        OPT_POINTS(&points_path, "points (R,stages[,F,sigma]) drawn with the fit"),
        OPT_FLAG(0, "residuals", &resid,
                 "residuals of the points against fitted stages (needs --points)"),
        OPT_GROUP("both:"),
        OPT_OUTPUT(&output, "the chart file (.png, .svg or .pdf), required"),
        OPT_LONG("chart-width", &width, "W",
                 "chart width in pixels (PNG) or points (SVG, PDF), default 800", 16, 20000),
        OPT_LONG("chart-height", &height, "H", "chart height, default 560", 16, 20000),
        OPT_ALIAS("width", "chart-width"),
        OPT_ALIAS("height", "chart-height"),
        OPT_END_COMMON(ctx),
    };
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    int json = ctx->json;
    const char *mccabe_opt = NULL, *model_opt = NULL; /* options of one chart kind only */
    for (int k = 0; mccabe_only[k] && !mccabe_opt; k++)
        if (cli_given(opts, mccabe_only[k]))
            mccabe_opt = mccabe_only[k];
    if (cli_given(opts, "points") || resid)
        model_opt = cli_given(opts, "points") ? "points" : "residuals";
    /* The chart kind is the first argument; options may come before or after it. */
    if (first >= argc)
        return cli_usage_error("a chart kind is required: 'mccabe' or 'model' (see 'stagecal "
                               "plot --help')");
    const char *kind = argv[first++];
    int is_mccabe = strcmp(kind, "mccabe") == 0, is_model = strcmp(kind, "model") == 0;
    if (!is_mccabe && !is_model)
        return cli_usage_error("unknown chart kind '%s' (expected 'mccabe' or 'model')", kind);
    if (is_model && mccabe_opt)
        return cli_usage_error("option '--%s' belongs to 'plot mccabe' (plot model takes its "
                               "equilibrium and conditions from the model file)",
                               mccabe_opt);
    if (is_mccabe && model_opt)
        return cli_usage_error("option '--%s' belongs to 'plot model'", model_opt);
    if (!output)
        return cli_usage_error("option '--output' is required (see 'stagecal plot --help')");
    stagecal_plot_format fmt;
    stagecal_error err;
    stagecal_error_clear(&err);
    if (stagecal_plot_format_from_path(output, &fmt, &err) != STAGECAL_OK)
        return cli_usage_error("option '--output': %s", err.text);
    const char *inputs[3] = {points_path, first < argc ? argv[first] : NULL, sys->column_path};
    if ((rc = cli_check_output("output", output, inputs, 3)))
        return rc;

    stagecal_plot_chart *chart = NULL;
    stagecal_report_doc *doc = NULL;
    stagecal_model m;
    stagecal_regress_data pts;
    memset(&pts, 0, sizeof pts);
    stagecal_model_init(&m);
    if (is_mccabe) {
        if (first < argc)
            return cli_usage_error("unexpected argument '%s' (plot mccabe takes options only)",
                                   argv[first]);
        if ((rc = cli_require("xd", xd)) || (rc = cli_require("reflux", reflux)))
            return rc;
        if (isnan(nstages) == isnan(xb))
            return cli_usage_error("give exactly one of '--stages' (a condition) and '--xb' (a "
                                   "sample)");
        if (!isnan(xb) && !(xb > 0 && xb < xd))
            return cli_usage_error("option '--xb': %g is outside (0, xd) (expected the pot "
                                   "mole fraction)",
                                   xb);
        if ((rc = cli_system_open(sys)))
            return rc;
        rc = stagecal_plot_mccabe_condition(sys->vle, xd, xb, reflux, nstages, murphree, &chart,
                                            &err);
    } else {
        if (first >= argc)
            return cli_usage_error("a model file is required (see 'stagecal plot --help')");
        if (first + 1 < argc)
            return cli_usage_error("unexpected argument '%s' (plot model takes one model file)",
                                   argv[first + 1]);
        if (resid && !points_path)
            return cli_usage_error("option '--residuals' needs '--points'");
        rc = model_chart(argv[first], points_path, &m, &pts, &doc, &err);
    }
    const stagecal_plot_chart *draw = is_mccabe ? chart : stagecal_report_doc_chart(doc, resid);
    if (rc == STAGECAL_OK) {
        stagecal_plot_params par = stagecal_plot_default_params();
        par.width = (size_t)width;
        par.height = (size_t)height;
        rc = stagecal_plot_write(draw, output, &par, &err);
    }
    if (rc != STAGECAL_OK) {
        int code = cli_fail(&err);
        stagecal_plot_chart_free(chart);
        stagecal_report_doc_free(doc);
        stagecal_regress_data_free(&pts);
        stagecal_model_free(&m);
        return code;
    }
    rc = print_result(draw, kind, output, json);
    stagecal_plot_chart_free(chart);
    stagecal_report_doc_free(doc);
    stagecal_regress_data_free(&pts);
    stagecal_model_free(&m);
    return rc;
}
