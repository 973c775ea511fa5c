/*
 * trend_fits.c — a column's fits by name, period and label; the catalogue of labels and
 * retirements (include/stagecal/fits.h).
 *
 * Workload: a column folder holds tens to a few hundred model files; listing loads each
 * once (a model file is a few kB of JSON). The catalogue is one small JSON object,
 * rewritten whole and atomically (fileio.h) on every change.
 */
#include "stagecal/fits.h"

#include <dirent.h>
#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "stagecal/convention.h"
#include "stagecal/model.h"
#include "stagecal/units.h"
#include "fileio.h"
#include "internal.h"

#define CATALOGUE "catalogue"
#define CAT_FORMAT "stagecal-fits-catalogue"
#define CAP_CATALOGUE ((size_t)4 << 20)

static void day(double t, char *buf, size_t cap)
{
    time_t tt = (time_t)floor(t);
    struct tm tm;
    if (!isfinite(t) || !gmtime_r(&tt, &tm) || strftime(buf, cap, "%Y-%m-%d", &tm) == 0)
        snprintf(buf, cap, "?");
}

static int cat_path(const char *dir, const char *column_id, char *buf, size_t cap,
                    stagecal_error *err)
{
    if (!stagecal_convention_id_valid(column_id))
        return error_set(err, STAGECAL_EINVAL, "'%s' is not a column id", column_id);
    if ((size_t)snprintf(buf, cap, "%s/%s/%s", dir, column_id, CATALOGUE) >= cap)
        return error_set(err, STAGECAL_EINVAL, "path '%s/%s' is too long", dir, column_id);
    return STAGECAL_OK;
}

/* The catalogue as a JSON object {file: {label, retired, reason}}; an empty object when
 * the file does not exist. */
static int cat_load(const char *path, json_t **out, stagecal_error *err)
{
    *out = NULL;
    FILE *probe = fopen(path, "r");
    if (!probe) {
        if (errno != ENOENT)
            return error_set(err, STAGECAL_ENOINPUT, "cannot open '%s': %s", path, strerror(errno));
        *out = json_object();
        return *out ? STAGECAL_OK : error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    fclose(probe);
    fileio_data d;
    int rc = read_all(path, CAP_CATALOGUE, "fits catalogue", 0, &d, err);
    if (rc)
        return rc;
    json_error_t je;
    json_t *doc = json_loadb(d.data, d.len, 0, &je);
    free(d.data);
    json_t *fits = doc ? json_object_get(doc, "fits") : NULL;
    const char *fmt = doc ? json_string_value(json_object_get(doc, "format")) : NULL;
    if (!doc || !json_is_object(fits) || !fmt || strcmp(fmt, CAT_FORMAT) != 0) {
        json_decref(doc);
        return error_set(err, STAGECAL_EDATA,
                         "%s: not a fits catalogue (expected JSON with \"format\": \"%s\" and "
                         "\"fits\": {...})",
                         path, CAT_FORMAT);
    }
    *out = json_incref(fits);
    json_decref(doc);
    return STAGECAL_OK;
}

static int cat_save(const char *path, json_t *fits, stagecal_error *err)
{
    json_t *doc = json_pack("{s:s, s:i, s:O}", "format", CAT_FORMAT, "version", 1, "fits", fits);
    char *text = doc ? json_dumps(doc, JSON_INDENT(2) | JSON_SORT_KEYS) : NULL;
    json_decref(doc);
    if (!text)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    int rc = write_atomic(path, text, strlen(text), ATOMIC_REPLACE, err);
    free(text);
    return rc;
}

static void set_name(stagecal_fit_entry *e, const char *column_id)
{
    char a[32], b[32];
    int k;
    if (isfinite(e->first_s)) {
        day(e->first_s, a, sizeof a);
        day(e->last_s, b, sizeof b);
        k = snprintf(e->name, sizeof e->name, "%s@%s..%s", column_id, a, b);
    } else {
        day(e->fitted_s, a, sizeof a);
        k = snprintf(e->name, sizeof e->name, "%s@fitted-%s", column_id, a);
    }
    if (e->label[0] && k > 0 && (size_t)k < sizeof e->name)
        snprintf(e->name + k, sizeof e->name - (size_t)k, "#%s", e->label);
}

static int cmp_entry(const void *pa, const void *pb)
{
    const stagecal_fit_entry *a = pa, *b = pb;
    double ta = isfinite(a->first_s) ? a->first_s : a->fitted_s;
    double tb = isfinite(b->first_s) ? b->first_s : b->fitted_s;
    if (ta != tb)
        return ta < tb ? -1 : 1;
    return strcmp(a->file, b->file);
}

static int is_model_name(const char *s)
{
    size_t n = strlen(s);
    return n > 5 && s[0] != '.' && strcmp(s + n - 5, ".json") == 0;
}

/* Fills one entry from its model file and the catalogue. */
static int fill_entry(stagecal_fit_entry *e, const char *folder, const char *file, json_t *cat,
                      const char *column_id, stagecal_error *err)
{
    memset(e, 0, sizeof *e);
    e->straddles = -1;
    if ((size_t)snprintf(e->path, sizeof e->path, "%s/%s", folder, file) >= sizeof e->path ||
        copy_text(e->file, sizeof e->file, file) != 0)
        return error_set(err, STAGECAL_EINVAL, "path '%s/%s' is too long", folder, file);
    stagecal_model m;
    stagecal_model_init(&m);
    int rc = stagecal_model_load(e->path, &m, err);
    if (rc == STAGECAL_OK && strcmp(m.column_id, column_id) != 0)
        rc = error_set(err, STAGECAL_EDATA, "%s: column id '%s' does not match its folder '%s'",
                       e->path, m.column_id, column_id);
    if (rc == STAGECAL_OK) {
        e->first_s = e->last_s = NAN;
        if (m.data_first_utc[0] && m.data_last_utc[0] &&
            (stagecal_units_parse_iso8601(m.data_first_utc, &e->first_s) != 0 ||
             stagecal_units_parse_iso8601(m.data_last_utc, &e->last_s) != 0))
            e->first_s = e->last_s = NAN;
        if (stagecal_units_parse_iso8601(m.fitted_utc, &e->fitted_s) != 0)
            e->fitted_s = NAN;
    }
    stagecal_model_free(&m);
    if (rc)
        return rc;
    json_t *c = json_object_get(cat, file);
    if (json_is_object(c)) {
        const char *label = json_string_value(json_object_get(c, "label"));
        const char *reason = json_string_value(json_object_get(c, "reason"));
        if (label)
            snprintf(e->label, sizeof e->label, "%s", label);
        e->retired = json_is_true(json_object_get(c, "retired"));
        if (e->retired && reason)
            snprintf(e->reason, sizeof e->reason, "%s", reason);
    }
    set_name(e, column_id);
    return STAGECAL_OK;
}

int stagecal_fits_list(const char *dir, const char *column_id, stagecal_fit_entry **out, size_t *n,
                       stagecal_error *err)
{
    *out = NULL;
    *n = 0;
    char folder[1024], cpath[1100];
    int rc = cat_path(dir, column_id, cpath, sizeof cpath, err);
    if (rc)
        return rc;
    snprintf(folder, sizeof folder, "%s/%s", dir, column_id);
    DIR *d = opendir(folder);
    if (!d)
        return error_set(err, STAGECAL_ENOINPUT,
                         "cannot open '%s': %s (expected the fits folder of the column)", folder,
                         strerror(errno));
    json_t *cat = NULL;
    if ((rc = cat_load(cpath, &cat, err))) {
        closedir(d);
        return rc;
    }
    size_t cap = 0;
    stagecal_fit_entry *e = NULL;
    struct dirent *de;
    while (rc == STAGECAL_OK && (de = readdir(d)) != NULL) {
        if (!is_model_name(de->d_name))
            continue;
        if (*n == cap) {
            size_t nc = cap ? 2 * cap : 16;
            stagecal_fit_entry *ne = realloc(e, nc * sizeof *ne);
            if (!ne) {
                rc = error_set(err, STAGECAL_ENOMEM, "out of memory listing '%s'", folder);
                break;
            }
            e = ne;
            cap = nc;
        }
        rc = fill_entry(&e[*n], folder, de->d_name, cat, column_id, err);
        if (rc == STAGECAL_OK)
            (*n)++;
    }
    closedir(d);
    json_decref(cat);
    if (rc) {
        free(e);
        *n = 0;
        return rc;
    }
    if (*n)
        qsort(e, *n, sizeof *e, cmp_entry);
    *out = e;
    return STAGECAL_OK;
}

void stagecal_fits_check_events(stagecal_fit_entry *e, size_t n, const stagecal_trend_event *ev,
                                size_t nev, const char *column_id)
{
    for (size_t i = 0; i < n; i++) {
        e[i].straddles = -1;
        if (!isfinite(e[i].first_s))
            continue;
        for (size_t k = 0; k < nev && e[i].straddles < 0; k++)
            if (ev[k].kind != STAGECAL_EVENT_NOTE && strcmp(ev[k].column_id, column_id) == 0 &&
                ev[k].t_s > e[i].first_s && ev[k].t_s <= e[i].last_s)
                e[i].straddles = (long)k;
    }
}

/* The period a spec names, [lo, hi) in s; 0 on success. */
static int spec_period(const char *spec, double *lo, double *hi)
{
    char a[16], b[16];
    const char *dots = strstr(spec, "..");
    int y, m, dd;
    char buf[40];
    if (dots) {
        size_t la = (size_t)(dots - spec);
        if (la != 10 || strlen(dots + 2) != 10)
            return -1;
        memcpy(a, spec, 10);
        a[10] = '\0';
        memcpy(b, dots + 2, 11);
        snprintf(buf, sizeof buf, "%sT00:00:00Z", a);
        if (stagecal_units_parse_iso8601(buf, lo) != 0)
            return -1;
        snprintf(buf, sizeof buf, "%sT00:00:00Z", b);
        if (stagecal_units_parse_iso8601(buf, hi) != 0)
            return -1;
        *hi += 86400;
        return *hi > *lo ? 0 : -1;
    }
    size_t len = strlen(spec);
    if (len == 4 && sscanf(spec, "%4d", &y) == 1) {
        snprintf(buf, sizeof buf, "%04d-01-01T00:00:00Z", y);
        if (stagecal_units_parse_iso8601(buf, lo) != 0)
            return -1;
        snprintf(buf, sizeof buf, "%04d-01-01T00:00:00Z", y + 1);
        return stagecal_units_parse_iso8601(buf, hi);
    }
    if (len == 7 && sscanf(spec, "%4d-%2d", &y, &m) == 2 && m >= 1 && m <= 12) {
        snprintf(buf, sizeof buf, "%04d-%02d-01T00:00:00Z", y, m);
        if (stagecal_units_parse_iso8601(buf, lo) != 0)
            return -1;
        snprintf(buf, sizeof buf, "%04d-%02d-01T00:00:00Z", m == 12 ? y + 1 : y,
                 m == 12 ? 1 : m + 1);
        return stagecal_units_parse_iso8601(buf, hi);
    }
    if (len == 10 && sscanf(spec, "%4d-%2d-%2d", &y, &m, &dd) == 3) {
        snprintf(buf, sizeof buf, "%sT00:00:00Z", spec);
        if (stagecal_units_parse_iso8601(buf, lo) != 0)
            return -1;
        *hi = *lo + 86400;
        return 0;
    }
    return -1;
}

/* Whether e matches spec: exactly (label, file, name or its own period "FROM..TO") when
 * exact, else by a period that holds its data period. */
static int matches(const stagecal_fit_entry *e, const char *spec, int exact, int by_period,
                   double lo, double hi)
{
    if (exact) {
        const char *at = strchr(e->name, '@');
        size_t plen = strcspn(at ? at + 1 : "", "#");
        return strcmp(e->label, spec) == 0 || strcmp(e->file, spec) == 0 ||
               strcmp(e->name, spec) == 0 ||
               (at && strlen(spec) == plen && strncmp(at + 1, spec, plen) == 0);
    }
    return by_period && isfinite(e->first_s) && e->first_s >= lo && e->last_s < hi;
}

int stagecal_fits_find(const stagecal_fit_entry *e, size_t n, const char *spec, size_t *index,
                       stagecal_error *err)
{
    size_t hits = 0, first = 0, used = 0;
    char list[512] = "";
    double lo = NAN, hi = NAN;
    int by_period = spec_period(spec, &lo, &hi) == 0;
    for (int exact = 1; exact >= 0 && hits == 0; exact--) {
        used = 0;
        for (size_t i = 0; i < n; i++) {
            if (e[i].retired || !matches(&e[i], spec, exact, by_period, lo, hi))
                continue;
            if (hits++ == 0)
                first = i;
            if (used < sizeof list) {
                int k = snprintf(list + used, sizeof list - used, "%s%s (%s)", used ? ", " : "",
                                 e[i].name, e[i].file);
                used += k > 0 ? (size_t)k : 0;
            }
        }
    }
    if (hits == 1) {
        *index = first;
        return STAGECAL_OK;
    }
    if (hits == 0)
        return error_set(err, STAGECAL_EDATA,
                         "no live fit is labelled '%s' or has its data period within it "
                         "(expected a label, a file name, or a period YYYY, YYYY-MM, "
                         "YYYY-MM-DD or FROM..TO)",
                         spec);
    return error_set(err, STAGECAL_EDATA,
                     "'%s' names %zu fits: %s (give a label or a narrower period, or retire "
                     "the ones not meant)",
                     spec, hits, list);
}

/* Loads the catalogue, applies fn to the entry of file, saves it. */
static int cat_update(const char *dir, const char *column_id, const char *file,
                      int (*fn)(json_t *cat, json_t *entry, const char *arg, stagecal_error *err),
                      const char *arg, stagecal_error *err)
{
    char cpath[1100], mpath[1400];
    int rc = cat_path(dir, column_id, cpath, sizeof cpath, err);
    if (rc)
        return rc;
    snprintf(mpath, sizeof mpath, "%s/%s/%s", dir, column_id, file);
    FILE *f = strchr(file, '/') ? NULL : fopen(mpath, "r");
    if (!f)
        return error_set(err, STAGECAL_ENOINPUT, "no model file '%s' in '%s/%s'", file, dir,
                         column_id);
    fclose(f);
    json_t *cat;
    if ((rc = cat_load(cpath, &cat, err)))
        return rc;
    json_t *entry = json_object_get(cat, file);
    if (!json_is_object(entry)) {
        entry = json_object();
        json_object_set_new(cat, file, entry);
    }
    rc = fn(cat, entry, arg, err);
    if (rc == STAGECAL_OK)
        rc = cat_save(cpath, cat, err);
    json_decref(cat);
    return rc;
}

static int apply_label(json_t *cat, json_t *entry, const char *label, stagecal_error *err)
{
    if (!label[0]) {
        json_object_del(entry, "label");
        return STAGECAL_OK;
    }
    if (!stagecal_convention_id_valid(label) || strlen(label) >= 64)
        return error_set(err, STAGECAL_EINVAL,
                         "label '%s' is not valid (expected [A-Za-z0-9_.-]+, under 64 bytes)",
                         label);
    const char *key;
    json_t *v;
    json_object_foreach(cat, key, v)
    {
        const char *l = json_string_value(json_object_get(v, "label"));
        if (v != entry && l && strcmp(l, label) == 0)
            return error_set(err, STAGECAL_EINVAL, "label '%s' is already given to %s", label, key);
    }
    json_object_set_new(entry, "label", json_string(label));
    return STAGECAL_OK;
}

static int apply_retire(json_t *cat, json_t *entry, const char *reason, stagecal_error *err)
{
    (void)cat;
    if (!reason) {
        json_object_del(entry, "retired");
        json_object_del(entry, "reason");
        return STAGECAL_OK;
    }
    if (!reason[0])
        return error_set(err, STAGECAL_EINVAL, "a fit is retired with a reason (got none)");
    json_object_set_new(entry, "retired", json_true());
    json_object_set_new(entry, "reason", json_string(reason));
    return STAGECAL_OK;
}

int stagecal_fits_set_label(const char *dir, const char *column_id, const char *file,
                            const char *label, stagecal_error *err)
{
    return cat_update(dir, column_id, file, apply_label, label, err);
}

int stagecal_fits_retire(const char *dir, const char *column_id, const char *file,
                         const char *reason, stagecal_error *err)
{
    return cat_update(dir, column_id, file, apply_retire, reason, err);
}
