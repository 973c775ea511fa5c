/*
 * invert_runlog.c — the run-log mode of `stagecal invert`:
 *   stagecal invert --column FILE RUNLOG.csv... [--out FILE.csv] [--json]
 * Reads the logs, checks them, closes each run's pot balance, inverts every row
 * and writes one CSV row per log row (--out, or stdout without --json); --json
 * prints a summary (status counts, closures, quasi-steady windows).
 */
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "fileio.h"
#include "cli.h"
#include "commands.h"
#include "stagecal/column.h"
#include "stagecal/evidence.h"
#include "stagecal/runlog.h"
#include "stagecal/stages.h"

static const char usage_text[] =
    "usage: stagecal invert --column FILE [--murphree E] [--out FILE.csv] [--min-rows N]\n"
    "                       [--json] [--quiet] RUNLOG.csv...\n"
    "\n"
    "Effective equilibrium stages at every row of production run logs (docs/runlog.md):\n"
    "stages (the pot included), column stages, their standard uncertainty propagated\n"
    "from the column file's uncertainties, status, L/V, F-factor and the quasi-steady\n"
    "window flags (docs/methods.md). The CSV goes to --out, or to stdout without --json;\n"
    "--json prints a summary: status counts, each run's mass-balance closure and the\n"
    "quasi-steady windows, which are the units of evidence.\n"
    "\n"
    "  --column FILE   column file: equilibrium model, geometry, uncertainties (required)\n"
    "  --murphree E    Murphree vapour efficiency of the column stages, in (0, 1] (default 1)\n"
    "  --out FILE.csv  per-row results ('-' = stdout)\n"
    "  --min-rows N    fewest rows a run may have (default 5)\n"
    "  --json          one JSON summary on stdout\n"
    "  --quiet         no warnings on stderr\n"
    "  -h, --help      this text\n";

int invert_runlog_wanted(int argc, char **argv)
{
    static const char *const with_value[] = {"--alpha",    "--kvalue", "--column",
                                             "--xd",       "--xb",     "--reflux",
                                             "--murphree", "--out",    "--min-rows"};
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (strcmp(a, "--") == 0)
            return i + 1 < argc;
        if (strcmp(a, "--out") == 0 || strncmp(a, "--out=", 6) == 0 ||
            strcmp(a, "--min-rows") == 0 || strncmp(a, "--min-rows=", 11) == 0)
            return 1;
        if (a[0] == '-' && a[1] != '\0') {
            for (size_t k = 0; k < sizeof with_value / sizeof with_value[0]; k++)
                if (strcmp(a, with_value[k]) == 0) {
                    i++; /* skip its value */
                    break;
                }
            continue;
        }
        return 1; /* a positional argument: a run log */
    }
    return 0;
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
    json_object_set_new(doc, "condenser", json_string(stagecal_condenser_name(col->condenser)));
    json_object_set_new(doc, "stage_convention",
                        json_string(stagecal_convention_text(col->condenser)));
    for (size_t k = 0; k < log->nfiles; k++)
        json_array_append_new(files, json_string(log->files[k]));
    json_object_set_new(doc, "files", files);
    json_object_set_new(doc, "rows", json_integer((json_int_t)log->n));
    json_object_set_new(doc, "out", out_path ? json_string(out_path) : json_null());
    json_t *cnt = json_object();
    for (int s = 0; s < STAGECAL_RUNLOG_NSTATUS; s++)
        json_object_set_new(cnt, stagecal_runlog_status_name(s),
                            json_integer((json_int_t)res->count[s]));
    json_object_set_new(doc, "status_counts", cnt);
    json_object_set_new(doc, "validation",
                        json_pack("{s:I,s:I}", "errors", (json_int_t)f->n_errors, "warnings",
                                  (json_int_t)f->n_warnings));
    for (size_t k = 0; k < log->nruns; k++) {
        const stagecal_runlog_run *r = &log->runs[k];
        const stagecal_runlog_closure *c = &res->closures[k];
        json_t *o = json_object();
        json_object_set_new(o, "name", json_string(r->name));
        json_object_set_new(o, "source", json_string(log->files[r->file]));
        json_object_set_new(o, "rows", json_integer((json_int_t)r->n));
        json_object_set_new(o, "closure", cli_json_real(c->closure));
        json_object_set_new(o, "u_closure", cli_json_real(c->u_closure));
        json_object_set_new(o, "gross_error", json_boolean(c->gross));
        json_object_set_new(o, "xb_drift_per_h", cli_json_real(c->drift_per_h));
        json_object_set_new(o, "u_xb_drift_per_h", cli_json_real(c->u_drift_per_h));
        json_object_set_new(o, "drift", json_boolean(c->drift));
        json_object_set_new(o, "outliers", json_integer((json_int_t)c->n_outliers));
        json_array_append_new(runs, o);
    }
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
        json_object_set_new(o, "reflux", cli_json_reflux(w->r_median));
        json_object_set_new(o, "n_ok", json_integer((json_int_t)w->n_ok));
        /* the window's stage count as the calibration uses it (evidence.h) */
        const stagecal_evidence *e = stagecal_evidence_find(ev, k);
        int ok = e && e->stages_ok;
        json_object_set_new(o, "stages", ok ? json_real(e->stages) : json_null());
        json_object_set_new(o, "se_stages", ok ? json_real(e->se_stages) : json_null());
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

int invert_runlog(int argc, char **argv)
{
    enum { O_COLUMN = 256, O_MURPHREE, O_OUT, O_MINROWS, O_JSON, O_QUIET };
    static const struct option opts[] = {{"column", required_argument, NULL, O_COLUMN},
                                         {"murphree", required_argument, NULL, O_MURPHREE},
                                         {"out", required_argument, NULL, O_OUT},
                                         {"min-rows", required_argument, NULL, O_MINROWS},
                                         {"json", no_argument, NULL, O_JSON},
                                         {"quiet", no_argument, NULL, O_QUIET},
                                         {"help", no_argument, NULL, 'h'},
                                         {0, 0, 0, 0}};
    const char *column_path = NULL, *out_path = NULL;
    double murphree = 1.0;
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    int json = 0, c, rc = CLI_EXIT_OK;
    long minrows;

    optind = 0;
    opterr = 0;
    while ((c = getopt_long(argc, argv, ":h", opts, NULL)) != -1) {
        switch (c) {
        case 'h':
            fputs(usage_text, stdout);
            return CLI_EXIT_OK;
        case O_COLUMN:
            column_path = optarg;
            break;
        case O_MURPHREE:
            if (cli_parse_double("murphree", optarg, 0, "an efficiency in (0, 1]", &murphree))
                return CLI_EXIT_USAGE;
            break;
        case O_OUT:
            out_path = optarg;
            break;
        case O_MINROWS:
            if (cli_parse_long("min-rows", optarg, 1, 1000000000L, &minrows))
                return CLI_EXIT_USAGE;
            rp.min_rows = (size_t)minrows;
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
    if (optind >= argc)
        return cli_usage_error("no run log given (expected one or more RUNLOG.csv)");
    if (!column_path)
        return cli_usage_error("option '--column' is required with a run log (the equilibrium "
                               "model and the uncertainties come from it)");
    if ((rc = cli_check_murphree("murphree", murphree)))
        return rc;
    if ((rc = cli_check_output("out", out_path, (const char *const *)(argv + optind),
                               (size_t)(argc - optind))) ||
        (rc = cli_check_output("out", out_path, &column_path, 1)))
        return rc;
    /* --json owns stdout: the CSV must go to a file then (one document on stdout). */
    if (json && out_path && strcmp(out_path, "-") == 0)
        return cli_usage_error("options '--json' and '--out -' both write to standard output "
                               "(give '--out FILE.csv' with '--json')");

    stagecal_column col;
    stagecal_error err;
    memset(&col, 0, sizeof col);
    stagecal_error_clear(&err);
    if (stagecal_column_load(column_path, &col, &err) != STAGECAL_OK)
        return cli_fail(&err);
    cli_column_warn(&col, column_path);
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(rp.max_findings);
    stagecal_runlog_result res;
    stagecal_evidence_set ev;
    memset(&res, 0, sizeof res);
    memset(&ev, 0, sizeof ev);
    if (!log || !f) {
        cli_error("out of memory");
        rc = CLI_EXIT_SOFTWARE;
        goto done;
    }
    for (int i = optind; i < argc; i++) {
        int s = stagecal_runlog_read(log, argv[i], &col, &rp, f, &err);
        if (s != STAGECAL_OK) {
            rc = cli_fail(&err);
            goto done;
        }
    }
    if (f->n_errors) {
        for (size_t i = 0; i < f->n && i < 10; i++)
            cli_warn("%s", f->items[i].text);
        cli_warn("%zu validation errors: the rows concerned have missing values (run "
                 "'stagecal check' for the full list)",
                 f->n_errors);
    }
    if (stagecal_runlog_analyse(log, &col, NULL, &res, &err) != STAGECAL_OK ||
        stagecal_runlog_invert(log, &col, murphree, NULL, &res, &err) != STAGECAL_OK ||
        stagecal_evidence_build(log, &res, &col, murphree, NULL, &ev, &err) != STAGECAL_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    if (out_path || !json) {
        int to_stdout = !out_path || strcmp(out_path, "-") == 0;
        atomic_file a;
        FILE *out = stdout;
        int w = to_stdout ? STAGECAL_OK : atomic_open(&a, out_path, &err);
        if (w == STAGECAL_OK && !to_stdout && !(out = atomic_stream(&a, &err)))
            w = STAGECAL_EWRITE;
        int csv = w == STAGECAL_OK ? stagecal_runlog_write_csv(log, &col, &res, out, &err) : w;
        if (w == STAGECAL_OK && csv == STAGECAL_OK && !to_stdout) /* replaces (docs/cli.md) */
            w = atomic_publish(&a, out_path, ATOMIC_REPLACE, NULL, &err);
        if (!to_stdout)
            atomic_discard(&a);
        if (w != STAGECAL_OK || csv != STAGECAL_OK) {
            if (w != STAGECAL_OK && !to_stdout)
                cli_fail(&err);
            else
                cli_error("cannot write '%s'", to_stdout ? "standard output" : out_path);
            rc = CLI_EXIT_CANTCREAT;
            goto done;
        }
    }
    for (size_t k = 0; k < log->nruns; k++) {
        const stagecal_runlog_closure *cl = &res.closures[k];
        if (cl->gross || cl->drift)
            cli_warn("run '%s': %s%s%s (closure %+.2f %%)", log->runs[k].name,
                     cl->gross ? "mass balance does not close" : "",
                     cl->gross && cl->drift ? ", " : "", cl->drift ? "xB analyser drift" : "",
                     100.0 * cl->closure);
    }
    if (json) {
        rc = cli_json_print(summary_json(log, &col, &res, &ev, f, out_path, murphree));
    } else if (out_path && strcmp(out_path, "-") != 0) {
        printf("%zu rows: %zu ok, %zu pinch, %zu azeotrope, %zu invalid, %zu censored (one-sided "
               "bounds in stages_low/stages_high); %zu quasi-steady windows; written to %s\n",
               log->n, res.count[0], res.count[1], res.count[2], res.count[3],
               res.count[STAGECAL_RUNLOG_CENSORED], res.nwindows, out_path);
    }
done:
    stagecal_evidence_set_free(&ev);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
    stagecal_findings_free(f);
    stagecal_column_free(&col);
    return rc;
}
