/*
 * cli.c — shared command-line helpers: messages, exit codes, strict number
 * parsing (strtod with end-pointer and errno checks, never atof), JSON output.
 */
#include "cli.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "banned.h"

const char *cli_command = "";
int cli_quiet = 0;

const char cli_caution[] =
    "Caution: batch distillation handles flammable and often toxic liquids under heat. "
    "These results are an empirical fit that supports engineering judgement; they do not "
    "replace it. Conditions outside the fitted envelope are extrapolations and are flagged "
    "as such. Local codes, site procedures and a licensed engineer's review come first.";

static void vmessage(const char *kind, const char *fmt, va_list ap)
{
    if (cli_command[0])
        fprintf(stderr, "stagecal %s: %s", cli_command, kind);
    else
        fprintf(stderr, "stagecal: %s", kind);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
}

void cli_error(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vmessage("", fmt, ap);
    va_end(ap);
}

void cli_warn(const char *fmt, ...)
{
    if (cli_quiet)
        return;
    va_list ap;
    va_start(ap, fmt);
    vmessage("warning: ", fmt, ap);
    va_end(ap);
}

int cli_usage_error(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vmessage("", fmt, ap);
    va_end(ap);
    return CLI_EXIT_USAGE;
}

int cli_exit_for(int status)
{
    switch (status) {
    case STAGECAL_OK:
        return CLI_EXIT_OK;
    case STAGECAL_EINVAL:
        return CLI_EXIT_USAGE;
    case STAGECAL_EDATA:
    case STAGECAL_EVERSION:
        return CLI_EXIT_DATA;
    case STAGECAL_ENOINPUT:
        return CLI_EXIT_NOINPUT;
    case STAGECAL_EWRITE:
        return CLI_EXIT_CANTCREAT;
    default:
        return CLI_EXIT_SOFTWARE;
    }
}

int cli_fail(const stagecal_error *err)
{
    cli_error("%s", err->text[0] ? err->text : stagecal_strerror(err->code));
    return cli_exit_for(err->code);
}

int cli_parse_double(const char *opt, const char *text, int allow_inf, const char *expected,
                     double *out)
{
    char *end = NULL;
    if (allow_inf && (strcmp(text, "inf") == 0 || strcmp(text, "Inf") == 0 ||
                      strcmp(text, "INF") == 0 || strcmp(text, "infinity") == 0)) {
        *out = INFINITY;
        return 0;
    }
    errno = 0;
    double v = text[0] ? strtod(text, &end) : 0.0;
    if (!text[0] || *end != '\0' || errno == ERANGE || !isfinite(v)) {
        cli_error("option '--%s': '%s' is not a number (expected %s)", opt, text, expected);
        return -1;
    }
    *out = v;
    return 0;
}

int cli_parse_long(const char *opt, const char *text, long lo, long hi, long *out)
{
    char *end = NULL;
    errno = 0;
    long v = text[0] ? strtol(text, &end, 10) : 0;
    if (!text[0] || *end != '\0' || errno == ERANGE || v < lo || v > hi) {
        cli_error("option '--%s': '%s' is not an integer in [%ld, %ld]", opt, text, lo, hi);
        return -1;
    }
    *out = v;
    return 0;
}

int cli_json_print(json_t *doc)
{
    int rc = json_dumpf(doc, stdout, JSON_INDENT(2) | JSON_SORT_KEYS | JSON_REAL_PRECISION(17));
    json_decref(doc);
    if (rc != 0 || fputc('\n', stdout) == EOF)
        return CLI_EXIT_CANTCREAT;
    return 0;
}

json_t *cli_json_real(double v)
{
    return isfinite(v) ? json_real(v) : json_null();
}

int cli_progress_enabled(void)
{
    return !cli_quiet && isatty(STDERR_FILENO) && getenv("NO_COLOR") == NULL;
}
