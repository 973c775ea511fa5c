/*
 * error.c — status code texts and the helpers that fill a stagecal_error.
 */
#include <stdlib.h>

#include "internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

static const char *const status_text[STAGECAL_NSTATUS] = {
    [STAGECAL_OK] = "success",
    [STAGECAL_EINVAL] = "invalid argument",
    [STAGECAL_EDATA] = "bad input data",
    [STAGECAL_ENOINPUT] = "input missing or unreadable",
    [STAGECAL_EWRITE] = "output cannot be written",
    [STAGECAL_ENOMEM] = "out of memory",
    [STAGECAL_ENOCONV] = "iteration did not converge",
    [STAGECAL_EVERSION] = "file from a newer format version",
    [STAGECAL_EINTERNAL] = "internal error",
};

const char *name_of(const char *const *names, size_t n, int v)
{
    return v >= 0 && (size_t)v < n && names[v] ? names[v] : "unknown";
}

void free_each(void *const *p, size_t n)
{
    for (size_t i = 0; i < n; i++)
        free(p[i]);
}

const char *stagecal_strerror(int code)
{
    if (code < 0 || code >= STAGECAL_NSTATUS)
        return "unknown status";
    return status_text[code];
}

void stagecal_error_clear(stagecal_error *err)
{
    if (!err)
        return;
    memset(err, 0, sizeof *err);
}

int error_set(stagecal_error *err, int code, const char *fmt, ...)
{
    if (!err)
        return code;
    va_list ap;
    err->code = code;
    err->source[0] = '\0';
    err->line = 0;
    err->column = 0;
    va_start(ap, fmt);
    vsnprintf(err->text, sizeof err->text, fmt, ap);
    va_end(ap);
    return code;
}

int error_set_at(stagecal_error *err, int code, const char *source, long line, long column,
                 const char *fmt, ...)
{
    if (!err)
        return code;
    va_list ap;
    int n = 0;
    err->code = code;
    err->line = line;
    err->column = column;
    snprintf(err->source, sizeof err->source, "%s", source ? source : "");
    /* Prefix first, then the body after it (so a long body truncates, not the place). */
    if (source && line > 0)
        n = snprintf(err->text, sizeof err->text, "%s:%ld: ", err->source, line);
    else if (source)
        n = snprintf(err->text, sizeof err->text, "%s: ", err->source);
    else
        err->text[0] = '\0';
    if (n < 0 || (size_t)n >= sizeof err->text)
        n = (int)strlen(err->text);
    va_start(ap, fmt);
    vsnprintf(err->text + n, sizeof err->text - (size_t)n, fmt, ap);
    va_end(ap);
    return code;
}
