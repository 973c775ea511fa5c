/*
 * cli.c — shared command-line helpers: messages, exit codes, strict number
 * parsing (strtod with end-pointer and errno checks, never atof), JSON output.
 */
#include "cli.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include <sys/stat.h>
#include <getopt.h>

#include "banned.h"
#include "fileio.h"

const char *cli_command = "";
int cli_quiet = 0;

__attribute__((format(printf, 2, 0))) static void vmessage(const char *kind, const char *fmt,
                                                           va_list ap)
{
    if (cli_command[0])
        fprintf(stderr, "stagecal %s: %s", cli_command, kind);
    else
        fprintf(stderr, "stagecal: %s", kind);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
}

void cli_error(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vmessage("", fmt, ap);
    va_end(ap);
}

void cli_warn(const char *fmt, ...)
{
    if (cli_quiet)
        return;
    va_list ap;
    va_start(ap, fmt);
    vmessage("warning: ", fmt, ap);
    va_end(ap);
}

int cli_usage_error(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vmessage("", fmt, ap);
    va_end(ap);
    return CLI_EXIT_USAGE;
}

int cli_exit_for(int status)
{
    switch (status) {
    case STAGECAL_OK:
        return CLI_EXIT_OK;
    case STAGECAL_EINVAL:
        return CLI_EXIT_USAGE;
    case STAGECAL_EDATA:
    case STAGECAL_EVERSION:
        return CLI_EXIT_DATA;
    case STAGECAL_ENOINPUT:
        return CLI_EXIT_NOINPUT;
    case STAGECAL_EWRITE:
        return CLI_EXIT_CANTCREAT;
    default:
        return CLI_EXIT_SOFTWARE;
    }
}

int cli_fail(const stagecal_error *err)
{
    cli_error("%s", err->text[0] ? err->text : stagecal_strerror(err->code));
    return cli_exit_for(err->code);
}

int cli_fail_data(const stagecal_error *err)
{
    int rc = cli_fail(err);
    return err->code == STAGECAL_EINVAL ? CLI_EXIT_DATA : rc;
}

/* strtod and strtol skip leading white space and strtod reads C99 hex floats and
 * "nan"/"infinity"; none of these is a number a person types for an option. */
static int plain_number_text(const char *text)
{
    const char *p = text + (text[0] == '-' || text[0] == '+');
    if (!text[0] || isspace((unsigned char)text[0]))
        return 0;
    if (p[0] == '0' && (p[1] == 'x' || p[1] == 'X'))
        return 0;
    return 1;
}

int cli_parse_double(const char *opt, const char *text, int allow_inf, const char *expected,
                     double *out)
{
    char *end = NULL;
    if (allow_inf && (strcmp(text, "inf") == 0 || strcmp(text, "Inf") == 0 ||
                      strcmp(text, "INF") == 0 || strcmp(text, "infinity") == 0)) {
        *out = INFINITY;
        return 0;
    }
    errno = 0;
    double v = plain_number_text(text) ? strtod(text, &end) : 0.0;
    if (!plain_number_text(text) || *end != '\0' || errno == ERANGE || !isfinite(v)) {
        cli_error("option '--%s': '%s' is not a number (expected %s)", opt, text, expected);
        return -1;
    }
    *out = v;
    return 0;
}

int cli_parse_long(const char *opt, const char *text, long lo, long hi, long *out)
{
    char *end = NULL;
    errno = 0;
    long v = plain_number_text(text) ? strtol(text, &end, 10) : 0;
    if (!plain_number_text(text) || *end != '\0' || errno == ERANGE || v < lo || v > hi) {
        cli_error("option '--%s': '%s' is not an integer in [%ld, %ld]", opt, text, lo, hi);
        return -1;
    }
    *out = v;
    return 0;
}

int cli_json_print(json_t *doc)
{
    int rc = json_dumpf(doc, stdout, JSON_INDENT(2) | JSON_SORT_KEYS | JSON_REAL_PRECISION(17));
    json_decref(doc);
    if (rc != 0 || fputc('\n', stdout) == EOF)
        return CLI_EXIT_CANTCREAT;
    return 0;
}

json_t *cli_json_real(double v)
{
    return isfinite(v) ? json_real(v) : json_null();
}

int cli_progress_enabled(void)
{
    return !cli_quiet && isatty(STDERR_FILENO) && getenv("NO_COLOR") == NULL;
}

void cli_system_init(cli_system *s)
{
    memset(s, 0, sizeof *s);
    s->alpha = NAN;
    s->kvalue = NAN;
}

int cli_system_open(cli_system *s)
{
    stagecal_error err;
    int given = !isnan(s->alpha) + !isnan(s->kvalue) + (s->column_path != NULL);
    if (given == 0)
        return cli_usage_error("one of '--alpha', '--kvalue' or '--column' is required");
    if (given > 1)
        return cli_usage_error("options '--alpha', '--kvalue' and '--column' exclude each other");
    if (s->column_path) {
        if (stagecal_column_load(s->column_path, &s->col, &err) != STAGECAL_OK)
            return cli_fail(&err);
        s->have_column = 1;
        s->vle = s->col.system.vle;
        cli_column_warn(&s->col, s->column_path);
        return 0;
    }
    if (!isnan(s->alpha)) {
        if (!(s->alpha > 1))
            return cli_usage_error("option '--alpha': %g is outside (1, inf) (expected the "
                                   "relative volatility of light to heavy, > 1)",
                                   s->alpha);
        s->vle = stagecal_vle_alloc_alpha(s->alpha, &err);
    } else {
        if (!(s->kvalue > 1))
            return cli_usage_error("option '--kvalue': %g is outside (1, inf) (expected the "
                                   "K value y/x of the light component, > 1)",
                                   s->kvalue);
        s->vle = stagecal_vle_alloc_kvalue(s->kvalue, &err);
    }
    if (!s->vle)
        return cli_fail(&err);
    s->own_vle = 1;
    return 0;
}

void cli_system_close(cli_system *s)
{
    if (s->own_vle)
        stagecal_vle_free(s->vle);
    if (s->have_column)
        stagecal_column_free(&s->col);
    s->vle = NULL;
    s->own_vle = s->have_column = 0;
}

void cli_column_warn(const stagecal_column *col, const char *path)
{
    static int warned; /* one command per process: warn once per command */
    if (warned)
        return;
    warned = 1;
    for (size_t k = 0; k < col->n_warnings; k++)
        cli_warn("%s: %s", path, col->warnings[k]);
}

json_t *cli_system_json(const cli_system *s)
{
    json_t *o = json_object();
    json_object_set_new(o, "kind",
                        json_string(stagecal_vle_kind_name(stagecal_vle_get_kind(s->vle))));
    if (s->own_vle && !isnan(s->alpha))
        json_object_set_new(o, "alpha", json_real(s->alpha));
    if (s->own_vle && !isnan(s->kvalue))
        json_object_set_new(o, "kvalue", json_real(s->kvalue));
    if (s->have_column) {
        json_object_set_new(o, "column_file", json_string(s->column_path));
        json_object_set_new(o, "column", json_string(s->col.id));
        json_object_set_new(o, "light", json_string(s->col.system.light));
        json_object_set_new(o, "heavy", json_string(s->col.system.heavy));
    }
    return o;
}

json_t *cli_run_json(const stagecal_runlog *log, size_t k, const stagecal_runlog_closure *cl)
{
    const stagecal_runlog_run *r = &log->runs[k];
    json_t *o = json_object();
    json_object_set_new(o, "name", json_string(r->name));
    json_object_set_new(o, "source", json_string(log->files[r->file]));
    json_object_set_new(o, "first_line", json_integer(r->first_line));
    json_object_set_new(o, "rows", json_integer((json_int_t)r->n));
    json_object_set_new(o, "rows_in_balance", json_integer((json_int_t)cl->n_used));
    json_object_set_new(o, "closure", cli_json_real(cl->closure));
    json_object_set_new(o, "u_closure", cli_json_real(cl->u_closure));
    /* the load-cell noise behind u_closure and the outlier scale (docs/runlog.md) */
    json_object_set_new(o, "u_w_mol", cli_json_real(cl->u_w_mol));
    json_object_set_new(o, "u_w_source",
                        json_string(cl->u_w_estimated ? "estimated from W" : "column file"));
    json_object_set_new(o, "gross_error", json_boolean(cl->gross));
    json_object_set_new(o, "xb_drift_per_h", cli_json_real(cl->drift_per_h));
    json_object_set_new(o, "u_xb_drift_per_h", cli_json_real(cl->u_drift_per_h));
    json_object_set_new(o, "drift", json_boolean(cl->drift));
    json_object_set_new(o, "drift_analyser",
                        json_string(stagecal_drift_analyser_name(cl->drift_analyser)));
    json_t *sigs = json_object();
    static const char *const key[2] = {"xd", "xb"};
    for (int j = 0; j < 2; j++) {
        const stagecal_runlog_drift_sig *s = &cl->sig[j];
        json_object_set_new(
            sigs, key[j],
            json_pack("{s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:o,s:I,s:I}", "balance_per_h",
                      cli_json_real(s->d_bal), "u_balance_per_h", cli_json_real(s->se_bal),
                      "stages_per_h", cli_json_real(s->d_stg), "u_stages_per_h",
                      cli_json_real(s->se_stg), "stages_free_count_per_h", cli_json_real(s->d_free),
                      "u_stages_free_count_per_h", cli_json_real(s->se_free), "drift_per_h",
                      cli_json_real(s->d), "u_drift_per_h", cli_json_real(s->se), "glr",
                      cli_json_real(s->t_stat), "glr_naming", cli_json_real(s->t_name),
                      "consistency", cli_json_real(s->q_stat), "rows_balance", (json_int_t)s->n_bal,
                      "rows_stages", (json_int_t)s->n_stg));
    }
    json_object_set_new(o, "drift_signatures", sigs);
    json_object_set_new(o, "outliers", json_integer((json_int_t)cl->n_outliers));
    if (cl->has_boilup)
        json_object_set_new(
            o, "boilup",
            json_pack("{s:o,s:o,s:o,s:o,s:b}", "w_fall_mol", cli_json_real(cl->w_fall_mol),
                      "w_predicted_mol", cli_json_real(cl->w_pred_mol), "u_difference_mol",
                      cli_json_real(cl->u_w_diff_mol), "ratio", cli_json_real(cl->boilup_ratio),
                      "mismatch", cl->boilup_mismatch));
    else
        json_object_set_new(o, "boilup", json_null());
    return o;
}

json_t *cli_json_reflux(double r)
{
    return isinf(r) ? json_string("inf") : json_real(r);
}

json_t *cli_json_doc_head(const char *format, double reflux, double f_factor, double level)
{
    json_t *doc = json_object();
    json_object_set_new(doc, "format", json_string(format));
    json_object_set_new(doc, "version", json_integer(1));
    json_object_set_new(doc, "reflux", cli_json_reflux(reflux));
    json_object_set_new(doc, "f_factor", cli_json_real(f_factor));
    json_object_set_new(doc, "fload", cli_json_real(f_factor)); /* the name of version 1 */
    json_object_set_new(doc, "level", json_real(level));
    return doc;
}

void cli_format_day(double t_s, const char *nan_text, char *buf, size_t cap)
{
    if (!isfinite(t_s)) {
        snprintf(buf, cap, "%s", isnan(t_s) ? nan_text : "open");
        return;
    }
    time_t tt = (time_t)floor(t_s);
    struct tm tm;
    if (!gmtime_r(&tt, &tm) || strftime(buf, cap, "%Y-%m-%d", &tm) == 0)
        snprintf(buf, cap, "?");
}

void cli_forecast_days(const stagecal_trend_forecast *fc, const char *nan_text, char day[3][32])
{
    cli_format_day(fc->t_cross_s, nan_text, day[0], 32);
    cli_format_day(fc->low_s, nan_text, day[1], 32);
    cli_format_day(fc->high_s, nan_text, day[2], 32);
}

void cli_format_reflux(char *buf, size_t cap, double r, int digits)
{
    if (isinf(r))
        snprintf(buf, cap, "inf");
    else
        snprintf(buf, cap, "%.*g", digits, r);
}

void cli_forecast_text(const stagecal_trend_forecast *fc, double required, int pct,
                       const char *nan_text, char *buf, size_t cap)
{
    char day[3][32];
    cli_forecast_days(fc, nan_text, day);
    snprintf(buf, cap, "below %.3g stages on %s%s, %d %% band %s to %s", required, day[0],
             fc->past ? " (already past)" : "", pct, day[1], day[2]);
}

void cli_print_caution(void)
{
    printf("\n%s\n", stagecal_caution_text());
}

int cli_require(const char *opt, double v)
{
    if (isnan(v))
        return cli_usage_error("option '--%s' is required (see 'stagecal %s --help')", opt,
                               cli_command);
    return 0;
}

int cli_usage_getopt(int c, char **argv, const char *command)
{
    const char *arg = argv[optind - 1];
    if (c == ':')
        return cli_usage_error("option '%s' needs a value (see 'stagecal %s --help')", arg,
                               command);
    if (optopt && arg[0] == '-' && arg[1] != '-')
        return cli_usage_error("unknown option '-%c' (see 'stagecal %s --help')", optopt, command);
    return cli_usage_error("unknown option '%s' (see 'stagecal %s --help')", arg, command);
}

int cli_check_fraction(const char *opt, double v)
{
    if (v > 0 && v < 1)
        return 0;
    return cli_usage_error("option '--%s': %g is outside (0, 1) (expected a mole fraction)", opt,
                           v);
}

int cli_check_output(const char *opt, const char *out, const char *const *inputs, size_t n)
{
    size_t k = output_is_input(out, inputs, n);
    if (k == (size_t)-1)
        return 0;
    return cli_usage_error("option '--%s': '%s' is also an input ('%s'); writing it would "
                           "destroy that input (expected a new file)",
                           opt, out, inputs[k]);
}

int cli_check_reflux(const char *opt, double v)
{
    if (v >= 0)
        return 0;
    return cli_usage_error("option '--%s': %g is negative (expected R >= 0 or 'inf')", opt, v);
}

int cli_check_murphree(const char *opt, double v)
{
    if (v > 0 && v <= 1)
        return 0;
    return cli_usage_error("option '--%s': %g is outside (0, 1] (expected a Murphree vapour "
                           "efficiency)",
                           opt, v);
}

int cli_system_option(cli_system *s, const char *name, const char *arg)
{
    if (strcmp(name, "column") == 0) {
        s->column_path = arg;
        return 0;
    }
    if (strcmp(name, "alpha") == 0)
        return cli_parse_double("alpha", arg, 0, "a relative volatility > 1", &s->alpha)
                   ? CLI_EXIT_USAGE
                   : 0;
    return cli_parse_double("kvalue", arg, 0, "a K value > 1", &s->kvalue) ? CLI_EXIT_USAGE : 0;
}

void cli_print_params(const stagecal_regress_result *f, int long_form)
{
    int nw = long_form ? 10 : 12, vw = long_form ? 16 : 14, vp = long_form ? 10 : 6;
    int sw = long_form ? 14 : 12, sp = long_form ? 6 : 4, ip = long_form ? 8 : 6;
    printf("  %-*s %*s %*s   %.0f%% confidence interval\n", nw, "parameter", vw, "value", sw,
           long_form ? "SE" : "std. error", 100 * f->level);
    for (size_t i = 0; i < f->p; i++)
        if ((f->undetermined >> i) & 1u)
            printf("  %-*s %*s\n", nw, f->form.param_names[i], vw, "not determined");
        else if (isfinite(f->ci_low[i]) && !isfinite(f->ci_high[i]))
            printf("  %-*s %*s %.*g (one-sided %.0f%%; no upper end)\n", nw, f->form.param_names[i],
                   vw, "at least", ip, f->ci_low[i], 100 * f->level);
        else if (!isfinite(f->ci_low[i]) && isfinite(f->ci_high[i]))
            printf("  %-*s %*s %.*g (one-sided %.0f%%; no lower end)\n", nw, f->form.param_names[i],
                   vw, "at most", ip, f->ci_high[i], 100 * f->level);
        else if (f->design) /* t at this parameter's own (Bell–McCaffrey) dof */
            printf("  %-*s %*.*g %*.*g   [%.*g, %.*g]  t, %.1f dof\n", nw, f->form.param_names[i],
                   vw, vp, f->theta[i], sw, sp, f->se[i], ip, f->ci_low[i], ip, f->ci_high[i],
                   f->param_dof[i]);
        else
            printf("  %-*s %*.*g %*.*g   [%.*g, %.*g]\n", nw, f->form.param_names[i], vw, vp,
                   f->theta[i], sw, sp, f->se[i], ip, f->ci_low[i], ip, f->ci_high[i]);
}

static const char *boot_name(stagecal_boot_kind k)
{
    return k == STAGECAL_BOOT_RUN ? "run" : k == STAGECAL_BOOT_RESIDUAL ? "residual" : "case";
}

void cli_print_bootstrap(const stagecal_regress_result *f)
{
    if (f->boot_b == 0)
        return;
    if (f->boot_ok == 0) {
        printf("\n  bootstrap (B = %zu, seed %lu): no resample could be refitted\n", f->boot_b,
               f->boot_seed);
        return;
    }
    char runs[40] = "";
    if (f->boot_kind == STAGECAL_BOOT_RUN)
        snprintf(runs, sizeof runs, " of %zu runs", f->boot_clusters);
    printf("\n  bootstrap (%s resampling%s, B = %zu, %zu fitted, seed %lu), percentile "
           "intervals:\n",
           boot_name(f->boot_kind), runs, f->boot_b, f->boot_ok, f->boot_seed);
    for (size_t i = 0; i < f->p; i++)
        printf("  %-10s SE %12.6g   [%.8g, %.8g]\n", f->form.param_names[i], f->boot_se[i],
               f->boot_low[i], f->boot_high[i]);
}

void cli_json_bootstrap(const stagecal_regress_result *f, json_t *params, json_t *obj)
{
    if (f->boot_b == 0)
        return;
    for (size_t i = 0; f->boot_ok > 0 && i < f->p && i < json_array_size(params); i++) {
        json_t *o = json_array_get(params, i);
        json_object_set_new(o, "boot_low", cli_json_real(f->boot_low[i]));
        json_object_set_new(o, "boot_high", cli_json_real(f->boot_high[i]));
        json_object_set_new(o, "boot_se", cli_json_real(f->boot_se[i]));
    }
    json_object_set_new(obj, "bootstrap",
                        json_pack("{s:I, s:I, s:I, s:s}", "B", (json_int_t)f->boot_b, "fitted",
                                  (json_int_t)f->boot_ok, "seed", (json_int_t)f->boot_seed,
                                  "resample", boot_name(f->boot_kind)));
    if (f->boot_kind == STAGECAL_BOOT_RUN) /* the runs drawn from */
        json_object_set_new(json_object_get(obj, "bootstrap"), "runs",
                            json_integer((json_int_t)f->boot_clusters));
}

json_t *cli_soft_json(const stagecal_runlog_soft *s)
{
    return json_pack("{s:I,s:I,s:I,s:I,s:I,s:I,s:I}", "xd", (json_int_t)s->xd_inferred,
                     "xd_censored", (json_int_t)s->xd_censored, "xb", (json_int_t)s->xb_inferred,
                     "xb_censored", (json_int_t)s->xb_censored, "outside", (json_int_t)s->outside,
                     "sensor_checks", (json_int_t)s->checks, "sensor_inconsistent",
                     (json_int_t)s->inconsistent);
}

void cli_soft_summary(const char *cmd, const stagecal_runlog_soft *s)
{
    if (cli_quiet || (!s->xd_inferred && !s->xb_inferred && !s->checks))
        return;
    fprintf(stderr,
            "%s: compositions from temperatures: xD inferred in %zu rows (%zu censored), xB in "
            "%zu (%zu censored)",
            cmd, s->xd_inferred, s->xd_censored, s->xb_inferred, s->xb_censored);
    if (s->outside)
        fprintf(stderr, ", %zu temperatures beyond the curve (nothing inferred)", s->outside);
    fprintf(stderr,
            "; sensors checked against the analyser readings in %zu run(s), %zu "
            "inconsistent\n",
            s->checks, s->inconsistent);
}

void cli_no_load_summary(const char *cmd, const stagecal_column *col)
{
    const char *why = stagecal_runlog_no_load_reason(col);
    if (cli_quiet || !why)
        return;
    fprintf(stderr,
            "%s: no F-factor on any row: %s (F[Pa^0.5] needs V, the inside diameter, molar "
            "masses and a temperature; the rows' note does not repeat it)\n",
            cmd, why);
}

json_t *cli_no_load_json(const stagecal_column *col)
{
    const char *why = stagecal_runlog_no_load_reason(col);
    return why ? json_string(why) : json_null();
}

long cli_threads(long v)
{
    if (v >= 0)
        return v;
    long online = sysconf(_SC_NPROCESSORS_ONLN) - 1; /* the calling thread has a core */
    return online < 1 ? 1 : online > 8 ? 8 : online;
}
