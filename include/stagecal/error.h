/*
 * stagecal/error.h — status codes and the error record every fallible call fills.
 *
 * Every fallible library call returns an int status: STAGECAL_OK (0) or one of the
 * codes below, and fills the caller's stagecal_error (which may be NULL) with the
 * code, a one-line message in Git's style ("what failed: why, what was expected")
 * and, for file input, the location (source name, line, column). The library never
 * prints and never exits; the CLI maps codes to exit statuses (cli.c).
 */
#ifndef STAGECAL_ERROR_H
#define STAGECAL_ERROR_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

enum {
    STAGECAL_OK = 0,    /* success */
    STAGECAL_EINVAL,    /* an argument is outside its documented domain */
    STAGECAL_EDATA,     /* input data (file content) is malformed or inconsistent */
    STAGECAL_ENOINPUT,  /* an input file is missing or unreadable */
    STAGECAL_EWRITE,    /* an output cannot be written */
    STAGECAL_ENOMEM,    /* memory allocation failed */
    STAGECAL_ENOCONV,   /* an iteration did not converge within its limits */
    STAGECAL_EVERSION,  /* a file was written by a newer, unknown format version */
    STAGECAL_EINTERNAL, /* a bug or an unexpected library failure (GSL, NLopt) */
    STAGECAL_NSTATUS    /* number of codes (not a code) */
};

#define STAGECAL_ERROR_TEXT 512
#define STAGECAL_ERROR_SOURCE 256

/* The error record (shape of jansson's json_error_t). line/column are 0 when the
 * message has no location; they are 1-based otherwise. */
typedef struct {
    int code;                           /* one of the codes above */
    long line;                          /* 1-based line in source, 0 if none */
    long column;                        /* 1-based column/field, 0 if none */
    char source[STAGECAL_ERROR_SOURCE]; /* file name or "" */
    char text[STAGECAL_ERROR_TEXT];     /* the message, including the location prefix */
} stagecal_error;

/* Short text for a status code ("invalid argument", ...). Never NULL. */
const char *stagecal_strerror(int code);

/* Resets err to STAGECAL_OK with empty text. err may be NULL. */
void stagecal_error_clear(stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif
