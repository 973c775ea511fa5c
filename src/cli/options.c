/*
 * options.c — the option-table parser and help generator (see options.h). getopt_long
 * does the scanning (GNU permutation: options may follow the file arguments, `--` ends
 * them); this file builds its table from ours, checks each value against the entry's
 * domain as it is read, and writes the help from the same entries.
 */
#include "options.h"

#include <errno.h>
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"

#define MAX_OPTS 64

const char *const cli_csv_dialects[] = {"auto", "comma", "semicolon", "tab", NULL};
const char *const cli_robust_names[] = {"huber", "bisquare", NULL};

/* Which entries of the last parsed table were given (one command per process). */
static const struct cli_option *seen_table;
static unsigned char seen[MAX_OPTS];

static size_t table_len(const struct cli_option *o)
{
    size_t n = 0;
    while (o[n].type != CLI_OPT_END)
        n++;
    return n;
}

static const struct cli_option *find_long(const struct cli_option *opts, const char *name)
{
    for (size_t i = 0; opts[i].type != CLI_OPT_END; i++)
        if (opts[i].long_name && strcmp(opts[i].long_name, name) == 0)
            return &opts[i];
    return NULL;
}

/* "(0, 1]", "[0, inf)": the interval of a domain, for messages. */
static void interval_text(const struct cli_option *o, char *buf, size_t cap)
{
    snprintf(buf, cap, "%c%g, %g%c", (o->flags & CLI_D_LO_OPEN) ? '(' : '[', o->lo, o->hi,
             (o->flags & CLI_D_HI_OPEN) || isinf(o->hi) ? ')' : ']');
}

static int check_double(const struct cli_option *o, double v)
{
    int lo_ok = (o->flags & CLI_D_LO_OPEN) ? v > o->lo : v >= o->lo;
    int hi_ok = isinf(v) ? (o->flags & CLI_D_INF) != 0
                         : ((o->flags & CLI_D_HI_OPEN) ? v < o->hi : v <= o->hi);
    if (lo_ok && hi_ok)
        return 0;
    const char *n = o->long_name;
    if (isinf(o->hi) && o->lo == 0 && (o->flags & CLI_D_LO_OPEN))
        return cli_usage_error("option '--%s': %g is not positive (expected %s)", n, v,
                               o->expected);
    if (isinf(o->hi) && o->lo == 0 && !(o->flags & CLI_D_LO_OPEN))
        return cli_usage_error("option '--%s': %g is negative (expected %s)", n, v, o->expected);
    if (isinf(o->hi) && !(o->flags & CLI_D_LO_OPEN))
        return cli_usage_error("option '--%s': %g is below %g (expected %s)", n, v, o->lo,
                               o->expected);
    if (isinf(o->hi))
        return cli_usage_error("option '--%s': %g is not above %g (expected %s)", n, v, o->lo,
                               o->expected);
    char iv[64];
    interval_text(o, iv, sizeof iv);
    return cli_usage_error("option '--%s': %g is outside %s (expected %s)", n, v, iv, o->expected);
}

static int take_choice(const struct cli_option *o, const char *arg)
{
    char list[256] = "";
    size_t len = 0;
    for (int k = 0; o->choices[k]; k++) {
        if (strcmp(o->choices[k], arg) == 0) {
            *(int *)o->value = k;
            return 0;
        }
        const char *sep = k == 0 ? "" : o->choices[k + 1] ? ", " : " or ";
        int w = snprintf(list + len, sizeof list - len, "%s%s", sep, o->choices[k]);
        if (w > 0 && (size_t)w < sizeof list - len)
            len += (size_t)w;
    }
    if (o->expected)
        return cli_usage_error("option '--%s': '%s' is not %s (expected %s)", o->long_name, arg,
                               o->expected, list);
    return cli_usage_error("option '--%s': '%s' is unknown (expected %s)", o->long_name, arg, list);
}

/* A time with its unit (s, min, h, d; a bare number is minutes) into seconds. */
static int take_duration(const struct cli_option *o, const char *arg)
{
    static const struct {
        const char *unit;
        double s;
    } units[] = {{"", 60}, {"s", 1}, {"min", 60}, {"h", 3600}, {"d", 86400}};
    char *end;
    errno = 0;
    double v = strtod(arg, &end);
    if (((arg[0] >= '0' && arg[0] <= '9') || arg[0] == '.') && end != arg && errno == 0 &&
        isfinite(v))
        for (size_t k = 0; k < sizeof units / sizeof units[0]; k++)
            if (strcmp(end, units[k].unit) == 0 && v * units[k].s <= o->hi) {
                *(double *)o->value = v * units[k].s;
                return 0;
            }
    return cli_usage_error("option '--%s': '%s' is not a time (expected a number >= 0 with s, "
                           "min, h or d, e.g. 30min)",
                           o->long_name, arg);
}

/* An option naming a file the command writes: -o/--output, --*-out, --chart. An empty
 * name there is a usage error naming the option (issue 18: `invert --out ''` said only
 * "the output file name is empty", `report -o ''` "report file name is empty"). */
static int is_output_option(const struct cli_option *o)
{
    size_t n = strlen(o->long_name);
    return strcmp(o->long_name, "output") == 0 || strcmp(o->long_name, "chart") == 0 ||
           (n > 4 && strcmp(o->long_name + n - 4, "-out") == 0);
}

/* Stores arg into the entry's variable after the checks; returns 0 or an exit code. */
static int take_value(const struct cli_option *o, const char *arg)
{
    long lv;
    switch (o->type) {
    case CLI_OPT_FLAG:
        *(int *)o->value = 1;
        return 0;
    case CLI_OPT_DOUBLE: {
        double v;
        char expected[160];
        snprintf(expected, sizeof expected, "%s", o->expected ? o->expected : "a number");
        if (cli_parse_double(o->long_name, arg, (o->flags & CLI_D_INF) != 0, expected, &v))
            return CLI_EXIT_USAGE;
        if (check_double(o, v))
            return CLI_EXIT_USAGE;
        *(double *)o->value = v;
        return 0;
    }
    case CLI_OPT_LONG:
        if (cli_parse_long(o->long_name, arg, (long)o->lo, (long)o->hi, &lv))
            return CLI_EXIT_USAGE;
        *(long *)o->value = lv;
        return 0;
    case CLI_OPT_STRING:
        *(const char **)o->value = arg;
        return 0;
    case CLI_OPT_CHOICE:
        return take_choice(o, arg);
    case CLI_OPT_LIST: {
        const char **arr = (const char **)o->value;
        size_t k = 0;
        while (k < (size_t)o->hi && arr[k])
            k++;
        if (k == (size_t)o->hi)
            return cli_usage_error("option '--%s': given more than %g times", o->long_name, o->hi);
        arr[k] = arg;
        arr[k + 1] = NULL;
        return 0;
    }
    case CLI_OPT_DURATION:
        return take_duration(o, arg);
    case CLI_OPT_SYSTEM:
        return cli_system_option((cli_system *)o->value, o->long_name, arg);
    default:
        return CLI_EXIT_SOFTWARE;
    }
}

int cli_given(const struct cli_option *opts, const char *long_name)
{
    if (opts != seen_table)
        return 0;
    for (size_t i = 0; opts[i].type != CLI_OPT_END; i++)
        if (seen[i] && opts[i].long_name &&
            (strcmp(opts[i].long_name, long_name) == 0 ||
             (opts[i].alias_of && strcmp(opts[i].alias_of, long_name) == 0)))
            return 1;
    return 0;
}

int cli_parse(int argc, char **argv, const struct cli_option *opts, const struct cli_usage *u,
              int *first_arg)
{
    struct option lo[MAX_OPTS + 2];
    char shorts[2 * MAX_OPTS + 4] = ":h";
    size_t n = table_len(opts), k = 0, ns = 2;
    if (n > MAX_OPTS) {
        cli_error("internal: option table of %zu entries (at most %d)", n, MAX_OPTS);
        return CLI_EXIT_SOFTWARE;
    }
    for (size_t i = 0; i < n; i++) {
        const struct cli_option *o = &opts[i];
        if (o->type == CLI_OPT_GROUP)
            continue;
        const struct cli_option *t = o->type == CLI_OPT_ALIAS ? find_long(opts, o->alias_of) : o;
        lo[k].name = o->long_name;
        lo[k].has_arg = t && t->type == CLI_OPT_FLAG ? no_argument : required_argument;
        lo[k].flag = NULL;
        lo[k].val = 256 + (int)i;
        k++;
        if (o->short_name) {
            shorts[ns++] = (char)o->short_name;
            if (t && t->type != CLI_OPT_FLAG)
                shorts[ns++] = ':';
        }
    }
    shorts[ns] = '\0';
    lo[k++] = (struct option){"help", no_argument, NULL, 'h'};
    lo[k] = (struct option){0, 0, 0, 0};
    seen_table = opts;
    memset(seen, 0, sizeof seen);

    int c, rc;
    optind = 0; /* glibc: full re-initialisation */
    opterr = 0;
    while ((c = getopt_long(argc, argv, shorts, lo, NULL)) != -1) {
        if (c == 'h') {
            cli_usage_print(stdout, opts, u);
            return CLI_PARSE_HELP;
        }
        const struct cli_option *o = NULL;
        if (c >= 256 && c < 256 + (int)n) {
            o = &opts[c - 256];
        } else {
            for (size_t i = 0; i < n && !o; i++)
                if (opts[i].short_name == c)
                    o = &opts[i];
        }
        if (!o)
            return cli_usage_getopt(c, argv, cli_command);
        seen[o - opts] = 1;
        const char *typed = o->long_name; /* the spelling given, for messages */
        if (o->type == CLI_OPT_ALIAS) {
            const struct cli_option *t = find_long(opts, o->alias_of);
            if (!t)
                return CLI_EXIT_SOFTWARE;
            seen[t - opts] = 1;
            o = t;
        }
        if (o->type == CLI_OPT_STRING && optarg && !optarg[0] && is_output_option(o))
            return cli_usage_error("option '--%s': the file name is empty (expected the name of "
                                   "the file to write)",
                                   typed);
        if ((rc = take_value(o, optarg)))
            return rc;
    }
    /* after the whole line, so that a --quiet anywhere silences them */
    for (size_t i = 0; i < n; i++)
        if (seen[i] && opts[i].type == CLI_OPT_ALIAS)
            cli_warn("option '--%s' is deprecated; use '--%s'", opts[i].long_name,
                     opts[i].alias_of);
    *first_arg = optind;
    return 0;
}

void cli_usage_print(FILE *out, const struct cli_option *opts, const struct cli_usage *u)
{
    enum { WIDTH = 22 };
    fputs(u->synopsis, out);
    if (u->about)
        fprintf(out, "\n%s", u->about);
    fputc('\n', out);
    for (size_t i = 0; opts[i].type != CLI_OPT_END; i++) {
        const struct cli_option *o = &opts[i];
        if (o->type == CLI_OPT_ALIAS)
            continue;
        if (o->type == CLI_OPT_GROUP) {
            fprintf(out, "%s\n", o->help);
            continue;
        }
        char left[80];
        if (o->short_name)
            snprintf(left, sizeof left, "-%c, --%s%s%s", (char)o->short_name, o->long_name,
                     o->argh ? " " : "", o->argh ? o->argh : "");
        else
            snprintf(left, sizeof left, "--%s%s%s", o->long_name, o->argh ? " " : "",
                     o->argh ? o->argh : "");
        int pad = WIDTH - (int)strlen(left);
        if (pad < 1) {
            fprintf(out, "  %s\n%*s", left, WIDTH + 3, "");
        } else {
            fprintf(out, "  %s%*s ", left, pad, "");
        }
        for (const char *h = o->help; *h; h++) {
            fputc(*h, out);
            if (*h == '\n' && h[1])
                fprintf(out, "%*s", WIDTH + 3, "");
        }
        fputc('\n', out);
    }
    fprintf(out, "  -h, --help%*s this text\n", WIDTH - 10, "");
    if (u->epilogue)
        fprintf(out, "\n%s", u->epilogue);
}
