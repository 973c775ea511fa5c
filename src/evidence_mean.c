/*
 * evidence_mean.c — a window's autocorrelation-aware mean and its standard error
 * (stagecal_evidence_mean, stagecal_evidence_mean_rho) and the pooling of the lag-1
 * autocorrelation over the windows (stagecal_evidence_pool_rho); see evidence.c and
 * stagecal/evidence.h.
 */
#include "stagecal/evidence.h"

#include <math.h>
#include <stddef.h>

#include "evidence_internal.h"
#include "internal.h"

#define RHO_MAX EVIDENCE_RHO_MAX

/* n_eff of m AR(1) samples with lag-1 autocorrelation rho, at least 1. */
static double ar1_neff(size_t m, double rho)
{
    double neff = (double)m * (1 - rho) / (1 + rho);
    return neff < 1 ? 1 : neff;
}

int stagecal_evidence_mean(const double *t, const double *y, size_t n, double u_floor, double *mean,
                           double *se, double *n_eff, stagecal_error *err)
{
    double rho;
    size_t m;
    int rc = stagecal_evidence_mean_rho(t, y, n, u_floor, mean, se, &rho, &m, err);
    if (rc == STAGECAL_OK && n_eff)
        *n_eff = ar1_neff(m, rho);
    return rc;
}

int stagecal_evidence_mean_rho(const double *t, const double *y, size_t n, double u_floor,
                               double *mean, double *se, double *rho_out, size_t *m_out,
                               stagecal_error *err)
{
    size_t m = 0;
    double tbar = 0, ybar = 0;
    for (size_t i = 0; i < n; i++) {
        if (isfinite(y[i]) && isfinite(t[i])) {
            m++;
            tbar += (t[i] - tbar) / (double)m;
            ybar += (y[i] - ybar) / (double)m;
        }
    }
    if (m < 3)
        return error_set(err, STAGECAL_EINVAL,
                         "window mean needs at least 3 finite samples, got %zu", m);
    /* Straight-line detrend in time (centred, so the intercept is the mean). */
    double stt = 0, sty = 0;
    for (size_t i = 0; i < n; i++) {
        if (isfinite(y[i]) && isfinite(t[i])) {
            stt += (t[i] - tbar) * (t[i] - tbar);
            sty += (t[i] - tbar) * (y[i] - ybar);
        }
    }
    double slope = stt > 0 ? sty / stt : 0.0;
    double ss = 0, sl = 0, prev = NAN;
    for (size_t i = 0; i < n; i++) {
        if (!(isfinite(y[i]) && isfinite(t[i])))
            continue;
        double e = y[i] - ybar - slope * (t[i] - tbar);
        ss += e * e;
        if (isfinite(prev))
            sl += e * prev;
        prev = e;
    }
    double rho = ss > 0 ? sl / ss : 0.0;
    if (rho < 0)
        rho = 0;
    if (rho > RHO_MAX)
        rho = RHO_MAX;
    double s = sqrt(ss / (double)(m - 2));
    if (s < u_floor)
        s = u_floor;
    *mean = ybar;
    *se = s / sqrt(ar1_neff(m, rho));
    if (rho_out)
        *rho_out = rho;
    if (m_out)
        *m_out = m;
    return STAGECAL_OK;
}

/* One analyser's series (rho, m and u point at the xD or the xB members of window k):
 * the mean ρ weighted by lag pairs, then each standard error rescaled to its n_eff. */
struct series {
    double *rho, *u;
    size_t m;
};

static struct series series_of(stagecal_evidence *e, int pot)
{
    return pot ? (struct series){&e->rho_xb, &e->u_xb, e->m_xb}
               : (struct series){&e->rho_xd, &e->u_xd, e->m_xd};
}

void stagecal_evidence_pool_rho(stagecal_evidence *ev, size_t nev)
{
    for (int pot = 0; ev && pot < 2; pot++) {
        double wsum = 0, rsum = 0;
        for (size_t k = 0; k < nev; k++) {
            struct series sr = series_of(&ev[k], pot);
            if (sr.m >= 2) {
                wsum += (double)(sr.m - 1);
                rsum += (double)(sr.m - 1) * *sr.rho;
            }
        }
        if (!(wsum > 0))
            continue;
        double pooled = rsum / wsum;
        for (size_t k = 0; k < nev; k++) {
            struct series sr = series_of(&ev[k], pot);
            if (sr.m < 2)
                continue;
            /* se = s/√n_eff: the same s with the pooled ρ's n_eff */
            *sr.u *= sqrt(ar1_neff(sr.m, *sr.rho) / ar1_neff(sr.m, pooled));
            *sr.rho = pooled;
        }
    }
}
