/*
 * cmd_invert.c — `stagecal invert`: effective equilibrium stages from a measured
 * distillate and pot composition at a reflux ratio (McCabe–Thiele inversion).
 */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "stagecal/stages.h"

static const char usage_text[] =
    "usage: stagecal invert (--alpha A | --kvalue K | --column FILE) --xd XD --xb XB\n"
    "                       --reflux R|inf [--murphree E] [--json] [--quiet]\n"
    "   or: stagecal invert --column FILE [--murphree E] [--out FILE.csv] [--min-rows N]\n"
    "                       [--json] [--quiet] RUNLOG.csv...\n"
    "\n"
    "Counts the equilibrium stages (the pot included, fractional) a batch rectifier needs\n"
    "to hold the distillate at XD over a pot at XB at reflux ratio R. A pinch or an\n"
    "azeotrope in the way is a result (status), not an error.\n"
    "\n"
    "  --alpha A       constant relative volatility, A > 1\n"
    "  --kvalue K      constant K value (dilute light component), y = K x, K > 1\n"
    "  --column FILE   the equilibrium model of a column file (docs/column-file.md)\n"
    "  --xd XD         distillate mole fraction of the light component, in (0, 1)\n"
    "  --xb XB         pot mole fraction of the light component, in (0, XD)\n"
    "  --reflux R      reflux ratio L/D >= 0, or 'inf' for total reflux\n"
    "  --murphree E    Murphree vapour efficiency of the column stages, in (0, 1] (default 1)\n"
    "  --json          one JSON document on stdout\n"
    "  --quiet         no warnings on stderr\n"
    "  -h, --help      this text\n"
    "\n"
    "With run logs (docs/runlog.md) every row is inverted: stages, column stages, their\n"
    "standard uncertainty from the column file's uncertainties, status, L/V, F-factor\n"
    "and the quasi-steady window flags, one CSV row per log row.\n"
    "  --out FILE.csv  the per-row CSV ('-' = stdout, the default without --json)\n"
    "  --min-rows N    fewest rows a run may have (default 5)\n"
    "  --json          a summary instead: status counts, each run's mass-balance closure\n"
    "                  and the quasi-steady windows (the units of evidence)\n"
    "\n"
    "Exit status: 0 success (a pinch or an azeotrope is a status, not an error), 2 usage\n"
    "error, 65 bad data, 66 missing file, 70 internal, 73 output cannot be written.\n";

int cmd_invert(int argc, char **argv)
{
    enum { O_ALPHA = 256, O_KVALUE, O_COLUMN, O_XD, O_XB, O_REFLUX, O_MURPHREE, O_JSON, O_QUIET };
    static const struct option opts[] = {{"alpha", required_argument, NULL, O_ALPHA},
                                         {"kvalue", required_argument, NULL, O_KVALUE},
                                         {"column", required_argument, NULL, O_COLUMN},
                                         {"xd", required_argument, NULL, O_XD},
                                         {"xb", required_argument, NULL, O_XB},
                                         {"reflux", required_argument, NULL, O_REFLUX},
                                         {"murphree", required_argument, NULL, O_MURPHREE},
                                         {"json", no_argument, NULL, O_JSON},
                                         {"quiet", no_argument, NULL, O_QUIET},
                                         {"help", no_argument, NULL, 'h'},
                                         {0, 0, 0, 0}};
    cli_system sys;
    double xd = NAN, xb = NAN, reflux = NAN, murphree = 1.0;
    int json = 0, c, rc;

    if (invert_runlog_wanted(argc, argv)) /* run-log mode: invert_runlog.c */
        return invert_runlog(argc, argv);
    cli_system_init(&sys);
    optind = 0;
    opterr = 0;
    while ((c = getopt_long(argc, argv, ":h", opts, NULL)) != -1) {
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
        case O_XB:
            if (cli_parse_double("xb", optarg, 0, "a mole fraction in (0, 1)", &xb))
                return CLI_EXIT_USAGE;
            break;
        case O_REFLUX:
            if (cli_parse_double("reflux", optarg, 1, "a reflux ratio >= 0 or 'inf'", &reflux))
                return CLI_EXIT_USAGE;
            break;
        case O_MURPHREE:
            if (cli_parse_double("murphree", optarg, 0, "an efficiency in (0, 1]", &murphree))
                return CLI_EXIT_USAGE;
            break;
        case O_JSON:
            json = 1;
            break;
        case O_QUIET:
            cli_quiet = 1;
            break;
        default:
            return cli_usage_getopt(c, argv, "invert");
        }
    }
    if (optind < argc)
        return cli_usage_error("unexpected argument '%s'", argv[optind]);
    if ((rc = cli_require("xd", xd)) || (rc = cli_require("xb", xb)) ||
        (rc = cli_require("reflux", reflux)))
        return rc;
    if ((rc = cli_check_fraction("xd", xd)))
        return rc;
    if ((rc = cli_check_fraction("xb", xb)))
        return rc;
    if (!(xb < xd))
        return cli_usage_error("option '--xb': %g is not below --xd %g (expected the pot leaner "
                               "in the light component than the distillate)",
                               xb, xd);
    if ((rc = cli_check_reflux("reflux", reflux)))
        return rc;
    if ((rc = cli_check_murphree("murphree", murphree)))
        return rc;
    if ((rc = cli_system_open(&sys)))
        return rc;

    stagecal_stages_params par = stagecal_stages_default_params();
    stagecal_stages_result res;
    stagecal_error err;
    par.want_sensitivities = 1;
    stagecal_error_clear(&err);
    rc = stagecal_stages_invert(sys.vle, xd, xb, reflux, murphree, &par, &res, &err);
    if (rc != STAGECAL_OK) {
        cli_system_close(&sys);
        return cli_fail(&err);
    }
    int ok = res.status == STAGECAL_STAGES_OK;
    /* the condenser comes from the column file; --alpha/--kvalue mean a total condenser */
    stagecal_condenser cond = sys.have_column ? sys.col.condenser : STAGECAL_CONDENSER_TOTAL;
    double col_stages = ok ? stagecal_convention_column_stages(res.stages, cond) : NAN;
    if (json) {
        json_t *doc = json_object();
        json_object_set_new(doc, "format", json_string("stagecal-invert"));
        json_object_set_new(doc, "version", json_integer(1));
        json_object_set_new(doc, "status", json_string(stagecal_stages_status_name(res.status)));
        json_object_set_new(doc, "reason", ok ? json_null() : json_string(res.reason));
        json_object_set_new(doc, "stages", ok ? json_real(res.stages) : json_null());
        json_object_set_new(doc, "column_stages", cli_json_real(col_stages));
        json_object_set_new(doc, "condenser", json_string(stagecal_condenser_name(cond)));
        json_object_set_new(doc, "stage_convention", json_string(stagecal_convention_text(cond)));
        json_object_set_new(doc, "xd", json_real(xd));
        json_object_set_new(doc, "xb", json_real(xb));
        json_object_set_new(doc, "reflux", cli_json_reflux(reflux));
        json_object_set_new(doc, "lv", json_real(res.lv));
        json_object_set_new(doc, "murphree", json_real(murphree));
        json_object_set_new(doc, "x_target", ok ? json_real(res.x_target) : json_null());
        json_object_set_new(doc, "sensitivities",
                            ok ? json_pack("{s:o,s:o,s:o}", "dstages_dxd",
                                           cli_json_real(res.dstages_dxd), "dstages_dxb",
                                           cli_json_real(res.dstages_dxb), "dstages_dr",
                                           cli_json_real(res.dstages_dr))
                               : json_null());
        json_object_set_new(doc, "model", cli_system_json(&sys));
        rc = cli_json_print(doc);
    } else {
        if (ok) {
            printf("stages (the pot included): %.6f\n", res.stages);
            if (isfinite(col_stages))
                printf("column stages:             %.6f\n", col_stages);
            else
                printf("column stages:             not determined (fewer stages than the pot "
                       "and the partial condenser give)\n");
            printf("L/V:                       %.6f\n", res.lv);
            printf("sensitivities: dN/dxD = %.4g, dN/dxB = %.4g, dN/dR = %.4g\n", res.dstages_dxd,
                   res.dstages_dxb, res.dstages_dr);
            printf("stage convention: %s\n", stagecal_convention_text(cond));
        } else {
            printf("status: %s (%s)\n", stagecal_stages_status_name(res.status), res.reason);
        }
        rc = CLI_EXIT_OK;
    }
    cli_system_close(&sys);
    return rc;
}
