/*
 * trend_dir.c — the model files of one column's fits folder (see stagecal/trend_dir.h):
 * readdir, keep "*.json" (no hidden names), sort by name so that the order does not
 * depend on the file system, load each, check its column id.
 */
#include "stagecal/trend_dir.h"

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

static int has_json_suffix(const char *name)
{
    size_t n = strlen(name);
    return n > 5 && name[0] != '.' && strcmp(name + n - 5, ".json") == 0;
}

static int cmp_name(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Appends "<dir>/<name>" to d->paths (capacity *cap). */
static int add_path(stagecal_trend_dir *d, size_t *cap, const char *dir, const char *name)
{
    if (d->n == *cap) {
        size_t nc = *cap ? 2 * *cap : 16;
        char **nn = realloc(d->paths, nc * sizeof *nn);
        if (!nn)
            return -1;
        d->paths = nn;
        *cap = nc;
    }
    size_t len = strlen(dir) + strlen(name) + 2;
    if (!(d->paths[d->n] = malloc(len)))
        return -1;
    snprintf(d->paths[d->n], len, "%s/%s", dir, name);
    d->n++;
    return 0;
}

static int list(const char *dir, stagecal_trend_dir *d, stagecal_error *err)
{
    DIR *dp = opendir(dir);
    if (!dp)
        return error_set(err, STAGECAL_ENOINPUT,
                         "cannot open '%s': %s (expected the fits folder of the column)", dir,
                         strerror(errno));
    size_t cap = 0;
    struct dirent *e;
    int rc = STAGECAL_OK;
    while (rc == STAGECAL_OK && (e = readdir(dp)) != NULL)
        if (has_json_suffix(e->d_name) && add_path(d, &cap, dir, e->d_name) != 0)
            rc = error_set(err, STAGECAL_ENOMEM, "out of memory listing '%s'", dir);
    closedir(dp);
    if (rc == STAGECAL_OK && d->n == 0)
        rc = error_set(err, STAGECAL_ENOINPUT,
                       "no model files in '%s' (expected *.json written by 'stagecal calibrate')",
                       dir);
    if (rc == STAGECAL_OK)
        qsort(d->paths, d->n, sizeof *d->paths, cmp_name);
    return rc;
}

int stagecal_trend_dir_load(const char *dir, const char *column_id, stagecal_trend_dir *d,
                            stagecal_error *err)
{
    memset(d, 0, sizeof *d);
    int rc = list(dir, d, err);
    if (rc == STAGECAL_OK && !(d->models = calloc(d->n, sizeof *d->models)))
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory for %zu model files", d->n);
    for (size_t i = 0; rc == STAGECAL_OK && i < d->n; i++)
        stagecal_model_init(&d->models[i]);
    for (size_t i = 0; rc == STAGECAL_OK && i < d->n; i++) {
        rc = stagecal_model_load(d->paths[i], &d->models[i], err);
        if (rc == STAGECAL_OK && strcmp(d->models[i].column_id, column_id) != 0)
            rc = error_set(err, STAGECAL_EDATA, "%s: column id '%s' does not match its folder '%s'",
                           d->paths[i], d->models[i].column_id, column_id);
    }
    if (rc != STAGECAL_OK)
        stagecal_trend_dir_free(d);
    return rc;
}

void stagecal_trend_dir_free(stagecal_trend_dir *d)
{
    if (!d)
        return;
    for (size_t i = 0; i < d->n; i++) {
        if (d->models)
            stagecal_model_free(&d->models[i]);
        free(d->paths[i]);
    }
    free(d->models);
    free(d->paths);
    memset(d, 0, sizeof *d);
}
