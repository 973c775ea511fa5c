/*
 * cmd_probe.c — `stagecal probe MODEL.json --at R[:F],…`: where to run the next tests.
 * Proposes K test conditions (each one production period at one reflux ratio, long
 * enough for one quasi-steady window) that shrink the confidence band of stages at the
 * conditions of interest most (I-optimal) or the whole parameter uncertainty (D-optimal),
 * with the expected half-width before and after. The numerics live in the design module.
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
#include "stagecal/convention.h"
#include "stagecal/design.h"
#include "stagecal/model.h"
#include "stagecal/plot.h"

static const struct cli_usage usage = {
    "usage: stagecal probe (MODEL.json | --column FILE [--form NAME] RUNLOG.csv...)\n"
    "                      --at R[:F][,R[:F]...] [--weights W[,W...]]\n"
    "                      [--reflux-range LO:HI] [--f-factor-range LO:HI] [--column FILE]\n"
    "                      [--tests K]"
    "                      [--criterion i|d] [--sample-interval MIN] [--seed N]\n"
    "                      [--compare R[:F]] [--chart-out FILE.png|svg|pdf] [--json] [--quiet]\n",
    "Where to run the next tests: K test conditions inside the ranges that shrink the\n"
    "95 % confidence band of stages at the conditions of interest most (I-optimal: the\n"
    "weighted average variance of the fitted stages there; D-optimal: the determinant of\n"
    "the parameters' information), from the model file's parameters, covariance and\n"
    "per-window sigma (by R where the file has a scatter function: a test at R adds\n"
    "information 1/sigma(R)^2). Each test is one production period at one reflux ratio long "
    "enough\n"
    "for one quasi-steady window. Prints the half-width of the interval at each condition\n"
    "of interest before and after the tests (expected, to first order in the parameters).\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal.\n"};

static const char *const criterion_names[] = {"i", "d", NULL};

#define MAX_AT 64

/* --compare: the same number of windows at one stated condition (e.g. the most common
 * production condition), evaluated like the proposal. */
struct compare {
    int on;
    double r, f;
    stagecal_design_result res;
    stagecal_design_at at[MAX_AT];
};

/* Parses "A" or "A:B" (B NAN when absent; with need_b both are required). */
static int parse_pair(const char *opt, const char *text, int need_b, const char *what, double *a,
                      double *b)
{
    char buf[128];
    if (strlen(text) >= sizeof buf)
        return cli_usage_error("option '--%s': '%s' is too long", opt, text);
    memcpy(buf, text, strlen(text) + 1);
    char *colon = strchr(buf, ':');
    *b = NAN;
    if (colon)
        *colon = '\0';
    else if (need_b)
        return cli_usage_error("option '--%s': '%s' is not a range (expected %s)", opt, text, what);
    if (cli_parse_double(opt, buf, 1, what, a))
        return CLI_EXIT_USAGE;
    if (colon && cli_parse_double(opt, colon + 1, 1, what, b))
        return CLI_EXIT_USAGE;
    return 0;
}

/* Splits a comma-separated list into at most MAX_AT items of parse_pair. */
static int parse_list(const char *opt, const char *text, const char *what, double *a, double *b,
                      size_t *n)
{
    const char *p = text;
    *n = 0;
    while (1) {
        const char *comma = strchr(p, ',');
        size_t len = comma ? (size_t)(comma - p) : strlen(p);
        char item[128];
        if (*n >= MAX_AT)
            return cli_usage_error("option '--%s': more than %d entries", opt, MAX_AT);
        if (len == 0 || len >= sizeof item)
            return cli_usage_error("option '--%s': empty or overlong entry in '%s' (expected %s)",
                                   opt, text, what);
        memcpy(item, p, len);
        item[len] = '\0';
        if (parse_pair(opt, item, 0, what, &a[*n], &b[*n]))
            return CLI_EXIT_USAGE;
        (*n)++;
        if (!comma)
            return 0;
        p = comma + 1;
    }
}

static json_t *real_or_null(double v, int ok)
{
    return ok ? cli_json_real(v) : json_null();
}

static int extrapolated(const stagecal_model *m, double r, double f)
{
    stagecal_model_point pt;
    return stagecal_model_eval(m, r, f, 0, &pt, NULL) == STAGECAL_OK && pt.extrapolated;
}

static json_t *compare_json(const stagecal_model *m, const struct compare *c, size_t n_at)
{
    if (!c->on)
        return json_null();
    json_t *ats = json_array();
    for (size_t j = 0; j < n_at; j++)
        json_array_append_new(
            ats, json_pack("{s:o, s:o, s:o}", "reflux", cli_json_reflux(c->at[j].r), "f_factor",
                           m->form.uses_load ? cli_json_real(c->at[j].f_load) : json_null(),
                           "half_width_after",
                           real_or_null(c->at[j].half_after, c->at[j].determined_after)));
    return json_pack("{s:o, s:o, s:i, s:o, s:o, s:o}", "reflux", cli_json_reflux(c->r), "f_factor",
                     m->form.uses_load ? cli_json_real(c->f) : json_null(), "tests", (int)c->res.k,
                     "at", ats, "criterion_after", cli_json_real(c->res.crit_after),
                     "log_det_ratio", cli_json_real(c->res.log_det_ratio));
}

static json_t *result_json(const char *path, const stagecal_model *m, const struct compare *cmp,
                           const stagecal_design_params *par, const stagecal_design_result *res,
                           const stagecal_design_at *at, size_t n_at)
{
    int load = m->form.uses_load;
    json_t *doc = json_object(), *tests = json_array(), *ats = json_array();
    json_object_set_new(doc, "format", json_string("stagecal-probe"));
    json_object_set_new(doc, "version", json_integer(1));
    json_object_set_new(doc, "model", json_string(path));
    json_object_set_new(doc, "column_id", json_string(m->column_id));
    json_object_set_new(doc, "form", json_string(m->form.name));
    json_object_set_new(doc, "criterion",
                        json_string(stagecal_design_criterion_key(res->criterion)));
    json_object_set_new(doc, "criterion_name",
                        json_string(stagecal_design_criterion_name(res->criterion)));
    json_object_set_new(doc, "level", json_real(m->level));
    for (size_t t = 0; t < res->k; t++) {
        const stagecal_design_test *x = &res->tests[t];
        json_array_append_new(tests,
                              json_pack("{s:o, s:o, s:o, s:b}", "reflux", cli_json_reflux(x->r),
                                        "f_factor", load ? cli_json_real(x->f_load) : json_null(),
                                        "duration_h", cli_json_real(x->duration_s / 3600.0),
                                        "extrapolated", extrapolated(m, x->r, x->f_load)));
    }
    json_object_set_new(doc, "tests", tests);
    for (size_t j = 0; j < n_at; j++) {
        const stagecal_design_at *a = &at[j];
        json_t *o = json_pack(
            "{s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:b}", "reflux", cli_json_reflux(a->r),
            "f_factor", load ? cli_json_real(a->f_load) : json_null(), "weight",
            cli_json_real(a->weight), "stages", cli_json_real(a->stages), "half_width_before",
            real_or_null(a->half_before, a->determined_before), "half_width_after",
            real_or_null(a->half_after, a->determined_after), "se_before",
            real_or_null(a->se_before, a->determined_before), "se_after",
            real_or_null(a->se_after, a->determined_after), "extrapolated",
            extrapolated(m, a->r, a->f_load));
        /* the t dof of each half-width (with a design: this condition's own) */
        json_object_set_new(o, "dof_before", real_or_null(a->dof_before, a->determined_before));
        json_object_set_new(o, "dof_after", real_or_null(a->dof_after, a->determined_after));
        json_array_append_new(ats, o);
    }
    json_object_set_new(doc, "at", ats);
    json_object_set_new(
        doc, "information",
        json_pack("{s:i, s:i, s:i, s:o, s:o, s:o, s:o, s:o}", "parameters", (int)res->p,
                  "rank_before", (int)res->rank_before, "rank_after", (int)res->rank_after,
                  "criterion_before", cli_json_real(res->crit_before), "criterion_after",
                  cli_json_real(res->crit_after), "log_det_ratio",
                  cli_json_real(res->log_det_ratio), "t_before", cli_json_real(res->t_before),
                  "t_after", cli_json_real(res->t_after)));
    json_object_set_new(doc, "identification",
                        res->rank_before < res->p
                            ? json_pack("{s:o, s:o, s:i}", "reflux",
                                        cli_json_reflux(res->identify_r), "f_factor",
                                        load ? cli_json_real(res->identify_f) : json_null(),
                                        "rank_with_one_window", (int)res->identify_rank)
                            : json_null());
    json_object_set_new(
        doc, "search",
        json_pack("{s:[o, o], s:o, s:s, s:i, s:i, s:i, s:I}", "reflux_range",
                  cli_json_reflux(res->r_lo), cli_json_reflux(res->r_hi), "f_factor_range",
                  load ? json_pack("[f, f]", res->f_lo, res->f_hi) : json_null(), "algorithm",
                  "NLopt LN_BOBYQA, multistart", "starts", (int)res->starts, "evaluations",
                  (int)res->evaluations, "nlopt_result", res->nlopt_result, "seed",
                  (json_int_t)par->seed));
    json_object_set_new(
        doc, "duration_rule",
        json_pack("{s:f, s:i, s:i, s:s}", "sample_interval_s", par->sample_interval_s,
                  "settle_samples", (int)res->settle_samples, "window_samples",
                  (int)res->window_samples, "rule", "(settle + window samples) x sample interval"));
    json_object_set_new(doc, "comparison", compare_json(m, cmp, n_at));
    json_object_set_new(doc, "units",
                        json_pack("{s:s, s:s, s:s}", "reflux", "-", "f_factor", "Pa^0.5",
                                  "half_width", "stages (pot included)"));
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return doc;
}

static void print_compare(const stagecal_model *m, const struct compare *c, size_t n_at)
{
    char a[32];
    cli_format_reflux(a, sizeof a, c->r, 3);
    printf("\nfor comparison, %zu windows at R = %s", c->res.k, a);
    if (m->form.uses_load)
        printf(", F = %.3g", c->f);
    printf(" instead:");
    for (size_t j = 0; j < n_at; j++) {
        if (c->at[j].determined_after)
            printf("%s +/- %.3f", j ? "," : "", c->at[j].half_after);
        else
            printf("%s not determined", j ? "," : "");
    }
    if (isfinite(c->res.log_det_ratio))
        printf("; determinant x %.3g", exp(c->res.log_det_ratio));
    printf("\n");
}

static void print_text(const char *path, const stagecal_model *m, const struct compare *cmp,
                       const stagecal_design_params *par, const stagecal_design_result *res,
                       const stagecal_design_at *at, size_t n_at)
{
    int load = m->form.uses_load, pct = (int)lround(m->level * 100);
    char a[32], b[32];
    if (m->scatter.n > 0) { /* σ of one window by R: a test's information is 1/σ(R)² */
        cli_format_reflux(a, sizeof a, m->r_min, 3);
        cli_format_reflux(b, sizeof b, m->r_max, 3);
        printf("%s (column %s, form %s, %zu windows, sigma %.3g stages per window at R = %s, "
               "%.3g at R = %s)\n",
               path, m->column_id, m->form.name, m->n_windows,
               stagecal_scatter_sd(&m->scatter, m->r_min), a,
               stagecal_scatter_sd(&m->scatter, m->r_max), b);
    } else
        printf("%s (column %s, form %s, %zu windows, sigma %.3g stages per window)\n", path,
               m->column_id, m->form.name, m->n_windows, m->sigma);
    cli_format_reflux(a, sizeof a, res->r_lo, 3);
    cli_format_reflux(b, sizeof b, res->r_hi, 3);
    printf("%s design of %zu tests, R in %s..%s", stagecal_design_criterion_name(res->criterion),
           res->k, a, b);
    if (load)
        printf(", F in %.3g..%.3g Pa^0.5", res->f_lo, res->f_hi);
    printf("\n\nproposed tests (one quasi-steady window each; %zu + %zu samples every %g min):\n",
           res->settle_samples, res->window_samples, par->sample_interval_s / 60);
    printf("  %-3s %-8s %-12s %-13s\n", "#", "R", load ? "F [Pa^0.5]" : "", "duration [h]");
    for (size_t t = 0; t < res->k; t++) {
        const stagecal_design_test *x = &res->tests[t];
        char fb[32] = "";
        cli_format_reflux(a, sizeof a, x->r, 3);
        if (load)
            snprintf(fb, sizeof fb, "%.3g", x->f_load);
        printf("  %-3zu %-8s %-12s %-13.1f%s\n", t + 1, a, fb, x->duration_s / 3600.0,
               extrapolated(m, x->r, x->f_load) ? "outside the fitted envelope" : "");
    }
    printf("\n%d %% confidence interval of stages (half-width), before -> after the tests:\n", pct);
    for (size_t j = 0; j < n_at; j++) {
        const stagecal_design_at *x = &at[j];
        char fb[48] = "", hb[32], ha[32];
        cli_format_reflux(a, sizeof a, x->r, 3);
        if (load)
            snprintf(fb, sizeof fb, ", F = %.3g", x->f_load);
        if (x->determined_before)
            snprintf(hb, sizeof hb, "+/- %.3f", x->half_before);
        else
            snprintf(hb, sizeof hb, "not determined");
        if (x->determined_after)
            snprintf(ha, sizeof ha, "+/- %.3f", x->half_after);
        else
            snprintf(ha, sizeof ha, "not determined");
        printf("  R = %s%s: %.3f stages, %s -> %s (weight %.3g)%s\n", a, fb, x->stages, hb, ha,
               x->weight, extrapolated(m, x->r, x->f_load) ? " [EXTRAPOLATED]" : "");
    }
    if (cmp->on)
        print_compare(m, cmp, n_at);
    if (isfinite(res->log_det_ratio))
        printf("\ninformation: determinant x %.3g with the tests", exp(res->log_det_ratio));
    else
        printf("\ninformation:");
    printf(" (rank %zu -> %zu of %zu)\n", res->rank_before, res->rank_after, res->p);
    if (res->rank_before < res->p) {
        cli_format_reflux(a, sizeof a, res->identify_r, 3);
        printf("the current evidence cannot identify form %s (rank %zu of %zu); one window at "
               "R = %s",
               m->form.name, res->rank_before, res->p, a);
        if (load)
            printf(", F = %.3g", res->identify_f);
        printf(" adds the most in the missing direction (rank %zu with it)\n", res->identify_rank);
    }
    printf("\nThe after-values assume the model's per-window sigma%s and its current parameters "
           "(first order); they are expectations, not guarantees. Run tests only inside the "
           "column's safe operating limits.\n",
           m->scatter.n > 0 ? " at each test's R" : "");
    if (m->design_run) /* tests from one batch share its error: docs/design.md */
        printf("The model's covariance is clustered by run: the after-values also assume the "
               "tests come from separate batches; tests run in one batch give a wider band "
               "(about 1.3 times, median, in the design study).\n");
}

/* Stages against R with the 95 % band before and after the tests, the tests and the
 * conditions of interest (load forms: at the first condition's F): the numbers from the
 * design library, the chart from the charts library. */
static int write_chart(const char *out, const stagecal_model *m, const stagecal_design_problem *pb,
                       const stagecal_design_result *res, const stagecal_design_at *at, size_t n_at)
{
    stagecal_design_curves *c = malloc(sizeof *c);
    stagecal_plot_chart *ch = NULL;
    stagecal_error err;
    stagecal_error_clear(&err);
    if (!c) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    int rc = stagecal_design_chart_curves(m, pb, res, at, n_at, c, &err);
    if (rc == STAGECAL_OK && c->skipped_tests)
        cli_warn("%zu test(s) at total reflux are not drawn on the R axis", c->skipped_tests);
    if (rc == STAGECAL_OK)
        rc = stagecal_plot_design(c, &ch, &err);
    if (rc == STAGECAL_OK) {
        stagecal_plot_params pp = stagecal_plot_default_params();
        rc = stagecal_plot_write(ch, out, &pp, &err);
    }
    stagecal_plot_chart_free(ch);
    free(c);
    return rc ? cli_fail(&err) : 0;
}

/* What the command line asks for. */
struct job {
    stagecal_design_params par;
    stagecal_design_point pts[MAX_AT];
    size_t n_at;
    struct compare cmp;
    const char *path, *chart;
    const char *column; /* --column: the flooding margin (NULL: none); with run logs also
                           their column */
    const char *form;   /* --form: the correlation fitted to run logs ("auto") */
    char **logs;        /* run logs in place of a model file (NULL: a model file) */
    size_t nlogs;
};

/* The arguments (nargs of them): one model file, or run logs (any argument that is not a
 * .json file; *logs = 1) with their column file; --form only with run logs. An exit code. */
static int check_arguments(int nargs, char **args, const char *column, const char *form, int *logs)
{
    if (nargs < 1)
        return cli_usage_error("a model file is required (see 'stagecal probe --help')");
    /* run logs in place of a model file: any argument that is not a .json file */
    *logs = 0;
    for (int i = 0; i < nargs; i++) {
        size_t n = strlen(args[i]);
        *logs |= !(n > 5 && strcmp(args[i] + n - 5, ".json") == 0);
    }
    if (!*logs && nargs > 1)
        return cli_usage_error("unexpected argument '%s' (expected one model file, or run logs "
                               "with --column)",
                               args[1]);
    if (*logs && !column)
        return cli_usage_error("run logs need option '--column' (their column file)");
    if (!*logs && strcmp(form, "auto") != 0)
        return cli_usage_error("option '--form' is for run logs (a model file has its form)");
    return 0;
}

/* The conditions of interest (--at: R, and F or NAN) with their weights (--weights, NULL:
 * equal) checked into pts. An exit code. */
static int fill_conditions(const double *at_r, const double *at_f, size_t n_at, const double *wv,
                           stagecal_design_point *pts)
{
    for (size_t i = 0; i < n_at; i++) {
        if (!(at_r[i] > 0))
            return cli_usage_error("option '--at': R = %g is not positive (expected R > 0 or "
                                   "'inf')",
                                   at_r[i]);
        if (!isnan(at_f[i]) && !(at_f[i] >= 0 && isfinite(at_f[i])))
            return cli_usage_error("option '--at': F = %g is invalid (expected a finite "
                                   "F-factor >= 0)",
                                   at_f[i]);
        if (wv && !(wv[i] > 0 && isfinite(wv[i])))
            return cli_usage_error("option '--weights': %g is not positive", wv[i]);
        pts[i].r = at_r[i];
        pts[i].f_load = at_f[i];
        pts[i].weight = wv ? wv[i] : 1.0;
    }
    return 0;
}

/* Parses and checks the options into j; returns 0, CLI_PARSE_HELP or an exit code. */
static int parse_options(int argc, char **argv, cli_ctx *ctx, struct job *j)
{
    stagecal_design_params par = stagecal_design_default_params();
    double at_r[MAX_AT], at_f[MAX_AT], wv[MAX_AT], wdummy[MAX_AT], minutes = 10;
    size_t n_at = 0, n_w = 0;
    const char *at_text = NULL, *w_text = NULL, *r_text = NULL, *f_text = NULL, *chart = NULL;
    const char *c_text = NULL, *column = NULL, *form = "auto";
    struct compare cmp;
    long k = 4, seed = 1;
    int criterion = 0, first, rc;
    const struct cli_option opts[] = {
        OPT_STRING(0, "at", &at_text, "LIST",
                   "conditions of interest: R or R:F (F-factor, Pa^0.5, needed\n"
                   "when the form uses the load), comma-separated; R may be 'inf'"),
        OPT_STRING(0, "weights", &w_text, "LIST",
                   "a weight > 0 per condition of interest (default: equal)"),
        OPT_STRING(0, "reflux-range", &r_text, "LO:HI",
                   "where tests may run (HI may be 'inf'); default: from the\n"
                   "fitted envelope and the conditions of interest together"),
        OPT_STRING(0, "f-factor-range", &f_text, "LO:HI",
                   "F-factor range for tests [Pa^0.5] (load forms; default the\n"
                   "same way), at most the column's flooding margin (--column)"),
        OPT_COLUMN(&column, "column file: tests stay below its flooding F-factor times the\n"
                            "margin (flooding.f_factor, flooding.margin; docs/column-file.md);\n"
                            "required with run logs"),
        OPT_FORM(&form, "with run logs: the correlation form to fit (default: auto)"),
        OPT_LONG("tests", &k, "K", "number of test conditions, 1..64 (4)", 1, STAGECAL_DESIGN_MAXK),
        OPT_CHOICE("criterion", &criterion, "i|d", "I-optimal (default) or D-optimal",
                   criterion_names, NULL),
        OPT_DOUBLE("sample-interval", &minutes, "MIN",
                   "minutes between logged samples, for the durations (10)", 0, INFINITY,
                   CLI_D_LO_OPEN, "minutes > 0"),
        OPT_SEED(&seed),
        OPT_STRING(0, "compare", &c_text, "R[:F]",
                   "also the band after as many windows at this condition (e.g. the\n"
                   "most common production condition), for comparison"),
        OPT_STRING(0, "chart-out", &chart, "FILE",
                   "also draw stages against R with the band before and after\n"
                   "the tests (PNG, SVG or PDF by extension)"),
        OPT_ALIAS("chart", "chart-out"),
        OPT_END_COMMON(ctx),
    };
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    par.criterion = criterion == 1 ? STAGECAL_DESIGN_D : STAGECAL_DESIGN_I;
    memset(&cmp, 0, sizeof cmp);
    cmp.on = c_text != NULL;
    if ((at_text && parse_list("at", at_text, "R or R:F, R > 0 or 'inf'", at_r, at_f, &n_at)) ||
        (c_text && parse_pair("compare", c_text, 0, "R or R:F, R > 0 or 'inf'", &cmp.r, &cmp.f)) ||
        (w_text && parse_list("weights", w_text, "weights > 0", wv, wdummy, &n_w)) ||
        (r_text && parse_pair("reflux-range", r_text, 1,
                              "LO:HI, reflux ratios > 0, HI may be 'inf'", &par.r_lo, &par.r_hi)) ||
        (f_text && parse_pair("f-factor-range", f_text, 1, "LO:HI, F-factors in Pa^0.5", &par.f_lo,
                              &par.f_hi)))
        return CLI_EXIT_USAGE;
    int logs = 0;
    if ((rc = check_arguments(argc - first, argv + first, column, form, &logs)))
        return rc;
    if (!at_text)
        return cli_usage_error("option '--at' is required (see 'stagecal probe --help')");
    if (n_w && n_w != n_at)
        return cli_usage_error("option '--weights': %zu weights for %zu conditions in '--at'", n_w,
                               n_at);
    if ((rc = fill_conditions(at_r, at_f, n_at, n_w ? wv : NULL, j->pts)))
        return rc;
    if (cmp.on && (!(cmp.r > 0) || (!isnan(cmp.f) && !(cmp.f >= 0 && isfinite(cmp.f)))))
        return cli_usage_error("option '--compare': R = %g, F = %g is invalid (expected R > 0 or "
                               "'inf' and a finite F-factor >= 0)",
                               cmp.r, cmp.f);
    par.tests = (size_t)k;
    par.seed = (unsigned long)seed;
    par.sample_interval_s = minutes * 60;

    j->path = argv[first];
    if (chart && cli_check_output("chart-out", chart, &j->path, 1))
        return CLI_EXIT_USAGE;
    j->par = par;
    j->n_at = n_at;
    j->cmp = cmp;
    j->chart = chart;
    j->column = column;
    j->form = form;
    j->logs = logs ? argv + first : NULL;
    j->nlogs = logs ? (size_t)(argc - first) : 0;
    if (logs && chart &&
        cli_check_output("chart-out", chart, (const char *const *)j->logs, j->nlogs))
        return CLI_EXIT_USAGE;
    return 0;
}

/* The model of run logs: calibrate's chain in memory (no model file written), its warnings
 * on stderr. 0 or an exit code; *m owns the model. */
static int model_from_logs(const struct job *jb, stagecal_model *m)
{
    stagecal_calibrate_params cp = stagecal_calibrate_default_params();
    stagecal_calibration cal;
    stagecal_error err;
    cp.form = jb->form;
    int rc =
        stagecal_calibrate(jb->column, (const char *const *)jb->logs, jb->nlogs, &cp, &cal, &err);
    if (rc != STAGECAL_OK) {
        for (size_t k = 0; cal.findings && k < cal.findings->n && k < 20; k++)
            if (cal.findings->items[k].severity == STAGECAL_FINDING_ERROR)
                cli_error("%s", cal.findings->items[k].text);
        rc = cli_fail_data(&err);
    } else {
        stagecal_model_free(m);
        *m = cal.model; /* the model moves out of the calibration */
        stagecal_model_init(&cal.model);
        for (size_t k = 0; k < m->n_warnings; k++)
            cli_warn("%s", m->warnings[k]);
    }
    stagecal_calibration_free(&cal);
    return rc;
}

/* The column's flooding margin into par->f_max (when the file states flooding), with a
 * warning for each condition of interest beyond it. 0 or an exit code. */
static int flooding_limit(const char *column, const stagecal_model *m,
                          const stagecal_design_point *pts, size_t n_at,
                          stagecal_design_params *par)
{
    stagecal_column col;
    stagecal_error err;
    stagecal_error_clear(&err);
    if (stagecal_column_load(column, &col, &err) != STAGECAL_OK)
        return cli_fail(&err);
    cli_column_warn(&col, column);
    if (strcmp(col.id, m->column_id) != 0)
        cli_warn("%s: column '%s' is not the model's column '%s'", column, col.id, m->column_id);
    if (col.flood_f_pa05 > 0) {
        par->f_max = col.flood_margin * col.flood_f_pa05;
        for (size_t j = 0; j < n_at; j++)
            if (pts[j].f_load > par->f_max)
                cli_warn("%s: condition of interest F = %g Pa^0.5 is beyond the flooding margin "
                         "(%g x %g = %g Pa^0.5): no test is proposed there",
                         column, pts[j].f_load, col.flood_margin, col.flood_f_pa05, par->f_max);
    } else if (m->form.uses_load) {
        cli_warn("%s: the column file states no flooding F-factor (flooding.f_factor): the "
                 "F-factor range is not limited by it",
                 column);
    }
    stagecal_column_free(&col);
    return 0;
}

int cmd_probe(int argc, char **argv, cli_ctx *ctx)
{
    struct job jb;
    int rc = parse_options(argc, argv, ctx, &jb);
    if (rc)
        return rc;
    const char *path = jb.path, *chart = jb.chart;
    const stagecal_design_point *pts = jb.pts;
    size_t n_at = jb.n_at;
    stagecal_design_params par = jb.par;
    struct compare cmp = jb.cmp;
    stagecal_model m;
    stagecal_design_problem pb;
    stagecal_design_result res;
    stagecal_design_at out[MAX_AT];
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_model_init(&m);
    if (jb.logs)
        rc = model_from_logs(&jb, &m);
    else if ((rc = stagecal_model_load(path, &m, &err)))
        rc = cli_fail(&err);
    if (rc)
        goto done;
    if (jb.column && (rc = flooding_limit(jb.column, &m, pts, n_at, &par)))
        goto done;
    if (m.form.uses_load)
        for (size_t j = 0; j <= n_at; j++)
            if (j < n_at ? isnan(pts[j].f_load) : cmp.on && isnan(cmp.f)) {
                rc = cli_usage_error("%s: form '%s' uses the vapour load: give every '--at' "
                                     "(and '--compare') condition as R:F (F-factor in Pa^0.5)",
                                     path, m.form.name);
                goto done;
            }
    if ((rc = stagecal_design_from_model(&m, &pb, &err))) {
        rc = cli_fail(&err);
        goto done;
    }
    if ((rc = stagecal_design_propose(&pb, pts, n_at, &par, m.r_min, m.r_max,
                                      m.has_load ? m.f_min : NAN, m.has_load ? m.f_max : NAN, &res,
                                      out, &err))) {
        rc = cli_fail(&err);
        goto done;
    }
    if (cmp.on) {
        stagecal_design_test same[STAGECAL_DESIGN_MAXK];
        for (size_t t = 0; t < par.tests; t++)
            same[t] = (stagecal_design_test){cmp.r, m.form.uses_load ? cmp.f : NAN, NAN};
        if ((rc = stagecal_design_evaluate(&pb, same, par.tests, pts, n_at, par.criterion, &cmp.res,
                                           cmp.at, &err))) {
            rc = cli_fail(&err);
            goto done;
        }
    }
    for (size_t j = 0; j < n_at; j++)
        if (extrapolated(&m, pts[j].r, pts[j].f_load))
            cli_warn("%s: condition of interest R = %g lies outside the fitted envelope "
                     "(extrapolation)",
                     path, pts[j].r);
    if (chart && (rc = write_chart(chart, &m, &pb, &res, out, n_at)))
        goto done;
    if (ctx->json)
        rc = cli_json_print(result_json(path, &m, &cmp, &par, &res, out, n_at));
    else {
        print_text(path, &m, &cmp, &par, &res, out, n_at);
        rc = CLI_EXIT_OK;
    }
done:
    stagecal_model_free(&m);
    return rc;
}
