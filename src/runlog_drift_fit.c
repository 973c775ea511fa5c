/*
 * runlog_drift_fit.c — the stage relation's drift fits (src/runlog_drift.c; declared in
 * runlog_internal.h): weighted least squares of a residual on a drift regressor with
 * per-stretch nuisance terms taken out within each stretch (the Frisch–Waugh–Lovell theorem:
 * Frisch, R. & Waugh, F. V. (1933), "Partial time regressions as compared with individual
 * trends", Econometrica 1, 387–401; Lovell, M. C. (1963), "Seasonal adjustment of economic
 * time series and multiple regression analysis", J. Amer. Statist. Assoc. 58, 993–1010; both
 * from memory), and the widening factor of the median-count fit. tests/test_runlog_drift_fit.c
 * checks both fits against GSL's general weighted least squares on the full design matrix.
 */
#include <math.h>
#include <stddef.h>

#include "runlog_internal.h"

/* Weighted regression of r on g with one intercept per group (rows of a group are
 * consecutive in win); d and its se scaled up by χ²/dof. 0 on success. */
int runlog_drift_within_fit(const double *n, const double *g, const double *w, const int32_t *win,
                            size_t m, double *d, double *se)
{
    double sxy = 0, sxx = 0, rss = 0;
    size_t nwin = 0;
    for (int pass = 0; pass < 2; pass++) {
        nwin = 0;
        for (size_t a = 0, e; a < m; a = e) {
            double sw = 0, sg = 0, sn = 0;
            for (e = a; e < m && win[e] == win[a]; e++)
                sw += w[e], sg += w[e] * g[e], sn += w[e] * n[e];
            for (size_t q = a; q < e; q++) {
                double dg = g[q] - sg / sw, dn = n[q] - sn / sw;
                if (pass == 0)
                    sxy += w[q] * dg * dn, sxx += w[q] * dg * dg;
                else
                    rss += w[q] * (dn - *d * dg) * (dn - *d * dg);
            }
            nwin++;
        }
        if (pass == 0) {
            if (!(sxx > 0) || m < nwin + 3)
                return -1;
            *d = sxy / sxx;
        }
    }
    double scale = rss / (double)(m - nwin - 1);
    *se = sqrt((scale > 1 ? scale : 1) / sxx);
    return isfinite(*d) && isfinite(*se) ? 0 : -1;
}

/* Weighted regression of r on g with, per group (rows consecutive in win), an intercept and
 * a slope on hx (a free error δ_s of the stretch's count, which moves a row's residual by
 * δ_s·∂X/∂N): both regressors taken out of r and g within each group (Frisch–Waugh), d and
 * its se scaled up by χ²/dof. Groups too short for the slope keep the intercept only.
 * Scratch: dgs, es (m each). */
int runlog_drift_free_fit(const double *n, const double *g, const double *hx, const double *w,
                          const int32_t *win, size_t m, double *d, double *se, double *dgs,
                          double *es)
{
    double sxy = 0, sxx = 0, rss = 0;
    size_t npar = 0;
    for (size_t a = 0, e; a < m; a = e) {
        double sw = 0, sg = 0, sn = 0, sh = 0;
        for (e = a; e < m && win[e] == win[a]; e++)
            sw += w[e], sg += w[e] * g[e], sn += w[e] * n[e], sh += w[e] * hx[e];
        double mg = sg / sw, mn = sn / sw, mh = sh / sw, hh = 0, hg = 0, hn = 0;
        for (size_t q = a; q < e; q++) {
            double dh = hx[q] - mh;
            hh += w[q] * dh * dh, hg += w[q] * dh * (g[q] - mg), hn += w[q] * dh * (n[q] - mn);
        }
        int slope = e - a >= 3 && hh > 0;
        double bg = slope ? hg / hh : 0, bn = slope ? hn / hh : 0;
        for (size_t q = a; q < e; q++) {
            double dh = hx[q] - mh;
            dgs[q] = g[q] - mg - bg * dh;
            es[q] = n[q] - mn - bn * dh;
            sxy += w[q] * dgs[q] * es[q], sxx += w[q] * dgs[q] * dgs[q];
        }
        npar += 1 + (size_t)slope;
    }
    if (!(sxx > 0) || m < npar + 3)
        return -1;
    *d = sxy / sxx;
    for (size_t q = 0; q < m; q++) {
        double eq = es[q] - *d * dgs[q];
        rss += w[q] * eq * eq;
    }
    double scale = rss / (double)(m - npar - 1);
    *se = sqrt((scale > 1 ? scale : 1) / sxx);
    return isfinite(*d) && isfinite(*se) ? 0 : -1;
}

/* How much the stretch counts' own error widens the stage relation's drift estimate: the
 * median count N_s of a stretch is itself off by δ_s, which moves each row's residual by
 * δ_s·∂X/∂N (hx), and across a batch ∂X/∂N changes with the pot much as a drift's g does
 * (near a pure distillate 1 − xD, and with it ∂X/∂N, grows through the run). The factor is
 * √(S_gg / S_gg|h): S_gg the within-stretch weighted sum of squares of g, S_gg|h what is left
 * of it once the per-stretch line in hx is taken out — the se of d in the model with a free
 * δ_s per stretch against the se with N_s taken as known (1 without collinearity; large when
 * a drift cannot be told from a different stretch count). */
double runlog_drift_collinear_factor(const double *g, const double *hx, const double *w,
                                     const int32_t *win, size_t m)
{
    double sgg = 0, sres = 0;
    for (size_t a = 0, e; a < m; a = e) {
        double sw = 0, mg = 0, mh = 0;
        for (e = a; e < m && win[e] == win[a]; e++)
            sw += w[e], mg += w[e] * g[e], mh += w[e] * hx[e];
        mg /= sw, mh /= sw;
        double gg = 0, gh = 0, hh = 0;
        for (size_t q = a; q < e; q++) {
            double dg = g[q] - mg, dh = hx[q] - mh;
            gg += w[q] * dg * dg, gh += w[q] * dg * dh, hh += w[q] * dh * dh;
        }
        sgg += gg;
        sres += hh > 0 ? gg - gh * gh / hh : gg;
    }
    return sres > 0 && sgg > 0 ? sqrt(sgg / sres) : INFINITY;
}
