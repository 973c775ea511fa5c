/*
 * cmd_check.c — `stagecal check`: read run logs, print every validation finding
 * (errors and warnings, file:line first) and each run's mass-balance closure.
 * Exit 0 when there is no error, 65 when there is one, 66 when a file is missing,
 * 2 on a usage error. The logs are read and checked run by run (stagecal_runlog_stream):
 * memory holds one run and a line per run, whatever the length of the logs; the findings
 * come first, then the runs, as when the whole log was held.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/column.h"
#include "stagecal/runlog.h"

static const struct cli_usage usage = {
    "usage: stagecal check [--column FILE] [--min-rows N] [--json] [--quiet] RUNLOG.csv...\n",
    "Reads run logs (docs/runlog.md) and prints what is wrong with them: unparseable or\n"
    "out-of-range values, time not increasing, W rising while distillate is drawn,\n"
    "xD below xB, unknown units, unknown, duplicate or missing columns, runs with too\n"
    "few rows; then each run's Rayleigh closure error, gross errors, analyser drift\n"
    "(with a column file: which analyser, from the balance and the stage relation) and\n"
    "the fall of W against V/(R+1) (docs/methods.md).\n",
    "Exit status: 0 no errors in the rows (warnings and closure findings allowed), 65 errors,\n"
    "66 a file is missing, 2 usage.\n"};

static json_t *findings_json(const stagecal_findings *f)
{
    json_t *arr = json_array();
    for (size_t i = 0; i < f->n; i++) {
        const stagecal_finding *it = &f->items[i];
        json_t *o = json_object();
        json_object_set_new(
            o, "severity",
            json_string(it->severity == STAGECAL_FINDING_ERROR ? "error" : "warning"));
        json_object_set_new(o, "source", json_string(it->source));
        json_object_set_new(o, "line", it->line > 0 ? json_integer(it->line) : json_null());
        json_object_set_new(o, "column", it->column[0] ? json_string(it->column) : json_null());
        json_object_set_new(o, "message", json_string(it->text));
        json_array_append_new(arr, o);
    }
    return arr;
}

/* The file lines of run k's samples flagged as outliers (all of them: a JSON array). */
static json_t *outlier_lines_json(const stagecal_runlog *log, const stagecal_runlog_result *res,
                                  size_t k)
{
    json_t *arr = json_array();
    const stagecal_runlog_run *r = &log->runs[k];
    for (size_t i = r->first; i < r->first + r->n; i++)
        if (res->flags[i] & STAGECAL_SAMPLE_OUTLIER)
            json_array_append_new(arr, json_integer((json_int_t)log->line[i]));
    return arr;
}

/* ", N outlier samples (lines a, b, … and K more)" for run k; nothing without outliers. */
static void print_outlier_lines(FILE *o, const stagecal_runlog *log,
                                const stagecal_runlog_result *res, size_t k)
{
    const stagecal_runlog_run *r = &log->runs[k];
    size_t shown = 0, n = res->closures[k].n_outliers;
    if (n == 0)
        return;
    fprintf(o, ", %zu outlier samples (line%s", n, n > 1 ? "s" : "");
    for (size_t i = r->first; i < r->first + r->n && shown < 10; i++)
        if (res->flags[i] & STAGECAL_SAMPLE_OUTLIER)
            fprintf(o, "%s %lu", shown++ ? "," : "", (unsigned long)log->line[i]);
    if (n > shown)
        fprintf(o, " and %zu more", n - shown);
    fputc(')', o);
}

/* The document: the files, the rows, the runs (one object each, in order) and the findings. */
static int print_json(const stagecal_runlog_totals *t, json_t *runs, const stagecal_findings *f,
                      size_t missing)
{
    json_t *doc = json_object(), *files = json_array();
    json_object_set_new(doc, "format", json_string("stagecal-check"));
    json_object_set_new(doc, "version", json_integer(1));
    for (size_t k = 0; k < t->nfiles; k++)
        json_array_append_new(files, json_string(t->files[k]));
    json_object_set_new(doc, "files", files);
    json_object_set_new(doc, "rows", json_integer((json_int_t)t->rows));
    json_object_set_new(doc, "runs", runs);
    json_object_set_new(doc, "inferred", cli_soft_json(&t->soft));
    json_object_set_new(doc, "findings", findings_json(f));
    /* a missing input is an error too: "errors" counts it, "missing" says how many */
    json_object_set_new(doc, "errors", json_integer((json_int_t)(f->n_errors + missing)));
    json_object_set_new(doc, "missing", json_integer((json_int_t)missing));
    json_object_set_new(doc, "warnings", json_integer((json_int_t)f->n_warnings));
    json_object_set_new(doc, "findings_truncated",
                        json_boolean(f->n < f->n_errors + f->n_warnings));
    json_object_set_new(doc, "units",
                        json_pack("{s:s,s:s}", "closure",
                                  "- (fraction of the initial light holdup)", "xb_drift_per_h",
                                  "mol/mol per h"));
    return cli_json_print(doc);
}

/* ", ANALYSER DRIFT: <analyser> <rate> /h ± se (GLR T, consistency Q)" when flagged. */
static void print_drift(FILE *o, const stagecal_runlog_closure *cl)
{
    if (!cl->drift)
        return;
    int j = cl->drift_analyser == STAGECAL_DRIFT_DISTILLATE ? 0 : 1;
    const stagecal_runlog_drift_sig *s = &cl->sig[j];
    if (cl->drift_analyser == STAGECAL_DRIFT_UNATTRIBUTED && !(s->n_stg > 0))
        fprintf(o, ", ANALYSER DRIFT (the balance alone cannot tell xD from xB: no stage counts in "
                   "a window)");
    else if (cl->drift_analyser == STAGECAL_DRIFT_UNATTRIBUTED)
        fprintf(o,
                ", DRIFT UNATTRIBUTED (balance and stage counts disagree: xB %+.3g/%+.3g, xD "
                "%+.3g/%+.3g /h)",
                cl->sig[1].d_bal, cl->sig[1].d_stg, cl->sig[0].d_bal, cl->sig[0].d_stg);
    else
        fprintf(o, ", ANALYSER DRIFT: %s %+.3g /h ± %.2g (GLR %.1f, consistency %.2f)",
                stagecal_drift_analyser_name(cl->drift_analyser), s->d, s->se, s->t_stat,
                s->q_stat);
}

/* Run k's closure line. */
static void print_run(FILE *o, const stagecal_runlog *log, const stagecal_runlog_result *res,
                      size_t k)
{
    const stagecal_runlog_run *r = &log->runs[k];
    const stagecal_runlog_closure *cl = &res->closures[k];
    if (cl->n_used < 3) {
        fprintf(o, "%s:%ld: run '%s': %zu rows, too few complete rows for a balance\n",
                log->files[r->file], r->first_line, r->name, r->n);
        return;
    }
    fprintf(o, "%s:%ld: run '%s': %zu rows, closure %+.2f %%", log->files[r->file], r->first_line,
            r->name, r->n, 100.0 * cl->closure);
    if (cl->u_closure > 0)
        fprintf(o, " ± %.2f %%", 100.0 * cl->u_closure);
    fprintf(o, ", xB drift %+.3g /h ± %.2g%s", cl->drift_per_h, cl->u_drift_per_h,
            cl->gross ? ", GROSS ERROR" : "");
    print_drift(o, cl);
    if (cl->has_boilup)
        fprintf(o, ", W fell %.4g of %.4g mol from V/(R+1) (ratio %.4f ± %.4f)%s", cl->w_fall_mol,
                cl->w_pred_mol, cl->boilup_ratio, cl->u_w_diff_mol / cl->w_pred_mol,
                cl->boilup_mismatch ? ", BOIL-UP/REFLUX MISMATCH" : "");
    print_outlier_lines(o, log, res, k);
    fputc('\n', o);
}

static void print_findings(const stagecal_findings *f)
{
    for (size_t i = 0; i < f->n; i++)
        printf("%s%s\n",
               f->items[i].severity == STAGECAL_FINDING_ERROR ? "" : "warning: ", f->items[i].text);
    if (f->n < f->n_errors + f->n_warnings)
        printf("... %zu more findings not shown\n", f->n_errors + f->n_warnings - f->n);
}

/* The summary line on stderr. A run whose balance does not close is an error-level
 * finding about the run (not about a row), and so is an input that is missing (said above
 * as it was met): the line never pairs either with "0 errors". */
static void summary(const stagecal_runlog_totals *t, size_t gross, const stagecal_findings *f,
                    size_t missing)
{
    size_t errors = f->n_errors + missing;
    char miss[96] = "";
    if (missing)
        snprintf(miss, sizeof miss, " (%zu input(s) not read, see above)", missing);
    fprintf(stderr, "stagecal check: %zu rows, %zu runs: ", t->rows, t->nruns);
    if (gross == 0)
        fprintf(stderr, "%zu errors%s, %zu warnings\n", errors, miss, f->n_warnings);
    else if (errors == 0)
        fprintf(stderr,
                "rows valid, %zu warnings; %zu run(s) with a gross error in the mass "
                "balance (see the closure lines)\n",
                f->n_warnings, gross);
    else
        fprintf(stderr,
                "%zu errors%s, %zu warnings; %zu run(s) with a gross error in "
                "the mass balance (see the closure lines)\n",
                errors, miss, f->n_warnings, gross);
}

/* The state of a streamed check: the runs' lines (text) or objects (JSON), a few numbers
 * per run, never the rows. */
struct check_out {
    int json;
    json_t *runs; /* JSON: one object per run */
    FILE *text;   /* text: the runs' lines, printed after the findings */
    char *buf;    /* its buffer */
    size_t len;
    size_t gross;             /* runs with a gross balance error */
    stagecal_runlog_totals t; /* rows, runs and files (runs and closures unused) */
    stagecal_physics *ph;     /* the models at logged pressures, kept from run to run */
};

/* Run `run` (one run): its analysis (and inversion with an equilibrium model: the stage
 * counts are the drift test's second signature, which analyser drifts) into out. */
static int check_run(struct check_out *out, const stagecal_runlog *run, const stagecal_column *col,
                     const stagecal_runlog_analysis_params *ap, stagecal_error *err)
{
    stagecal_runlog_result res;
    if (stagecal_runlog_analyse(run, col, ap, &res, err) != STAGECAL_OK ||
        (col && col->system.vle &&
         stagecal_runlog_invert_physics(run, col, 1.0, ap, out->ph, &res, err) != STAGECAL_OK))
        return -1;
    if (out->json) {
        json_t *o = cli_run_json(run, 0, &res.closures[0]);
        json_object_set_new(o, "outlier_lines", outlier_lines_json(run, &res, 0));
        json_array_append_new(out->runs, o);
    } else {
        print_run(out->text, run, &res, 0);
    }
    out->gross += res.closures[0].gross != 0;
    out->t.rows += run->n;
    out->t.nruns++;
    stagecal_runlog_result_free(&res);
    return 0;
}

/* Reads and checks the logs run by run. A missing file is said and skipped (counted in
 * *missing);
 * an unusable one is a finding. 0, or an exit code after saying why. */
static int check_stream(struct check_out *out, char **paths, size_t n, const stagecal_column *col,
                        const stagecal_runlog_params *rp, const stagecal_runlog_analysis_params *ap,
                        stagecal_findings *f, size_t *missing)
{
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_runlog_stream *s =
        stagecal_runlog_stream_alloc((const char *const *)paths, n, col, rp, f);
    stagecal_runlog *run = stagecal_runlog_alloc();
    int rc = s && run ? 0 : CLI_EXIT_SOFTWARE;
    if (rc)
        cli_error("out of memory");
    while (rc == 0) {
        int st = stagecal_runlog_stream_next(s, run, &err);
        if (st == STAGECAL_ENOINPUT) {
            cli_error("%s", err.text);
            (*missing)++;
        } else if (st != STAGECAL_OK && st != STAGECAL_EDATA) {
            rc = cli_fail(&err);
        } else if (st == STAGECAL_OK && run->n == 0) {
            break;
        } else if (st == STAGECAL_OK && check_run(out, run, col, ap, &err) != 0) {
            rc = cli_fail(&err);
        }
    }
    if (run && (out->t.files = malloc((run->nfiles ? run->nfiles : 1) * sizeof *out->t.files))) {
        memcpy(out->t.files, run->files, run->nfiles * sizeof *out->t.files);
        out->t.nfiles = run->nfiles;
    }
    out->t.soft = stagecal_runlog_stream_soft(s);
    stagecal_runlog_free(run);
    stagecal_runlog_stream_free(s);
    return rc;
}

int cmd_check(int argc, char **argv, cli_ctx *ctx)
{
    const char *column_path = NULL;
    long minrows = 0;
    int dialect = 0, no_infer = 0;
    stagecal_runlog_analysis_params ap = stagecal_runlog_analysis_default_params();
    const struct cli_option opts[] = {
        OPT_COLUMN(&column_path, "column file: molar masses (mass units), latent heat (Q) and\n"
                                 "the uncertainties the checks use (docs/column-file.md)"),
        OPT_MIN_ROWS(&minrows),
        OPT_CSV_DIALECT(&dialect),
        OPT_NO_INFER(&no_infer),
        OPT_WARM_UP(&ap.warmup_s),
        OPT_MIN_WINDOW(&ap.min_window_s),
        OPT_END_COMMON(ctx),
    };
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    int first, rc = cli_parse(argc, argv, opts, &usage, &first);
    if (rc)
        return rc;
    if (minrows > 0)
        rp.min_rows = (size_t)minrows;
    rp.csv_separator = cli_csv_separator(dialect);
    rp.infer = !no_infer;
    if (first >= argc)
        return cli_usage_error("no run log given (expected one or more RUNLOG.csv)");

    stagecal_column col;
    stagecal_error err;
    int have_col = 0;
    memset(&col, 0, sizeof col);
    stagecal_error_clear(&err);
    if (column_path) {
        if (stagecal_column_load(column_path, &col, &err) != STAGECAL_OK)
            return cli_fail(&err);
        have_col = 1;
        cli_column_warn(&col, column_path);
    }
    /* run by run: memory holds one run and a line per run, whatever the length of the logs */
    stagecal_findings *f = stagecal_findings_alloc(rp.max_findings);
    struct check_out out;
    memset(&out, 0, sizeof out);
    out.json = ctx->json;
    if (ctx->json)
        out.runs = json_array();
    else
        out.text = open_memstream(&out.buf, &out.len);
    size_t missing = 0;
    if (have_col && col.system.vle)
        out.ph = stagecal_physics_alloc(&col, NULL, NULL); /* NULL: one per run (slower) */
    if (!f || !(ctx->json ? out.runs != NULL : out.text != NULL)) {
        cli_error("out of memory");
        rc = CLI_EXIT_SOFTWARE;
    } else if ((rc = check_stream(&out, argv + first, (size_t)(argc - first),
                                  have_col ? &col : NULL, &rp, &ap, f, &missing))) {
        /* said */
    } else if (ctx->json) {
        rc = print_json(&out.t, out.runs, f, missing) ? CLI_EXIT_CANTCREAT : 0;
        out.runs = NULL; /* the document owns it */
    } else {
        print_findings(f);
        fclose(out.text);
        out.text = NULL;
        rc = out.len && fwrite(out.buf, 1, out.len, stdout) != out.len ? CLI_EXIT_CANTCREAT : 0;
    }
    if (rc == 0 && !cli_quiet)
        summary(&out.t, out.gross, f, missing);
    if (rc == 0)
        cli_soft_summary("stagecal check", &out.t.soft);
    if (rc == 0)
        rc = missing ? CLI_EXIT_NOINPUT : f->n_errors ? CLI_EXIT_DATA : CLI_EXIT_OK;
    if (out.text)
        fclose(out.text);
    free(out.buf);
    json_decref(out.runs);
    stagecal_runlog_totals_free(&out.t);
    stagecal_findings_free(f);
    stagecal_physics_free(out.ph);
    if (have_col)
        stagecal_column_free(&col);
    return rc;
}
