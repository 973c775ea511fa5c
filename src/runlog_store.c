/*
 * runlog_store.c — storage of a run log: columnar arrays grown geometrically (×2), the
 * bounded findings list (see stagecal/runlog.h).
 */
#include <math.h>
#include <stdlib.h>

#include "runlog_internal.h"

/* ---- findings ---------------------------------------------------------------------- */

stagecal_findings *stagecal_findings_alloc(size_t max_items)
{
    stagecal_findings *f = calloc(1, sizeof *f);
    if (!f)
        return NULL;
    f->max_items = max_items ? max_items : 1;
    return f;
}

void stagecal_findings_free(stagecal_findings *f)
{
    if (!f)
        return;
    free(f->items);
    free(f);
}

stagecal_runlog_params stagecal_runlog_default_params(void)
{
    stagecal_runlog_params p = {.min_rows = 5,
                                .w_rise_sigmas = 3.0,
                                .max_findings = 1000,
                                .sha256 = 1,
                                .split_gap_s = 7200.0,
                                .split_gap_samples = 20.0,
                                .split_rise_frac = 0.10,
                                .split_rise_sigmas = 10.0,
                                .csv_separator = 0,
                                .infer = 1};
    return p;
}

/* ---- storage ----------------------------------------------------------------------- */

stagecal_runlog *stagecal_runlog_alloc(void)
{
    return calloc(1, sizeof(stagecal_runlog));
}

void stagecal_runlog_free(stagecal_runlog *log)
{
    if (!log)
        return;
    free(log->t_s);
    free(log->w_mol);
    free(log->xd);
    free(log->xb);
    free(log->xd_cens);
    free(log->xb_cens);
    free(log->r);
    free(log->r_set);
    free(log->u_r_set);
    free(log->v_mol_s);
    free(log->p_pa);
    free(log->t_top_k);
    free(log->t_pot_k);
    free(log->t_reflux_k);
    free(log->u_xd_inf);
    free(log->u_xb_inf);
    free(log->line);
    free(log->run);
    free(log->runs);
    free(log->files);
    free(log->sha256);
    free(log->checksum);
    free(log);
}

static int grow_doubles(double **a, size_t n, size_t cap)
{
    if (!*a)
        return 0; /* optional signal not present */
    double *p = realloc(*a, cap * sizeof *p);
    if (!p)
        return -1;
    for (size_t i = n; i < cap; i++)
        p[i] = NAN;
    *a = p;
    return 0;
}

int runlog_grow_rows(stagecal_runlog *log)
{
    size_t cap = log->cap ? 2 * log->cap : 64; /* doubling: small logs stay small */
    double **arr[] = {&log->t_s,     &log->w_mol,   &log->xd,       &log->xb,      &log->r,
                      &log->v_mol_s, &log->p_pa,    &log->t_top_k,  &log->t_pot_k, &log->t_reflux_k,
                      &log->r_set,   &log->u_r_set, &log->u_xd_inf, &log->u_xb_inf};
    for (size_t i = 0; i < sizeof arr / sizeof arr[0]; i++) {
        if (i < 5 && !*arr[i]) {
            *arr[i] = malloc(sizeof(double)); /* required signals always exist */
            if (!*arr[i])
                return -1;
        }
        if (grow_doubles(arr[i], log->n, cap) != 0)
            return -1;
    }
    unsigned char *c = realloc(log->xd_cens, cap);
    if (!c)
        return -1;
    log->xd_cens = c;
    c = realloc(log->xb_cens, cap);
    if (!c)
        return -1;
    log->xb_cens = c;
    uint32_t *l = realloc(log->line, cap * sizeof *l);
    if (!l)
        return -1;
    log->line = l;
    uint32_t *r = realloc(log->run, cap * sizeof *r);
    if (!r)
        return -1;
    log->run = r;
    log->cap = cap;
    return 0;
}

/* Shrinks every row array to the rows stored (cap = n): the doubling leaves up to half of
 * each array unused but written (NaN), which a caller that keeps the whole log (calibrate)
 * would otherwise hold through the chain. A failed shrink keeps the larger block. */
void runlog_shrink_rows(stagecal_runlog *log)
{
    size_t n = log->n ? log->n : 1;
    if (log->cap <= n)
        return;
    double **arr[] = {&log->t_s,     &log->w_mol,   &log->xd,       &log->xb,      &log->r,
                      &log->v_mol_s, &log->p_pa,    &log->t_top_k,  &log->t_pot_k, &log->t_reflux_k,
                      &log->r_set,   &log->u_r_set, &log->u_xd_inf, &log->u_xb_inf};
    for (size_t i = 0; i < sizeof arr / sizeof arr[0]; i++) {
        double *p = *arr[i] ? realloc(*arr[i], n * sizeof *p) : NULL;
        if (p)
            *arr[i] = p;
    }
    unsigned char *c = realloc(log->xd_cens, n);
    if (c)
        log->xd_cens = c;
    c = realloc(log->xb_cens, n);
    if (c)
        log->xb_cens = c;
    uint32_t *u = realloc(log->line, n * sizeof *u);
    if (u)
        log->line = u;
    u = realloc(log->run, n * sizeof *u);
    if (u)
        log->run = u;
    log->cap = n;
}

/* Allocates an optional signal's array (NaN for the rows already stored). */
int runlog_ensure_optional(stagecal_runlog *log, double **a)
{
    if (*a)
        return 0;
    size_t cap = log->cap ? log->cap : 1;
    *a = malloc(cap * sizeof **a);
    if (!*a)
        return -1;
    for (size_t i = 0; i < cap; i++)
        (*a)[i] = NAN;
    return 0;
}
