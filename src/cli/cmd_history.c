/*
 * cmd_history.c — `stagecal history --column FILE RUNLOG.csv…`: one fit over every
 * quasi-steady window of a column's logs (include/stagecal/history.h), with the
 * repack/maintenance events as segment boundaries. It answers: the loss rate with its
 * interval, the stages now at a stated condition, the date they fall below a
 * requirement (with a band); before/after the last event with the equivalence tests
 * of hetp.h; and a self-starting EWMA/CUSUM chart of the runs (chart.h). Windows come
 * from the calibration chain (calibrate.h); runs can be excluded with a reason.
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
#include "stagecal/calibrate.h"
#include "stagecal/chart.h"
#include "stagecal/convention.h"
#include "stagecal/hetp.h"
#include "stagecal/history.h"
#include "stagecal/units.h"

static const struct cli_usage usage = {
    "usage: stagecal history --column FILE RUNLOG.csv... --reflux R|inf [--f-factor F]\n"
    "                        [--form NAME] [--events FILE] [--require N] [--now DATE]\n"
    "                        [--level P] [--min-runs K] [--exclude-run RUN=REASON]...\n"
    "                        [--design-hetp H] [--margin M] [--json] [--quiet]\n",
    "One fit over every quasi-steady window of the logs: stages = correlation(R, F) x\n"
    "(level - loss x months since the last repack/maintenance event), a level and a loss\n"
    "per segment, intervals from run-clustered (CR2) standard errors with Bell-McCaffrey\n"
    "degrees of freedom (docs/hetp-trend.md section 9). Reports, at the stated condition:\n"
    "the loss rate per segment, the stages now, and with --require the date they fall\n"
    "below N with a band; before/after the last event with TOST equivalence verdicts\n"
    "against the old bed when new and (--design-hetp) the design HETP; and a\n"
    "self-starting EWMA/CUSUM chart of the runs of the current segment. Answers the\n"
    "evidence cannot give are printed as 'not determined' with the reason.\n",
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal.\n"};

#define MAX_EXCLUDE 64

struct exclusion {
    char run[64];
    const char *reason;
    size_t windows; /* windows it removed */
};

struct options {
    const char *column, *form, *events;
    stagecal_history_params hp; /* level, stated R and F, now, stages required */
    double design, margin;
    double warmup_s, min_window_s; /* evidence settings [s] (0: the defaults) */
    int dialect;                   /* OPT_CSV_DIALECT index (0: detect) */
    long min_runs;
    struct exclusion ex[MAX_EXCLUDE];
    size_t n_ex;
    int json;
};

static json_t *day_json(double t_s)
{
    char b[32];
    if (!isfinite(t_s))
        return json_null();
    cli_format_day(t_s, "open", b, sizeof b);
    return json_string(b);
}

/* "v [lo, hi] (dof)" with `digits` decimals (sign shown when plus), or the reason. */
static void est_text(const stagecal_history_estimate *e, int digits, int plus, char *buf,
                     size_t cap)
{
    if (!e->determined)
        snprintf(buf, cap, "%s", e->reason[0] ? e->reason : "not determined");
    else if (plus)
        snprintf(buf, cap, "%+.*f [%+.*f, %+.*f] (%.1f dof)", digits, e->value, digits, e->low,
                 digits, e->high, e->dof);
    else
        snprintf(buf, cap, "%.*f [%.*f, %.*f] (%.1f dof)", digits, e->value, digits, e->low, digits,
                 e->high, e->dof);
}

/* One line: label, the estimate as est_text writes it, tail. */
static void print_est(const char *label, const stagecal_history_estimate *e, int digits, int plus,
                      const char *tail)
{
    char a[STAGECAL_HISTORY_REASON + 64];
    est_text(e, digits, plus, a, sizeof a);
    printf("%s%s%s\n", label, a, tail);
}

static json_t *est_json(const stagecal_history_estimate *e)
{
    if (!e->determined)
        return json_pack("{s:b, s:n, s:n, s:n, s:n, s:n, s:s}", "determined", 0, "value", "se",
                         "dof", "low", "high", "reason", e->reason);
    return json_pack("{s:b, s:o, s:o, s:o, s:o, s:o, s:n}", "determined", 1, "value",
                     cli_json_real(e->value), "se", cli_json_real(e->se), "dof",
                     cli_json_real(e->dof), "low", cli_json_real(e->low), "high",
                     cli_json_real(e->high), "reason");
}

static json_t *equiv_json(const stagecal_hetp_equiv *q)
{
    int nd = q->verdict == STAGECAL_EQUIV_NOT_DETERMINED;
    return json_pack("{s:s, s:s, s:o, s:o, s:o, s:o, s:o}", "verdict",
                     stagecal_equiv_verdict_name(q->verdict), "text", q->text, "margin",
                     cli_json_real(q->margin), "ratio_low",
                     nd ? json_null() : cli_json_real(q->low), "ratio_high",
                     nd ? json_null() : cli_json_real(q->high), "p",
                     nd ? json_null() : cli_json_real(q->p), "dof", cli_json_real(q->dof));
}

static int take_exclusions(struct options *o, const char *const *text)
{
    for (; *text; text++) {
        const char *eq = strchr(*text, '=');
        if (!eq || eq == *text || !eq[1] || (size_t)(eq - *text) >= sizeof o->ex[0].run)
            return cli_usage_error("option '--exclude-run': '%s' is not RUN=REASON (expected "
                                   "e.g. K7-018='analyser drift', at most %d)",
                                   *text, MAX_EXCLUDE);
        struct exclusion *x = &o->ex[o->n_ex++];
        memcpy(x->run, *text, (size_t)(eq - *text));
        x->run[eq - *text] = '\0';
        x->reason = eq + 1;
    }
    return 0;
}

/* Returns 0, CLI_PARSE_HELP or an exit code; *first is the first run log. */
static int parse_options(int argc, char **argv, struct options *o, cli_ctx *ctx, int *first)
{
    const char *now = NULL, *excl[MAX_EXCLUDE + 1] = {NULL};
    const struct cli_option opts[] = {
        OPT_COLUMN(&o->column, "the column file (packed height, condenser, equilibrium)"),
        OPT_REFLUX(&o->hp.r_ref, "stated reflux ratio, > 0 or 'inf'"),
        OPT_FFACTOR(&o->hp.f_ref, "stated F-factor [Pa^0.5] (needed when the form uses it)"),
        OPT_FORM(&o->form, "correlation form (saturating)"),
        OPT_STRING(0, "events", &o->events, "FILE",
                   "repack/maintenance events (CSV: time,column,kind[,note])"),
        OPT_DOUBLE("require", &o->hp.required, "N",
                   "stages the product needs, for the crossing date", 1, INFINITY, 0,
                   "stages, the pot included"),
        OPT_STRING(0, "now", &now, "DATE", "date of 'now' (ISO 8601; default: the last window)"),
        OPT_LEVEL(&o->hp.level),
        OPT_LONG("min-runs", &o->min_runs, "K",
                 "runs a segment needs for its own level and loss (3)", 2, 1000),
        OPT_LIST("exclude-run", excl, MAX_EXCLUDE, "R=WHY",
                 "leave run R out, with the reason (repeatable)"),
        OPT_DOUBLE("design-hetp", &o->design, "H",
                   "design HETP [m] for 'as good as the design figure'", 0, INFINITY, CLI_D_LO_OPEN,
                   "a design HETP in m"),
        OPT_DOUBLE("margin", &o->margin, "M", "equivalence margin, a fraction (0.10)", 0, 1,
                   CLI_D_LO_OPEN | CLI_D_HI_OPEN, "a fraction such as 0.10"),
        OPT_WARM_UP(&o->warmup_s),
        OPT_MIN_WINDOW(&o->min_window_s),
        OPT_CSV_DIALECT(&o->dialect),
        OPT_END_COMMON(ctx),
    };
    int rc;
    if ((rc = cli_parse(argc, argv, opts, &usage, first)))
        return rc;
    o->json = ctx->json;
    if (now && stagecal_units_parse_iso8601(now, &o->hp.now_s) != 0)
        return cli_usage_error("option '--now': '%s' is not a date (expected ISO 8601, "
                               "e.g. 2026-03-01T00:00:00Z)",
                               now);
    if ((rc = take_exclusions(o, excl)))
        return rc;
    if (!o->column)
        return cli_usage_error(
            "option '--column FILE' is required (see 'stagecal history --help')");
    if (*first >= argc)
        return cli_usage_error("at least one run log is required (see 'stagecal history --help')");
    if ((rc = cli_require("reflux", o->hp.r_ref)))
        return rc;
    if (!(o->hp.r_ref > 0))
        return cli_usage_error(
            "option '--reflux': 0 is not a condition with stages (expected R > 0)");
    return 0;
}

/* Everything the command computed. */
struct result {
    stagecal_calibration cal;
    stagecal_history_point *pts;
    size_t n;
    stagecal_trend_event *ev;
    size_t nev;
    stagecal_history_fit fit;
    int has_repack;
    stagecal_history_repack rp;
    stagecal_hetp_equiv eq_old, eq_design;
    int has_design;
    stagecal_trend_point *chart_in; /* per run of the current segment, at the condition */
    stagecal_chart_point *chart;
    char (*chart_run)[64];
    size_t n_chart;
    size_t chart_alarms;
};

/* The evidence's windows with a stage count as history points; excluded runs are left
 * out (counted per exclusion). */
static int collect(struct result *res, struct options *o)
{
    const stagecal_calibration *cal = &res->cal;
    const stagecal_evidence_set *set = &cal->evidence;
    res->pts = calloc(set->n ? set->n : 1, sizeof *res->pts);
    if (!res->pts) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    if (cal->log->nfiles_iso != cal->log->nfiles) {
        cli_error("the run logs carry relative times; the history needs dates (expected a "
                  "time[iso8601] column)");
        return CLI_EXIT_DATA;
    }
    size_t n = stagecal_history_points_from_evidence(set, res->pts);
    res->n = 0;
    for (size_t i = 0; i < n; i++) {
        const char *name = cal->log->runs[res->pts[i].run].name;
        struct exclusion *x = NULL;
        for (size_t k = 0; k < o->n_ex; k++)
            if (strcmp(o->ex[k].run, name) == 0)
                x = &o->ex[k];
        if (x)
            x->windows++;
        else
            res->pts[res->n++] = res->pts[i];
    }
    for (size_t k = 0; k < o->n_ex; k++)
        if (o->ex[k].windows == 0)
            cli_warn("--exclude-run %s: no window of that run in the logs", o->ex[k].run);
    return 0;
}

/* Per run of the current segment: its windows scaled to the stated condition by the
 * fitted correlation, h(R_ref)/h(R_i), and averaged with weights 1/se². */
static int build_chart(struct result *res, const struct options *o)
{
    const stagecal_history_fit *f = &res->fit;
    size_t n = res->n;
    res->chart_in = calloc(n ? n : 1, sizeof *res->chart_in);
    res->chart = calloc(n ? n : 1, sizeof *res->chart);
    res->chart_run = calloc(n ? n : 1, sizeof *res->chart_run);
    if (!res->chart_in || !res->chart || !res->chart_run) {
        cli_error("out of memory");
        return CLI_EXIT_SOFTWARE;
    }
    double href;
    if (stagecal_form_eval(&f->form, f->beta, o->hp.r_ref, o->hp.f_ref, &href, NULL) != 0)
        return 0;
    long last = -1;
    for (size_t i = 0; i < n; i++) {
        const stagecal_history_point *p = &res->pts[i];
        double h;
        if (f->segment_of[i] != f->current ||
            stagecal_form_eval(&f->form, f->beta, p->r, p->f_load, &h, NULL) != 0 || !(h > 0))
            continue;
        double v = p->stages * href / h, s = p->se * href / h, w = 1 / (s * s);
        stagecal_trend_point *c = &res->chart_in[res->n_chart];
        if (p->run != last) { /* windows of a run are contiguous in time */
            c = &res->chart_in[res->n_chart++];
            c->t_s = c->value = c->se = 0;
            snprintf(res->chart_run[res->n_chart - 1], 64, "%s", res->cal.log->runs[p->run].name);
            last = p->run;
        } else {
            c = &res->chart_in[res->n_chart - 1];
        }
        /* accumulate Σw (in se), Σw·v (in value), Σw·t (in t_s); finished below */
        c->se += w;
        c->value += w * v;
        c->t_s += w * p->t_s;
    }
    for (size_t k = 0; k < res->n_chart; k++) {
        stagecal_trend_point *c = &res->chart_in[k];
        c->value /= c->se;
        c->t_s /= c->se;
        c->se = 1 / sqrt(c->se);
    }
    /* time order (the logs may be given in any order); insertion sort of a few runs */
    for (size_t k = 1; k < res->n_chart; k++) {
        stagecal_trend_point c = res->chart_in[k];
        char name[64];
        memcpy(name, res->chart_run[k], sizeof name);
        size_t j = k;
        for (; j > 0 && res->chart_in[j - 1].t_s > c.t_s; j--) {
            res->chart_in[j] = res->chart_in[j - 1];
            memcpy(res->chart_run[j], res->chart_run[j - 1], sizeof name);
        }
        res->chart_in[j] = c;
        memcpy(res->chart_run[j], name, sizeof name);
    }
    stagecal_chart_params cp = stagecal_chart_default_params();
    stagecal_error err;
    if (res->n_chart > 0 && stagecal_chart_selfstart(res->chart_in, res->n_chart, &cp, res->chart,
                                                     &res->chart_alarms, &err) != STAGECAL_OK)
        return cli_fail_data(&err);
    return 0;
}

static int compute(struct result *res, struct options *o, char **logs, size_t nlogs)
{
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_calibrate_params cp = stagecal_calibrate_default_params();
    cp.form = o->form;
    cp.method = STAGECAL_CAL_STAGE;
    cp.analysis.warmup_s = o->warmup_s;
    cp.analysis.min_window_s = o->min_window_s;
    cp.read.csv_separator = cli_csv_separator(o->dialect);
    /* Holdup compensation of xD (calibrate --holdup) stays off here until a history study
     * covers it: on the demo logs it moves the first segment's loss from 0.082 [0.055,
     * 0.109] to 0.075 [0.047, 0.102] /month against a true 0.106 (one case). */
    cp.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE;
    /* history leaves runs out by name (--exclude-run RUN=REASON), so that every window it
     * drops is one the user chose */
    cp.keep_flagged = 1;
    int rc = stagecal_calibrate(o->column, (const char *const *)logs, nlogs, &cp, &res->cal, &err);
    /* the correlation fitted to all windows at once may fail (the bed changes); only the
     * windows are needed here */
    if (rc != STAGECAL_OK && res->cal.evidence.n == 0)
        return cli_fail(&err);
    if ((rc = collect(res, o)))
        return rc;
    if (o->events &&
        stagecal_trend_events_read(o->events, &res->ev, &res->nev, &err) != STAGECAL_OK)
        return cli_fail(&err);
    stagecal_form form;
    if (stagecal_form_parse(o->form, &form, &err) != STAGECAL_OK)
        return cli_usage_error("option '--form': %s", err.text);
    if (form.uses_load && isnan(o->hp.f_ref))
        return cli_usage_error("form '%s' uses the vapour load: option '--f-factor F' is required",
                               form.name);
    stagecal_history_params hp = o->hp;
    hp.min_runs = (size_t)o->min_runs;
    if (stagecal_history_fit_points(&form, res->pts, res->n, res->ev, res->nev, res->cal.column->id,
                                    &hp, &res->fit, &err) != STAGECAL_OK)
        return cli_fail_data(&err);
    const stagecal_history_fit *f = &res->fit;
    double off = stagecal_convention_outside(res->cal.column->condenser);
    if (f->current > 0) {
        res->has_repack = 1;
        if (stagecal_history_repack_at(f, f->current, o->hp.r_ref, o->hp.f_ref, off, &res->rp,
                                       &err))
            return cli_fail_data(&err);
        const stagecal_history_estimate *lr = &res->rp.log_ratio;
        if (isfinite(lr->value) && isfinite(lr->se) && isfinite(lr->dof)) {
            stagecal_hetp_equiv_log(lr->value, lr->se, lr->dof, o->margin, 0.05,
                                    "the old bed when new", &res->eq_old, NULL);
        } else {
            res->eq_old.verdict = STAGECAL_EQUIV_NOT_DETERMINED;
            snprintf(res->eq_old.text, sizeof res->eq_old.text, "%s", lr->reason);
        }
        const stagecal_history_estimate *ac = &res->rp.after_col;
        if (!isnan(o->design) && res->cal.column->height_m > 0) {
            res->has_design = 1;
            stagecal_hetp_stages s = {ac->value, ac->se, ac->dof, 0};
            if (!(ac->value > 0 && ac->dof > 0) ||
                stagecal_hetp_equiv_design(res->cal.column->height_m, &s, o->design, o->margin,
                                           0.05, &res->eq_design, NULL) != STAGECAL_OK) {
                res->eq_design.verdict = STAGECAL_EQUIV_NOT_DETERMINED;
                snprintf(res->eq_design.text, sizeof res->eq_design.text,
                         "not determined whether it is as good as the design figure: %s",
                         ac->determined ? "no column stages" : ac->reason);
            }
        }
    }
    return build_chart(res, o);
}

static void print_text(const struct result *res, const struct options *o)
{
    const stagecal_history_fit *f = &res->fit;
    char a[STAGECAL_HISTORY_REASON + 64], d0[32];
    int pct = (int)lround(o->hp.level * 100);
    printf("history of column %s: %zu windows in %zu runs, form %s, at R = %g", res->cal.column->id,
           f->n, f->n_runs, f->form.name, o->hp.r_ref);
    if (!isnan(o->hp.f_ref))
        printf(", F = %g Pa^0.5", o->hp.f_ref);
    printf("; %d %% intervals (run-clustered CR2, Bell-McCaffrey dof)\n", pct);
    for (size_t k = 0; k < o->n_ex; k++)
        printf("excluded run %s (%zu windows): %s\n", o->ex[k].run, o->ex[k].windows,
               o->ex[k].reason);
    for (size_t s = 0; s < f->n_segments; s++) {
        const stagecal_history_segment *g = &f->segments[s];
        cli_format_day(g->origin_s, "open", d0, sizeof d0);
        printf("segment %zu from %s", s + 1, d0);
        if (g->event >= 0)
            printf(" (%s%s%s)", stagecal_event_kind_name(res->ev[g->event].kind),
                   res->ev[g->event].note[0] ? ": " : "", res->ev[g->event].note);
        printf(": %zu windows, %zu runs\n", g->n_points, g->n_runs);
        print_est("  stages at its start: ", &g->start, 3, 0, "");
        print_est("  loss: ", &g->loss, 4, 0, " stages per month");
        print_est("  relative loss: ", &g->rel_loss, 4, 0, " per month");
    }
    cli_format_day(f->now_s, "open", d0, sizeof d0);
    est_text(&f->now, 3, 0, a, sizeof a);
    printf("stages now (%s): %s\n", d0, a);
    if (f->has_crossing) {
        const stagecal_trend_forecast *fc = &f->crossing;
        char line[160];
        cli_forecast_text(fc, o->hp.required, pct, "open", line, sizeof line);
        if (fc->status == STAGECAL_FORECAST_NOT_DECLINING)
            printf("below %.3g stages: not forecast (the current segment is not declining)\n",
                   o->hp.required);
        else
            printf("%s%s\n", line,
                   fc->status == STAGECAL_FORECAST_UNBOUNDED
                       ? " (loss not significant: the band is open)"
                       : "");
    } else if (!isnan(o->hp.required)) {
        printf("below %.3g stages: not determined (%s)\n", o->hp.required,
               f->now.determined ? "the current segment's loss has < 2 dof" : f->now.reason);
    }
    if (res->has_repack) {
        const stagecal_history_repack *r = &res->rp;
        cli_format_day(r->t_s, "open", d0, sizeof d0);
        printf("at the event of %s:\n", d0);
        print_est("  stages before: ", &r->before, 3, 0, "");
        print_est("  stages after:  ", &r->after, 3, 0, "");
        print_est("  change:        ", &r->change, 3, 1, "");
        printf("  %s\n", res->eq_old.text);
        if (res->has_design)
            printf("  %s\n", res->eq_design.text);
    }
    if (res->n_chart > 0) {
        printf("chart of the current segment's runs at the stated condition (self-starting EWMA "
               "and CUSUM on Q statistics; in-control ARL 500 and 465 runs):\n");
        for (size_t k = 0; k < res->n_chart; k++) {
            const stagecal_chart_point *c = &res->chart[k];
            cli_format_day(res->chart_in[k].t_s, "open", d0, sizeof d0);
            printf("  %s %-10s %7.3f", d0, res->chart_run[k], res->chart_in[k].value);
            if (c->started)
                printf("  Q %+6.2f  EWMA %+6.3f  CUSUM -%5.2f/+%5.2f%s", c->q, c->ewma, c->cusum_lo,
                       c->cusum_hi,
                       c->ewma_alarm < 0 || c->cusum_alarm < 0   ? "  LOSS"
                       : c->ewma_alarm > 0 || c->cusum_alarm > 0 ? "  GAIN"
                                                                 : "");
            else
                printf("  (start-up)");
            printf("\n");
        }
    }
}

static json_t *result_json(const struct result *res, const struct options *o)
{
    const stagecal_history_fit *f = &res->fit;
    json_t *doc = json_object();
    json_object_set_new(doc, "format", json_string("stagecal-history"));
    json_object_set_new(doc, "version", json_integer(1));
    json_object_set_new(doc, "column_id", json_string(res->cal.column->id));
    json_object_set_new(doc, "form", json_string(f->form.name));
    json_object_set_new(doc, "reflux", cli_json_reflux(o->hp.r_ref));
    json_object_set_new(doc, "f_factor", cli_json_real(o->hp.f_ref));
    json_object_set_new(doc, "level", json_real(o->hp.level));
    json_object_set_new(doc, "windows", json_integer((json_int_t)f->n));
    json_object_set_new(doc, "runs", json_integer((json_int_t)f->n_runs));
    json_object_set_new(doc, "excess_variance", cli_json_real(f->tau2));
    json_object_set_new(
        doc, "method",
        json_string("stages = h(R, F) x (m_s - k_s x months since the segment's event); weighted "
                    "nonlinear least squares; run-clustered CR2 sandwich (Bell & McCaffrey 2002); "
                    "t with Bell-McCaffrey dof"));
    json_t *ex = json_array();
    for (size_t k = 0; k < o->n_ex; k++)
        json_array_append_new(ex,
                              json_pack("{s:s, s:s, s:I}", "run", o->ex[k].run, "reason",
                                        o->ex[k].reason, "windows", (json_int_t)o->ex[k].windows));
    json_object_set_new(doc, "excluded_runs", ex);
    json_t *segs = json_array();
    for (size_t s = 0; s < f->n_segments; s++) {
        const stagecal_history_segment *g = &f->segments[s];
        json_t *j = json_pack(
            "{s:o, s:I, s:I, s:b, s:o, s:o, s:o, s:o}", "start", day_json(g->origin_s), "windows",
            (json_int_t)g->n_points, "runs", (json_int_t)g->n_runs, "fitted", g->fitted,
            "stages_at_start", est_json(&g->start), "loss_per_month", est_json(&g->loss),
            "relative_loss_per_month", est_json(&g->rel_loss), "level", est_json(&g->level));
        json_object_set_new(j, "event",
                            g->event >= 0
                                ? json_pack("{s:s, s:s}", "kind",
                                            stagecal_event_kind_name(res->ev[g->event].kind),
                                            "note", res->ev[g->event].note)
                                : json_null());
        json_array_append_new(segs, j);
    }
    json_object_set_new(doc, "segments", segs);
    json_object_set_new(
        doc, "now",
        json_pack("{s:o, s:o}", "date", day_json(f->now_s), "stages", est_json(&f->now)));
    if (f->has_crossing) {
        const stagecal_trend_forecast *fc = &f->crossing;
        json_object_set_new(doc, "crossing",
                            json_pack("{s:o, s:s, s:o, s:o, s:o, s:b}", "required",
                                      cli_json_real(o->hp.required), "status",
                                      stagecal_forecast_status_name(fc->status), "date",
                                      day_json(fc->t_cross_s), "band_low", day_json(fc->low_s),
                                      "band_high", day_json(fc->high_s), "past", fc->past));
    } else {
        json_object_set_new(doc, "crossing", json_null());
    }
    if (res->has_repack) {
        const stagecal_history_repack *r = &res->rp;
        json_object_set_new(doc, "last_event",
                            json_pack("{s:o, s:o, s:o, s:o, s:o, s:o, s:o}", "date",
                                      day_json(r->t_s), "before", est_json(&r->before), "after",
                                      est_json(&r->after), "change", est_json(&r->change),
                                      "old_bed_when_new", est_json(&r->old_new), "vs_old_bed",
                                      equiv_json(&res->eq_old), "vs_design",
                                      res->has_design ? equiv_json(&res->eq_design) : json_null()));
    } else {
        json_object_set_new(doc, "last_event", json_null());
    }
    json_t *ch = json_array();
    for (size_t k = 0; k < res->n_chart; k++) {
        const stagecal_chart_point *c = &res->chart[k];
        json_array_append_new(
            ch, json_pack("{s:s, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:i, s:i}", "run",
                          res->chart_run[k], "date", day_json(res->chart_in[k].t_s), "stages",
                          cli_json_real(res->chart_in[k].value), "q",
                          c->started ? cli_json_real(c->q) : json_null(), "t_dof",
                          c->started ? cli_json_real(c->dof) : json_null(), "ewma",
                          cli_json_real(c->ewma), "cusum_low", cli_json_real(c->cusum_lo),
                          "cusum_high", cli_json_real(c->cusum_hi), "ewma_alarm", c->ewma_alarm,
                          "cusum_alarm", c->cusum_alarm));
    }
    json_object_set_new(doc, "chart", ch);
    json_object_set_new(doc, "caution", json_string(stagecal_caution_text()));
    return doc;
}

int cmd_history(int argc, char **argv, cli_ctx *ctx)
{
    struct options o;
    memset(&o, 0, sizeof o);
    o.form = "saturating";
    o.hp = stagecal_history_default_params();
    o.design = NAN;
    o.margin = STAGECAL_HETP_EQUIV_MARGIN;
    o.min_runs = 3;
    int first, rc = parse_options(argc, argv, &o, ctx, &first);
    if (rc)
        return rc;
    struct result res;
    memset(&res, 0, sizeof res);
    rc = compute(&res, &o, argv + first, (size_t)(argc - first));
    if (rc == 0) {
        if (o.json)
            rc = cli_json_print(result_json(&res, &o));
        else
            print_text(&res, &o);
    }
    if (rc == 0 && ctx->chart) { /* `plot history`: the runs' self-starting charts */
        stagecal_plot_chart *chart = NULL;
        stagecal_error err;
        stagecal_error_clear(&err);
        stagecal_plot_selfstart_data sd = {
            res.chart_in, res.chart, res.n_chart, stagecal_chart_default_params(), NULL, NULL};
        int brc = stagecal_plot_selfstart(&sd, &chart, &err);
        rc = cli_chart_write(ctx, chart, brc, &err);
    }
    stagecal_calibration_free(&res.cal);
    stagecal_history_free(&res.fit);
    free(res.pts);
    free(res.ev);
    free(res.chart_in);
    free(res.chart);
    free(res.chart_run);
    return rc;
}
