/*
 * cmd_hetp.c — `stagecal hetp MODEL.json [MODEL2.json]`: HETP (or overall tray
 * efficiency) at a stated condition with a confidence interval; with two model files
 * the change from the first to the second with a Welch test; checks against a design
 * HETP and a rule of thumb. The numerics live in the hetp module.
 */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "stagecal/hetp.h"
#include "stagecal/model.h"

static const char usage_text[] =
    "usage: stagecal hetp MODEL.json [MODEL2.json] --reflux R|inf [--fload F]\n"
    "                     [--height H] [--trays N] [--design-hetp H]\n"
    "                     [--packing structured --area A | --packing random --size D]\n"
    "                     [--level P] [--json] [--quiet]\n"
    "\n"
    "HETP = packed height / column stages at reflux ratio R (and F-factor F), with a\n"
    "confidence interval: the t interval of the column stages mapped through H/N\n"
    "(exact for a monotone map). With a second model file (after a repack, or another\n"
    "column) it reports the change second - first with its interval and a two-sided\n"
    "Welch test (Satterthwaite dof) at the level. For a trayed column (--trays, or a\n"
    "model without a packed height and --trays given) it reports the overall tray\n"
    "efficiency column stages / trays instead. Column stages = stages - 1 (total\n"
    "condenser) or - 2 (partial condenser); the pot is a stage.\n"
    "\n"
    "  --reflux R        reference reflux ratio, >= 0 or 'inf'\n"
    "  --fload F         reference F-factor [Pa^0.5] (needed when the form uses it)\n"
    "  --height H        packed height [m]; default: the model file's height\n"
    "  --trays N         actual trays: report overall tray efficiency instead of HETP\n"
    "  --design-hetp H   design HETP [m] from the packing supplier's data sheet\n"
    "  --packing KIND    'structured' (with --area) or 'random' (with --size) for the\n"
    "                    rule-of-thumb check (from memory, see docs/hetp-trend.md)\n"
    "  --area A          specific area of structured packing [m2/m3]\n"
    "  --size D          nominal size of random packing [mm]\n"
    "  --level P         confidence level, in (0, 1) (0.95)\n"
    "  --json            one JSON document on stdout\n"
    "  --quiet           no warnings on stderr\n"
    "  -h, --help        this text\n"
    "\n"
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal.\n";

/* One model file evaluated at the reference condition. */
struct side {
    const char *path;
    stagecal_model m;
    stagecal_model_point pt;
    stagecal_hetp_stages s;
    double height_m;         /* NAN for trays */
    stagecal_hetp_result h;  /* when height_m is known */
    stagecal_hetp_tray tray; /* when trays > 0 */
};

static json_t *real_or_inf(double v)
{
    return isinf(v) ? json_string(v > 0 ? "inf" : "-inf") : cli_json_real(v);
}

static json_t *side_json(const struct side *sd, int trays)
{
    json_t *o = json_object();
    json_object_set_new(o, "path", json_string(sd->path));
    json_object_set_new(o, "column_id", json_string(sd->m.column_id));
    json_object_set_new(o, "fitted_utc", json_string(sd->m.fitted_utc));
    json_object_set_new(o, "form", json_string(sd->m.form.name));
    json_object_set_new(o, "stages", cli_json_real(sd->pt.stages));
    json_object_set_new(o, "column_stages", cli_json_real(sd->s.column_stages));
    json_object_set_new(o, "se_column_stages", cli_json_real(sd->s.se));
    json_object_set_new(o, "dof", cli_json_real(sd->s.dof));
    json_object_set_new(o, "extrapolated", json_boolean(sd->pt.extrapolated));
    if (trays > 0) {
        json_object_set_new(o, "trays", json_integer(trays));
        json_object_set_new(
            o, "tray_efficiency",
            json_pack("{s:o, s:o, s:o, s:o}", "value", cli_json_real(sd->tray.efficiency), "se",
                      cli_json_real(sd->tray.se), "low", cli_json_real(sd->tray.low), "high",
                      cli_json_real(sd->tray.high)));
        json_object_set_new(o, "hetp", json_null());
    } else {
        json_object_set_new(o, "height_m", cli_json_real(sd->height_m));
        json_object_set_new(
            o, "hetp",
            json_pack("{s:o, s:o, s:o, s:o, s:b, s:s}", "value_m", cli_json_real(sd->h.hetp_m),
                      "se_m", cli_json_real(sd->h.se_m), "low_m", cli_json_real(sd->h.low_m),
                      "high_m", real_or_inf(sd->h.high_m), "unbounded", sd->h.unbounded, "interval",
                      "t interval of the column stages mapped through H/N (exact, monotone); "
                      "se by the delta method H*se/N^2"));
        json_object_set_new(o, "tray_efficiency", json_null());
    }
    return o;
}

static int open_side(struct side *sd, double reflux, double fload, double height, int trays,
                     double level)
{
    stagecal_error err;
    stagecal_error_clear(&err);
    int rc = stagecal_model_load(sd->path, &sd->m, &err);
    if (rc)
        return cli_fail(&err);
    if (sd->m.form.uses_load && isnan(fload))
        return cli_usage_error("%s: form '%s' uses the vapour load: option '--fload F' is "
                               "required (F-factor in Pa^0.5)",
                               sd->path, sd->m.form.name);
    /* The options were checked in cmd_hetp: what is still rejected as an invalid argument
     * comes from the model file (bad data, 65). */
    if ((rc = stagecal_hetp_stages_from_model(&sd->m, reflux, fload, &sd->s, &sd->pt, &err)))
        return cli_fail_data(&err);
    char at[64] = "";
    if (sd->m.form.uses_load)
        snprintf(at, sizeof at, " and F = %g Pa^0.5", fload);
    if (sd->pt.extrapolated)
        cli_warn("%s: R = %g%s lies outside the fitted envelope (extrapolation)", sd->path, reflux,
                 at);
    if (trays > 0) {
        sd->height_m = NAN;
        rc = stagecal_hetp_tray_efficiency(&sd->s, trays, level, &sd->tray, &err);
    } else {
        sd->height_m = !isnan(height) ? height : sd->m.has_hetp ? sd->m.height_m : NAN;
        if (isnan(sd->height_m)) {
            cli_error("%s: no packed height in the model file (give --height H, or --trays N "
                      "for a trayed column)",
                      sd->path);
            return CLI_EXIT_DATA;
        }
        rc = stagecal_hetp_compute(sd->height_m, &sd->s, level, &sd->h, &err);
    }
    return rc ? cli_fail_data(&err) : 0;
}

static int positive(const char *opt, double v, const char *what)
{
    if (!isnan(v) && !(v > 0)) {
        cli_usage_error("option '--%s': %g is not positive (expected %s)", opt, v, what);
        return 1;
    }
    return 0;
}

int cmd_hetp(int argc, char **argv)
{
    enum {
        O_REFLUX = 256,
        O_FLOAD,
        O_HEIGHT,
        O_TRAYS,
        O_DESIGN,
        O_PACKING,
        O_AREA,
        O_SIZE,
        O_LEVEL,
        O_JSON,
        O_QUIET
    };
    static const struct option opts[] = {{"reflux", required_argument, NULL, O_REFLUX},
                                         {"fload", required_argument, NULL, O_FLOAD},
                                         {"height", required_argument, NULL, O_HEIGHT},
                                         {"trays", required_argument, NULL, O_TRAYS},
                                         {"design-hetp", required_argument, NULL, O_DESIGN},
                                         {"packing", required_argument, NULL, O_PACKING},
                                         {"area", required_argument, NULL, O_AREA},
                                         {"size", required_argument, NULL, O_SIZE},
                                         {"level", required_argument, NULL, O_LEVEL},
                                         {"json", no_argument, NULL, O_JSON},
                                         {"quiet", no_argument, NULL, O_QUIET},
                                         {"help", no_argument, NULL, 'h'},
                                         {0, 0, 0, 0}};
    double reflux = NAN, fload = NAN, height = NAN, design = NAN, area = NAN, size_mm = NAN;
    double level = 0.95;
    long trays = 0;
    const char *packing = NULL;
    int json = 0, c, rc;

    optind = 0;
    opterr = 0;
    while ((c = getopt_long(argc, argv, ":h", opts, NULL)) != -1) {
        switch (c) {
        case 'h':
            fputs(usage_text, stdout);
            return CLI_EXIT_OK;
        case O_REFLUX:
            if (cli_parse_double("reflux", optarg, 1, "a reflux ratio >= 0 or 'inf'", &reflux))
                return CLI_EXIT_USAGE;
            break;
        case O_FLOAD:
            if (cli_parse_double("fload", optarg, 0, "an F-factor in Pa^0.5", &fload))
                return CLI_EXIT_USAGE;
            break;
        case O_HEIGHT:
            if (cli_parse_double("height", optarg, 0, "a packed height in m", &height))
                return CLI_EXIT_USAGE;
            break;
        case O_TRAYS:
            if (cli_parse_long("trays", optarg, 1, 1000, &trays))
                return CLI_EXIT_USAGE;
            break;
        case O_DESIGN:
            if (cli_parse_double("design-hetp", optarg, 0, "a design HETP in m", &design))
                return CLI_EXIT_USAGE;
            break;
        case O_PACKING:
            packing = optarg;
            break;
        case O_AREA:
            if (cli_parse_double("area", optarg, 0, "a specific area in m2/m3", &area))
                return CLI_EXIT_USAGE;
            break;
        case O_SIZE:
            if (cli_parse_double("size", optarg, 0, "a nominal packing size in mm", &size_mm))
                return CLI_EXIT_USAGE;
            break;
        case O_LEVEL:
            if (cli_parse_double("level", optarg, 0, "a confidence level in (0, 1)", &level))
                return CLI_EXIT_USAGE;
            break;
        case O_JSON:
            json = 1;
            break;
        case O_QUIET:
            cli_quiet = 1;
            break;
        default:
            return cli_usage_getopt(c, argv, "hetp");
        }
    }
    int nfiles = argc - optind;
    if (nfiles < 1)
        return cli_usage_error("a model file is required (see 'stagecal hetp --help')");
    if (nfiles > 2)
        return cli_usage_error("unexpected argument '%s' (expected one or two model files)",
                               argv[optind + 2]);
    if ((rc = cli_require("reflux", reflux)))
        return rc;
    if ((rc = cli_check_reflux("reflux", reflux)))
        return rc;
    if (!(level > 0 && level < 1))
        return cli_usage_error("option '--level': %g is outside (0, 1) (expected e.g. 0.95)",
                               level);
    if (positive("height", height, "a packed height in m") ||
        positive("design-hetp", design, "a design HETP in m") ||
        positive("area", area, "a specific area in m2/m3") ||
        positive("size", size_mm, "a nominal packing size in mm") ||
        (!isnan(fload) && !(fload >= 0) &&
         cli_usage_error("option '--fload': %g is negative (expected F >= 0)", fload)))
        return CLI_EXIT_USAGE;
    stagecal_packing_kind kind = STAGECAL_PACKING_STRUCTURED;
    double rule_size = NAN;
    if (packing) {
        if (stagecal_packing_kind_parse(packing, &kind) != 0)
            return cli_usage_error("option '--packing': '%s' is unknown (expected 'structured' "
                                   "or 'random')",
                                   packing);
        if (kind == STAGECAL_PACKING_STRUCTURED && isnan(area))
            return cli_usage_error("option '--packing structured' needs '--area A' (m2/m3)");
        if (kind == STAGECAL_PACKING_RANDOM && isnan(size_mm))
            return cli_usage_error("option '--packing random' needs '--size D' (mm)");
        rule_size = kind == STAGECAL_PACKING_STRUCTURED ? area : size_mm * 1e-3; /* mm → m */
    } else if (!isnan(area) || !isnan(size_mm)) {
        return cli_usage_error("options '--area' and '--size' need '--packing KIND'");
    }
    if (trays > 0 && (!isnan(height) || !isnan(design) || packing))
        return cli_usage_error("option '--trays' excludes '--height', '--design-hetp' and "
                               "'--packing' (a trayed column has no HETP)");

    struct side sd[2];
    memset(sd, 0, sizeof sd);
    for (int i = 0; i < 2; i++)
        stagecal_model_init(&sd[i].m);
    int nt = (int)trays;
    for (int i = 0; i < nfiles; i++) {
        sd[i].path = argv[optind + i];
        if ((rc = open_side(&sd[i], reflux, fload, height, nt, level)))
            goto done;
    }

    stagecal_error err;
    stagecal_error_clear(&err);
    int have_diff = nfiles == 2;
    stagecal_hetp_diff diff;
    if (have_diff) {
        if (nt > 0)
            rc = stagecal_hetp_welch(sd[0].tray.efficiency, sd[0].tray.se, sd[0].s.dof,
                                     sd[1].tray.efficiency, sd[1].tray.se, sd[1].s.dof, level,
                                     &diff, &err);
        else
            rc = stagecal_hetp_welch(sd[0].h.hetp_m, sd[0].h.se_m, sd[0].s.dof, sd[1].h.hetp_m,
                                     sd[1].h.se_m, sd[1].s.dof, level, &diff, &err);
        if (rc) { /* e.g. both standard errors 0: the model files' content */
            rc = cli_fail_data(&err);
            goto done;
        }
    }
    /* The design and rule checks apply to the last file given (the current bed). */
    const struct side *cur = &sd[nfiles - 1];
    stagecal_hetp_design_check dc;
    stagecal_hetp_rule rule;
    if (!isnan(design) && (rc = stagecal_hetp_vs_design(&cur->h, design, &dc, &err))) {
        rc = cli_fail(&err);
        goto done;
    }
    if (packing && (rc = stagecal_hetp_rule_of_thumb(kind, rule_size, &rule, &err))) {
        rc = cli_usage_error("option '--%s': %s",
                             kind == STAGECAL_PACKING_STRUCTURED ? "area" : "size", err.text);
        goto done;
    }

    if (json) {
        json_t *doc = json_object();
        json_object_set_new(doc, "format", json_string("stagecal-hetp"));
        json_object_set_new(doc, "version", json_integer(1));
        json_object_set_new(doc, "reflux", cli_json_reflux(reflux));
        json_object_set_new(doc, "fload", cli_json_real(fload));
        json_object_set_new(doc, "level", json_real(level));
        json_object_set_new(
            doc, "units",
            json_pack("{s:s, s:s, s:s}", "hetp", "m", "height", "m", "fload", "Pa^0.5"));
        json_object_set_new(doc, "stage_convention", json_string(stagecal_convention_text_any()));
        json_t *models = json_array();
        for (int i = 0; i < nfiles; i++)
            json_array_append_new(models, side_json(&sd[i], nt));
        json_object_set_new(doc, "models", models);
        if (have_diff)
            json_object_set_new(
                doc, "comparison",
                json_pack("{s:s, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:b, s:s}", "quantity",
                          nt > 0 ? "tray_efficiency" : "hetp_m", "difference",
                          cli_json_real(diff.diff), "relative_change",
                          cli_json_real(diff.rel_change), "se", cli_json_real(diff.se), "dof",
                          cli_json_real(diff.dof), "t", cli_json_real(diff.t_stat), "p_value",
                          cli_json_real(diff.p_value), "low", cli_json_real(diff.low), "high",
                          cli_json_real(diff.high), "significant", diff.significant, "test",
                          "two-sided Welch t, Satterthwaite dof (second minus first)"));
        else
            json_object_set_new(doc, "comparison", json_null());
        json_object_set_new(doc, "design",
                            isnan(design) ? json_null()
                                          : json_pack("{s:o, s:o, s:o, s:o, s:s}", "design_hetp_m",
                                                      cli_json_real(dc.design_m), "ratio",
                                                      cli_json_real(dc.ratio), "ratio_low",
                                                      cli_json_real(dc.ratio_low), "ratio_high",
                                                      real_or_inf(dc.ratio_high), "verdict",
                                                      stagecal_hetp_verdict_name(dc.verdict)));
        json_object_set_new(
            doc, "rule_of_thumb",
            !packing
                ? json_null()
                : json_pack("{s:s, s:o, s:o, s:o, s:o, s:s, s:s, s:s}", "packing",
                            stagecal_packing_kind_name(kind), "size", cli_json_real(rule.size),
                            "hetp_m", cli_json_real(rule.hetp_m), "low_m",
                            cli_json_real(rule.low_m), "high_m", cli_json_real(rule.high_m), "rule",
                            rule.rule, "source", rule.source, "verdict",
                            stagecal_hetp_verdict_name(stagecal_hetp_vs_rule(&cur->h, &rule))));
        json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
        rc = cli_json_print(doc);
        goto done;
    }

    int pct = (int)lround(level * 100);
    for (int i = 0; i < nfiles; i++) {
        const struct side *s = &sd[i];
        char at[64] = "";
        if (s->m.form.uses_load)
            snprintf(at, sizeof at, " and F = %g Pa^0.5", fload);
        printf("%s (column %s, fitted %s)\n", s->path, s->m.column_id, s->m.fitted_utc);
        printf("  stages at R = %g%s: %.3f (the pot included); column stages %.3f "
               "(se %.3f, %.3g dof)%s\n",
               reflux, at, s->pt.stages, s->s.column_stages, s->s.se, s->s.dof,
               s->pt.extrapolated ? " [EXTRAPOLATED]" : "");
        if (nt > 0)
            printf("  overall tray efficiency %.3f on %d trays, %d %% CI [%.3f, %.3f]\n",
                   s->tray.efficiency, nt, pct, s->tray.low, s->tray.high);
        else if (s->h.unbounded)
            printf("  HETP %.3f m over %.3f m packed, %d %% CI [%.3f m, unbounded] (the stage "
                   "interval reaches 0)\n",
                   s->h.hetp_m, s->height_m, pct, s->h.low_m);
        else
            printf("  HETP %.3f m over %.3f m packed, %d %% CI [%.3f, %.3f] m (delta-method se "
                   "%.3f m)\n",
                   s->h.hetp_m, s->height_m, pct, s->h.low_m, s->h.high_m, s->h.se_m);
    }
    if (have_diff) {
        const char *unit = nt > 0 ? "" : " m";
        printf("change second - first: %+.3f%s (%+.1f %%), %d %% CI [%+.3f, %+.3f]%s\n", diff.diff,
               unit, 100 * diff.rel_change, pct, diff.low, diff.high, unit);
        printf("  Welch t = %.3f, %.3g dof (Satterthwaite), p = %.3g: %s at the %d %% level\n",
               diff.t_stat, diff.dof, diff.p_value,
               diff.significant ? "a significant difference" : "no significant difference", pct);
    }
    if (!isnan(design)) {
        char hi[32];
        if (isinf(dc.ratio_high))
            snprintf(hi, sizeof hi, "unbounded");
        else
            snprintf(hi, sizeof hi, "%.3f", dc.ratio_high);
        printf("design HETP %.3f m: measured/design %.3f, %d %% CI [%.3f, %s] -> %s%s\n", design,
               dc.ratio, pct, dc.ratio_low, hi, stagecal_hetp_verdict_name(dc.verdict),
               have_diff ? " (second file)" : "");
    }
    if (packing)
        printf("rule of thumb (%s): %.3f m, range %.3f-%.3f m -> %s%s\n  source: %s\n", rule.rule,
               rule.hetp_m, rule.low_m, rule.high_m,
               stagecal_hetp_verdict_name(stagecal_hetp_vs_rule(&cur->h, &rule)),
               have_diff ? " (second file)" : "", rule.source);
    rc = CLI_EXIT_OK;
done:
    for (int i = 0; i < 2; i++)
        stagecal_model_free(&sd[i].m);
    return rc;
}
