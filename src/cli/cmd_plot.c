/*
 * cmd_plot.c — `stagecal plot`: charts as PNG, SVG or PDF (by the output's extension).
 *   plot mccabe  the McCabe–Thiele stage diagram of a condition (xD, R, stages) or a
 *                sample (xD, xB, R → stages by inversion)
 *   plot model   stages against R from a model file with bands, envelope and points;
 *                --residuals draws the residuals against fitted stages instead
 * The charts are built and drawn by the plot and report modules.
 */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "stagecal/model.h"
#include "stagecal/plot.h"
#include "stagecal/regress.h"
#include "stagecal/report.h"

static const char usage_text[] =
    "usage: stagecal plot mccabe (--alpha A | --kvalue K | --column FILE) --xd XD\n"
    "                     --reflux R|inf (--stages N | --xb XB) [--murphree E]\n"
    "                     --output FILE [--width W] [--height H] [--json] [--quiet]\n"
    "       stagecal plot model MODEL.json [--points POINTS.csv] [--residuals]\n"
    "                     --output FILE [--width W] [--height H] [--json] [--quiet]\n"
    "\n"
    "Draws a chart; the format follows the extension of FILE: .png, .svg or .pdf.\n"
    "\n"
    "mccabe: the McCabe-Thiele stage diagram: equilibrium curve, pseudo-equilibrium\n"
    "curve when E < 1, operating line, diagonal, the steps, the pinch. Give --stages\n"
    "for a condition, or --xb for a sample (stages from the inversion).\n"
    "  --alpha A / --kvalue K / --column FILE   equilibrium model (as for 'steps')\n"
    "  --xd XD         distillate mole fraction, in (0, 1)\n"
    "  --reflux R      reflux ratio >= 0, or 'inf'\n"
    "  --stages N      equilibrium stages including the pot, N >= 1\n"
    "  --xb XB         pot mole fraction of a sample, in (0, XD)\n"
    "  --murphree E    Murphree vapour efficiency, in (0, 1] (default 1)\n"
    "\n"
    "model: stages against R from a model file, with confidence and prediction bands\n"
    "and the fitted envelope.\n"
    "  --points FILE   points (R,stages[,F,sigma]) drawn with the fit\n"
    "  --residuals     residuals of the points against fitted stages (needs --points)\n"
    "\n"
    "  -o, --output F  the chart file (.png, .svg or .pdf), required\n"
    "  --width W       width in pixels (PNG) or points (SVG, PDF), default 800\n"
    "  --height H      height, default 560\n"
    "  --json          one JSON document on stdout\n"
    "  --quiet         no warnings on stderr\n"
    "  -h, --help      this text\n"
    "\n"
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal,\n"
    "73 output cannot be written.\n";

int cmd_plot(int argc, char **argv)
{
    enum {
        O_ALPHA = 256,
        O_KVALUE,
        O_COLUMN,
        O_XD,
        O_REFLUX,
        O_STAGES,
        O_XB,
        O_MURPHREE,
        O_POINTS,
        O_RESID,
        O_WIDTH,
        O_HEIGHT,
        O_JSON,
        O_QUIET
    };
    static const struct option opts[] = {{"alpha", required_argument, NULL, O_ALPHA},
                                         {"kvalue", required_argument, NULL, O_KVALUE},
                                         {"column", required_argument, NULL, O_COLUMN},
                                         {"xd", required_argument, NULL, O_XD},
                                         {"reflux", required_argument, NULL, O_REFLUX},
                                         {"stages", required_argument, NULL, O_STAGES},
                                         {"xb", required_argument, NULL, O_XB},
                                         {"murphree", required_argument, NULL, O_MURPHREE},
                                         {"points", required_argument, NULL, O_POINTS},
                                         {"residuals", no_argument, NULL, O_RESID},
                                         {"output", required_argument, NULL, 'o'},
                                         {"width", required_argument, NULL, O_WIDTH},
                                         {"height", required_argument, NULL, O_HEIGHT},
                                         {"json", no_argument, NULL, O_JSON},
                                         {"quiet", no_argument, NULL, O_QUIET},
                                         {"help", no_argument, NULL, 'h'},
                                         {0, 0, 0, 0}};
    cli_system sys;
    double xd = NAN, reflux = NAN, nstages = NAN, xb = NAN, murphree = 1.0;
    const char *output = NULL, *points_path = NULL;
    long width = 800, height = 560;
    int json = 0, resid = 0, c, rc;

    cli_system_init(&sys);
    optind = 0;
    opterr = 0;
    const char *mccabe_opt = NULL, *model_opt = NULL; /* options of one chart kind only */
    int li = -1;
    while ((c = getopt_long(argc, argv, ":ho:", opts, &li)) != -1) {
        if (c >= O_ALPHA && c <= O_MURPHREE && li >= 0)
            mccabe_opt = opts[li].name;
        if ((c == O_POINTS || c == O_RESID) && li >= 0)
            model_opt = opts[li].name;
        li = -1;
        switch (c) {
        case 'h':
            fputs(usage_text, stdout);
            return CLI_EXIT_OK;
        case O_ALPHA:
        case O_KVALUE:
        case O_COLUMN:
            if ((rc = cli_system_option(&sys, opts[c - O_ALPHA].name, optarg)))
                return rc;
            break;
        case O_XD:
            if (cli_parse_double("xd", optarg, 0, "a mole fraction in (0, 1)", &xd))
                return CLI_EXIT_USAGE;
            break;
        case O_REFLUX:
            if (cli_parse_double("reflux", optarg, 1, "a reflux ratio >= 0 or 'inf'", &reflux))
                return CLI_EXIT_USAGE;
            break;
        case O_STAGES:
            if (cli_parse_double("stages", optarg, 0, "a number of stages >= 1", &nstages))
                return CLI_EXIT_USAGE;
            break;
        case O_XB:
            if (cli_parse_double("xb", optarg, 0, "a mole fraction in (0, 1)", &xb))
                return CLI_EXIT_USAGE;
            break;
        case O_MURPHREE:
            if (cli_parse_double("murphree", optarg, 0, "an efficiency in (0, 1]", &murphree))
                return CLI_EXIT_USAGE;
            break;
        case O_POINTS:
            points_path = optarg;
            break;
        case O_RESID:
            resid = 1;
            break;
        case 'o':
            output = optarg;
            break;
        case O_WIDTH:
            if (cli_parse_long("width", optarg, 16, 20000, &width))
                return CLI_EXIT_USAGE;
            break;
        case O_HEIGHT:
            if (cli_parse_long("height", optarg, 16, 20000, &height))
                return CLI_EXIT_USAGE;
            break;
        case O_JSON:
            json = 1;
            break;
        case O_QUIET:
            cli_quiet = 1;
            break;
        default:
            return cli_usage_getopt(c, argv, "plot");
        }
    }
    /* The chart kind is the first argument; options may come before or after it. */
    if (optind >= argc)
        return cli_usage_error("a chart kind is required: 'mccabe' or 'model' (see 'stagecal "
                               "plot --help')");
    const char *kind = argv[optind++];
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
    const char *inputs[3] = {points_path, optind < argc ? argv[optind] : NULL, sys.column_path};
    if ((rc = cli_check_output("output", output, inputs, 3)))
        return rc;

    stagecal_plot_chart *chart = NULL;
    stagecal_report_doc *doc = NULL;
    stagecal_model m;
    stagecal_regress_data pts;
    memset(&pts, 0, sizeof pts);
    stagecal_model_init(&m);
    if (is_mccabe) {
        if (optind < argc)
            return cli_usage_error("unexpected argument '%s' (plot mccabe takes options only)",
                                   argv[optind]);
        if ((rc = cli_require("xd", xd)) || (rc = cli_require("reflux", reflux)))
            return rc;
        if (isnan(nstages) == isnan(xb))
            return cli_usage_error("give exactly one of '--stages' (a condition) and '--xb' (a "
                                   "sample)");
        if (!(xd > 0 && xd < 1))
            return cli_usage_error("option '--xd': %g is outside (0, 1) (expected a mole "
                                   "fraction)",
                                   xd);
        if (!(reflux >= 0))
            return cli_usage_error("option '--reflux': %g is negative (expected R >= 0 or "
                                   "'inf')",
                                   reflux);
        if (!isnan(nstages) && !(nstages >= 1))
            return cli_usage_error("option '--stages': %g is below 1 (expected stages "
                                   "including the pot, >= 1)",
                                   nstages);
        if (!isnan(xb) && !(xb > 0 && xb < xd))
            return cli_usage_error("option '--xb': %g is outside (0, xd) (expected the pot "
                                   "mole fraction)",
                                   xb);
        if (!(murphree > 0 && murphree <= 1))
            return cli_usage_error("option '--murphree': %g is outside (0, 1] (expected a "
                                   "Murphree vapour efficiency)",
                                   murphree);
        if ((rc = cli_system_open(&sys)))
            return rc;
        rc = stagecal_plot_mccabe_condition(sys.vle, xd, xb, reflux, nstages, murphree, &chart,
                                            &err);
        cli_system_close(&sys);
    } else {
        if (optind >= argc)
            return cli_usage_error("a model file is required (see 'stagecal plot --help')");
        if (optind + 1 < argc)
            return cli_usage_error("unexpected argument '%s' (plot model takes one model file)",
                                   argv[optind + 1]);
        if (resid && !points_path)
            return cli_usage_error("option '--residuals' needs '--points'");
        rc = stagecal_model_load(argv[optind], &m, &err);
        if (rc == STAGECAL_OK && points_path)
            rc = stagecal_regress_data_read(points_path, &pts, &err);
        if (rc == STAGECAL_OK &&
            (rc = stagecal_report_from_model(&m, points_path ? &pts : NULL, &doc, &err)) &&
            err.code == STAGECAL_EINVAL)
            err.code = STAGECAL_EDATA; /* built from the files alone: their content */
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
    if (json) {
        json_t *names = json_array();
        for (size_t i = 0; i < draw->n_series; i++)
            json_array_append_new(names,
                                  json_string(draw->series[i].label ? draw->series[i].label : ""));
        json_t *o =
            json_pack("{s:s, s:i, s:s, s:s, s:s, s:s, s:o}", "format", "stagecal-plot-result",
                      "version", 1, "status", "ok", "kind", kind, "output", output, "title",
                      draw->title ? draw->title : "", "series", names);
        rc = o ? cli_json_print(o) : CLI_EXIT_SOFTWARE;
    } else {
        printf("chart written to %s\n", output);
        rc = CLI_EXIT_OK;
    }
    stagecal_plot_chart_free(chart);
    stagecal_report_doc_free(doc);
    stagecal_regress_data_free(&pts);
    stagecal_model_free(&m);
    return rc;
}
