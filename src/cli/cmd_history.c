/*
 * cmd_history.c — `stagecal history --column FILE RUNLOG.csv…`: one fit over every
 * quasi-steady window of a column's logs (include/stagecal/history.h), with the
 * repack/maintenance events as segment boundaries. It answers: the loss rate with its
 * interval, the stages now at a stated condition, the date they fall below a
 * requirement (with a band); before/after the last event with the equivalence tests
 * of hetp.h; and a self-starting EWMA/CUSUM chart of the runs (chart.h). Windows come
 * from the calibration chain (calibrate.h); runs can be excluded with a reason.
 */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "banned.h"
#include "cli.h"
#include "commands.h"
#include "stagecal/calibrate.h"
#include "stagecal/chart.h"
#include "stagecal/convention.h"
#include "stagecal/hetp.h"
#include "stagecal/history.h"
#include "stagecal/units.h"

static const char usage_text[] =
    "usage: stagecal history --column FILE RUNLOG.csv... --reflux R|inf [--f-factor F]\n"
    "                        [--form NAME] [--events FILE] [--require N] [--now DATE]\n"
    "                        [--level P] [--min-runs K] [--exclude-run RUN=REASON]...\n"
    "                        [--design-hetp H] [--margin M] [--json] [--quiet]\n"
    "\n"
    "One fit over every quasi-steady window of the logs: stages = correlation(R, F) x\n"
    "(level - loss x months since the last repack/maintenance event), a level and a loss\n"
    "per segment, intervals from run-clustered (CR2) standard errors with Bell-McCaffrey\n"
    "degrees of freedom (docs/hetp-trend.md section 9). Reports, at the stated condition:\n"
    "the loss rate per segment, the stages now, and with --require the date they fall\n"
    "below N with a band; before/after the last event with TOST equivalence verdicts\n"
    "against the old bed when new and (--design-hetp) the design HETP; and a\n"
    "self-starting EWMA/CUSUM chart of the runs of the current segment. Answers the\n"
    "evidence cannot give are printed as 'not determined' with the reason.\n"
    "\n"
    "  --column FILE        the column file (packed height, condenser, equilibrium)\n"
    "  --reflux R           stated reflux ratio, > 0 or 'inf'\n"
    "  --f-factor F         stated F-factor [Pa^0.5] (needed when the form uses it)\n"
    "  --form NAME          correlation form (saturating)\n"
    "  --events FILE        repack/maintenance events (CSV: time,column,kind[,note])\n"
    "  --require N          stages the product needs, for the crossing date\n"
    "  --now DATE           date of 'now' (ISO 8601; default: the last window)\n"
    "  --level P            confidence level, in (0, 1) (0.95)\n"
    "  --min-runs K         runs a segment needs for its own level and loss (3)\n"
    "  --exclude-run R=WHY  leave run R out, with the reason (repeatable)\n"
    "  --design-hetp H      design HETP [m] for 'as good as the design figure'\n"
    "  --margin M           equivalence margin, a fraction (0.10)\n"
    "  --json               one JSON document on stdout\n"
    "  --quiet              no warnings on stderr\n"
    "  -h, --help           this text\n"
    "\n"
    "Exit status: 0 success, 2 usage error, 65 bad data, 66 missing file, 70 internal.\n";

#define MAX_EXCLUDE 64

struct exclusion {
    char run[64];
    const char *reason;
    size_t windows; /* windows it removed */
};

struct options {
    const char *column, *form, *events;
    double reflux, fload, require, level, design, margin, now_s;
    long min_runs;
    struct exclusion ex[MAX_EXCLUDE];
    size_t n_ex;
    int json;
};

static void format_day(double t_s, char *buf, size_t cap)
{
    time_t tt = (time_t)floor(t_s);
    struct tm tm;
    if (!isfinite(t_s) || !gmtime_r(&tt, &tm) || strftime(buf, cap, "%Y-%m-%d", &tm) == 0)
        snprintf(buf, cap, "open");
}

static json_t *day_json(double t_s)
{
    char b[32];
    if (!isfinite(t_s))
        return json_null();
    format_day(t_s, b, sizeof b);
    return json_string(b);
}

/* "v [lo, hi]" or "not determined (reason)". */
static void est_text(const stagecal_history_estimate *e, const char *fmt, char *buf, size_t cap)
{
    if (!e->determined) {
        snprintf(buf, cap, "%s", e->reason[0] ? e->reason : "not determined");
        return;
    }
    char f[64];
    snprintf(f, sizeof f, "%s [%s, %s] (%%.1f dof)", fmt, fmt, fmt);
    snprintf(buf, cap, f, e->value, e->low, e->high, e->dof);
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
                     cli_json_real(q->margin), "ratio_low", nd ? json_null() : cli_json_real(q->low),
                     "ratio_high", nd ? json_null() : cli_json_real(q->high), "p",
                     nd ? json_null() : cli_json_real(q->p), "dof", cli_json_real(q->dof));
}

static int parse_options(int argc, char **argv, struct options *o)
{
    enum { O_COLUMN = 256, O_REFLUX, O_FLOAD, O_FORM, O_EVENTS, O_REQUIRE, O_NOW, O_LEVEL,
           O_MINRUNS, O_EXCLUDE, O_DESIGN, O_MARGIN, O_JSON, O_QUIET };
    static const struct option opts[] = {
        {"column", required_argument, NULL, O_COLUMN}, {"reflux", required_argument, NULL, O_REFLUX},
        {"f-factor", required_argument, NULL, O_FLOAD}, {"form", required_argument, NULL, O_FORM},
        {"events", required_argument, NULL, O_EVENTS}, {"require", required_argument, NULL, O_REQUIRE},
        {"now", required_argument, NULL, O_NOW}, {"level", required_argument, NULL, O_LEVEL},
        {"min-runs", required_argument, NULL, O_MINRUNS},
        {"exclude-run", required_argument, NULL, O_EXCLUDE},
        {"design-hetp", required_argument, NULL, O_DESIGN},
        {"margin", required_argument, NULL, O_MARGIN}, {"json", no_argument, NULL, O_JSON},
        {"quiet", no_argument, NULL, O_QUIET}, {"help", no_argument, NULL, 'h'}, {0, 0, 0, 0}};
    int c;
    optind = 0;
    opterr = 0;
    while ((c = getopt_long(argc, argv, ":h", opts, NULL)) != -1) {
        int bad = 0;
        switch (c) {
        case 'h':
            fputs(usage_text, stdout);
            return -1;
        case O_COLUMN: o->column = optarg; break;
        case O_FORM: o->form = optarg; break;
        case O_EVENTS: o->events = optarg; break;
        case O_REFLUX: bad = cli_parse_double("reflux", optarg, 1, "a reflux ratio > 0 or 'inf'", &o->reflux); break;
        case O_FLOAD: bad = cli_parse_double("f-factor", optarg, 0, "an F-factor in Pa^0.5", &o->fload); break;
        case O_REQUIRE: bad = cli_parse_double("require", optarg, 0, "a number of stages", &o->require); break;
        case O_LEVEL: bad = cli_parse_double("level", optarg, 0, "a confidence level in (0, 1)", &o->level); break;
        case O_DESIGN: bad = cli_parse_double("design-hetp", optarg, 0, "a design HETP in m", &o->design); break;
        case O_MARGIN: bad = cli_parse_double("margin", optarg, 0, "a fraction, e.g. 0.10", &o->margin); break;
        case O_MINRUNS: bad = cli_parse_long("min-runs", optarg, 2, 1000, &o->min_runs); break;
        case O_NOW:
            if (stagecal_units_parse_iso8601(optarg, &o->now_s) != 0)
                return cli_usage_error("option '--now': '%s' is not a date (expected ISO 8601, "
                                       "e.g. 2026-03-01T00:00:00Z)",
                                       optarg);
            break;
        case O_EXCLUDE: {
            const char *eq = strchr(optarg, '=');
            if (!eq || eq == optarg || !eq[1] || (size_t)(eq - optarg) >= sizeof o->ex[0].run ||
                o->n_ex == MAX_EXCLUDE)
                return cli_usage_error("option '--exclude-run': '%s' is not RUN=REASON (expected "
                                       "e.g. K7-018='analyser drift', at most %d)",
                                       optarg, MAX_EXCLUDE);
            struct exclusion *x = &o->ex[o->n_ex++];
            memcpy(x->run, optarg, (size_t)(eq - optarg));
            x->run[eq - optarg] = '\0';
            x->reason = eq + 1;
            break;
        }
        case O_JSON: o->json = 1; break;
        case O_QUIET: cli_quiet = 1; break;
        default: return cli_usage_getopt(c, argv, "history");
        }
        if (bad)
            return CLI_EXIT_USAGE;
    }
    int rc;
    if (!o->column)
        return cli_usage_error("option '--column FILE' is required (see 'stagecal history --help')");
    if (optind >= argc)
        return cli_usage_error("at least one run log is required (see 'stagecal history --help')");
    if ((rc = cli_require("reflux", o->reflux)) || (rc = cli_check_reflux("reflux", o->reflux)))
        return rc;
    if (!(o->reflux > 0))
        return cli_usage_error("option '--reflux': 0 is not a condition with stages (expected R > 0)");
    if (!(o->level > 0 && o->level < 1))
        return cli_usage_error("option '--level': %g is outside (0, 1) (expected e.g. 0.95)", o->level);
    if (!(o->margin > 0 && o->margin < 1))
        return cli_usage_error("option '--margin': %g is outside (0, 1) (expected e.g. 0.10)", o->margin);
    if (!isnan(o->require) && !(o->require >= 1))
        return cli_usage_error("option '--require': %g is below 1 (expected stages, the pot included)",
                               o->require);
    if (!isnan(o->design) && !(o->design > 0))
        return cli_usage_error("option '--design-hetp': %g is not positive (expected m)", o->design);
    return 0;
}
