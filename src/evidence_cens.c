/*
 * evidence_cens.c — the windows a censored likelihood takes (stagecal_evidence_set.cens,
 * see stagecal/evidence.h): every window's readings with their censoring, also where the
 * censored xD readings leave too few values for the window's means.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "evidence_internal.h"
#include "internal.h"
#include "stagecal/evidence.h"

static unsigned char cens_bits(int c, unsigned below, unsigned above)
{
    return (unsigned char)(c == STAGECAL_CENSOR_BELOW   ? below
                           : c == STAGECAL_CENSOR_ABOVE ? above
                                                        : 0);
}

/* Window k as a window of the censored likelihood (set->cens, see evidence.h) into e, with
 * the window's own numbers (evidence_fill_cens takes those of its evidence entry later); 1
 * when it has at least 3 rows with both readings. xd_src: the (holdup-compensated) xD values. */
static int cens_window(const stagecal_runlog *log, const double *xd_src,
                       const stagecal_runlog_result *res, size_t k, size_t cap, double *s,
                       unsigned char *fl, stagecal_evidence *e)
{
    const stagecal_runlog_window *w = &res->windows[k];
    size_t nfin = 0, ms = 0;
    for (int pass = 0; pass < 2; pass++)
        for (size_t i = w->first, kf = 0; i <= w->last && ms < cap; i++) {
            double yd = log->xd_cens[i] ? log->xd[i] : xd_src[i], yb = log->xb[i];
            if ((res->flags[i] & STAGECAL_SAMPLE_OUTLIER) || !isfinite(yd) || !isfinite(yb))
                continue;
            if (pass == 0) {
                nfin++;
                continue;
            }
            if (nfin <= cap || kf * cap / nfin == ms) {
                s[ms] = log->t_s[i];
                s[cap + ms] = yd;
                s[2 * cap + ms] = yb;
                fl[ms] = cens_bits(log->xd_cens[i], STAGECAL_EVIDENCE_XD_BELOW,
                                   STAGECAL_EVIDENCE_XD_ABOVE) |
                         cens_bits(log->xb_cens[i], STAGECAL_EVIDENCE_XB_BELOW,
                                   STAGECAL_EVIDENCE_XB_ABOVE);
                ms++;
            }
            kf++;
        }
    if (ms < 3)
        return 0;
    memset(e, 0, sizeof *e);
    e->window = k;
    e->run = w->run;
    e->first = w->first;
    e->last = w->last;
    e->n_samples = w->last - w->first + 1;
    e->total_reflux = w->total_reflux;
    e->r = w->total_reflux ? INFINITY : w->r_median;
    e->t_mid_s = 0.5 * (log->t_s[w->first] + log->t_s[w->last]);
    e->xd = e->xb = NAN;
    double fsum = 0;
    size_t nf = 0;
    for (size_t i = w->first; i <= w->last; i++)
        if (isfinite(res->f_factor[i])) {
            fsum += res->f_factor[i];
            nf++;
        }
    if (nf * 2 >= e->n_samples && nf > 0) {
        e->has_load = 1;
        e->f_load = fsum / (double)nf;
    }
    e->stages_ok = 0;
    e->m = ms;
    e->s_t = s;
    e->s_xd = s + cap;
    e->s_xb = s + 2 * cap;
    e->s_cens = fl;
    return 1;
}

int evidence_collect_cens(const stagecal_runlog *log, const double *xd_src,
                          const stagecal_runlog_result *res, size_t cap, stagecal_evidence_set *set,
                          stagecal_error *err)
{
    size_t nw = res->nwindows;
    if (nw == 0)
        return STAGECAL_OK;
    set->cens = calloc(nw, sizeof *set->cens);
    set->cens_samples = malloc(nw * 3 * cap * sizeof *set->cens_samples);
    set->cens_flags = malloc(nw * cap);
    if (!set->cens || !set->cens_samples || !set->cens_flags)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t k = 0; k < nw; k++)
        if (cens_window(log, xd_src, res, k, cap, set->cens_samples + 3 * cap * set->ncens,
                        set->cens_flags + cap * set->ncens, &set->cens[set->ncens]))
            set->ncens++;
    return STAGECAL_OK;
}

void evidence_fill_cens(stagecal_evidence_set *set)
{
    for (size_t i = 0; i < set->ncens; i++) {
        stagecal_evidence *e = &set->cens[i];
        const stagecal_evidence *reg = stagecal_evidence_find(set, e->window);
        if (!reg)
            continue;
        size_t m = e->m;
        const double *st = e->s_t, *sd = e->s_xd, *sb = e->s_xb;
        const unsigned char *fl = e->s_cens;
        *e = *reg;
        e->stages_ok = 0;
        e->m = m;
        e->s_t = st;
        e->s_xd = sd;
        e->s_xb = sb;
        e->s_cens = fl;
    }
}
