/*
 * regress_boot.c — bootstrap of the stage-space fit: case, residual or run resampling,
 * percentile intervals (Efron & Tibshirani 1993, ch. 6, 13); RNG gsl_rng_mt19937 with the
 * caller's seed.
 *
 * Run resampling (the cluster bootstrap; Davison, A. C. & Hinkley, D. V. 1997, Bootstrap
 * Methods and their Application, §3.8; Field, C. A. & Welsh, A. H. 2007, "Bootstrapping
 * clustered data", J. R. Stat. Soc. B 69, 369–390): the G clusters of params.cluster are
 * numbered in order of first appearance; a resample draws G of them with replacement and
 * keeps every point of each, in the drawn order, so its size varies when the clusters do.
 * With one point per cluster, cluster g is point g and the draws are case resampling's, the
 * same doubles.
 *
 * Two cores (params.threads): the one RNG draws the resamples' indices in the calling thread,
 * in the order a one-thread loop draws them (resample by resample, point or cluster by point
 * or cluster), a chunk of resamples at a time; the chunk's refits then run on the threads
 * (parallel.h), each keeping its θ and status at its resample's index; the estimates are
 * gathered in resample order. So every resample is the same data set and the same fit for any
 * number of threads, and the intervals are the same doubles.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "cr2.h"
#include "internal.h"
#include "parallel.h"
#include "regress_internal.h"

/* Indices drawn ahead of the fits, at most (2 MB of them): the chunk's resamples */
#define BOOT_CHUNK_INDICES ((size_t)1 << 18)

struct boot_job {
    const pts *d;
    const stagecal_regress_params *bp; /* the refits' parameters */
    const stagecal_regress_result *res;
    stagecal_boot_kind kind; /* the resampling used */
    size_t nd;               /* draws per resample: n, or G for run resampling */
    size_t nmax;             /* points of the largest resample: n, or G × the largest cluster */
    const size_t *start; /* run resampling: cluster g's points are mem[start[g] .. start[g+1]) */
    const size_t *mem;
    double infl;       /* residual resampling's inflation sqrt(n/(n − p)) */
    const double *fit; /* residual resampling: the full-data fitted values, n */
    const size_t *idx; /* chunk × nd drawn indices */
    double *scratch;   /* 6·nmax per thread */
    double *theta;     /* chunk × p estimates */
    int *status;       /* chunk refit statuses */
};

/* Resample `item` of the chunk: its data set from the drawn indices, then its refit. */
static int boot_one(void *ctx, size_t item, size_t worker, stagecal_error *err)
{
    struct boot_job *bj = ctx;
    const pts *d = bj->d;
    const stagecal_regress_result *res = bj->res;
    size_t n = d->n, p = d->form->p, nm = bj->nmax;
    const size_t *idx = bj->idx + item * bj->nd;
    double *r = bj->scratch + worker * 6 * nm, *f = r + nm, *y = f + nm, *w = y + nm,
           *wrob = w + nm, *wtot = wrob + nm;
    (void)err;
    if (bj->kind == STAGECAL_BOOT_RUN) { /* every point of each drawn cluster, in order */
        n = 0;
        for (size_t k = 0; k < bj->nd; k++)
            for (size_t q = bj->start[idx[k]]; q < bj->start[idx[k] + 1]; q++, n++) {
                size_t j = bj->mem[q];
                r[n] = d->r[j];
                f[n] = pt_f(d, j);
                y[n] = d->y[j];
                w[n] = d->w[j];
            }
    }
    for (size_t i = 0; bj->kind != STAGECAL_BOOT_RUN && i < n; i++) {
        size_t j = idx[i];
        if (bj->kind == STAGECAL_BOOT_CASE) {
            r[i] = d->r[j];
            f[i] = pt_f(d, j);
            y[i] = d->y[j];
            w[i] = d->w[j];
        } else {
            double e_std = sqrt(d->w[j]) * (d->y[j] - bj->fit[j]) * bj->infl;
            r[i] = d->r[i];
            f[i] = pt_f(d, i);
            y[i] = bj->fit[i] + e_std / sqrt(d->w[i]);
            w[i] = d->w[i];
        }
    }
    pts bd = *d;
    bd.n = n;
    bd.r = r;
    bd.f = d->f ? f : NULL;
    bd.y = y;
    bd.w = w;
    double scale;
    size_t it;
    fitinfo fi;
    /* Start from the full-data estimate: resamples lie near it. */
    double th[STAGECAL_FORM_MAXP];
    bj->status[item] =
        regress_estimate(&bd, bj->bp, res->theta, th, &fi, wrob, wtot, &scale, &it, NULL);
    memcpy(bj->theta + item * p, th, p * sizeof *th);
    return STAGECAL_OK; /* the status is read in resample order */
}

/* Run resampling's clusters: G (0 when there are too few to resample, or none), cluster g's
 * points mem[start[g] .. start[g + 1]) in the data's order, the largest cluster's size. */
static size_t boot_clusters(const pts *d, const stagecal_regress_params *prm, size_t *cl,
                            size_t *start, size_t *mem, size_t *largest)
{
    size_t n = d->n, G = prm->cluster ? cr2_clusters(prm->cluster, n, cl) : 0;
    if (G < STAGECAL_CR2_MIN_CLUSTERS)
        return 0;
    memset(start, 0, (G + 1) * sizeof *start);
    for (size_t i = 0; i < n; i++)
        start[cl[i] + 1]++;
    *largest = 0;
    for (size_t g = 0; g < G; g++) {
        if (start[g + 1] > *largest)
            *largest = start[g + 1];
        start[g + 1] += start[g];
    }
    for (size_t i = 0; i < n; i++) /* a counting sort: start[g] runs to cluster g's end */
        mem[start[cl[i]]++] = i;
    for (size_t g = G; g > 0; g--) /* start[g] now holds cluster g's end: shift back */
        start[g] = start[g - 1];
    start[0] = 0;
    return G;
}

int regress_bootstrap(const pts *d, const stagecal_regress_params *prm,
                      stagecal_regress_result *res, stagecal_error *err)
{
    size_t n = d->n, p = d->form->p, B = prm->bootstrap, nth = prm->threads;
    int rc = STAGECAL_OK;
    if (nth > 64)
        nth = 64;
    /* run resampling: the clusters, or case resampling when there are too few */
    stagecal_boot_kind kind = prm->boot_kind;
    size_t G = 0, largest = 0, *cbuf = NULL;
    if (kind == STAGECAL_BOOT_RUN) {
        if (!(cbuf = malloc((3 * n + 1) * sizeof *cbuf)))
            return error_set(err, STAGECAL_ENOMEM, "regress: out of memory for the clusters");
        G = boot_clusters(d, prm, cbuf, cbuf + n, cbuf + 2 * n + 1, &largest);
        if (G == 0)
            kind = STAGECAL_BOOT_CASE;
    }
    res->boot_kind = kind;
    res->boot_clusters = G;
    size_t nd = kind == STAGECAL_BOOT_RUN ? G : n,
           nmax = kind == STAGECAL_BOOT_RUN ? G * largest : n;
    size_t chunk = nd > 0 && BOOT_CHUNK_INDICES / nd > 0 ? BOOT_CHUNK_INDICES / nd : 1;
    if (chunk > B)
        chunk = B;
    double *buf = malloc(((nth + 1) * 6 * nmax + B * p + B + chunk * p + n) * sizeof *buf);
    size_t *idx = malloc((chunk * nd > 0 ? chunk * nd : 1) * sizeof *idx);
    int *status = malloc((chunk ? chunk : 1) * sizeof *status);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    if (!buf || !idx || !status || !rng) {
        free(buf);
        free(idx);
        free(status);
        free(cbuf);
        gsl_rng_free(rng);
        return error_set(err, STAGECAL_ENOMEM, "regress: out of memory for %zu resamples", B);
    }
    double *scratch = buf, *thetas = scratch + (nth + 1) * 6 * nmax, *col = thetas + B * p,
           *cth = col + B, *fit = cth + chunk * p;
    /* the full-data fit at every point, once (residual resampling reads it B·n times) */
    for (size_t i = 0; kind == STAGECAL_BOOT_RESIDUAL && i < n; i++)
        stagecal_form_eval(d->form, res->theta, d->r[i], pt_f(d, i), &fit[i], NULL);
    gsl_rng_set(rng, prm->seed);
    stagecal_regress_params bp = *prm;
    bp.theta0 = NULL;
    /* Resample estimates feed percentiles: boot_xtol is ample, and waiting for the
     * rounding-level stall of the full-accuracy fit would dominate the cost. */
    bp.xtol = prm->boot_xtol;
    bp.gtol = prm->boot_xtol;
    bp.stall_iter = 2;
    bp.polish_steps = 0;
    /* Standardised residuals, inflated by sqrt(n/(n−p)) so that their variance matches
     * σ² (Davison & Hinkley 1997, §6.2.3; leverage adjustment omitted). */
    struct boot_job bj = {d,
                          &bp,
                          res,
                          kind,
                          nd,
                          nmax,
                          cbuf ? cbuf + n : NULL,
                          cbuf ? cbuf + 2 * n + 1 : NULL,
                          sqrt((double)n / (double)(n - p)),
                          fit,
                          idx,
                          scratch,
                          cth,
                          status};
    size_t ok = 0;
    for (size_t b0 = 0; b0 < B; b0 += chunk) {
        size_t m = B - b0 < chunk ? B - b0 : chunk;
        /* the draws of resamples b0 .. b0 + m − 1, in the one-thread order */
        for (size_t k = 0; k < m * nd; k++)
            idx[k] = gsl_rng_uniform_int(rng, nd);
        parallel_for(m, nth, boot_one, &bj, NULL);
        for (size_t k = 0; k < m; k++) {
            if (status[k] == STAGECAL_ENOMEM) {
                rc = error_set(err, STAGECAL_ENOMEM, "regress: out of memory in the bootstrap");
                goto done;
            }
            if (status[k] != STAGECAL_OK)
                continue;
            memcpy(thetas + ok * p, cth + k * p, p * sizeof *thetas);
            ok++;
        }
    }
    res->boot_ok = ok;
    if (ok < 2) {
        rc = error_set(err, STAGECAL_EDATA,
                       "regress: bootstrap: only %zu of %zu resamples could be fitted", ok, B);
        goto done;
    }
    for (size_t k = 0; k < p; k++) {
        for (size_t b = 0; b < ok; b++)
            col[b] = thetas[b * p + k];
        res->boot_se[k] = gsl_stats_sd(col, 1, ok);
        gsl_sort(col, 1, ok);
        res->boot_low[k] = gsl_stats_quantile_from_sorted_data(col, 1, ok, 0.5 - 0.5 * prm->level);
        res->boot_high[k] = gsl_stats_quantile_from_sorted_data(col, 1, ok, 0.5 + 0.5 * prm->level);
    }
done:
    free(buf);
    free(cbuf);
    free(idx);
    free(status);
    gsl_rng_free(rng);
    return rc;
}
