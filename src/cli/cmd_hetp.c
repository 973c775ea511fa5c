/*
 * cmd_hetp.c — `stagecal hetp MODEL.json [MODEL2.json]`: HETP (or overall tray
 * efficiency) at a stated condition with a confidence interval; with two model files
 * the change from the first to the second with a Welch test; checks against a design
 * HETP and a rule of thumb. The numerics live in the hetp module.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/hetp.h"
#include "stagecal/model.h"

static const struct cli_usage usage = {
    "usage: stagecal hetp MODEL.json [MODEL2.json] --reflux R|inf [--f-factor F]\n"
    "                     [--packed-height H] [--trays N] [--design-hetp H]\n"
    "                     [--packing structured --area A | --packing random --size D]\n"
    "                     [--level P] [--json] [--quiet]\n",
    "HETP = packed height / column stages at reflux ratio R (and F-factor F), with a\n"
    "confidence interval: the t interval of the column stages mapped through H/N\n"
    "(exact for a monotone map). With a second model file (after a repack, or another\n"
    "column) it reports the change second - first with its interval and a two-sided\n"
    "Welch test (Satterthwaite dof) at the level. For a trayed column (--trays, or a\n"
    "model without a packed height and --trays given) it reports the overall tray\n"
    "efficiency column stages / trays instead. Column stages = stages - 1 (total\n"
    "condenser) or - 2 (partial condenser); the pot is a stage.\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal.\n"};

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
        /* printing rule: < 2 dof gives no interval; unbounded gives a lower bound only */
        const char *why = stagecal_hetp_undetermined(&sd->s, &sd->h);
        int no_dof = !(sd->s.dof >= 2);
        json_object_set_new(o, "height_m", cli_json_real(sd->height_m));
        json_object_set_new(
            o, "hetp",
            json_pack("{s:o, s:o, s:o, s:o, s:b, s:s}", "value_m", cli_json_real(sd->h.hetp_m),
                      "se_m", cli_json_real(sd->h.se_m), "low_m",
                      no_dof ? json_null() : cli_json_real(sd->h.low_m), "high_m",
                      why ? json_null() : cli_json_real(sd->h.high_m), "unbounded", sd->h.unbounded,
                      "interval",
                      "t interval of the column stages mapped through H/N (exact, monotone); "
                      "se by the delta method H*se/N^2; a null end is not determined"));
        json_object_set_new(json_object_get(o, "hetp"), "note",
                            why ? json_string(why) : json_null());
        json_object_set_new(o, "tray_efficiency", json_null());
    }
    return o;
}

/* The whole job: options, the one or two model files, the checks. */
struct job {
    double reflux, fload, height, design, area, size_mm, level;
    long trays;
    int packing; /* -1: no rule-of-thumb check; else a stagecal_packing_kind */
    int nfiles, have_diff;
    int one_sided; /* a side's model is one-sided: comparisons are not determined */
    struct side sd[2];
    stagecal_hetp_diff diff;
    stagecal_hetp_design_check dc;
    stagecal_hetp_rule rule;
    double margin;                         /* equivalence margin (fraction) */
    stagecal_hetp_equiv eq_design, eq_old; /* TOST vs the design figure / the first file */
};

static const char *const packing_names[] = {"structured", "random", NULL};

static int open_side(struct side *sd, const struct job *j)
{
    stagecal_error err;
    stagecal_error_clear(&err);
    int rc = stagecal_model_load(sd->path, &sd->m, &err);
    if (rc)
        return cli_fail(&err);
    if (sd->m.form.uses_load && isnan(j->fload))
        return cli_usage_error("%s: form '%s' uses the vapour load: option '--f-factor F' is "
                               "required (F-factor in Pa^0.5)",
                               sd->path, sd->m.form.name);
    /* The options were checked in cmd_hetp: what is still rejected as an invalid argument
     * comes from the model file (bad data, 65). */
    if ((rc = stagecal_hetp_stages_from_model(&sd->m, j->reflux, j->fload, &sd->s, &sd->pt, &err)))
        return cli_fail_data(&err);
    char at[64] = "";
    if (sd->m.form.uses_load)
        snprintf(at, sizeof at, " and F = %g Pa^0.5", j->fload);
    if (sd->pt.extrapolated)
        cli_warn("%s: R = %g%s lies outside the fitted envelope (extrapolation)", sd->path,
                 j->reflux, at);
    if (j->trays > 0) {
        sd->height_m = NAN;
        rc = stagecal_hetp_tray_efficiency(&sd->s, (int)j->trays, j->level, &sd->tray, &err);
    } else {
        sd->height_m = !isnan(j->height) ? j->height : sd->m.has_hetp ? sd->m.height_m : NAN;
        if (isnan(sd->height_m)) {
            cli_error(
                "%s: no packed height in the model file (give --packed-height H, or --trays N "
                "for a trayed column)",
                sd->path);
            return CLI_EXIT_DATA;
        }
        rc = stagecal_hetp_compute(sd->height_m, &sd->s, j->level, &sd->h, &err);
    }
    return rc ? cli_fail_data(&err) : 0;
}

/* The comparison of two files, the design and the rule-of-thumb checks. */
static int compare(struct job *j)
{
    stagecal_error err;
    const struct side *a = &j->sd[0], *b = &j->sd[1], *cur = &j->sd[j->nfiles - 1];
    int rc = 0;
    stagecal_error_clear(&err);
    /* a one-sided side ("at least N stages"): the change is not determined, never "no
     * difference" (print_text, the JSON's comparison) */
    j->one_sided = j->sd[0].s.lower_only || (j->nfiles > 1 && j->sd[1].s.lower_only);
    if (j->have_diff && !j->one_sided) {
        if (j->trays > 0)
            rc = stagecal_hetp_welch(a->tray.efficiency, a->tray.se, a->s.dof, b->tray.efficiency,
                                     b->tray.se, b->s.dof, j->level, &j->diff, &err);
        else
            rc = stagecal_hetp_welch(a->h.hetp_m, a->h.se_m, a->s.dof, b->h.hetp_m, b->h.se_m,
                                     b->s.dof, j->level, &j->diff, &err);
        if (rc) /* e.g. both standard errors 0: the model files' content */
            return cli_fail_data(&err);
    }
    /* The design and rule checks apply to the last file given (the current bed). */
    if (!isnan(j->design) && stagecal_hetp_vs_design(&cur->h, j->design, &j->dc, &err))
        return cli_fail(&err);
    /* Equivalence (TOST): the current bed as good as the design figure, as the first */
    if (j->trays == 0 && !isnan(j->design) &&
        stagecal_hetp_equiv_design(cur->height_m, &cur->s, j->design, j->margin, 0.05,
                                   &j->eq_design, &err))
        return cli_fail_data(&err);
    if (j->trays == 0 && j->have_diff &&
        stagecal_hetp_equiv_pair(a->height_m, &a->s, b->height_m, &b->s, j->margin, 0.05,
                                 &j->eq_old, &err))
        return cli_fail_data(&err);
    double size = j->packing == STAGECAL_PACKING_STRUCTURED ? j->area : j->size_mm * 1e-3;
    if (j->packing >= 0 &&
        stagecal_hetp_rule_of_thumb((stagecal_packing_kind)j->packing, size, &j->rule, &err))
        return cli_usage_error("option '--%s': %s",
                               j->packing == STAGECAL_PACKING_STRUCTURED ? "area" : "size",
                               err.text);
    return 0;
}

static json_t *comparison_json(const struct job *j)
{
    const stagecal_hetp_diff *d = &j->diff;
    if (!j->have_diff)
        return json_null();
    if (j->one_sided)
        return json_pack("{s:s, s:s, s:n, s:n, s:s}", "quantity",
                         j->trays > 0 ? "tray_efficiency" : "hetp_m", "verdict", "not determined",
                         "low", "high", "reason",
                         "a model file gives at least N stages only (one-sided): the change "
                         "is not determined");
    return json_pack(
        "{s:s, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:b, s:s}", "quantity",
        j->trays > 0 ? "tray_efficiency" : "hetp_m", "difference", cli_json_real(d->diff),
        "relative_change", cli_json_real(d->rel_change), "se", cli_json_real(d->se), "dof",
        cli_json_real(d->dof), "t", cli_json_real(d->t_stat), "p_value", cli_json_real(d->p_value),
        "low", cli_json_real(d->low), "high", cli_json_real(d->high), "significant", d->significant,
        "test", "two-sided Welch t, Satterthwaite dof (second minus first)");
}

static json_t *equiv_json(const stagecal_hetp_equiv *q)
{
    int nd = q->verdict == STAGECAL_EQUIV_NOT_DETERMINED;
    return json_pack("{s:s, s:s, s:o, s:o, s:o, s:o}", "verdict",
                     stagecal_equiv_verdict_name(q->verdict), "text", q->text, "ratio_low",
                     nd ? json_null() : cli_json_real(q->low), "ratio_high",
                     nd ? json_null() : cli_json_real(q->high), "p",
                     nd ? json_null() : cli_json_real(q->p), "dof", cli_json_real(q->dof));
}

static int print_json(const struct job *j)
{
    const struct side *cur = &j->sd[j->nfiles - 1];
    json_t *doc = cli_json_doc_head("stagecal-hetp", j->reflux, j->fload, j->level);
    json_t *models = json_array();
    json_object_set_new(doc, "units",
                        json_pack("{s:s, s:s, s:s, s:s}", "hetp", "m", "height", "m", "f_factor",
                                  "Pa^0.5", "fload", "Pa^0.5"));
    json_object_set_new(doc, "stage_convention", json_string(stagecal_convention_text_any()));
    for (int i = 0; i < j->nfiles; i++)
        json_array_append_new(models, side_json(&j->sd[i], (int)j->trays));
    json_object_set_new(doc, "models", models);
    json_object_set_new(doc, "comparison", comparison_json(j));
    const stagecal_hetp_design_check *dc = &j->dc;
    json_object_set_new(
        doc, "design",
        isnan(j->design) ? json_null()
        : !(cur->s.dof >= 2)
            ? json_pack("{s:o, s:o, s:n, s:n, s:s}", "design_hetp_m", cli_json_real(dc->design_m),
                        "ratio", cli_json_real(dc->ratio), "ratio_low", "ratio_high", "verdict",
                        "not-determined")
            : json_pack("{s:o, s:o, s:o, s:o, s:s}", "design_hetp_m", cli_json_real(dc->design_m),
                        "ratio", cli_json_real(dc->ratio), "ratio_low",
                        cli_json_real(dc->ratio_low), "ratio_high",
                        isinf(dc->ratio_high) ? json_null() : cli_json_real(dc->ratio_high),
                        "verdict", stagecal_hetp_verdict_name(dc->verdict)));
    json_object_set_new(
        doc, "equivalence",
        json_pack("{s:o, s:o, s:o, s:s}", "margin", cli_json_real(j->margin), "vs_design",
                  j->trays == 0 && !isnan(j->design) ? equiv_json(&j->eq_design) : json_null(),
                  "second_vs_first",
                  j->trays == 0 && j->have_diff ? equiv_json(&j->eq_old) : json_null(), "test",
                  "two one-sided tests (Schuirmann 1987) at 5 % each"));
    const stagecal_hetp_rule *r = &j->rule;
    json_object_set_new(
        doc, "rule_of_thumb",
        j->packing < 0
            ? json_null()
            : json_pack("{s:s, s:o, s:o, s:o, s:o, s:s, s:s, s:s}", "packing",
                        stagecal_packing_kind_name((stagecal_packing_kind)j->packing), "size",
                        cli_json_real(r->size), "hetp_m", cli_json_real(r->hetp_m), "low_m",
                        cli_json_real(r->low_m), "high_m", cli_json_real(r->high_m), "rule",
                        r->rule, "source", r->source, "verdict",
                        stagecal_hetp_verdict_name(stagecal_hetp_vs_rule(&cur->h, r))));
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return cli_json_print(doc);
}

static void print_side(const struct job *j, const struct side *s, int pct)
{
    char at[64] = "";
    if (s->m.form.uses_load)
        snprintf(at, sizeof at, " and F = %g Pa^0.5", j->fload);
    char se[32]; /* a huge se (a variance of 1e308 in the file) in exponent form */
    snprintf(se, sizeof se, s->s.se < 1e6 ? "%.3f" : "%.3g", s->s.se);
    printf("%s (column %s, fitted %s)\n", s->path, s->m.column_id, s->m.fitted_utc);
    if (s->pt.lower_only)
        printf("  stages at R = %g%s: AT LEAST %.3f (the pot included; one-sided %.0f %%); "
               "column stages at least %.3f%s\n",
               j->reflux, at, s->pt.stages, 100 * s->pt.level, s->s.column_stages,
               s->pt.extrapolated ? " [EXTRAPOLATED]" : "");
    else
        printf("  stages at R = %g%s: %.3f (the pot included); column stages %.3f "
               "(se %s, %.3g dof)%s\n",
               j->reflux, at, s->pt.stages, s->s.column_stages, se, s->s.dof,
               s->pt.extrapolated ? " [EXTRAPOLATED]" : "");
    if (j->trays > 0)
        printf("  overall tray efficiency %.3f on %ld trays, %d %% CI [%.3f, %.3f]\n",
               s->tray.efficiency, j->trays, pct, s->tray.low, s->tray.high);
    else if (s->h.at_most)
        printf("  HETP AT MOST %.3f m (one-sided %d %%) over %.3f m packed: at least %.3f column "
               "stages, the evidence gives no upper end\n",
               s->h.high_m, pct, s->height_m, s->s.column_stages);
    else if (!(s->s.dof >= 2))
        printf("  HETP %.3f m over %.3f m packed, interval %s\n", s->h.hetp_m, s->height_m,
               stagecal_hetp_undetermined(&s->s, &s->h));
    else if (s->h.unbounded)
        printf("  HETP at least %.3f m (%d %% lower bound) over %.3f m packed: not bounded "
               "above, the stage interval reaches 0\n",
               s->h.low_m, pct, s->height_m);
    else
        printf("  HETP %.3f m over %.3f m packed, %d %% CI [%.3f, %.3f] m (delta-method se "
               "%.3f m)\n",
               s->h.hetp_m, s->height_m, pct, s->h.low_m, s->h.high_m, s->h.se_m);
}

static void print_text(const struct job *j)
{
    const struct side *cur = &j->sd[j->nfiles - 1];
    const stagecal_hetp_diff *d = &j->diff;
    int pct = (int)lround(j->level * 100);
    for (int i = 0; i < j->nfiles; i++)
        print_side(j, &j->sd[i], pct);
    int thin = j->have_diff && (!(j->sd[0].s.dof >= 2) || !(j->sd[1].s.dof >= 2));
    if (j->have_diff && j->one_sided) {
        printf("change second - first: not determined (a model file gives at least N stages "
               "only, one-sided: HETP is bounded from above only)\n");
        thin = 1;
    } else if (thin)
        printf("change second - first: not determined (a fit has fewer than 2 degrees of "
               "freedom)\n");
    if (j->have_diff && !thin) {
        const char *unit = j->trays > 0 ? "" : " m";
        printf("change second - first: %+.3f%s (%+.1f %%), %d %% CI [%+.3f, %+.3f]%s\n", d->diff,
               unit, 100 * d->rel_change, pct, d->low, d->high, unit);
        printf("  Welch t = %.3f, %.3g dof (Satterthwaite), p = %.3g: %s at the %d %% level\n",
               d->t_stat, d->dof, d->p_value,
               d->significant ? "a significant difference" : "no significant difference", pct);
    }
    const char *cur_why = j->trays > 0 ? NULL : stagecal_hetp_undetermined(&cur->s, &cur->h);
    if (!isnan(j->design) && cur_why && !(cur->s.dof >= 2)) {
        printf("design HETP %.3f m: measured/design %.3f, interval %s%s\n", j->design, j->dc.ratio,
               cur_why, j->have_diff ? " (second file)" : "");
    } else if (!isnan(j->design)) {
        char hi[32];
        if (isinf(j->dc.ratio_high))
            snprintf(hi, sizeof hi, "unbounded");
        else
            snprintf(hi, sizeof hi, "%.3f", j->dc.ratio_high);
        printf("design HETP %.3f m: measured/design %.3f, %d %% CI [%.3f, %s] -> %s%s\n", j->design,
               j->dc.ratio, pct, j->dc.ratio_low, hi, stagecal_hetp_verdict_name(j->dc.verdict),
               j->have_diff ? " (second file)" : "");
    }
    if (j->trays == 0 && j->have_diff)
        printf("equivalence, second vs first (margin %.0f %%): %s\n", 100 * j->margin,
               j->eq_old.text);
    if (j->trays == 0 && !isnan(j->design))
        printf("equivalence vs design (margin %.0f %%): %s%s\n", 100 * j->margin, j->eq_design.text,
               j->have_diff ? " (second file)" : "");
    if (j->packing >= 0)
        printf("rule of thumb (%s): %.3f m, range %.3f-%.3f m -> %s%s\n  source: %s\n",
               j->rule.rule, j->rule.hetp_m, j->rule.low_m, j->rule.high_m,
               stagecal_hetp_verdict_name(stagecal_hetp_vs_rule(&cur->h, &j->rule)),
               j->have_diff ? " (second file)" : "", j->rule.source);
}

/* Checks that need more than one option; returns 0 or the usage error's exit code. */
static int check_options(const struct job *j)
{
    if (j->packing == STAGECAL_PACKING_STRUCTURED && isnan(j->area))
        return cli_usage_error("option '--packing structured' needs '--area A' (m2/m3)");
    if (j->packing == STAGECAL_PACKING_RANDOM && isnan(j->size_mm))
        return cli_usage_error("option '--packing random' needs '--size D' (mm)");
    if (j->packing < 0 && (!isnan(j->area) || !isnan(j->size_mm)))
        return cli_usage_error("options '--area' and '--size' need '--packing KIND'");
    if (j->trays > 0 && (!isnan(j->height) || !isnan(j->design) || j->packing >= 0))
        return cli_usage_error("option '--trays' excludes '--packed-height', '--design-hetp' and "
                               "'--packing' (a trayed column has no HETP)");
    return 0;
}

#define OPT_POSITIVE(l, v, a, h, exp)                                                              \
    OPT_DOUBLE((l), (v), (a), (h), 0, INFINITY, CLI_D_LO_OPEN, (exp))

int cmd_hetp(int argc, char **argv, cli_ctx *ctx)
{
    struct job j;
    memset(&j, 0, sizeof j);
    j.reflux = j.fload = j.height = j.design = j.area = j.size_mm = NAN;
    j.level = 0.95;
    j.margin = STAGECAL_HETP_EQUIV_MARGIN;
    j.packing = -1;
    const struct cli_option opts[] = {
        OPT_REFLUX(&j.reflux, "reference reflux ratio, >= 0 or 'inf'"),
        OPT_FFACTOR(&j.fload, "reference F-factor [Pa^0.5] (needed when the form uses it)"),
        OPT_ALIAS("fload", "f-factor"),
        OPT_POSITIVE("packed-height", &j.height, "H",
                     "packed height [m]; default: the model file's height", "a packed height in m"),
        OPT_ALIAS("height", "packed-height"),
        OPT_LONG("trays", &j.trays, "N",
                 "actual trays: report overall tray efficiency instead of HETP", 1, 1000),
        OPT_POSITIVE("design-hetp", &j.design, "H",
                     "design HETP [m] from the packing supplier's data sheet",
                     "a design HETP in m"),
        OPT_CHOICE("packing", &j.packing, "KIND",
                   "'structured' (with --area) or 'random' (with --size) for the\n"
                   "rule-of-thumb check (common practice; sources in docs/hetp-trend.md)",
                   packing_names, NULL),
        OPT_POSITIVE("area", &j.area, "A", "specific area of structured packing [m2/m3]",
                     "a specific area in m2/m3"),
        OPT_POSITIVE("size", &j.size_mm, "D", "nominal size of random packing [mm]",
                     "a nominal packing size in mm"),
        OPT_DOUBLE("margin", &j.margin, "M",
                   "equivalence margin: HETP ratio within [1/(1+M), 1+M] (0.10)", 0, 1,
                   CLI_D_LO_OPEN | CLI_D_HI_OPEN, "a fraction, e.g. 0.10"),
        OPT_LEVEL(&j.level),
        OPT_END_COMMON(ctx),
    };
    int first, rc;
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    j.nfiles = argc - first;
    if (j.nfiles < 1)
        return cli_usage_error("a model file is required (see 'stagecal hetp --help')");
    if (j.nfiles > 2)
        return cli_usage_error("unexpected argument '%s' (expected one or two model files)",
                               argv[first + 2]);
    if ((rc = cli_require("reflux", j.reflux)) || (rc = check_options(&j)))
        return rc;
    j.have_diff = j.nfiles == 2;
    for (int i = 0; i < 2; i++)
        stagecal_model_init(&j.sd[i].m);
    for (int i = 0; i < j.nfiles && rc == 0; i++) {
        j.sd[i].path = argv[first + i];
        rc = open_side(&j.sd[i], &j);
    }
    if (rc == 0)
        rc = compare(&j);
    if (rc == 0 && ctx->json)
        rc = print_json(&j);
    else if (rc == 0)
        print_text(&j);
    for (int i = 0; i < 2; i++)
        stagecal_model_free(&j.sd[i].m);
    return rc;
}
