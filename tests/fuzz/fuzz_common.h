/*
 * fuzz_common.h — helpers shared by the libFuzzer harnesses (issue 8): loading a
 * column file from datasets/ once, and turning the fuzz input into a NUL-terminated
 * copy. Harness-only code: it may print (libFuzzer owns the process).
 */
#ifndef STAGECAL_FUZZ_COMMON_H
#define STAGECAL_FUZZ_COMMON_H

#include <gsl/gsl_errno.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/column.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerInitialize(int *argc, char ***argv);

/* A malloc'd NUL-terminated copy of data (the parsers take (text, len) but some callers
 * rely on the terminator); NULL when out of memory. */
static inline char *fuzz_strndup(const uint8_t *data, size_t size)
{
    char *s = malloc(size + 1);
    if (s) {
        if (size)
            memcpy(s, data, size);
        s[size] = '\0';
    }
    return s;
}

/* Loads datasets/columns/<name> into *col; aborts the fuzzer if it cannot (a broken
 * setup must not pass as "no crashes"). */
static inline void fuzz_load_column(const char *name, stagecal_column *col)
{
    char path[512];
    stagecal_error err;
    snprintf(path, sizeof path, "%s/columns/%s", STAGECAL_DATASETS, name);
    if (stagecal_column_load(path, col, &err) != 0) {
        fprintf(stderr, "fuzz setup: %s\n", err.text);
        abort();
    }
}

#endif
