/*
 * cmd_invert.c — `stagecal invert`: effective equilibrium stages from a measured
 * distillate and pot composition at a reflux ratio (McCabe–Thiele inversion), or at
 * every row of production run logs. The mode follows from what was given: run logs
 * (or --output, --min-rows) ask for the run-log mode, which reads the logs, checks
 * them, closes each run's pot balance, inverts every row and writes one CSV row per log
 * row (--output, or stdout without --json); --json then prints a summary.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "fileio.h"
#include "options.h"
#include "stagecal/column.h"
#include "stagecal/evidence.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"

static const struct cli_usage usage = {
    "usage: stagecal invert (--alpha A | --kvalue K | --column FILE) --xd XD --xb XB\n"
    "                       --reflux R|inf [--murphree E] [--json] [--quiet]\n"
    "   or: stagecal invert --column FILE [--murphree E] [-o FILE.csv] [--min-rows N]\n"
    "                       [--threads N] [--json] [--quiet] RUNLOG.csv...\n",
    "Counts the equilibrium stages (the pot included, fractional) a batch rectifier needs\n"
    "to hold the distillate at XD over a pot at XB at reflux ratio R. A pinch or an\n"
    "azeotrope in the way is a result (status), not an error. Column stages follow the\n"
    "column file's condenser (stages - 1, or - 2 with a partial condenser).\n"
    "\n"
    "With run logs (docs/runlog.md) every row is inverted: stages, column stages, their\n"
    "standard uncertainty from the column file's uncertainties, status, L/V, F-factor\n"
    "and the quasi-steady window flags, one CSV row per log row (to --output, or to\n"
    "stdout without --json); --json prints a summary instead: status counts, each run's\n"
    "mass-balance closure and the quasi-steady windows (the units of evidence).\n",
    "Exit status: 0 success (a pinch or an azeotrope is a status, not an error), 2 usage\n"
    "error, 65 bad data, 66 missing file, 70 internal, 73 output cannot be written.\n"};

/* A censored reading of one point ("--xd '>0.9999'", "--xb '<0.001'"): the mark of the
 * option's value is taken off (argv is copied into av) and its sense kept in *cens, so that
 * the option table parses and checks the number as usual. */
static void strip_censor(int argc, char **av, const char *opt, int *cens)
{
    size_t n = strlen(opt);
    for (int i = 1; i < argc; i++) {
        char **v = NULL;
        if (strcmp(av[i], opt) == 0 && i + 1 < argc)
            v = &av[i + 1];
        else if (strncmp(av[i], opt, n) == 0 && av[i][n] == '=')
            v = NULL; /* "--xd=>v": left to the parser, which names it */
        if (v && ((*v)[0] == '>' || (*v)[0] == '<')) {
            *cens = (*v)[0] == '>' ? STAGECAL_CENSOR_ABOVE : STAGECAL_CENSOR_BELOW;
            (*v)++;
        }
    }
}

/* One censored point: "at least N stages" (or at most), stagecal_runlog_bound. */
static int invert_bound(double xd, int cd, double xb, int cb, double reflux, double murphree,
                        cli_ctx *ctx)
{
    cli_system *sys = &ctx->sys;
    const stagecal_column *col = sys->have_column ? &sys->col : NULL;
    double b;
    int note = stagecal_runlog_bound(col, sys->vle, xd, cd, xb, cb, reflux, murphree, &b);
    int lower = note == STAGECAL_NOTE_AT_LEAST, upper = note == STAGECAL_NOTE_AT_MOST;
    const char *how = "the count at the readings moved by 1.645 standard uncertainties each "
                      "(the column file's) the way that weakens it";
    if (ctx->json) {
        json_t *doc =
            json_pack("{s:s,s:i,s:s,s:o,s:o,s:o,s:s,s:f,s:s,s:f,s:s,s:o,s:f,s:s,s:o}", "format",
                      "stagecal-invert", "version", 1, "status", "censored", "stages", json_null(),
                      "stages_low", lower ? json_real(b) : json_null(), "stages_high",
                      upper ? json_real(b) : json_null(), "note", stagecal_runlog_note_text(note),
                      "xd", xd, "xd_censored",
                      cd == STAGECAL_CENSOR_ABOVE ? "above"
                      : cd                        ? "below"
                                                  : "no",
                      "xb", xb, "xb_censored",
                      cb == STAGECAL_CENSOR_ABOVE ? "above"
                      : cb                        ? "below"
                                                  : "no",
                      "reflux", cli_json_reflux(reflux), "level", 0.95, "bound", how, "model",
                      cli_system_json(sys));
        return cli_json_print(doc);
    }
    if (lower || upper)
        printf("stages (the pot included): AT %s %.6f (one-sided 95 %%: a censored reading "
               "bounds the count from one side only; %s%s)\n",
               lower ? "LEAST" : "MOST", b, how, col ? "" : ", none stated: the limits themselves");
    else
        printf("stages (the pot included): not determined (%s)\n", stagecal_runlog_note_text(note));
    printf(
        "stage convention: %s\n",
        stagecal_convention_text(sys->have_column ? sys->col.condenser : STAGECAL_CONDENSER_TOTAL));
    return CLI_EXIT_OK;
}

/* One point: --xd, --xb, --reflux. */
static int invert_point(double xd, int cd, double xb, int cb, double reflux, double murphree,
                        cli_ctx *ctx)
{
    cli_system *sys = &ctx->sys;
    int rc;
    if ((rc = cli_require("xd", xd)) || (rc = cli_require("xb", xb)) ||
        (rc = cli_require("reflux", reflux)))
        return rc;
    if (!(xb < xd) && !cd && !cb)
        return cli_usage_error("option '--xb': %g is not below --xd %g (expected the pot leaner "
                               "in the light component than the distillate)",
                               xb, xd);
    if ((rc = cli_system_open(sys)))
        return rc;
    if (cd || cb)
        return invert_bound(xd, cd, xb, cb, reflux, murphree, ctx);

    stagecal_stages_params par = stagecal_stages_default_params();
    stagecal_stages_result res;
    stagecal_error err;
    par.want_sensitivities = 1;
    stagecal_error_clear(&err);
    rc = stagecal_stages_invert(sys->vle, xd, xb, reflux, murphree, &par, &res, &err);
    if (rc != STAGECAL_OK)
        return cli_fail(&err);
    int ok = res.status == STAGECAL_STAGES_OK;
    /* the condenser comes from the column file; --alpha/--kvalue mean a total condenser */
    stagecal_condenser cond = sys->have_column ? sys->col.condenser : STAGECAL_CONDENSER_TOTAL;
    double col_stages = ok ? stagecal_convention_column_stages(res.stages, cond) : NAN;
    if (ctx->json) {
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
        json_object_set_new(doc, "model", cli_system_json(sys));
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
    return rc;
}

static json_t *summary_json(const stagecal_runlog *log, const stagecal_column *col,
                            const stagecal_runlog_result *res, const stagecal_evidence_set *ev,
                            const stagecal_findings *f, const char *out_path, double murphree)
{
    json_t *doc = json_object(), *files = json_array(), *runs = json_array(), *wins = json_array();
    json_object_set_new(doc, "format", json_string("stagecal-invert-runlog"));
    json_object_set_new(doc, "version", json_integer(1));
    json_object_set_new(doc, "column", json_string(col->id));
    json_object_set_new(doc, "murphree", json_real(murphree));
    json_object_set_new(doc, "inferred", cli_soft_json(&log->soft));
    json_object_set_new(doc, "no_f_factor", cli_no_load_json(col));
    json_object_set_new(doc, "condenser", json_string(stagecal_condenser_name(col->condenser)));
    json_object_set_new(doc, "stage_convention",
                        json_string(stagecal_convention_text(col->condenser)));
    for (size_t k = 0; k < log->nfiles; k++)
        json_array_append_new(files, json_string(log->files[k]));
    json_object_set_new(doc, "files", files);
    json_object_set_new(doc, "rows", json_integer((json_int_t)log->n));
    json_object_set_new(doc, "output", out_path ? json_string(out_path) : json_null());
    json_object_set_new(doc, "out", out_path ? json_string(out_path) : json_null()); /* v1 name */
    json_t *cnt = json_object();
    for (int s = 0; s < STAGECAL_RUNLOG_NSTATUS; s++)
        json_object_set_new(cnt, stagecal_runlog_status_name(s),
                            json_integer((json_int_t)res->count[s]));
    json_object_set_new(doc, "status_counts", cnt);
    json_object_set_new(doc, "validation",
                        json_pack("{s:I,s:I}", "errors", (json_int_t)f->n_errors, "warnings",
                                  (json_int_t)f->n_warnings));
    for (size_t k = 0; k < log->nruns; k++)
        json_array_append_new(runs, cli_run_json(log, k, &res->closures[k]));
    json_object_set_new(doc, "runs", runs);
    for (size_t k = 0; k < res->nwindows; k++) {
        const stagecal_runlog_window *w = &res->windows[k];
        const stagecal_runlog_run *r = &log->runs[w->run];
        json_t *o = json_object();
        json_object_set_new(o, "run", json_string(r->name));
        json_object_set_new(o, "first_line", json_integer(log->line[w->first]));
        json_object_set_new(o, "last_line", json_integer(log->line[w->last]));
        json_object_set_new(o, "rows", json_integer((json_int_t)(w->last - w->first + 1)));
        json_object_set_new(o, "total_reflux", json_boolean(w->total_reflux));
        /* the set point the window's stage count uses, and its uncertainty (a measured R) */
        json_object_set_new(o, "reflux",
                            cli_json_reflux(w->total_reflux ? w->r_median : w->r_mean));
        json_object_set_new(o, "u_reflux", json_real(w->total_reflux ? 0.0 : w->u_r));
        json_object_set_new(o, "n_ok", json_integer((json_int_t)w->n_ok));
        /* the window's stage count as the calibration uses it (evidence.h) */
        const stagecal_evidence *e = stagecal_evidence_find(ev, k);
        int ok = e && e->stages_ok;
        json_object_set_new(o, "stages", ok ? json_real(e->stages) : json_null());
        json_object_set_new(o, "se_stages", ok ? json_real(e->se_stages) : json_null());
        json_object_set_new(o, "censored_xd", json_integer(e ? (json_int_t)e->n_cens_xd : 0));
        json_object_set_new(o, "censored_xb", json_integer(e ? (json_int_t)e->n_cens_xb : 0));
        json_array_append_new(wins, o);
    }
    json_object_set_new(doc, "windows", wins);
    json_object_set_new(doc, "independent_evidence", json_integer((json_int_t)res->nwindows));
    json_object_set_new(
        doc, "units",
        json_pack("{s:s,s:s,s:s}", "time", "s", "F", "Pa^0.5", "xb_drift_per_h", "mol/mol per h"));
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return doc;
}

/* The per-row CSV to path (atomically; it replaces a file of that name, docs/cli.md) or to
 * stdout (path NULL or "-"). An exit code. */
static int write_rows(const stagecal_runlog *log, const stagecal_column *col,
                      const stagecal_runlog_result *res, const char *out_path)
{
    stagecal_error err;
    int to_stdout = !out_path || strcmp(out_path, "-") == 0;
    atomic_file a;
    FILE *out = stdout;
    stagecal_error_clear(&err);
    int w = to_stdout ? STAGECAL_OK : atomic_open(&a, out_path, &err);
    if (w == STAGECAL_OK && !to_stdout && !(out = atomic_stream(&a, &err)))
        w = STAGECAL_EWRITE;
    int csv = w == STAGECAL_OK ? stagecal_runlog_write_csv(log, col, res, out, &err) : w;
    if (w == STAGECAL_OK && csv == STAGECAL_OK && !to_stdout)
        w = atomic_publish(&a, out_path, ATOMIC_REPLACE, NULL, &err);
    if (!to_stdout)
        atomic_discard(&a);
    if (w == STAGECAL_OK && csv == STAGECAL_OK)
        return CLI_EXIT_OK;
    if (w != STAGECAL_OK && !to_stdout)
        cli_fail(&err);
    else
        cli_error("cannot write '%s'", to_stdout ? "standard output" : out_path);
    return CLI_EXIT_CANTCREAT;
}

/* Prints the first findings (as errors when nothing could be inverted, else as warnings). */
static void show_findings(const stagecal_findings *f, int fatal)
{
    for (size_t i = 0; i < f->n && i < 10; i++)
        (fatal ? cli_error : cli_warn)("%s", f->items[i].text);
    if (fatal && f->n == 0)
        cli_error("no data rows in the run log(s)");
    else if (!fatal && f->n_errors)
        cli_warn("%zu validation errors: the rows concerned have missing values (run "
                 "'stagecal check' for the full list)",
                 f->n_errors);
}

static void closure_warnings(const stagecal_runlog_run *runs, const stagecal_runlog_closure *cls,
                             size_t nruns)
{
    for (size_t k = 0; k < nruns; k++) {
        const stagecal_runlog_closure *cl = &cls[k];
        if (cl->gross || cl->drift)
            cli_warn("run '%s': %s%s%s (closure %+.2f %%)", runs[k].name,
                     cl->gross ? "mass balance does not close" : "",
                     cl->gross && cl->drift ? ", " : "", cl->drift ? "xB analyser drift" : "",
                     100.0 * cl->closure);
    }
}

static void summary_line(size_t rows, const size_t *count, size_t nwindows, const char *out_path)
{
    printf("%zu rows: %zu ok, %zu pinch, %zu azeotrope, %zu invalid, %zu censored (one-sided "
           "bounds in stages_low/stages_high); %zu quasi-steady windows; written to %s\n",
           rows, count[0], count[1], count[2], count[3], count[STAGECAL_RUNLOG_CENSORED], nwindows,
           out_path);
}

/* Every row of the run logs, whole (--json: the windows' statistics pool over all runs). */
static int invert_whole(int argc, char **argv, int first, const char *out_path,
                        const stagecal_runlog_params *rp, const stagecal_runlog_analysis_params *ap,
                        double murphree, cli_ctx *ctx)
{
    const stagecal_column *col = &ctx->sys.col;
    int rc = 0;
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(rp->max_findings);
    stagecal_runlog_result res;
    stagecal_evidence_set ev;
    memset(&res, 0, sizeof res);
    memset(&ev, 0, sizeof ev);
    if (!log || !f) {
        cli_error("out of memory");
        rc = CLI_EXIT_SOFTWARE;
        goto done;
    }
    for (int i = first; i < argc && rc == 0; i++)
        if (stagecal_runlog_read(log, argv[i], col, rp, f, &err) != STAGECAL_OK)
            rc = cli_fail(&err);
    if (rc)
        goto done;
    if (log->n == 0) { /* nothing to invert (as 'check' says): never an empty table, exit 0 */
        show_findings(f, 1);
        rc = CLI_EXIT_DATA;
        goto done;
    }
    show_findings(f, 0);
    if (stagecal_runlog_analyse(log, col, ap, &res, &err) != STAGECAL_OK ||
        stagecal_runlog_invert(log, col, murphree, ap, &res, &err) != STAGECAL_OK ||
        stagecal_evidence_build(log, &res, col, murphree, NULL, &ev, &err) != STAGECAL_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    if (out_path && (rc = write_rows(log, col, &res, out_path)))
        goto done;
    closure_warnings(log->runs, res.closures, log->nruns);
    cli_soft_summary("stagecal invert", &log->soft);
    if (out_path)
        cli_no_load_summary("stagecal invert", col);
    rc = cli_json_print(summary_json(log, col, &res, &ev, f, out_path, murphree));
done:
    stagecal_evidence_set_free(&ev);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
    stagecal_findings_free(f);
    return rc;
}

/* Every row of the run logs, run by run (stagecal_runlog_invert_stream): memory holds a few
 * runs whatever the length of the logs; the CSV to out_path (atomically) or stdout. */
static int invert_streamed(char **paths, size_t n, const char *out_path,
                           const stagecal_runlog_params *rp,
                           const stagecal_runlog_analysis_params *ap, double murphree,
                           size_t threads, cli_ctx *ctx)
{
    const stagecal_column *col = &ctx->sys.col;
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_findings *f = stagecal_findings_alloc(rp->max_findings);
    stagecal_runlog_stream *s =
        f ? stagecal_runlog_stream_alloc((const char *const *)paths, n, col, rp, f) : NULL;
    stagecal_runlog_totals tot;
    memset(&tot, 0, sizeof tot);
    int to_stdout = !out_path || strcmp(out_path, "-") == 0, rc = CLI_EXIT_OK;
    atomic_file a;
    FILE *out = stdout;
    atomic_init(&a);
    ctx->data_on_stdout = to_stdout;
    if (!s) {
        cli_error("out of memory");
        rc = CLI_EXIT_SOFTWARE;
    } else if (!to_stdout && (atomic_open(&a, out_path, &err) != STAGECAL_OK ||
                              !(out = atomic_stream(&a, &err)))) {
        rc = cli_fail(&err);
    } else {
        int w = stagecal_runlog_invert_stream(s, col, murphree, ap, threads, out, &tot, &err);
        if (w == STAGECAL_EWRITE) {
            cli_error("cannot write '%s'", to_stdout ? "standard output" : out_path);
            rc = CLI_EXIT_CANTCREAT;
        } else if (w != STAGECAL_OK) {
            rc = cli_fail(&err);
        } else if (tot.rows == 0) { /* nothing to invert: never an empty table */
            show_findings(f, 1);
            rc = CLI_EXIT_DATA;
        } else if (!to_stdout && atomic_publish(&a, out_path, ATOMIC_REPLACE, NULL, &err)) {
            rc = cli_fail(&err);
        }
    }
    if (!to_stdout)
        atomic_discard(&a);
    if (rc == CLI_EXIT_OK) {
        show_findings(f, 0);
        closure_warnings(tot.runs, tot.closures, tot.nruns);
        cli_soft_summary("stagecal invert", &tot.soft);
        cli_no_load_summary("stagecal invert", col);
        if (!to_stdout)
            summary_line(tot.rows, tot.count, tot.nwindows, out_path);
    }
    stagecal_runlog_totals_free(&tot);
    stagecal_runlog_stream_free(s);
    stagecal_findings_free(f);
    return rc;
}

/* Every row of the run logs argv[first..argc). */
static int invert_rows(int argc, char **argv, int first, const char *out_path, long minrows,
                       int dialect, int no_infer, const stagecal_runlog_analysis_params *ap,
                       double murphree, long threads, cli_ctx *ctx)
{
    cli_system *sys = &ctx->sys;
    int rc;
    if (first >= argc)
        return cli_usage_error("no run log given (expected one or more RUNLOG.csv)");
    if (!sys->column_path || !isnan(sys->alpha) || !isnan(sys->kvalue))
        return cli_usage_error("option '--column' is required with a run log (the equilibrium "
                               "model and the uncertainties come from it)");
    if ((rc = cli_check_output("output", out_path, (const char *const *)(argv + first),
                               (size_t)(argc - first))) ||
        (rc = cli_check_output("output", out_path, &sys->column_path, 1)))
        return rc;
    /* --json owns stdout: the CSV must go to a file then (one document on stdout). */
    if (ctx->json && out_path && strcmp(out_path, "-") == 0)
        return cli_usage_error("options '--json' and '--output -' both write to standard output "
                               "(give '--output FILE.csv' with '--json')");
    if ((rc = cli_system_open(sys)))
        return rc;
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    rp.sha256 = 0; /* no provenance is recorded here */
    if (minrows > 0)
        rp.min_rows = (size_t)minrows;
    rp.csv_separator = cli_csv_separator(dialect);
    rp.infer = !no_infer;
    if (ctx->json)
        return invert_whole(argc, argv, first, out_path, &rp, ap, murphree, ctx);
    threads = cli_threads(threads); /* one core reads */
    return invert_streamed(argv + first, (size_t)(argc - first), out_path, &rp, ap, murphree,
                           (size_t)threads, ctx);
}

int cmd_invert(int argc, char **argv, cli_ctx *ctx)
{
    double xd = NAN, xb = NAN, reflux = NAN, murphree = 1.0;
    const char *out_path = NULL;
    long minrows = 0, threads = -1;
    int dialect = 0, no_infer = 0;
    stagecal_runlog_analysis_params ap = stagecal_runlog_analysis_default_params();
    const struct cli_option opts[] = {
        OPT_SYSTEM(&ctx->sys),
        OPT_XD(&xd),
        OPT_XB(&xb),
        OPT_REFLUX(&reflux, "reflux ratio L/D >= 0, or 'inf' for total reflux"),
        OPT_MURPHREE(&murphree),
        OPT_OUTPUT(&out_path, "run logs: the per-row CSV ('-' = stdout, the default without\n"
                              "--json)"),
        OPT_ALIAS("out", "output"),
        OPT_MIN_ROWS(&minrows),
        OPT_CSV_DIALECT(&dialect),
        OPT_NO_INFER(&no_infer),
        OPT_WARM_UP(&ap.warmup_s),
        OPT_MIN_WINDOW(&ap.min_window_s),
        OPT_THREADS(&threads, "run logs: threads inverting runs while one reads"),
        OPT_END_COMMON(ctx),
    };
    int first, rc, cd = 0, cb = 0;
    char **av = malloc(((size_t)argc + 1) * sizeof *av);
    if (!av) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    memcpy(av, argv, ((size_t)argc + 1) * sizeof *av);
    strip_censor(argc, av, "--xd", &cd);
    strip_censor(argc, av, "--xb", &cb);
    rc = cli_parse(argc, av, opts, &usage, &first);
    free(av);
    if (rc)
        return rc;
    /* the mode follows from what was given: run logs, or a point */
    if (first < argc || out_path || cli_given(opts, "min-rows") || cli_given(opts, "warm-up") ||
        cli_given(opts, "min-window") || cli_given(opts, "threads") ||
        cli_given(opts, "csv-dialect") || no_infer) {
        if (!isnan(xd) || !isnan(xb) || !isnan(reflux))
            return cli_usage_error("options '--xd', '--xb' and '--reflux' are for one point, "
                                   "not with run logs (each row carries its own)");
        return invert_rows(argc, argv, first, out_path, minrows, dialect, no_infer, &ap, murphree,
                           threads, ctx);
    }
    return invert_point(xd, cd, xb, cb, reflux, murphree, ctx);
}
