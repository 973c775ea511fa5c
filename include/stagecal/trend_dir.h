/*
 * stagecal/trend_dir.h — the model files of one column, as `calibrate` leaves them in
 * its folder (fits/<column id>/): listed, loaded and checked to belong to the column.
 * The trend and history commands start from here.
 */
#ifndef STAGECAL_TREND_DIR_H
#define STAGECAL_TREND_DIR_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/model.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct {
    size_t n;               /* model files found, ≥ 1 after a successful load */
    char **paths;           /* "<dir>/<name>.json", sorted by name (byte order) */
    stagecal_model *models; /* models[i] loaded from paths[i] */
} stagecal_trend_dir;

/* Loads every "*.json" file of dir whose name does not start with '.', in name order, and
 * checks that each model's column id is column_id. On success *d owns its memory (free
 * with stagecal_trend_dir_free). Errors: ENOINPUT (dir cannot be opened, or holds no model
 * file), what stagecal_model_load returns for a file, EDATA (a model of another column),
 * ENOMEM. On error *d is empty. */
int stagecal_trend_dir_load(const char *dir, const char *column_id, stagecal_trend_dir *d,
                            stagecal_error *err);
void stagecal_trend_dir_free(stagecal_trend_dir *d); /* NULL ok; leaves *d empty */

#ifdef __cplusplus
}
#endif
#endif
