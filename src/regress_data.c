/*
 * regress_data.c — the points file (docs/regress.md): CSV with a header row naming the
 * columns R and stages, optionally F (F-factor, Pa^0.5) and sigma (standard
 * uncertainty of stages), in any order. Names may carry a unit in brackets; only
 * the units below are accepted because these quantities have no other common unit:
 *   R or R[-], stages or stages[-], F or F[Pa^0.5], sigma or sigma[-].
 * R may be `inf` (total reflux). Parsed with libcsv, one physical line at a time so
 * that messages carry "file:line:". Numbers with strtod in the "C" locale.
 */
#include "stagecal/regress.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <csv.h>

#include "fileio.h"
#include "internal.h"

enum { COL_R, COL_STAGES, COL_F, COL_SIGMA, NCOL };
static const char *const col_name[NCOL] = {"R", "stages", "F", "sigma"};
static const char *const col_unit[NCOL] = {"[-]", "[-]", "[Pa^0.5]", "[-]"};

typedef struct {
    const char *source;
    long line;
    int rc;
    stagecal_error *err;
    int header_done;
    size_t nfields; /* fields in the header */
    int map[32];    /* header field → COL_* (-1 unknown not allowed) */
    int have[NCOL];
    size_t field; /* current field within the record */
    double val[NCOL];
    int set[NCOL];
    size_t n, cap;
    double *r, *f, *y, *s;
} reader;

static int is_inf_text(const char *t)
{
    return strcmp(t, "inf") == 0 || strcmp(t, "Inf") == 0 || strcmp(t, "INF") == 0 ||
           strcmp(t, "infinity") == 0;
}

static void on_field(void *s, size_t len, void *ctx)
{
    reader *rd = ctx;
    const char *t = s ? s : "";
    size_t k = rd->field++;
    if (rd->rc != STAGECAL_OK)
        return;
    if (!rd->header_done) {
        if (k >= sizeof rd->map / sizeof rd->map[0]) {
            rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, (long)k + 1,
                                  "header has more than %zu columns",
                                  sizeof rd->map / sizeof rd->map[0]);
            return;
        }
        for (int c = 0; c < NCOL; c++) {
            size_t nl = strlen(col_name[c]);
            if (strncmp(t, col_name[c], nl) == 0 &&
                (t[nl] == '\0' || strcmp(t + nl, col_unit[c]) == 0)) {
                if (rd->have[c]) {
                    rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line,
                                          (long)k + 1, "column '%s' appears twice", col_name[c]);
                    return;
                }
                rd->have[c] = 1;
                rd->map[k] = c;
                return;
            }
        }
        rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, (long)k + 1,
                              "unknown column '%.*s' (expected R, stages, F[Pa^0.5], sigma)",
                              (int)len, t);
        return;
    }
    if (k >= rd->nfields) {
        rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, (long)k + 1,
                              "%zu fields (expected %zu as in the header)", k + 1, rd->nfields);
        return;
    }
    int c = rd->map[k];
    char *end = NULL;
    double v;
    if (t[0] == '\0') {
        rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, (long)k + 1,
                              "column '%s': empty cell (expected a number)", col_name[c]);
        return;
    }
    if (c == COL_R && is_inf_text(t)) {
        v = INFINITY;
    } else {
        errno = 0;
        v = strtod(t, &end);
        if (*end != '\0' || errno == ERANGE || !isfinite(v)) {
            rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, (long)k + 1,
                                  "column '%s': '%s' is not a number (expected a finite "
                                  "number%s)",
                                  col_name[c], t, c == COL_R ? " or inf" : "");
            return;
        }
    }
    int bad = (c == COL_R && !(v > 0)) || (c == COL_STAGES && !(v > 0)) ||
              (c == COL_F && !(v >= 0)) || (c == COL_SIGMA && !(v > 0));
    if (bad) {
        rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, (long)k + 1,
                              "column '%s': value '%s' out of range (expected %s)", col_name[c], t,
                              c == COL_F ? ">= 0" : "> 0");
        return;
    }
    rd->val[c] = v;
    rd->set[c] = 1;
}

static int grow(reader *rd)
{
    size_t cap = rd->cap ? 2 * rd->cap : 64;
    double *a[4] = {rd->r, rd->f, rd->y, rd->s};
    for (int i = 0; i < 4; i++) {
        double *q = realloc(a[i], cap * sizeof *q);
        if (!q)
            return STAGECAL_ENOMEM;
        a[i] = q;
        /* keep the pointers current after each success so that nothing leaks */
        rd->r = a[0], rd->f = a[1], rd->y = a[2], rd->s = a[3];
    }
    rd->cap = cap;
    return STAGECAL_OK;
}

static void on_record(int term, void *ctx)
{
    reader *rd = ctx;
    (void)term;
    size_t nf = rd->field;
    rd->field = 0;
    if (rd->rc != STAGECAL_OK)
        return;
    if (!rd->header_done) {
        rd->header_done = 1;
        rd->nfields = nf;
        if (!rd->have[COL_R] || !rd->have[COL_STAGES])
            rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, 0,
                                  "header lacks column '%s' (expected at least R,stages)",
                                  rd->have[COL_R] ? "stages" : "R");
        return;
    }
    if (nf != rd->nfields) {
        rd->rc = error_set_at(rd->err, STAGECAL_EDATA, rd->source, rd->line, 0,
                              "%zu fields (expected %zu as in the header)", nf, rd->nfields);
        return;
    }
    if (rd->n == rd->cap && grow(rd) != STAGECAL_OK) {
        rd->rc = error_set(rd->err, STAGECAL_ENOMEM, "%s: out of memory", rd->source);
        return;
    }
    rd->r[rd->n] = rd->val[COL_R];
    rd->y[rd->n] = rd->val[COL_STAGES];
    rd->f[rd->n] = rd->have[COL_F] ? rd->val[COL_F] : 0;
    rd->s[rd->n] = rd->have[COL_SIGMA] ? rd->val[COL_SIGMA] : 1;
    rd->n++;
    memset(rd->set, 0, sizeof rd->set);
}

void stagecal_regress_data_free(stagecal_regress_data *data)
{
    if (!data)
        return;
    FREE_EACH(data->r, data->f_load, data->stages, data->sigma);
    memset(data, 0, sizeof *data);
}

int stagecal_regress_data_read(const char *path, stagecal_regress_data *data, stagecal_error *err)
{
    struct csv_parser csv;
    reader rd;
    char *line = NULL;
    size_t lcap = 0;
    ssize_t len;
    if (!path || !data)
        return error_set(err, STAGECAL_EINVAL, "points: path and data are required");
    memset(data, 0, sizeof *data);
    memset(&rd, 0, sizeof rd);
    int use_stdin = strcmp(path, "-") == 0;
    rd.source = use_stdin ? "<stdin>" : path;
    rd.err = err;
    FILE *fp = stdin;
    int orc =
        use_stdin ? STAGECAL_OK : open_bounded(path, FILEIO_CAP_POINTS, "points file", &fp, err);
    if (orc != STAGECAL_OK)
        return orc;
    if (csv_init(&csv, CSV_APPEND_NULL) != 0) {
        if (!use_stdin)
            fclose(fp);
        return error_set(err, STAGECAL_ENOMEM, "%s: out of memory", rd.source);
    }
    while (rd.rc == STAGECAL_OK && (len = getline(&line, &lcap, fp)) != -1) {
        rd.line++;
        if (csv_parse(&csv, line, (size_t)len, on_field, on_record, &rd) != (size_t)len &&
            rd.rc == STAGECAL_OK)
            rd.rc = error_set_at(err, STAGECAL_EDATA, rd.source, rd.line, 0, "%s",
                                 csv_strerror(csv_error(&csv)));
    }
    if (rd.rc == STAGECAL_OK && ferror(fp))
        rd.rc = error_set_at(err, STAGECAL_ENOINPUT, rd.source, rd.line, 0, "read error: %s",
                             strerror(errno));
    if (rd.rc == STAGECAL_OK)
        csv_fini(&csv, on_field, on_record, &rd);
    csv_free(&csv);
    free(line);
    if (!use_stdin)
        fclose(fp);
    if (rd.rc == STAGECAL_OK && !rd.header_done)
        rd.rc = error_set_at(err, STAGECAL_EDATA, rd.source, 0, 0,
                             "empty file (expected a header R,stages and rows)");
    if (rd.rc == STAGECAL_OK && rd.n == 0)
        rd.rc = error_set_at(err, STAGECAL_EDATA, rd.source, rd.line, 0,
                             "no data rows after the header");
    if (rd.rc != STAGECAL_OK) {
        free(rd.r);
        free(rd.f);
        free(rd.y);
        free(rd.s);
        return rd.rc;
    }
    data->n = rd.n;
    data->r = rd.r;
    data->stages = rd.y;
    if (rd.have[COL_F]) {
        data->f_load = rd.f;
    } else {
        free(rd.f);
    }
    if (rd.have[COL_SIGMA]) {
        data->sigma = rd.s;
    } else {
        free(rd.s);
    }
    return STAGECAL_OK;
}
