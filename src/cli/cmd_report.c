/*
 * cmd_report.c — `stagecal report MODEL.json`: one self-contained HTML file (inline
 * SVG, no scripts, no network, printable to A4) for a calibration, from its model
 * file and, optionally, the points it was fitted on. The content is assembled by the
 * report module (stagecal_report_from_model); this file parses, calls and prints.
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
#include "stagecal/model.h"
#include "stagecal/regress.h"
#include "stagecal/report.h"

static const struct cli_usage usage = {
    "usage: stagecal report MODEL.json [--points POINTS.csv] [--output OUT.html]\n"
    "                       [--xd XD --reflux R|inf [--f-factor F]] [--column FILE]\n"
    "                       [--json] [--quiet]\n",
    "Writes one self-contained HTML report for the calibration in MODEL.json, for a\n"
    "reviewer to sign. Page one is the answer: the stages at the condition (stated by\n"
    "--reflux/--f-factor, else the model's HETP reference condition) with their\n"
    "interval ('at least N' for a one-sided fit), HETP at that same condition, verdicts\n"
    "in words (inside or outside the fitted envelope, precision), the data period, the\n"
    "caution and a prepared / checked / approved sign-off block; an INVENTED DEMO DATA\n"
    "banner when the column file's description calls the data invented. Then warnings,\n"
    "the fit table, the charts (stages against R with bands and envelope) and the\n"
    "provenance (inputs with SHA-256). Inline SVG, no scripts, no network resources;\n"
    "prints to A4 with page numbers. --xd with --reflux also adds the pot composition\n"
    "the stages reach below a distillate of XD and a McCabe-Thiele chart. The report\n"
    "that 'calibrate --report-out' writes adds the runs, windows and closure tables\n"
    "and the fit in the other space.\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal,\n"
    "73 output cannot be written.\n"};

/* MODEL.json → MODEL.html (or MODEL + ".html"); malloc'd. */
static char *default_output(const char *model)
{
    size_t n = strlen(model);
    char *out = malloc(n + 6);
    if (!out)
        return NULL;
    memcpy(out, model, n + 1);
    if (n > 5 && strcmp(model + n - 5, ".json") == 0)
        out[n - 5] = '\0';
    memcpy(out + strlen(out), ".html", 6);
    return out;
}

/* A load the form does not take (or lacks) is the command line's fault: an exit code. */
static int load_usage(const stagecal_model *m, double fload)
{
    if (m->form.uses_load && isnan(fload))
        return cli_usage_error("the model's form '%s' uses the vapour load: give "
                               "'--f-factor F' with the condition",
                               m->form.name);
    if (!m->form.uses_load && !isnan(fload))
        return cli_usage_error("the model's form '%s' does not use the vapour load: leave "
                               "out '--f-factor'",
                               m->form.name);
    return 0;
}

static int error_data(stagecal_error *err, const char *path, const char *col_id,
                      const char *model_id)
{
    stagecal_error_clear(err);
    err->code = STAGECAL_EDATA;
    snprintf(err->text, sizeof err->text, "column file '%s' is for column '%s', the model for '%s'",
             path, col_id, model_id);
    return STAGECAL_EDATA;
}

/* The stated condition, with the equilibrium of column_path when given (same column id).
 * A library status. */
static int add_condition(stagecal_report_doc *doc, const stagecal_model *m, const char *column_path,
                         double xd, double reflux, double fload, stagecal_error *err)
{
    stagecal_column col;
    int have_col = 0, rc = STAGECAL_OK;
    if (column_path && (rc = stagecal_column_load(column_path, &col, err)) == STAGECAL_OK) {
        have_col = 1;
        cli_column_warn(&col, column_path);
        if (strcmp(col.id, m->column_id) != 0) /* bad data, reported like the rest */
            rc = error_data(err, column_path, col.id, m->column_id);
    }
    if (rc == STAGECAL_OK)
        rc = stagecal_report_doc_add_condition(doc, m, have_col ? col.system.vle : NULL, xd, reflux,
                                               fload, err);
    if (have_col)
        stagecal_column_free(&col);
    return rc;
}

/* The column file's description (for the invented-data banner): from --column, else from
 * the column file the model was fitted with (its first input, when it is still there and
 * is the same column). Best effort: a file that is gone or differs gives no banner. */
static void describe(stagecal_report_doc *doc, const stagecal_model *m, const char *column_path)
{
    const char *path = column_path;
    for (size_t i = 0; !path && i < m->n_inputs; i++) {
        size_t n = strlen(m->inputs[i].path);
        if (n > 5 && strcmp(m->inputs[i].path + n - 5, ".json") == 0)
            path = m->inputs[i].path;
    }
    stagecal_column col;
    stagecal_error e;
    stagecal_error_clear(&e);
    if (!path || stagecal_column_load(path, &col, &e) != STAGECAL_OK)
        return;
    if (strcmp(col.id, m->column_id) == 0)
        (void)stagecal_report_doc_set_description(doc, col.description);
    stagecal_column_free(&col);
}

static int print_result(const stagecal_report *rep, const char *model_path, const char *output,
                        int json, int to_stdout)
{
    for (size_t i = 0; i < rep->n_warnings; i++)
        cli_warn("%s", rep->warnings[i]);
    if (json) {
        json_t *w = json_array();
        for (size_t i = 0; i < rep->n_warnings; i++)
            json_array_append_new(w, json_string(rep->warnings[i]));
        json_t *doc_json = json_pack(
            "{s:s, s:i, s:s, s:s, s:s, s:I, s:o, s:s}", "format", "stagecal-report-result",
            "version", 1, "status", "ok", "model", model_path, "report", output, "figures",
            (json_int_t)rep->n_figures, "warnings", w, "caution", stagecal_caution_text());
        return doc_json ? cli_json_print(doc_json) : CLI_EXIT_SOFTWARE;
    }
    if (!to_stdout)
        printf("report written to %s\n", output);
    return CLI_EXIT_OK;
}

/* What a report is built from, and the report. */
struct report_job {
    stagecal_model m;
    stagecal_regress_data pts;
    stagecal_report_doc *doc;
};

static void report_job_free(struct report_job *job)
{
    stagecal_report_doc_free(job->doc);
    stagecal_regress_data_free(&job->pts);
    stagecal_model_free(&job->m);
}

/* The model file and the points read, the report built from them, described (column_path)
 * and, with xd, the stated condition added. An exit code (the message printed). */
static int build_report(struct report_job *job, const char *model_path, const char *points_path,
                        const char *column_path, double xd, double reflux, double fload)
{
    stagecal_error err;
    int have_pts = 0;
    stagecal_error_clear(&err);
    int rc = stagecal_model_load(model_path, &job->m, &err);
    if (rc == STAGECAL_OK && points_path) {
        rc = stagecal_regress_data_read(points_path, &job->pts, &err);
        have_pts = rc == STAGECAL_OK;
    }
    if (rc != STAGECAL_OK)
        return cli_fail(&err);
    /* The report is built from the files alone: an invalid argument there is their content
     * (bad data, 65); writing it is about --output. */
    rc = stagecal_report_from_model(&job->m, have_pts ? &job->pts : NULL, &job->doc, &err);
    if (rc == STAGECAL_OK)
        describe(job->doc, &job->m, column_path);
    if (rc == STAGECAL_OK && !isnan(xd)) {
        if ((rc = load_usage(&job->m, fload)) != 0)
            return rc;
        rc = add_condition(job->doc, &job->m, column_path, xd, reflux, fload, &err);
    }
    return rc == STAGECAL_OK ? 0 : cli_fail_data(&err);
}

/* The HTML to standard output or, atomically, to output. An exit code. */
static int write_report(const stagecal_report_doc *doc, const char *output, int to_stdout)
{
    stagecal_error err;
    stagecal_error_clear(&err);
    if (to_stdout) {
        char *html = NULL;
        size_t len = 0;
        int rc = stagecal_report_html(stagecal_report_doc_content(doc), NULL, &html, &len, &err);
        /* A failed write is reported once, by main (ferror(stdout) → exit 73). */
        if (rc == STAGECAL_OK)
            (void)fwrite(html, 1, len, stdout);
        free(html);
        return rc == STAGECAL_OK ? 0 : cli_fail_data(&err); /* built from the files alone */
    }
    if (stagecal_report_write(stagecal_report_doc_content(doc), NULL, output, &err) != STAGECAL_OK)
        return cli_fail(&err);
    return 0;
}

int cmd_report(int argc, char **argv, cli_ctx *ctx)
{
    const char *points_path = NULL, *output = NULL, *column_path = NULL;
    double xd = NAN, reflux = NAN, fload = NAN;
    const struct cli_option opts[] = {
        OPT_POINTS(&points_path, "the points (R,stages[,F,sigma]) to show with the fit; adds a\n"
                                 "residual chart and flags points outside the envelope"),
        OPT_XD(&xd),
        OPT_REFLUX(&reflux, "reflux ratio of the stated condition, >= 0 or 'inf'"),
        OPT_FFACTOR(&fload, "F-factor [Pa^0.5] of the stated condition (for a form that uses it)"),
        OPT_COLUMN(&column_path, "the column file (same column id): the equilibrium for the\n"
                                 "condition when the model file does not record it, and the\n"
                                 "description (data called invented get a banner); default:\n"
                                 "the column file the model was fitted with, if still there"),
        OPT_OUTPUT(&output, "the HTML file (default: MODEL with .json replaced by .html);\n"
                            "'-' writes the HTML to standard output (not with --json)"),
        OPT_END_COMMON(ctx),
    };
    int json, first, rc;
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    json = ctx->json;
    if (first >= argc)
        return cli_usage_error("a model file is required (see 'stagecal report --help')");
    if (first + 1 < argc)
        return cli_usage_error("unexpected argument '%s' (report takes one model file)",
                               argv[first + 1]);
    const char *model_path = argv[first];
    if (isnan(xd) != isnan(reflux))
        return cli_usage_error("options '--xd' and '--reflux' go together (a stated condition)");
    if (!isnan(fload) && isnan(xd))
        return cli_usage_error("option '--f-factor' needs '--xd' and '--reflux'");
    int to_stdout = output && strcmp(output, "-") == 0;
    if (to_stdout && json)
        return cli_usage_error("options '--json' and '--output -' both write to standard output");
    ctx->data_on_stdout = to_stdout; /* the HTML is the output: no caution after it (the
                                        report carries its own) */
    char *out_owned = output ? NULL : default_output(model_path);
    if (!output && !out_owned) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    if (!output)
        output = out_owned;
    {
        const char *inputs[3] = {model_path, points_path, column_path};
        if ((rc = cli_check_output("output", output, inputs, 3))) {
            free(out_owned);
            return rc;
        }
    }

    struct report_job job;
    memset(&job, 0, sizeof job);
    stagecal_model_init(&job.m);
    if ((rc = build_report(&job, model_path, points_path, column_path, xd, reflux, fload)) == 0 &&
        (rc = write_report(job.doc, output, to_stdout)) == 0)
        rc =
            print_result(stagecal_report_doc_content(job.doc), model_path, output, json, to_stdout);
    report_job_free(&job);
    free(out_owned);
    return rc;
}
