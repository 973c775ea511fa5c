/*
 * cmd_regress.c — `stagecal regress POINTS.csv --form NAME`: fit a correlation of
 * effective stages against reflux ratio (and vapour load) to pre-computed stage
 * counts, with standard errors, t intervals, bands, information criteria and
 * optional bootstrap and robust reweighting. `--form auto` ranks several forms by
 * AICc and reports the best in full. The numerics live in the regress module.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/regress.h"

static const struct cli_usage usage = {
    "usage: stagecal regress POINTS.csv --form NAME|auto [--level P] [--bootstrap B]\n"
    "                        [--seed S] [--resample case|residual] [--robust huber|bisquare]\n"
    "                        [--start V1,V2,...] [--absolute-sigma] [--band-points N]\n"
    "                        [--threads N] [--json] [--quiet]\n",
    "Fits effective stages (the pot included) against the reflux ratio R and, where the\n"
    "points carry it, the F-factor F. POINTS.csv has a header 'R,stages' with optional\n"
    "'F' (Pa^0.5) and 'sigma' (standard uncertainty of stages; weights 1/sigma^2);\n"
    "R may be 'inf'. '-' reads standard input.\n"
    "The covariance is the least-squares one, s^2 (J'WJ)^-1, with t at n - p dof: the\n"
    "points are taken as independent. A points file does not say which run each point\n"
    "came from, so the covariance clustered by run (calibrate --covariance cr2-run) is\n"
    "not offered here: fit the run logs with calibrate for it.\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal.\n"};

static const char *const resample_names[] = {"case", "residual", NULL};

static json_t *json_r(double r)
{
    return isinf(r) ? json_string("inf") : cli_json_real(r);
}

static json_t *band_json(const stagecal_regress_result *res)
{
    json_t *a = json_array();
    for (size_t i = 0; i < res->nband; i++) {
        const stagecal_band *b = &res->band[i];
        json_t *o =
            json_pack("{s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o}", "R", json_r(b->r), "value",
                      cli_json_real(b->value), "se_fit", cli_json_real(b->se_fit), "se_pred",
                      cli_json_real(b->se_pred), "ci_low", cli_json_real(b->ci_low), "ci_high",
                      cli_json_real(b->ci_high), "pi_low", cli_json_real(b->pi_low), "pi_high",
                      cli_json_real(b->pi_high));
        if (res->form.uses_load)
            json_object_set_new(o, "F", cli_json_real(b->f_load));
        json_array_append_new(a, o);
    }
    return a;
}

static json_t *ranking_json(const stagecal_regress_rank_row *rows, size_t nrows)
{
    json_t *a = json_array();
    for (size_t i = 0; i < nrows; i++) {
        const stagecal_regress_rank_row *r = &rows[i];
        json_t *o = json_pack("{s:s, s:s}", "form", r->form.name, "status",
                              r->status == STAGECAL_OK ? "ok" : "failed");
        if (r->status == STAGECAL_OK) {
            json_object_update_new(
                o,
                json_pack("{s:I, s:o, s:o, s:o, s:o, s:o, s:o, s:o}", "p", (json_int_t)r->p, "aicc",
                          cli_json_real(r->aicc), "delta_aicc", cli_json_real(r->delta_aicc),
                          "akaike_weight", cli_json_real(r->akaike_weight), "bic",
                          cli_json_real(r->bic), "rss", cli_json_real(r->rss), "sigma",
                          cli_json_real(r->sigma), "r2", cli_json_real(r->r2)));
        } else {
            json_object_set_new(o, "message", json_string(r->message));
        }
        json_array_append_new(a, o);
    }
    return a;
}

static const char *robust_name(stagecal_robust_kind k)
{
    return k == STAGECAL_ROBUST_HUBER      ? "huber"
           : k == STAGECAL_ROBUST_BISQUARE ? "bisquare"
                                           : "none";
}

static int print_json(const char *path, const stagecal_regress_result *res,
                      const stagecal_regress_rank_row *rows, size_t nrows)
{
    size_t p = res->p;
    json_t *params = json_array(), *cov = json_array();
    for (size_t i = 0; i < p; i++) {
        /* a parameter the evidence does not determine has no estimate to print */
        int und = (res->undetermined >> i) & 1u;
        json_t *o =
            json_pack("{s:s, s:o, s:o, s:o, s:o, s:b}", "name", res->form.param_names[i], "value",
                      und ? json_null() : cli_json_real(res->theta[i]), "se",
                      und ? json_null() : cli_json_real(res->se[i]), "ci_low",
                      und ? json_null() : cli_json_real(res->ci_low[i]), "ci_high",
                      und ? json_null() : cli_json_real(res->ci_high[i]), "determined", !und);
        json_array_append_new(params, o);
        json_t *row = json_array();
        for (size_t j = 0; j < p; j++)
            json_array_append_new(row, cli_json_real(res->cov[i * p + j]));
        json_array_append_new(cov, row);
    }
    json_t *env = json_pack("{s:o, s:o, s:b}", "R_min", cli_json_real(res->r_min), "R_max",
                            cli_json_real(res->r_max), "total_reflux", res->has_total_reflux);
    if (res->form.uses_load) {
        json_object_set_new(env, "F_min", cli_json_real(res->f_min));
        json_object_set_new(env, "F_max", cli_json_real(res->f_max));
    }
    json_t *doc = json_object();
    json_object_set_new(doc, "format", json_string("stagecal-regress"));
    json_object_set_new(doc, "format_version", json_integer(1));
    json_object_set_new(doc, "points_file", json_string(path));
    json_object_set_new(doc, "form", json_string(res->form.name));
    json_object_set_new(doc, "stage_convention", json_string(stagecal_convention_text_any()));
    json_object_set_new(doc, "n", json_integer((json_int_t)res->n));
    json_object_set_new(doc, "p", json_integer((json_int_t)p));
    json_object_set_new(doc, "dof", cli_json_real(res->dof));
    json_object_set_new(doc, "parameters", params);
    json_object_set_new(doc, "covariance", cov);
    json_object_set_new(doc, "rss", cli_json_real(res->rss));
    json_object_set_new(doc, "sigma", cli_json_real(res->sigma));
    json_object_set_new(doc, "sigma_obs", cli_json_real(res->sigma_obs));
    json_object_set_new(doc, "r2", cli_json_real(res->r2));
    json_object_set_new(doc, "aicc", res->ic_defined ? cli_json_real(res->aicc) : json_null());
    json_object_set_new(doc, "bic", res->ic_defined ? cli_json_real(res->bic) : json_null());
    json_object_set_new(doc, "level", cli_json_real(res->level));
    json_object_set_new(doc, "t_quantile", cli_json_real(res->tquant));
    json_object_set_new(doc, "weighted", json_boolean(res->weighted));
    json_object_set_new(doc, "covariance_scaled", json_boolean(res->cov_scaled));
    json_object_set_new(doc, "stop_reason", json_string(stagecal_regress_stop_text(res->stop)));
    json_object_set_new(doc, "iterations", json_integer((json_int_t)res->iterations));
    json_object_set_new(doc, "starts", json_integer((json_int_t)res->starts));
    json_object_set_new(doc, "polish_steps", json_integer((json_int_t)res->polish));
    json_object_set_new(doc, "envelope", env);
    json_object_set_new(doc, "band", band_json(res));
    json_object_set_new(doc, "units",
                        json_pack("{s:s, s:s, s:s}", "R", "-", "stages",
                                  "- (equilibrium stages, pot included)", "F", "Pa^0.5"));
    if (!doc)
        return CLI_EXIT_SOFTWARE;
    if (res->robust != STAGECAL_ROBUST_NONE) {
        json_t *w = json_array();
        for (size_t i = 0; i < res->n; i++)
            json_array_append_new(w, cli_json_real(res->weights[i]));
        json_object_set_new(doc, "robust",
                            json_pack("{s:s, s:o, s:I, s:o}", "method", robust_name(res->robust),
                                      "scale", cli_json_real(res->robust_scale), "iterations",
                                      (json_int_t)res->robust_iter, "weights", w));
    }
    cli_json_bootstrap(res, params, doc);
    if (rows)
        json_object_set_new(doc, "ranking", ranking_json(rows, nrows));
    return cli_json_print(doc);
}

static void print_r(double r)
{
    if (isinf(r))
        printf("%10s", "inf");
    else
        printf("%10.4g", r);
}

static void print_text(const char *path, const stagecal_regress_result *res,
                       const stagecal_regress_rank_row *rows, size_t nrows)
{
    if (rows) {
        printf("form ranking by AICc (%s):\n", path);
        printf("  %-24s %3s %12s %10s %8s %12s %12s\n", "form", "p", "AICc", "dAICc", "weight",
               "BIC", "sigma");
        for (size_t i = 0; i < nrows; i++) {
            const stagecal_regress_rank_row *r = &rows[i];
            if (r->status == STAGECAL_OK)
                printf("  %-24s %3zu %12.5g %10.4g %8.3f %12.5g %12.5g\n", r->form.name, r->p,
                       r->aicc, r->delta_aicc, r->akaike_weight, r->bic, r->sigma);
            else
                printf("  %-24s not fitted: %s\n", r->form.name, r->message);
        }
        printf("\n");
    }
    printf("form        %s\n", res->form.name);
    printf("points      %zu (%s), %zu parameters, %g degrees of freedom\n", res->n,
           res->weighted ? "weighted by 1/sigma^2" : "unweighted", res->p, res->dof);
    printf("stages      equilibrium stages including the pot\n\n");
    cli_print_params(res, 1);
    if (res->undetermined) {
        char why[STAGECAL_ERROR_TEXT];
        stagecal_regress_ident_text(res, why, sizeof why);
        printf("  (%s)\n", why);
    }
    cli_print_bootstrap(res);
    printf("\nresidual sigma %.8g   RSS %.8g   R^2 %.6f\n", res->sigma, res->rss, res->r2);
    if (res->ic_defined)
        printf("AICc %.6g   BIC %.6g\n", res->aicc, res->bic);
    else
        printf("AICc, BIC: undefined (too few points or an exact fit)\n");
    printf("covariance %s\n", res->cov_scaled ? "scaled by the residual variance s^2"
                                              : "from the stated sigma alone (not scaled)");
    printf("solver: %s (%zu iterations, %zu start(s), %zu polish steps)\n",
           stagecal_regress_stop_text(res->stop), res->iterations, res->starts, res->polish);
    if (res->robust != STAGECAL_ROBUST_NONE) {
        size_t down = 0;
        for (size_t i = 0; i < res->n; i++)
            down += res->weights[i] < 1;
        printf("robust: %s, MAD scale %.6g, %zu iterations, %zu of %zu points down-weighted\n",
               robust_name(res->robust), res->robust_scale, res->robust_iter, down, res->n);
    }
    printf("envelope: R in [%.6g, %.6g]%s", res->r_min, res->r_max,
           res->has_total_reflux ? " and total reflux" : "");
    if (res->form.uses_load)
        printf(", F in [%.6g, %.6g] Pa^0.5", res->f_min, res->f_max);
    printf("\n");
    if (res->nband > 0) {
        printf("\n  %10s%s %12s %12s %25s %25s\n", "R", res->form.uses_load ? "        F" : "",
               "stages", "SE fit", "confidence band", "prediction band");
        for (size_t i = 0; i < res->nband; i++) {
            const stagecal_band *b = &res->band[i];
            printf("  ");
            print_r(b->r);
            if (res->form.uses_load)
                printf(" %8.4g", b->f_load);
            printf(" %12.6g %12.4g   [%9.5g, %9.5g]   [%9.5g, %9.5g]\n", b->value, b->se_fit,
                   b->ci_low, b->ci_high, b->pi_low, b->pi_high);
        }
    }
}

static int parse_start(const char *text, double *v, size_t *nv)
{
    char buf[512];
    size_t k = 0;
    snprintf(buf, sizeof buf, "%s", text);
    for (char *s = buf, *comma;; s = comma + 1) {
        comma = strchr(s, ',');
        if (comma)
            *comma = '\0';
        if (k == STAGECAL_FORM_MAXP)
            return cli_usage_error("option '--start': more than %d values", STAGECAL_FORM_MAXP);
        if (cli_parse_double("start", s, 0, "comma-separated numbers", &v[k]))
            return CLI_EXIT_USAGE;
        k++;
        if (!comma)
            break;
    }
    *nv = k;
    return 0;
}

/* The library names itself ("regress: …") for callers such as calibrate; here the
 * command name already says it. */
static stagecal_error *drop_module_prefix(stagecal_error *err)
{
    static const char prefix[] = "regress: ";
    size_t n = sizeof prefix - 1;
    if (strncmp(err->text, prefix, n) == 0)
        memmove(err->text, err->text + n, strlen(err->text + n) + 1);
    return err;
}

int cmd_regress(int argc, char **argv, cli_ctx *ctx)
{
    stagecal_regress_params prm = stagecal_regress_default_params();
    const char *form_name = NULL, *start_text = NULL;
    double start[STAGECAL_FORM_MAXP];
    size_t nstart = 0;
    long boot = 0, seed = (long)prm.seed, band = (long)prm.band_points, threads = -1;
    int absolute = 0, resample = 0, robust = -1, first, rc;
    const struct cli_option opts[] = {
        OPT_FORM(&form_name, "constant | saturating | saturating-load | linear:TERMS, with\n"
                             "TERMS from 1, 1/R, L/V, lnR, F, F^2, 1/F joined by '+'\n"
                             "(e.g. linear:1+1/R); 'auto' ranks the candidates by AICc\n"
                             "(docs/forms.md)"),
        OPT_LEVEL(&prm.level),
        OPT_BOOTSTRAP(&boot),
        OPT_SEED(&seed),
        OPT_CHOICE("resample", &resample, "KIND",
                   "bootstrap by 'case' (default) or 'residual' resampling", resample_names, NULL),
        OPT_THREADS(&threads, "threads refitting the bootstrap's resamples beside the main one"),
        OPT_ROBUST(&robust),
        OPT_STRING(0, "start", &start_text, "LIST",
                   "comma-separated start values of the parameters (nonlinear forms)"),
        OPT_FLAG(0, "absolute-sigma", &absolute,
                 "take sigma as absolute: covariance (J'WJ)^-1, not scaled by s^2"),
        OPT_LONG("band-points", &band, "N", "points of the band grid over the fitted R range (25)",
                 0, 10000),
        OPT_FLAG(0, "allow-undetermined", &prm.allow_undetermined,
                 "report a fit whose evidence does not determine a parameter (that\n"
                 "parameter 'not determined'); without it such a fit is refused (exit 65)\n"
                 "with what would determine it"),
        OPT_END_COMMON(ctx),
    };
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    if (start_text && (rc = parse_start(start_text, start, &nstart)) != 0)
        return rc;
    prm.bootstrap = (size_t)boot;
    prm.threads = (size_t)cli_threads(threads);
    prm.seed = (unsigned long)seed;
    prm.band_points = (size_t)band;
    prm.boot_kind = resample == 1 ? STAGECAL_BOOT_RESIDUAL : STAGECAL_BOOT_CASE;
    prm.robust = cli_robust_kind(robust);
    if (absolute)
        prm.scale_cov = 0;
    if (first >= argc)
        return cli_usage_error("a points file is required (see 'stagecal regress --help')");
    if (first + 1 < argc)
        return cli_usage_error("unexpected argument '%s' (regress takes one points file)",
                               argv[first + 1]);
    if (!form_name)
        return cli_usage_error("option '--form' is required (see 'stagecal regress --help')");
    const char *path = argv[first];

    stagecal_error err;
    stagecal_form form;
    stagecal_regress_rank_row rows[STAGECAL_REGRESS_MAXRANK];
    size_t nrows = 0;
    int is_auto = strcmp(form_name, "auto") == 0;
    stagecal_error_clear(&err);
    if (!is_auto && stagecal_form_parse(form_name, &form, &err) != STAGECAL_OK)
        return cli_usage_error("option '--form': %s", err.text);
    if (nstart > 0) {
        if (is_auto || nstart != form.p)
            return cli_usage_error("option '--start': %zu values (expected %zu, one per "
                                   "parameter of the form)",
                                   nstart, is_auto ? (size_t)0 : form.p);
        prm.theta0 = start;
    }

    stagecal_regress_data data;
    memset(&err, 0, sizeof err);
    if ((rc = stagecal_regress_data_read(path, &data, &err)) != STAGECAL_OK)
        return cli_fail(&err);
    if (is_auto) {
        if (stagecal_regress_rank(&data, NULL, 0, &prm, rows, &nrows, &err) != STAGECAL_OK) {
            stagecal_regress_data_free(&data);
            return cli_fail_data(drop_module_prefix(&err));
        }
        form = rows[0].form;
    }
    stagecal_regress_result res;
    rc = stagecal_regress_fit(&data, &form, &prm, &res, &err);
    stagecal_regress_data_free(&data);
    /* The options were checked above, so what the fit still rejects as an invalid argument
     * is the points file's content: a form that needs F on points without it, a form
     * undefined at a point's R (bad data, 65). */
    if (rc != STAGECAL_OK)
        return cli_fail_data(drop_module_prefix(&err));
    if (res.r_max > 0 && !cli_quiet && res.boot_b > 0 && res.boot_ok < res.boot_b)
        cli_warn("bootstrap: %zu of %zu resamples could not be fitted and were left out",
                 res.boot_b - res.boot_ok, res.boot_b);
    if (ctx->json)
        rc = print_json(path, &res, is_auto ? rows : NULL, nrows);
    else
        print_text(path, &res, is_auto ? rows : NULL, nrows);
    stagecal_regress_result_free(&res);
    return rc;
}
