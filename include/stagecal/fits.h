/*
 * stagecal/fits.h — a column's fits found by what they were fitted on: names from the
 * column and the data period (plus an optional label), lookup by period or label, and a
 * catalogue that labels and retires fits without touching the model files.
 *
 * A fit's name is "COLUMN@FIRST..LAST" (the days of its first and last logged sample,
 * UTC) or "COLUMN@FIRST..LAST#LABEL" when it carries a label; a fit without a data
 * period (logs with relative times) is "COLUMN@fitted-DAY". The model file keeps the
 * name the writer gave it (the time of fit); the catalogue file fits/COLUMN/catalogue
 * (JSON, docs/cli.md "fits") holds labels and retirements by file name and
 * is replaced atomically. Retired fits are listed but never found or trended.
 */
#ifndef STAGECAL_FITS_H
#define STAGECAL_FITS_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/trend.h"

#ifdef __cplusplus
extern "C" {
#endif

#define STAGECAL_FITS_TEXT 160

typedef struct {
    char path[1024];                 /* the model file */
    char file[256];                  /* its file name in the folder */
    char name[STAGECAL_FITS_TEXT];   /* COLUMN@FIRST..LAST[#LABEL] */
    char label[64];                  /* "" when none */
    int retired;                     /* 1: set aside, with reason */
    char reason[STAGECAL_FITS_TEXT]; /* why it was retired */
    double first_s, last_s;          /* data period [s since 1970 UTC]; NAN when unknown */
    double fitted_s;                 /* time of fit */
    long straddles;                  /* index of a splitting event inside the data period
                                        (stagecal_fits_check_events), −1 none */
} stagecal_fit_entry;

/* Lists the model files of dir/column_id (sorted by data period, then file name) with
 * their names, labels and retirements. *out is malloc'd (free()), NULL when n = 0.
 * ENOINPUT when the folder cannot be read; EDATA when a model file or the catalogue is
 * bad (message names it); ENOMEM. */
int stagecal_fits_list(const char *dir, const char *column_id, stagecal_fit_entry **out, size_t *n,
                       stagecal_error *err);

/* Marks in each entry the first repack/maintenance event of column_id that lies strictly
 * inside its data period (the fit mixes two beds). */
void stagecal_fits_check_events(stagecal_fit_entry *e, size_t n, const stagecal_trend_event *ev,
                                size_t nev, const char *column_id);

/* The one live (not retired) fit that spec names: a label, a file name, a full name, or a
 * period "YYYY", "YYYY-MM", "YYYY-MM-DD" or "FROM..TO" (days, inclusive) that holds the
 * fit's whole data period. Index into e; EDATA (message lists the candidates) when
 * none or several match; EINVAL for an unreadable spec. */
int stagecal_fits_find(const stagecal_fit_entry *e, size_t n, const char *spec, size_t *index,
                       stagecal_error *err);

/* Sets (label non-empty) or clears (label "") the label of `file` in the catalogue of
 * dir/column_id. Labels are [A-Za-z0-9_.-]+, unique in the column. EINVAL for a bad or
 * taken label; EWRITE; ENOMEM. */
int stagecal_fits_set_label(const char *dir, const char *column_id, const char *file,
                            const char *label, stagecal_error *err);

/* Retires `file` with a reason (non-empty), or brings it back (reason NULL). */
int stagecal_fits_retire(const char *dir, const char *column_id, const char *file,
                         const char *reason, stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif
