/*
 * cmd_fits.c — `stagecal fits list|find|label|retire|restore COLUMN …`: a column's fits
 * named by their data period and label (include/stagecal/fits.h), found by period or
 * label, labelled and retired with a reason in the column's catalogue.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/fits.h"

static const struct cli_usage usage = {
    "usage: stagecal fits list COLUMN [--fits DIR] [--events FILE] [--json]\n"
    "       stagecal fits find COLUMN SPEC [--fits DIR]\n"
    "       stagecal fits label COLUMN FIT LABEL [--fits DIR]\n"
    "       stagecal fits retire COLUMN FIT --reason TEXT [--fits DIR]\n"
    "       stagecal fits restore COLUMN FIT [--fits DIR]\n",
    "A fit is named COLUMN@FIRST..LAST (the days of its first and last logged sample),\n"
    "with #LABEL when labelled. 'list' shows every fit of the column with its name, file,\n"
    "label and retirement; with --events it flags fits whose data period straddles a\n"
    "repack or maintenance event (they mix two beds). 'find' prints the path of the one\n"
    "live fit that SPEC names: a label, a file name, a name, or a period YYYY, YYYY-MM,\n"
    "YYYY-MM-DD or FROM..TO that holds its whole data period. FIT in 'label', 'retire'\n"
    "and 'restore' is such a SPEC (or a file name). Labels and retirements live in\n"
    "DIR/COLUMN/catalogue; the model files are never changed. Retired fits are not found\n"
    "and not trended.\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 73 cannot write.\n"};

static json_t *entry_json(const stagecal_fit_entry *e, const stagecal_trend_event *ev)
{
    json_t *o = json_pack("{s:s, s:s, s:s, s:b}", "name", e->name, "path", e->path, "file", e->file,
                          "retired", e->retired);
    json_object_set_new(o, "label", e->label[0] ? json_string(e->label) : json_null());
    json_object_set_new(o, "reason", e->retired ? json_string(e->reason) : json_null());
    json_object_set_new(o, "straddles_event",
                        e->straddles >= 0
                            ? json_pack("{s:s, s:s}", "kind",
                                        stagecal_event_kind_name(ev[e->straddles].kind), "note",
                                        ev[e->straddles].note)
                            : json_null());
    return o;
}

static int do_list(const stagecal_fit_entry *e, size_t n, const stagecal_trend_event *ev,
                   const char *column, int json)
{
    if (json) {
        json_t *arr = json_array();
        for (size_t i = 0; i < n; i++)
            json_array_append_new(arr, entry_json(&e[i], ev));
        return cli_json_print(json_pack("{s:s, s:i, s:s, s:o}", "format", "stagecal-fits",
                                        "version", 1, "column_id", column, "fits", arr));
    }
    printf("%zu fit(s) of column %s\n", n, column);
    for (size_t i = 0; i < n; i++) {
        printf("  %-48s %s", e[i].name, e[i].file);
        if (e[i].retired)
            printf("  RETIRED: %s", e[i].reason);
        if (e[i].straddles >= 0)
            printf("  STRADDLES the %s of its period: it mixes two beds",
                   stagecal_event_kind_name(ev[e[i].straddles].kind));
        printf("\n");
    }
    return 0;
}

int cmd_fits(int argc, char **argv, cli_ctx *ctx)
{
    const char *fits = "fits", *events = NULL, *reason = NULL;
    const struct cli_option opts[] = {
        OPT_FITS(&fits),
        OPT_STRING(0, "events", &events, "FILE",
                   "repack/maintenance events (CSV: time,column,kind[,note])"),
        OPT_STRING(0, "reason", &reason, "TEXT", "why the fit is retired (required by 'retire')"),
        OPT_END_COMMON(ctx),
    };
    int first, rc0;
    if ((rc0 = cli_parse(argc, argv, opts, &usage, &first)))
        return rc0;
    int json = ctx->json;
    int nargs = argc - first;
    char **a = argv + first;
    static const struct {
        const char *verb;
        int args; /* after the verb */
    } verbs[] = {{"list", 1}, {"find", 2}, {"label", 3}, {"retire", 2}, {"restore", 2}};
    int v = -1;
    for (int i = 0; nargs > 0 && i < 5; i++)
        if (strcmp(a[0], verbs[i].verb) == 0)
            v = i;
    if (v < 0)
        return cli_usage_error("expected list, find, label, retire or restore (see 'stagecal "
                               "fits --help')");
    if (nargs - 1 != verbs[v].args)
        return cli_usage_error("'fits %s' takes %d argument(s) (see 'stagecal fits --help')",
                               verbs[v].verb, verbs[v].args);
    if (v == 3 && !(reason && reason[0]))
        return cli_usage_error("'fits retire' needs '--reason TEXT' (why the fit is set aside)");
    const char *column = a[1];
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_fit_entry *e = NULL;
    stagecal_trend_event *ev = NULL;
    size_t n = 0, nev = 0, k = 0;
    int rc = 0;
    if (stagecal_fits_list(fits, column, &e, &n, &err) != STAGECAL_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    if (events && stagecal_trend_events_read(events, &ev, &nev, &err) != STAGECAL_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    stagecal_fits_check_events(e, n, ev, nev, column);
    if (v == 0) {
        rc = do_list(e, n, ev, column, json);
        goto done;
    }
    /* restore looks among retired fits too: find by file name or name there */
    if (v == 4) {
        for (k = 0; k < n; k++)
            if (strcmp(e[k].file, a[2]) == 0 || strcmp(e[k].name, a[2]) == 0 ||
                (e[k].label[0] && strcmp(e[k].label, a[2]) == 0))
                break;
        if (k == n) {
            cli_error("no fit of %s is named '%s' (expected a file name, name or label)", column,
                      a[2]);
            rc = CLI_EXIT_DATA;
            goto done;
        }
    } else if (stagecal_fits_find(e, n, a[2], &k, &err) != STAGECAL_OK) {
        rc = cli_fail(&err);
        goto done;
    }
    if (v == 1)
        printf("%s\n", e[k].path);
    else if ((v == 2 && stagecal_fits_set_label(fits, column, e[k].file, a[3], &err)) ||
             (v == 3 && stagecal_fits_retire(fits, column, e[k].file, reason, &err)) ||
             (v == 4 && stagecal_fits_retire(fits, column, e[k].file, NULL, &err)))
        rc = cli_fail(&err);
    else if (v >= 2)
        printf("%s: %s\n", e[k].name,
               v == 2   ? "labelled"
               : v == 3 ? "retired"
                        : "restored (no longer retired)");
done:
    free(e);
    free(ev);
    return rc;
}
