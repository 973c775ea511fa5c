/*
 * options.h — one table of typed options per command, in the manner of git's
 * parse-options: each entry carries its spelling, where the value goes, its domain
 * check and its help line; the parser (getopt_long underneath) checks every value as it
 * is read, and the usage text is generated from the same table. Options with one meaning
 * have one spelling in every command because they come from the macros below
 * (OPT_FFACTOR is always `--f-factor`, OPT_OUTPUT always `-o/--output`, ...).
 * Old spellings stay as OPT_ALIAS entries that warn and point to the new one.
 */
#ifndef STAGECAL_CLI_OPTIONS_H
#define STAGECAL_CLI_OPTIONS_H

#include <math.h>
#include <stddef.h>

#include "cli.h"
#include "stagecal/regress.h"

enum cli_opt_type {
    CLI_OPT_END = 0,  /* ends a table */
    CLI_OPT_GROUP,    /* a heading in the help text (help = the heading, "" = blank line) */
    CLI_OPT_FLAG,     /* no value: sets *(int *)value = 1 */
    CLI_OPT_DOUBLE,   /* a number checked against the domain, into *(double *)value */
    CLI_OPT_LONG,     /* an integer in [lo, hi], into *(long *)value */
    CLI_OPT_STRING,   /* text (a path, a name), into *(const char **)value */
    CLI_OPT_LIST,     /* repeatable text: appended to the NULL-terminated array value of hi */
    CLI_OPT_CHOICE,   /* one of choices[], its index into *(int *)value */
    CLI_OPT_SYSTEM,   /* --alpha/--kvalue/--column of a cli_system (value: cli_system *) */
    CLI_OPT_DURATION, /* a time "30min", "2.5h", "90s", "1d" (a bare number: minutes), in
                         [lo, hi] seconds, into *(double *)value in seconds */
    CLI_OPT_ALIAS     /* a deprecated spelling of the option named by `alias_of` */
};

/* Domain flags of CLI_OPT_DOUBLE. */
#define CLI_D_INF 1u     /* 'inf' is accepted (total reflux) */
#define CLI_D_LO_OPEN 2u /* the lower bound is excluded */
#define CLI_D_HI_OPEN 4u /* the upper bound is excluded */

struct cli_option {
    enum cli_opt_type type;
    int short_name;             /* e.g. 'o', 0 for none */
    const char *long_name;      /* without the dashes */
    void *value;                /* where the value goes (see the type) */
    const char *argh;           /* the value's name in the help ("R|inf", "FILE"); NULL for flags */
    const char *help;           /* one help line (may hold '\n' for more) */
    double lo, hi;              /* domain of DOUBLE and LONG */
    unsigned flags;             /* CLI_D_* for DOUBLE */
    const char *expected;       /* what a good value is, for messages ("a mole fraction") */
    const char *const *choices; /* CHOICE: the accepted words, NULL-terminated */
    const char *alias_of;       /* ALIAS: the long name it stands for */
};

/* ---- building blocks ------------------------------------------------------------- */
#define OPT_END()                                                                                  \
    {                                                                                              \
        CLI_OPT_END, 0, NULL, NULL, NULL, NULL, 0, 0, 0, NULL, NULL, NULL                          \
    }
#define OPT_GROUP(h)                                                                               \
    {                                                                                              \
        CLI_OPT_GROUP, 0, NULL, NULL, NULL, (h), 0, 0, 0, NULL, NULL, NULL                         \
    }
#define OPT_FLAG(s, l, v, h)                                                                       \
    {                                                                                              \
        CLI_OPT_FLAG, (s), (l), (v), NULL, (h), 0, 0, 0, NULL, NULL, NULL                          \
    }
#define OPT_DOUBLE(l, v, a, h, lo, hi, fl, exp)                                                    \
    {                                                                                              \
        CLI_OPT_DOUBLE, 0, (l), (v), (a), (h), (lo), (hi), (fl), (exp), NULL, NULL                 \
    }
#define OPT_LONG(l, v, a, h, lo, hi)                                                               \
    {                                                                                              \
        CLI_OPT_LONG, 0, (l), (v), (a), (h), (lo), (hi), 0, NULL, NULL, NULL                       \
    }
#define OPT_STRING(s, l, v, a, h)                                                                  \
    {                                                                                              \
        CLI_OPT_STRING, (s), (l), (v), (a), (h), 0, 0, 0, NULL, NULL, NULL                         \
    }
/* noun: what a choice is, for messages ("a method"); NULL says "unknown" */
#define OPT_CHOICE(l, v, a, h, ch, noun)                                                           \
    {                                                                                              \
        CLI_OPT_CHOICE, 0, (l), (v), (a), (h), 0, 0, 0, (noun), (ch), NULL                         \
    }
#define OPT_LIST(l, arr, cap, a, h)                                                                \
    {                                                                                              \
        CLI_OPT_LIST, 0, (l), (arr), (a), (h), 0, (cap), 0, NULL, NULL, NULL                       \
    }
/* A deprecated spelling: accepted with a warning naming the new one; not in the help. */
#define OPT_ALIAS(l, of)                                                                           \
    {                                                                                              \
        CLI_OPT_ALIAS, 0, (l), NULL, NULL, NULL, 0, 0, 0, NULL, NULL, (of)                         \
    }

/* ---- options with one meaning everywhere ---------------------------------------- */
#define OPT__JSON(v) OPT_FLAG(0, "json", (v), "one JSON document on stdout")
/* The end of every command's table: --json, --quiet (and -h/--help, always there). */
#define OPT_END_COMMON(ctx) OPT__JSON(&(ctx)->json), OPT__QUIET(), OPT_END()
#define OPT__QUIET() OPT_FLAG(0, "quiet", &cli_quiet, "no warnings or progress on stderr")
/* a mole fraction of the light component in (0, 1); l is "xd", "xb", ... */
#define OPT_FRACTION(l, v, a, h)                                                                   \
    OPT_DOUBLE((l), (v), (a), (h), 0, 1, CLI_D_LO_OPEN | CLI_D_HI_OPEN, "a mole fraction")
#define OPT_XD(v)                                                                                  \
    OPT_FRACTION("xd", (v), "XD", "distillate mole fraction of the light component, in (0, 1)")
#define OPT_XB(v)                                                                                  \
    OPT_FRACTION("xb", (v), "XB", "pot mole fraction of the light component, in (0, XD)")
#define OPT_REFLUX(v, h)                                                                           \
    OPT_DOUBLE("reflux", (v), "R|inf", (h), 0, INFINITY, CLI_D_INF, "R >= 0 or 'inf'")
#define OPT_MURPHREE(v)                                                                            \
    OPT_DOUBLE("murphree", (v), "E",                                                               \
               "Murphree vapour efficiency of the column stages, in (0, 1] (default 1)", 0, 1,     \
               CLI_D_LO_OPEN, "a Murphree vapour efficiency")
#define OPT_FFACTOR(v, h)                                                                          \
    OPT_DOUBLE("f-factor", (v), "F", (h), 0, INFINITY, 0, "an F-factor >= 0 in Pa^0.5")
#define OPT_LEVEL(v)                                                                               \
    OPT_DOUBLE("level", (v), "P", "confidence level of intervals and bands (default 0.95)", 0, 1,  \
               CLI_D_LO_OPEN | CLI_D_HI_OPEN, "a confidence level such as 0.95")
#define OPT_STAGES(v, h)                                                                           \
    OPT_DOUBLE("stages", (v), "N", (h), 1, INFINITY, 0, "stages including the pot, >= 1")
#define OPT_COLUMN(v, h) OPT_STRING(0, "column", (v), "FILE", (h))
#define OPT_OUTPUT(v, h) OPT_STRING('o', "output", (v), "FILE", (h))
#define OPT_FITS(v)                                                                                \
    OPT_STRING(0, "fits", (v), "DIR",                                                              \
               "the folder of model files, one folder per column (default: fits)")
#define OPT_POINTS(v, h) OPT_STRING(0, "points", (v), "FILE.csv", (h))
#define OPT_FORM(v, h) OPT_STRING(0, "form", (v), "NAME", (h))
#define OPT_DURATION(l, v, h)                                                                      \
    {                                                                                              \
        CLI_OPT_DURATION, 0, (l), (v), "TIME", (h), 0, 1e9, 0, NULL, NULL, NULL                    \
    }
/* evidence settings in time (the run-log analysis, stagecal/runlog.h) */
#define OPT_WARM_UP(v)                                                                             \
    OPT_DURATION("warm-up", (v),                                                                   \
                 "time at the start of a run that cannot be quasi-steady, e.g.\n30min (default: "  \
                 "15 samples, at most a third of the run)")
#define OPT_MIN_WINDOW(v)                                                                          \
    OPT_DURATION("min-window", (v),                                                                \
                 "shortest quasi-steady window, e.g. 40min, at least 3 samples\n(default: 6 "      \
                 "samples, at most an eighth of the run, at least 4)")
/* runs flagged for a gross closure error or analyser drift (calibrate.h) */
#define OPT_KEEP_FLAGGED(v)                                                                        \
    OPT_FLAG(0, "keep-flagged", (v),                                                               \
             "keep runs flagged for a gross closure error or analyser drift in\n"                  \
             "the fit (default: left out, and the summary says which and why)")
/* compositions from temperatures (runlog.h params.infer): off with --no-infer */
#define OPT_NO_INFER(v)                                                                            \
    OPT_FLAG(0, "no-infer", (v),                                                                   \
             "do not read blank xD/xB cells from T_top/T_pot (default: they are\n"                 \
             "inferred through the column's equilibrium, marked so; docs/runlog.md)")
/* the CSV dialect of run logs: auto, comma, semicolon or tab (index into *v); see
 * cli_csv_separator */
#define OPT_CSV_DIALECT(v)                                                                         \
    OPT_CHOICE("csv-dialect", (v), "KIND",                                                         \
               "run-log separator: auto (default: from the header line), comma,\n"                 \
               "semicolon or tab; with semicolon or tab a decimal comma is read too",              \
               cli_csv_dialects, "a CSV dialect")
extern const char *const cli_csv_dialects[];
/* The runlog's csv_separator for an OPT_CSV_DIALECT index (0: detect). */
#define cli_csv_separator(i) ((i) == 1 ? ',' : (i) == 2 ? ';' : (i) == 3 ? '\t' : 0)
#define OPT_MIN_ROWS(v)                                                                            \
    OPT_LONG("min-rows", (v), "N", "fewest rows a run may have (default 5)", 1, 1000000000L)
#define OPT_BOOTSTRAP(v)                                                                           \
    OPT_LONG("bootstrap", (v), "B", "stage-space bootstrap resamples (default 0 = none)", 0,       \
             1000000)
/* --threads N (invert, calibrate, regress): WHAT is what the threads do beside the calling one;
 * the default (-1 in v) is cli_threads'. */
#define OPT_THREADS(v, what)                                                                       \
    OPT_LONG("threads", (v), "N",                                                                  \
             what " (default:\n"                                                                   \
                  "the processors online less one, at least 1, at most 8; 0: one thread\n"         \
                  "does everything; the output does not depend on it)",                            \
             0, 64)
#define OPT_SEED(v)                                                                                \
    OPT_LONG("seed", (v), "S", "seed of the random numbers (default 1)", 0, 2147483647L)
#define OPT_ROBUST(v)                                                                              \
    OPT_CHOICE("robust", (v), "KIND", "robust reweighting: huber or bisquare", cli_robust_names,   \
               "a weighting")
/* The equilibrium model: exactly one of --alpha A, --kvalue K, --column FILE. */
#define OPT_SYSTEM(sys)                                                                            \
    {CLI_OPT_SYSTEM, 0,    "alpha", (sys), "A", "constant relative volatility, A > 1", 0, 0, 0,    \
     NULL,           NULL, NULL},                                                                  \
        {CLI_OPT_SYSTEM,                                                                           \
         0,                                                                                        \
         "kvalue",                                                                                 \
         (sys),                                                                                    \
         "K",                                                                                      \
         "constant K value (dilute light component), y = K x, K > 1",                              \
         0,                                                                                        \
         0,                                                                                        \
         0,                                                                                        \
         NULL,                                                                                     \
         NULL,                                                                                     \
         NULL},                                                                                    \
    {                                                                                              \
        CLI_OPT_SYSTEM, 0, "column", (sys), "FILE",                                                \
            "the equilibrium model of a column file (docs/column-file.md)", 0, 0, 0, NULL, NULL,   \
            NULL                                                                                   \
    }

/* "huber", "bisquare": OPT_ROBUST stores 0 or 1 (leave -1 for none), see cli_robust_kind. */
extern const char *const cli_robust_names[];
#define cli_robust_kind(i)                                                                         \
    ((i) < 0 ? STAGECAL_ROBUST_NONE : (i) == 0 ? STAGECAL_ROBUST_HUBER : STAGECAL_ROBUST_BISQUARE)

/* What a command's help says around the generated option list. */
struct cli_usage {
    const char *synopsis; /* "usage: stagecal x ...\n   or: ...\n" */
    const char *about;    /* paragraphs between the synopsis and the options */
    const char *epilogue; /* after the options (exit status, ...); may be NULL */
};

/* Parses argv (argv[0] = the command name) against the table. Values are checked as they
 * are read (number syntax, domain, choices); an alias warns once. Arguments that are not
 * options stay in argv from *first_arg on (getopt's permutation: options may follow them).
 * Returns 0, CLI_PARSE_HELP after printing the help on stdout (the caller returns 0), or
 * an exit code after printing the problem. */
#define CLI_PARSE_HELP (-1)
int cli_parse(int argc, char **argv, const struct cli_option *opts, const struct cli_usage *u,
              int *first_arg);
/* Writes the help text: synopsis, about, the option list from the table, epilogue. */
void cli_usage_print(FILE *out, const struct cli_option *opts, const struct cli_usage *u);
/* Did the last cli_parse see option `long_name` (or one of its aliases)? */
int cli_given(const struct cli_option *opts, const char *long_name);

#endif
