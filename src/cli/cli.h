/*
 * cli.h — what every subcommand shares: exit codes, number parsing, messages,
 * JSON output. Subcommands live in cmd_<name>.c, one per file, and are listed in
 * the table in main.c. Checklist for a new subcommand: cmd_<name>.c with usage text,
 * getopt_long table, parse → library call → print; an entry in main.c's table;
 * tests in tests/cli/; a page in docs/cli.md.
 */
#ifndef STAGECAL_CLI_H
#define STAGECAL_CLI_H

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <sysexits.h>

#include "stagecal/column.h"
#include "stagecal/convention.h"
#include "stagecal/error.h"
#include "stagecal/regress.h"
#include "stagecal/runlog.h"
#include "stagecal/trend.h"

/* Exit codes (docs/cli.md). */
#define CLI_EXIT_OK 0
#define CLI_EXIT_USAGE 2                /* usage error (jq's choice) */
#define CLI_EXIT_DATA EX_DATAERR        /* 65 bad input data */
#define CLI_EXIT_NOINPUT EX_NOINPUT     /* 66 input missing */
#define CLI_EXIT_SOFTWARE EX_SOFTWARE   /* 70 internal error */
#define CLI_EXIT_CANTCREAT EX_CANTCREAT /* 73 output cannot be written */

/* The running command's name, for messages ("stagecal <cmd>: ..."). */
extern const char *cli_command;
/* Set by --quiet: silence warnings and progress on stderr. */
extern int cli_quiet;

/* "stagecal <cmd>: <message>\n" on stderr. */
void cli_error(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
/* "stagecal <cmd>: warning: <message>\n" on stderr unless --quiet. */
void cli_warn(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
/* Prints a usage error and the hint to run --help; returns CLI_EXIT_USAGE. */
int cli_usage_error(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

/* Maps a library status to an exit code. */
int cli_exit_for(int status);
/* Prints err's text as an error and returns cli_exit_for(err->code). */
int cli_fail(const stagecal_error *err);
/* As cli_fail for a library call whose arguments all come from input files, the options
 * having been checked before: an EINVAL there is about the files' content, so it is bad
 * data (65), not a usage error. */
int cli_fail_data(const stagecal_error *err);

/* Strict number parsing for option `opt`: the whole text must be a finite number
 * (or "inf" when allow_inf). On failure prints "option '--opt': 'text' is not a
 * number (expected ...)" and returns -1. */
int cli_parse_double(const char *opt, const char *text, int allow_inf, const char *expected,
                     double *out);
int cli_parse_long(const char *opt, const char *text, long lo, long hi, long *out);

/* Writes doc as the one JSON document on stdout (sorted keys, indent 2, 17
 * significant digits) and releases it. Returns 0 or CLI_EXIT_CANTCREAT. */
int cli_json_print(json_t *doc);
/* A JSON real that is null when v is not finite. */
json_t *cli_json_real(double v);

/* Is stderr a terminal that may show progress (and NO_COLOR unset)? */
int cli_progress_enabled(void);

/* The equilibrium model chosen on the command line: exactly one of --alpha A,
 * --kvalue K or --column FILE. */
typedef struct {
    double alpha;            /* --alpha, NAN when not given */
    double kvalue;           /* --kvalue, NAN when not given */
    const char *column_path; /* --column, NULL when not given */
    int have_column;         /* col below is loaded */
    stagecal_column col;     /* the column file, when --column */
    stagecal_vle *vle;       /* the model to use (owned here or by col) */
    int own_vle;             /* 1 when vle was built from --alpha/--kvalue */
} cli_system;

/* Empties s (no model chosen). */
void cli_system_init(cli_system *s);
/* Builds s->vle from the options; prints the problem and returns an exit code
 * (0 on success). With --column it warns as cli_column_warn does. */
int cli_system_open(cli_system *s);
/* Takes the value of --alpha, --kvalue or --column (name without dashes) into s; prints
 * the problem and returns CLI_EXIT_USAGE for a value that is not a number, else 0. */
int cli_system_option(cli_system *s, const char *name, const char *arg);
void cli_system_close(cli_system *s);
/* Prints the loaded column's warnings (col->warnings, see stagecal_column_warnings) on
 * stderr with path in front, at most once per command. */
void cli_column_warn(const stagecal_column *col, const char *path);
/* Compositions inferred from temperatures (the soft sensor, docs/runlog.md): the JSON
 * object {"xd": n, "xd_censored": n, "xb": n, "xb_censored": n, "outside": n,
 * "sensor_checks": n, "sensor_inconsistent": n}, and one stderr line "cmd: compositions
 * from temperatures: ..." (nothing when none was inferred or checked). */
json_t *cli_soft_json(const stagecal_runlog_soft *s);
void cli_soft_summary(const char *cmd, const stagecal_runlog_soft *s);
/* The F-factor's fact of the column file, once (stagecal_runlog_no_load_reason, left out of
 * the per-row CSV's notes): one stderr line "cmd: no F-factor on any row: ..." after a
 * per-row CSV was written (nothing with --quiet or when the column file gives what the
 * F-factor needs). The JSON member "no_f_factor": the reason, or null. */
void cli_no_load_summary(const char *cmd, const stagecal_column *col);
json_t *cli_no_load_json(const stagecal_column *col);
/* A JSON object describing the model in use ({"kind": …, "alpha": …} or the column). */
json_t *cli_system_json(const cli_system *s);
/* One run of a run log with its mass-balance closure, as check and invert report it. */
json_t *cli_run_json(const stagecal_runlog *log, size_t k, const stagecal_runlog_closure *cl);
/* JSON for a reflux ratio: the string "inf" at total reflux, else a real. */
json_t *cli_json_reflux(double r);
/* A new JSON document opening with the fields hetp and trend share: "format", "version" 1,
 * "reflux", "f_factor" (and its version-1 name "fload") and "level". */
json_t *cli_json_doc_head(const char *format, double reflux, double f_factor, double level);
/* The UTC day of t_s (Unix seconds) as YYYY-MM-DD; nan_text when t_s is NaN, "open" when
 * it is infinite (an unbounded band end), "?" when it cannot be formatted. */
void cli_format_day(double t_s, const char *nan_text, char *buf, size_t cap);
/* The parameter table of a fit on stdout: a header naming the level, then a row per
 * parameter (value, standard error, interval; "not determined" where it is). long_form:
 * 10 significant digits (regress), else 6 (calibrate). */
void cli_print_params(const stagecal_regress_result *f, int long_form);
/* The bootstrap's percentile intervals of a fit that ran one (f->boot_b > 0), text. */
void cli_print_bootstrap(const stagecal_regress_result *f);
/* The same in JSON: boot_low, boot_high, boot_se added to each object of params (one per
 * parameter, in order) and a "bootstrap" object {B, fitted, seed, resample} to obj. */
void cli_json_bootstrap(const stagecal_regress_result *f, json_t *params, json_t *obj);
/* A reflux ratio as text: "inf" at total reflux, else %.<digits>g. */
void cli_format_reflux(char *buf, size_t cap, double r, int digits);
/* The three days of a forecast (crossing, band low, band high) by cli_format_day. */
void cli_forecast_days(const stagecal_trend_forecast *fc, const char *nan_text, char day[3][32]);
/* "below N stages on DAY[ (already past)], P % band LOW to HIGH" for a forecast that
 * declines, days by cli_forecast_days(fc, nan_text), into buf of cap bytes. */
void cli_forecast_text(const stagecal_trend_forecast *fc, double required, int pct,
                       const char *nan_text, char *buf, size_t cap);

/* What main prepares for a command and tidies after it (the flags of its table row). */
typedef struct {
    int json;           /* --json was given (OPT__JSON(&ctx->json)) */
    int data_on_stdout; /* the command wrote data (CSV, HTML) on stdout: no caution after it */
    cli_system sys;     /* CMD_SYSTEM: the equilibrium-model options; main closes it */
    const char *chart;  /* `plot trend|trajectory`: the chart file the command also draws
                           (cmd_plot.c, cli_chart_write); NULL otherwise */
    size_t chart_width, chart_height;
} cli_ctx;

/* Flags of main.c's command table: the shared setup main does. */
#define CMD_SYSTEM 1u /* takes --alpha/--kvalue/--column: ctx->sys initialised and closed */
#define CMD_CAUTION                                                                                \
    2u /* its numbers feed a decision: main prints the caution after text output                   \
        */

/* Prints the caution (stagecal_caution_text) as the last paragraph of a text output. */
void cli_print_caution(void);

/* "option '--name' is required" when v is NaN (not given); returns the exit code. */
int cli_require(const char *opt, double v);
/* Message for what getopt_long rejected: c is its return value (':' missing value, as
 * the commands' option string starts with ':'; '?' unknown option). Returns
 * CLI_EXIT_USAGE. */
int cli_usage_getopt(int c, char **argv, const char *command);

/* Domain checks of the options every stepping command shares: print the usage error
 * naming the option and return CLI_EXIT_USAGE, or return 0. */
int cli_check_fraction(const char *opt, double v); /* a mole fraction in (0, 1) */
int cli_check_reflux(const char *opt, double v);   /* R >= 0 or inf */
/* Refuses (usage error, exit 2) an output path that names one of the n inputs (the same
 * file: device and inode, whatever the spelling): writing it would destroy that input.
 * NULL or "-" outputs and NULL inputs are skipped; an output that does not exist yet
 * passes. Returns 0 when the output is safe. */
int cli_check_output(const char *opt, const char *out, const char *const *inputs, size_t n);
int cli_check_murphree(const char *opt, double v); /* E_MV in (0, 1] */

/* The threads of an OPT_THREADS option given as v (-1: not given): v, or by default the
 * processors online less one, at least 1, at most 8. */
long cli_threads(long v);

#endif
