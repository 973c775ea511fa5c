/*
 * cmd_trend.c — `stagecal trend COLUMN...`: every model file of a column under
 * fits/<column>/ evaluated at a reference condition, in date order, with the weighted
 * trend in stages per month, an EWMA chart with its alarms, and the forecast date on
 * which the stages fall below a requirement; repack/maintenance events split the
 * history. Several columns give one comparable row each (the fleet view). Fits that
 * re-use a newer fit's run logs are set aside first (stagecal_trend_select; --all-fits
 * keeps them). The numerics live in the trend and hetp modules.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "options.h"
#include "stagecal/fits.h"
#include "stagecal/hetp.h"
#include "stagecal/model.h"
#include "stagecal/trend.h"
#include "stagecal/trend_dir.h"

static const struct cli_usage usage = {
    "usage: stagecal trend COLUMN... --reflux R|inf [--f-factor F] [--fits DIR]\n"
    "                      [--events FILE] [--require N] [--level P] [--lambda W]\n"
    "                      [--limit L] [--baseline-n K] [--baseline N] [--all-fits]\n"
    "                      [--json] [--quiet]\n",
    "Reads every model file under DIR/COLUMN/ and evaluates the stages (the pot included)\n"
    "at reflux ratio R (and F-factor F), each with its confidence interval, and HETP\n"
    "where the model knows the packed height. Each fit is dated by the last logged\n"
    "sample it used (its time of fit for logs with relative times). Fits a weighted\n"
    "straight line (stages per month, t interval), runs an EWMA chart of the deviations\n"
    "from a baseline, and, with --require, forecasts the date the stages fall below N\n"
    "with a band (Fieller inversion of the line's confidence band).\n"
    "Repack and maintenance events (docs/events-file.md) start new segments; the chart\n"
    "restarts in each and the current segment drives the forecast. With several\n"
    "columns the output is one row per column.\n"
    "Fits that share run logs are not counted twice: newest time of fit first, a fit\n"
    "is kept when none of its run logs (by SHA-256; the column file does not count)\n"
    "was read by a kept fit, and is set aside with a warning otherwise. Ties in time\n"
    "of fit go to the file written later (NAME-2.json after NAME.json).\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal.\n"};

/* Where one set-aside fit's data went: the newer fit that supersedes it. */
struct superseded {
    char path[1024];     /* the set-aside model file */
    char by[1024];       /* the newer, accepted model file */
    char log_path[1024]; /* one shared run log, as the set-aside fit recorded it */
    char sha256[STAGECAL_MODEL_HEX];
};

/* Per model file, beside the trend point: what is shown but not fitted. */
struct extra {
    char path[1024];
    char fitted_utc[STAGECAL_MODEL_TEXT];
    stagecal_model_point pt; /* stages with ci at the reference */
    double dof;
    int has_hetp;
    double height_m;
    stagecal_hetp_result hetp;
};

struct column {
    const char *id;
    stagecal_trend_point *pts;
    struct extra *ex;
    size_t n;               /* fits in the trend */
    struct superseded *sup; /* fits set aside */
    size_t n_sup;
    stagecal_trend_history h;
};

/* The reference condition and the options every column shares. */
struct reference {
    double reflux, fload, level;
    const char *fits;
    int all_fits;
};

static const char *base_name(const char *path)
{
    const char *s = strrchr(path, '/');
    return s ? s + 1 : path;
}

/* Sets aside fit i (it re-uses run logs of the newer fit by). */
static void set_aside(struct column *col, const stagecal_trend_dir *d, size_t i,
                      const stagecal_trend_selection *sel)
{
    struct superseded *s = &col->sup[col->n_sup++];
    const stagecal_model_input *in = &d->models[i].inputs[sel->input];
    snprintf(s->path, sizeof s->path, "%s", d->paths[i]);
    snprintf(s->by, sizeof s->by, "%s", d->paths[sel->by]);
    snprintf(s->log_path, sizeof s->log_path, "%s", in->path);
    snprintf(s->sha256, sizeof s->sha256, "%s", in->sha256);
    cli_warn("%s: superseded by the newer fit %s, which shares the run log '%s' "
             "(sha256 %.12s...); set aside from the trend (--all-fits counts every fit)",
             s->path, s->by, s->log_path, s->sha256);
}

/* Evaluates one kept fit at the reference condition: its trend point and what is shown
 * beside it. Returns an exit code. */
static int add_fit(struct column *col, const stagecal_model *m, const char *path,
                   const struct reference *ref)
{
    struct extra *x = &col->ex[col->n];
    stagecal_hetp_stages s;
    stagecal_error err;
    stagecal_error_clear(&err);
    snprintf(x->path, sizeof x->path, "%s", path);
    if (m->form.uses_load && isnan(ref->fload))
        return cli_usage_error("%s: form '%s' uses the vapour load: option '--f-factor F' is "
                               "required (F-factor in Pa^0.5)",
                               path, m->form.name);
    int st =
        stagecal_trend_point_from_model(m, ref->reflux, ref->fload, 0, &col->pts[col->n], &err);
    if (st == STAGECAL_OK)
        st = stagecal_model_eval(m, ref->reflux, ref->fload, ref->level, &x->pt, &err);
    if (st != STAGECAL_OK) /* options checked already: the model file's content */
        return cli_fail_data(&err);
    if (x->pt.extrapolated)
        cli_warn("%s: the reference condition lies outside the fitted envelope (extrapolation)",
                 path);
    snprintf(x->fitted_utc, sizeof x->fitted_utc, "%s", m->fitted_utc);
    x->dof = x->pt.dof_fit; /* the model's, or the reference condition's Bell-McCaffrey dof */
    if (m->has_hetp &&
        stagecal_hetp_stages_from_model(m, ref->reflux, ref->fload, &s, NULL, &err) ==
            STAGECAL_OK &&
        stagecal_hetp_compute(m->height_m, &s, ref->level, &x->hetp, &err) == STAGECAL_OK) {
        x->has_hetp = 1;
        x->height_m = m->height_m;
    }
    col->n++;
    return 0;
}

/* Loads every model file of the column (stagecal_trend_dir_load), sets aside fits that
 * re-use a newer fit's run logs (unless all_fits), and evaluates the kept ones. */

/* Keeps in d only the fits that may be trended: not retired in the column's catalogue
 * (stagecal fits retire), and whose data period does not straddle a repack/maintenance
 * event of the column (such a fit mixes two beds). Each one left out is named in a
 * warning. The models left out are freed. */
static int live_fits(stagecal_trend_dir *d, const struct reference *ref, const char *column,
                     const stagecal_trend_event *ev, size_t nev)
{
    stagecal_fit_entry *fe = NULL;
    size_t nfe = 0, kept = 0;
    stagecal_error err;
    if (stagecal_fits_list(ref->fits, column, &fe, &nfe, &err) != STAGECAL_OK)
        return cli_fail(&err);
    stagecal_fits_check_events(fe, nfe, ev, nev, column);
    for (size_t i = 0; i < d->n; i++) {
        const stagecal_fit_entry *e = NULL;
        for (size_t k = 0; k < nfe && !e; k++)
            if (strcmp(fe[k].file, base_name(d->paths[i])) == 0)
                e = &fe[k];
        if (e && e->retired) {
            cli_warn("%s: retired (%s); not trended", d->paths[i], e->reason);
        } else if (e && e->straddles >= 0) {
            char day[32];
            cli_format_day(ev[e->straddles].t_s, "-", day, sizeof day);
            cli_warn("%s: its data period straddles the %s of %s: it mixes two beds; set aside "
                     "(fit the logs before and after separately)",
                     d->paths[i], stagecal_event_kind_name(ev[e->straddles].kind), day);
        } else {
            stagecal_model tm = d->models[kept];
            char *tp = d->paths[kept];
            d->models[kept] = d->models[i];
            d->paths[kept] = d->paths[i];
            d->models[i] = tm;
            d->paths[i] = tp;
            kept++;
            continue;
        }
    }
    free(fe);
    if (kept == 0) {
        cli_error("column %s: no live fit to trend (all retired or straddling an event)", column);
        return CLI_EXIT_DATA;
    }
    /* the left-out models sit at [kept, n): free them and shrink the view */
    for (size_t i = kept; i < d->n; i++) {
        stagecal_model_free(&d->models[i]);
        free(d->paths[i]);
        d->paths[i] = NULL;
    }
    d->n = kept;
    return 0;
}

static int load_column(struct column *col, const struct reference *ref,
                       const stagecal_trend_event *ev, size_t nev)
{
    char dir[1024];
    if ((size_t)snprintf(dir, sizeof dir, "%s/%s", ref->fits, col->id) >= sizeof dir) {
        cli_error("path '%s/%s' is too long", ref->fits, col->id);
        return CLI_EXIT_USAGE;
    }
    stagecal_trend_dir d;
    stagecal_error err;
    stagecal_error_clear(&err);
    if (stagecal_trend_dir_load(dir, col->id, &d, &err) != STAGECAL_OK)
        return cli_fail(&err);
    int lrc = live_fits(&d, ref, col->id, ev, nev);
    if (lrc) {
        stagecal_trend_dir_free(&d);
        return lrc;
    }
    stagecal_trend_selection *sel = calloc(d.n, sizeof *sel);
    col->pts = calloc(d.n, sizeof *col->pts);
    col->ex = calloc(d.n, sizeof *col->ex);
    col->sup = calloc(d.n, sizeof *col->sup);
    int rc = 0;
    if (!sel || !col->pts || !col->ex || !col->sup) {
        cli_error("out of memory for %zu model files", d.n);
        rc = CLI_EXIT_SOFTWARE;
    } else if (!ref->all_fits && stagecal_trend_select(d.models, (const char *const *)d.paths, d.n,
                                                       sel, NULL, &err) != STAGECAL_OK) {
        rc = cli_fail_data(&err);
    }
    for (size_t i = 0; i < d.n && rc == 0; i++) {
        if (!ref->all_fits && sel[i].by >= 0)
            set_aside(col, &d, i, &sel[i]);
        else
            rc = add_fit(col, &d.models[i], d.paths[i], ref);
    }
    free(sel);
    stagecal_trend_dir_free(&d);
    return rc;
}

static json_t *date_json(double t_s)
{
    if (!isfinite(t_s))
        return json_null();
    char buf[32];
    time_t tt = (time_t)floor(t_s);
    struct tm tm;
    if (!gmtime_r(&tt, &tm) || strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm) == 0)
        return json_null();
    return json_string(buf);
}

/* A fit's stage interval, or "n.d." under the printing rule (stagecal_trend_undetermined;
 * the reason goes to JSON and to the legend under the table). */
static void ci_text(const struct extra *x, char *buf, size_t cap)
{
    if (stagecal_trend_undetermined(x->dof, x->pt.ci_low, x->pt.ci_high))
        snprintf(buf, cap, "n.d.");
    else
        snprintf(buf, cap, "[%7.3f, %7.3f]", x->pt.ci_low, x->pt.ci_high);
}

static json_t *fit_json(const stagecal_trend_fit *f)
{
    const double M = STAGECAL_TREND_MONTH_S;
    return json_pack("{s:I, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o}", "n", (json_int_t)f->n,
                     "slope_per_month", cli_json_real(f->b * M), "slope_low_per_month",
                     cli_json_real(f->b_low * M), "slope_high_per_month",
                     cli_json_real(f->b_high * M), "se_slope_per_month",
                     cli_json_real(sqrt(f->c11) * M), "p_value", cli_json_real(f->p_value), "dof",
                     cli_json_real(f->dof), "scale", cli_json_real(f->scale), "reference_time",
                     date_json(f->t0_s));
}

static json_t *column_json(const struct column *col, const stagecal_trend_event *ev)
{
    const stagecal_trend_history *h = &col->h;
    json_t *o = json_object();
    json_object_set_new(o, "column_id", json_string(col->id));
    json_t *fits = json_array();
    for (size_t i = 0; i < h->n; i++) {
        const struct extra *x = &col->ex[h->order[i]];
        const stagecal_trend_ewma_point *c = &h->chart[i];
        const char *why = stagecal_trend_undetermined(x->dof, x->pt.ci_low, x->pt.ci_high);
        stagecal_hetp_stages hs = {0, 0, x->dof, 0};
        const char *hwhy = x->has_hetp ? stagecal_hetp_undetermined(&hs, &x->hetp) : NULL;
        json_t *f = json_pack(
            "{s:s, s:s, s:o, s:o, s:o, s:o, s:b, s:I, s:o, s:o, s:o, s:i}", "path", x->path,
            "fitted_utc", x->fitted_utc, "stages", cli_json_real(h->points[i].value), "se",
            why ? json_null() : cli_json_real(h->points[i].se), "ci_low",
            why ? json_null() : cli_json_real(x->pt.ci_low), "ci_high",
            why ? json_null() : cli_json_real(x->pt.ci_high), "extrapolated", x->pt.extrapolated,
            "segment", (json_int_t)h->segment_of[i], "z", cli_json_real(c->z), "ewma",
            cli_json_real(c->ewma), "limit", cli_json_real(c->limit), "alarm", c->alarm);
        /* the date the point is plotted at: the data period's end, not the time of fit */
        json_object_set_new(f, "date", date_json(h->points[i].t_s));
        json_object_set_new(f, "ci_note", why ? json_string(why) : json_null());
        json_object_set_new(
            f, "hetp",
            x->has_hetp
                ? json_pack("{s:o, s:o, s:o, s:o}", "value_m", cli_json_real(x->hetp.hetp_m),
                            "low_m", x->dof >= 2 ? cli_json_real(x->hetp.low_m) : json_null(),
                            "high_m", hwhy ? json_null() : cli_json_real(x->hetp.high_m), "note",
                            hwhy ? json_string(hwhy) : json_null())
                : json_null());
        json_array_append_new(fits, f);
    }
    json_object_set_new(o, "fits", fits);
    json_t *sup = json_array();
    for (size_t i = 0; i < col->n_sup; i++) {
        const struct superseded *s = &col->sup[i];
        json_array_append_new(sup,
                              json_pack("{s:s, s:s, s:{s:s, s:s}}", "path", s->path, "by", s->by,
                                        "shared_input", "path", s->log_path, "sha256", s->sha256));
    }
    json_object_set_new(o, "superseded", sup);
    json_t *segs = json_array();
    for (size_t s = 0; s < h->n_segments; s++) {
        const stagecal_trend_segment *g = &h->segments[s];
        json_t *j = json_pack("{s:I, s:I, s:o, s:o, s:o, s:I}", "first", (json_int_t)g->first, "n",
                              (json_int_t)g->n, "start", date_json(g->start_s), "baseline",
                              cli_json_real(g->baseline), "baseline_se",
                              cli_json_real(g->baseline_se), "alarms", (json_int_t)g->n_alarms);
        json_object_set_new(j, "event",
                            g->event >= 0
                                ? json_pack("{s:s, s:s, s:o}", "kind",
                                            stagecal_event_kind_name(ev[g->event].kind), "note",
                                            ev[g->event].note, "time", date_json(ev[g->event].t_s))
                                : json_null());
        json_object_set_new(j, "trend", g->has_fit ? fit_json(&g->fit) : json_null());
        json_array_append_new(segs, j);
    }
    json_object_set_new(o, "segments", segs);
    if (h->has_forecast) {
        const stagecal_trend_forecast *fc = &h->forecast;
        json_object_set_new(
            o, "forecast",
            json_pack("{s:s, s:o, s:o, s:o, s:o, s:b, s:s}", "status",
                      stagecal_forecast_status_name(fc->status), "required",
                      cli_json_real(fc->required), "date", date_json(fc->t_cross_s), "band_low",
                      date_json(fc->low_s), "band_high", date_json(fc->high_s), "past", fc->past,
                      "method",
                      "crossing of the weighted trend line; band = Fieller inversion of its "
                      "confidence band (null end: unbounded)"));
    } else {
        json_object_set_new(o, "forecast", json_null());
    }
    return o;
}

static void print_column(const struct column *col, const stagecal_trend_event *ev, int pct,
                         double required)
{
    const stagecal_trend_history *h = &col->h;
    const double M = STAGECAL_TREND_MONTH_S;
    char d[32];
    printf("column %s: %zu fits", col->id, h->n);
    if (col->n_sup > 0)
        printf(" (%zu more set aside: they share run logs with a newer fit)", col->n_sup);
    printf("\n");
    printf("  %-10s %8s %19s %19s %3s %7s %s\n", "date", "stages", "CI", "HETP [m] (CI)", "seg",
           "EWMA", "alarm");
    for (size_t i = 0; i < h->n; i++) {
        const struct extra *x = &col->ex[h->order[i]];
        const stagecal_trend_ewma_point *c = &h->chart[i];
        char hetp[40] = "-", ci[40];
        stagecal_hetp_stages hs = {0, 0, x->dof, 0};
        int ci_nd = stagecal_trend_undetermined(x->dof, x->pt.ci_low, x->pt.ci_high) != NULL;
        if (x->has_hetp && !ci_nd && stagecal_hetp_undetermined(&hs, &x->hetp) == NULL)
            snprintf(hetp, sizeof hetp, "%.3f (%.3f-%.3f)", x->hetp.hetp_m, x->hetp.low_m,
                     x->hetp.high_m);
        else if (x->has_hetp && !ci_nd)
            snprintf(hetp, sizeof hetp, ">= %.3f", x->hetp.low_m);
        else if (x->has_hetp)
            snprintf(hetp, sizeof hetp, "%.3f (n.d.)", x->hetp.hetp_m);
        ci_text(x, ci, sizeof ci);
        cli_format_day(h->points[i].t_s, "-", d, sizeof d);
        printf("  %-10s %8.3f %19s %19s %3zu %+7.3f %s%s\n", d, h->points[i].value, ci, hetp,
               h->segment_of[i] + 1, c->ewma,
               c->alarm < 0   ? "LOSS"
               : c->alarm > 0 ? "GAIN"
                              : "",
               x->pt.extrapolated ? " (extrapolated)" : "");
    }
    printf("  (n.d.: not determined - the fit has fewer than 2 degrees of freedom or its "
           "interval reaches beyond the physical range; reasons in --json)\n");
    for (size_t s = 0; s < h->n_segments; s++) {
        const stagecal_trend_segment *g = &h->segments[s];
        cli_format_day(g->start_s, "-", d, sizeof d);
        printf("segment %zu from %s", s + 1, d);
        if (g->event >= 0)
            printf(" (%s%s%s)", stagecal_event_kind_name(ev[g->event].kind),
                   ev[g->event].note[0] ? ": " : "", ev[g->event].note);
        printf(", %zu fits, baseline %.3f stages\n", g->n, g->baseline);
        if (g->has_fit)
            printf("  trend %+.4f stages/month, %d %% CI [%+.4f, %+.4f], p = %.3g "
                   "(scatter/stated se = %.2f)\n",
                   g->fit.b * M, pct, g->fit.b_low * M, g->fit.b_high * M, g->fit.p_value,
                   g->fit.scale);
        else
            printf("  trend: needs at least 3 fits at different dates\n");
        if (g->first_alarm >= 0) {
            cli_format_day(h->points[g->first_alarm].t_s, "-", d, sizeof d);
            printf("  EWMA alarms: %zu, first on %s\n", g->n_alarms, d);
        } else {
            printf("  EWMA alarms: none\n");
        }
    }
    for (size_t i = 0; i < col->n_sup; i++)
        printf("set aside: %s, superseded by %s (shared run log %s)\n", base_name(col->sup[i].path),
               base_name(col->sup[i].by), col->sup[i].log_path);
    if (h->has_forecast) {
        const stagecal_trend_forecast *fc = &h->forecast;
        char line[160];
        cli_forecast_text(fc, required, pct, "-", line, sizeof line);
        if (fc->status == STAGECAL_FORECAST_NOT_DECLINING)
            printf("forecast: the current segment is not declining; no date below %.3g stages\n",
                   required);
        else
            printf("forecast: %s%s\n", line,
                   fc->status == STAGECAL_FORECAST_UNBOUNDED ? " (slope not significant: open)"
                                                             : "");
    } else if (!isnan(required)) {
        printf("forecast: none (the current segment has fewer than 3 fits)\n");
    }
}

static void print_fleet_row(const struct column *col, int pct)
{
    (void)pct;
    const stagecal_trend_history *h = &col->h;
    const stagecal_trend_segment *g = &h->segments[h->n_segments - 1];
    const struct extra *x = &col->ex[h->order[h->n - 1]];
    const double M = STAGECAL_TREND_MONTH_S;
    char loss[48] = "-", fc[112] = "-";
    if (g->has_fit)
        snprintf(loss, sizeof loss, "%.3f [%.3f, %.3f]", -g->fit.b * M, -g->fit.b_high * M,
                 -g->fit.b_low * M);
    if (h->has_forecast) {
        if (h->forecast.status == STAGECAL_FORECAST_NOT_DECLINING) {
            snprintf(fc, sizeof fc, "not declining");
        } else {
            char day[3][32];
            cli_forecast_days(&h->forecast, "-", day);
            snprintf(fc, sizeof fc, "%s [%s, %s]", day[0], day[1], day[2]);
        }
    }
    char ci[40];
    ci_text(x, ci, sizeof ci);
    printf("%-16s %4zu %7.3f %19s %-26s %-36s %zu\n", col->id, h->n, h->points[h->n - 1].value, ci,
           loss, fc, g->n_alarms);
}

static int print_json(const struct column *cols, size_t ncol, const stagecal_trend_event *ev,
                      const struct reference *ref, const stagecal_trend_params *par)
{
    json_t *doc = cli_json_doc_head("stagecal-trend", ref->reflux, ref->fload, par->level);
    json_object_set_new(doc, "required", cli_json_real(par->required));
    json_object_set_new(doc, "units",
                        json_pack("{s:s, s:s, s:s}", "stages", "stages, the pot included", "slope",
                                  "stages per month (365.2425 d / 12)", "hetp", "m"));
    json_object_set_new(
        doc, "chart",
        json_pack("{s:s, s:o, s:o, s:o, s:I, s:o, s:s}", "kind", "ewma", "lambda",
                  json_real(par->ewma.lambda), "L", json_real(par->ewma.L), "arl0",
                  cli_json_real(cols[0].h.arl0), "baseline_n", (json_int_t)par->baseline_n,
                  "baseline", cli_json_real(par->baseline), "design",
                  "Lucas & Saccucci 1990; ARL by the Brook & Evans 1972 Markov chain"));
    json_object_set_new(
        doc, "time_of_fit",
        json_string(
            "each point is dated by its model file's data_last_utc (fitted_utc when absent)"));
    json_object_set_new(
        doc, "selection",
        json_pack("{s:s, s:s}", "rule", ref->all_fits ? "all-fits" : "newest-wins", "description",
                  ref->all_fits ? "every model file is a point (--all-fits)"
                                : "newest fit first; a fit that shares a run log (SHA-256, "
                                  "rows > 0) with a kept newer fit is set aside "
                                  "(columns[].superseded)"));
    json_t *arr = json_array();
    for (size_t i = 0; i < ncol; i++)
        json_array_append_new(arr, column_json(&cols[i], ev));
    json_object_set_new(doc, "columns", arr);
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return cli_json_print(doc);
}

static void print_text(const struct column *cols, size_t ncol, const stagecal_trend_event *ev,
                       const struct reference *ref, const stagecal_trend_params *par)
{
    int pct = (int)lround(par->level * 100);
    printf("stages (the pot included) at R = %g%s; %d %% intervals; EWMA lambda = %g, L = %g "
           "(in-control ARL %.0f fits)\n",
           ref->reflux, isnan(ref->fload) ? "" : " and the given F", pct, par->ewma.lambda,
           par->ewma.L, cols[0].h.arl0);
    if (ncol == 1) {
        print_column(&cols[0], ev, pct, par->required);
        return;
    }
    printf("%-16s %4s %24s %-26s %-36s %s\n", "column", "fits", "current stages (CI)",
           "loss/month (CI)", "forecast date [band]", "alarms");
    for (size_t i = 0; i < ncol; i++)
        print_fleet_row(&cols[i], pct);
    for (size_t i = 0; i < ncol; i++)
        if (cols[i].n_sup > 0)
            printf("column %s: %zu set aside (they share run logs with a newer fit)\n", cols[i].id,
                   cols[i].n_sup);
}

/* Loads and analyses every column, warns about scatter, prints. Returns an exit code. */
static int run(struct column *cols, size_t ncol, const char *events_path,
               const struct reference *ref, const stagecal_trend_params *par, cli_ctx *ctx)
{
    const int json = ctx->json;
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_trend_event *ev = NULL;
    size_t nev = 0;
    int rc = 0;
    if (events_path && stagecal_trend_events_read(events_path, &ev, &nev, &err) != STAGECAL_OK)
        return cli_fail(&err);
    for (size_t i = 0; i < ncol && rc == 0; i++) {
        rc = load_column(&cols[i], ref, ev, nev);
        if (rc == 0 && stagecal_trend_analyse(cols[i].pts, cols[i].n, ev, nev, cols[i].id, par,
                                              &cols[i].h, &err) != STAGECAL_OK)
            rc = cli_fail_data(&err);
    }
    for (size_t i = 0; i < ncol && rc == 0; i++) {
        const stagecal_trend_segment *g = &cols[i].h.segments[cols[i].h.n_segments - 1];
        /* A Birge ratio above 2 means the fits scatter far beyond their own errors. */
        if (g->has_fit && g->fit.scale > 2)
            cli_warn("column %s: the fits scatter %.1f times their stated standard errors; the "
                     "trend interval is widened by that factor, but the chart assumes the "
                     "stated errors and will raise more false alarms than its design",
                     cols[i].id, g->fit.scale);
    }
    if (rc == 0 && json)
        rc = print_json(cols, ncol, ev, ref, par);
    else if (rc == 0)
        print_text(cols, ncol, ev, ref, par);
    if (rc == 0 && ctx->chart) { /* `plot trend`: the chart of the one column */
        stagecal_plot_chart *chart = NULL;
        char yl[160], fl[48] = "";
        if (isfinite(ref->fload))
            snprintf(fl, sizeof fl, ", F = %.3g Pa^0.5", ref->fload);
        snprintf(yl, sizeof yl, "stages incl. pot at R = %g%s [-]", ref->reflux, fl);
        stagecal_plot_trend_history_data td = {&cols[0].h, ev, nev, cols[0].id, yl, NULL};
        int brc = stagecal_plot_trend_history(&td, &chart, &err);
        rc = cli_chart_write(ctx, chart, brc, &err);
    }
    free(ev);
    return rc;
}

int cmd_trend(int argc, char **argv, cli_ctx *ctx)
{
    stagecal_trend_params par = stagecal_trend_default_params();
    struct reference ref = {NAN, NAN, 0.95, "fits", 0};
    const char *events_path = NULL;
    long baseline_n = (long)par.baseline_n;
    const struct cli_option opts[] = {
        OPT_REFLUX(&ref.reflux, "reference reflux ratio, >= 0 or 'inf'"),
        OPT_FFACTOR(&ref.fload, "reference F-factor [Pa^0.5] (needed when a form uses it)"),
        OPT_ALIAS("fload", "f-factor"),
        OPT_FITS(&ref.fits),
        OPT_STRING(0, "events", &events_path, "FILE",
                   "repack/maintenance events (CSV: time,column,kind[,note])"),
        OPT_DOUBLE("require", &par.required, "N",
                   "stages the product specification needs, for the forecast", 1, INFINITY, 0,
                   "stages, the pot included"),
        OPT_LEVEL(&par.level),
        OPT_DOUBLE("lambda", &par.ewma.lambda, "W", "EWMA weight, in (0, 1] (0.2)", 0, 1,
                   CLI_D_LO_OPEN, "an EWMA weight such as 0.2"),
        OPT_DOUBLE("limit", &par.ewma.L, "L",
                   "EWMA limit width in sigma (2.962: in-control ARL 500 with 0.2)", 0, INFINITY,
                   CLI_D_LO_OPEN, "a limit width such as 2.962"),
        OPT_LONG("baseline-n", &baseline_n, "K",
                 "fits at the start of each segment that set the baseline (3)", 1, 1000),
        OPT_DOUBLE("baseline", &par.baseline, "N",
                   "known baseline stages for the current segment (e.g. acceptance)", 1, INFINITY,
                   0, "stages including the pot, >= 1"),
        OPT_FLAG(0, "all-fits", &ref.all_fits,
                 "every model file is a point, shared run logs or not"),
        OPT_END_COMMON(ctx),
    };
    int first, rc;
    if ((rc = cli_parse(argc, argv, opts, &usage, &first)))
        return rc;
    par.baseline_n = (size_t)baseline_n;
    ref.level = par.level;
    size_t ncol = (size_t)(argc - first);
    if (ncol == 0)
        return cli_usage_error("a column id is required (see 'stagecal trend --help')");
    if ((rc = cli_require("reflux", ref.reflux)))
        return rc;
    if (ctx->chart && ncol != 1)
        return cli_usage_error("'plot trend' draws one column (got %zu)", ncol);
    for (size_t i = 0; i < ncol; i++)
        if (!stagecal_convention_id_valid(argv[first + (int)i]))
            return cli_usage_error("'%s' is not a column id (expected %s)", argv[first + (int)i],
                                   stagecal_convention_id_rule());
    struct column *cols = calloc(ncol, sizeof *cols);
    if (!cols) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    for (size_t i = 0; i < ncol; i++)
        cols[i].id = argv[first + (int)i];
    rc = run(cols, ncol, events_path, &ref, &par, ctx);
    for (size_t i = 0; i < ncol; i++) {
        stagecal_trend_history_free(&cols[i].h);
        free(cols[i].pts);
        free(cols[i].ex);
        free(cols[i].sup);
    }
    free(cols);
    return rc;
}
