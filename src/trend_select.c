/*
 * trend_select.c — which fits of a column's history are points of its trend: a fit that
 * re-uses a run log of a newer fit is set aside, so that no log is counted twice.
 *
 * Why: two fits on the same run logs share those logs' measurement errors and their
 * run-to-run variation, so their stage estimates are correlated. The weighted trend and
 * the EWMA chart treat points as independent; counting a log twice over-weights its
 * month and makes the trend interval and the chart limits too narrow. The newest re-fit
 * of the same data is taken as the engineer's current view (docs/hetp-trend.md; the
 * rule itself is common practice, no source).
 *
 * Method: sort the fits newest first (time of fit, ties by the writer's file names, see
 * include/stagecal/trend.h), then a greedy pass: a fit is accepted when none of its run
 * logs (inputs with rows > 0, by SHA-256) was read by an accepted fit. Workload: tens to
 * a few hundred fits with a handful of inputs each, so the pass compares hashes pairwise
 * (O(n²·k²) string compares, well under a millisecond) rather than building an index.
 */
#include <stdlib.h>
#include <string.h>

#include "stagecal/trend.h"
#include "stagecal/units.h"
#include "internal.h"

/* Longest copy number of a writer's name "STEM-N" taken as a number (fits in unsigned
 * long everywhere); longer digit runs are plain name text. */
#define COPY_DIGITS_MAX 9

/* The sort key of one fit. */
struct fit_key {
    double t_s;         /* time of fit [s since 1970 UTC] */
    const char *base;   /* file name without directories, NULL when names are not given */
    size_t stem_len;    /* bytes of base before "-N" and ".json" */
    unsigned long copy; /* N of "STEM-N", 1 without such a suffix */
    size_t index;       /* position in the caller's array */
};

/* Fills stem_len and copy from the file name base. */
static void split_name(struct fit_key *k)
{
    const char *b = k->base;
    size_t len = strlen(b);
    if (len > 5 && strcmp(b + len - 5, ".json") == 0)
        len -= 5;
    k->stem_len = len;
    k->copy = 1;
    size_t d = len;
    while (d > 0 && b[d - 1] >= '0' && b[d - 1] <= '9')
        d--;
    size_t digits = len - d;
    if (digits == 0 || digits > COPY_DIGITS_MAX || d < 2 || b[d - 1] != '-' || b[d] == '0')
        return;
    unsigned long n = 0;
    for (size_t i = d; i < len; i++)
        n = 10 * n + (unsigned long)(b[i] - '0');
    k->stem_len = d - 1;
    k->copy = n;
}

/* Orders newest first: later time, then (with names) the greater stem, the higher copy,
 * the greater name in bytes; last the higher index. */
static int cmp_newest_first(const void *pa, const void *pb)
{
    const struct fit_key *a = pa, *b = pb;
    if (a->t_s != b->t_s)
        return a->t_s > b->t_s ? -1 : 1;
    if (a->base && b->base) {
        size_t m = a->stem_len < b->stem_len ? a->stem_len : b->stem_len;
        int c = memcmp(a->base, b->base, m);
        if (c == 0 && a->stem_len != b->stem_len)
            c = a->stem_len < b->stem_len ? -1 : 1;
        if (c != 0)
            return -c;
        if (a->copy != b->copy)
            return a->copy > b->copy ? -1 : 1;
        c = strcmp(a->base, b->base);
        if (c != 0)
            return -c;
    }
    if (a->index != b->index)
        return a->index > b->index ? -1 : 1;
    return 0;
}

/* Index into a's inputs of its first run log that b also read, or a->n_inputs. */
static size_t first_shared_log(const stagecal_model *a, const stagecal_model *b)
{
    for (size_t i = 0; i < a->n_inputs; i++) {
        if (a->inputs[i].rows == 0)
            continue;
        for (size_t j = 0; j < b->n_inputs; j++)
            if (b->inputs[j].rows > 0 && strcmp(a->inputs[i].sha256, b->inputs[j].sha256) == 0)
                return i;
    }
    return a->n_inputs;
}

int stagecal_trend_select(const stagecal_model *models, const char *const *names, size_t n,
                          stagecal_trend_selection *out, size_t *n_kept, stagecal_error *err)
{
    if (n_kept)
        *n_kept = 0;
    if (n == 0)
        return STAGECAL_OK;
    struct fit_key *keys = malloc(n * sizeof *keys);
    size_t *accepted = malloc(n * sizeof *accepted);
    if (!keys || !accepted) {
        free(keys);
        free(accepted);
        return error_set(err, STAGECAL_ENOMEM, "out of memory ordering %zu fits", n);
    }
    for (size_t i = 0; i < n; i++) {
        struct fit_key *k = &keys[i];
        k->index = i;
        k->base = NULL;
        if (stagecal_units_parse_iso8601(models[i].fitted_utc, &k->t_s) != 0) {
            int rc = error_set(err, STAGECAL_EDATA,
                               "%s: time of fit '%s' is not a timestamp (expected "
                               "YYYY-MM-DDTHH:MM:SSZ)",
                               names ? names[i] : models[i].column_id, models[i].fitted_utc);
            free(keys);
            free(accepted);
            return rc;
        }
        if (names) {
            const char *slash = strrchr(names[i], '/');
            k->base = slash ? slash + 1 : names[i];
            split_name(k);
        }
    }
    qsort(keys, n, sizeof *keys, cmp_newest_first);

    size_t n_acc = 0;
    for (size_t r = 0; r < n; r++) {
        size_t i = keys[r].index;
        out[i].by = -1;
        out[i].input = 0;
        /* accepted[] is newest first, so the first overlap found is the newest one */
        for (size_t a = 0; a < n_acc; a++) {
            size_t s = first_shared_log(&models[i], &models[accepted[a]]);
            if (s < models[i].n_inputs) {
                out[i].by = (long)accepted[a];
                out[i].input = s;
                break;
            }
        }
        if (out[i].by < 0)
            accepted[n_acc++] = i;
    }
    if (n_kept)
        *n_kept = n_acc;
    free(keys);
    free(accepted);
    return STAGECAL_OK;
}
