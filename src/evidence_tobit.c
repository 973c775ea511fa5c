/*
 * evidence_tobit.c — a window's trend with censored readings taken as censored observations
 * (stagecal_evidence_tobit, see stagecal/evidence.h): the Tobit maximum-likelihood fit of a
 * polynomial trend in time (Tobin 1958, "Estimation of relationships for limited dependent
 * variables", Econometrica 26(1):24-36) by the EM iteration of Schmee & Hahn 1979 ("A simple
 * method for regression analysis with censored data", Technometrics 21(4):417-432) with the
 * conditional variance in the σ step (the exact EM for a censored normal; both from memory).
 */
#include <math.h>
#include <stddef.h>
#include <stdlib.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_randist.h>

#include "internal.h"
#include "parallel.h"
#include "stagecal/evidence.h"

#define TOBIT_MAX_ITER 5000
#define TOBIT_TOL 1e-10

/* Inverse Mills ratio φ(w)/Q(w) (Q the upper tail), w for a far tail where Q underflows. */
static double mills(double w)
{
    double q = gsl_cdf_ugaussian_Q(w);
    return q > 1e-300 ? gsl_ran_ugaussian_pdf(w) / q : w;
}

struct tobit {
    size_t m, q;
    const double *p[3]; /* orthogonal basis columns (m each) */
    const double *y;    /* values, or the bounds of censored readings */
    const signed char *d;
};

/* Log-likelihood at (β, log σ). */
static double tobit_loglik(const struct tobit *tb, const double *beta, double lsig)
{
    double sig = exp(lsig), ll = 0;
    for (size_t i = 0; i < tb->m; i++) {
        double mu = 0;
        for (size_t j = 0; j < tb->q; j++)
            mu += beta[j] * tb->p[j][i];
        if (tb->d[i]) {
            double qv = gsl_cdf_ugaussian_Q(tb->d[i] * (tb->y[i] - mu) / sig);
            ll += log(qv > 1e-300 ? qv : 1e-300);
        } else {
            double z = (tb->y[i] - mu) / sig;
            ll += -0.5 * z * z - lsig;
        }
    }
    return ll;
}

/* [I⁻¹]₀₀ of the observed information in (β, log σ) by central second differences of the
 * log-likelihood at the estimate (steps: 10⁻³ of σ in the trend level, 10⁻³ in log σ); NAN
 * when the information is not positive definite. */
static double tobit_var0(const struct tobit *tb, const double *beta, double lsig, const double *g)
{
    size_t k = tb->q + 1;
    double h[4], x[4], H[16];
    for (size_t j = 0; j < tb->q; j++) {
        x[j] = beta[j];
        h[j] = 1e-3 * exp(lsig) / sqrt(g[j] / (double)tb->m);
    }
    x[tb->q] = lsig;
    h[tb->q] = 1e-3;
    double f0 = tobit_loglik(tb, x, x[tb->q]);
    for (size_t a = 0; a < k; a++)
        for (size_t b = a; b < k; b++) {
            double v[4], s = 0;
            for (int sa = -1; sa <= 1; sa += 2)
                for (int sb = -1; sb <= 1; sb += 2) {
                    if (a == b && sa != sb)
                        continue;
                    for (size_t c = 0; c < k; c++)
                        v[c] = x[c];
                    v[a] += sa * h[a];
                    v[b] += sb * h[b];
                    s += (a == b ? 1.0 : sa * sb) * tobit_loglik(tb, v, v[tb->q]);
                }
            double d2 = a == b ? (s - 2 * f0) / (4 * h[a] * h[a]) : s / (4 * h[a] * h[b]);
            H[a * k + b] = H[b * k + a] = -d2;
        }
    gsl_matrix_view hm = gsl_matrix_view_array(H, k, k);
    gsl_quiet q = gsl_quiet_begin();
    int st = gsl_linalg_cholesky_decomp1(&hm.matrix);
    double out = NAN;
    if (st == GSL_SUCCESS) {
        double e0[4] = {1, 0, 0, 0};
        gsl_vector_view ev = gsl_vector_view_array(e0, k);
        if (gsl_linalg_cholesky_svx(&hm.matrix, &ev.vector) == GSL_SUCCESS)
            out = e0[0];
    }
    gsl_quiet_end(q);
    return out;
}

int stagecal_evidence_tobit(const double *t, const double *y, const signed char *dir, size_t n,
                            size_t q, double *yc, double *trend, double *var_ratio,
                            stagecal_error *err)
{
    size_t m = 0, mu_n = 0, mc = 0;
    double tbar = 0;
    for (size_t i = 0; i < n; i++) {
        yc[i] = trend[i] = NAN;
        if (isfinite(y[i]) && isfinite(t[i])) {
            m++;
            tbar += (t[i] - tbar) / (double)m;
            mu_n += dir[i] == 0;
            mc += dir[i] != 0;
        }
    }
    if (q < 1 || q > 3)
        return error_set(err, STAGECAL_EINVAL, "censored window trend: %zu terms (expected 1-3)",
                         q);
    if (mu_n < 3 || mu_n < q + 1)
        return error_set(err, STAGECAL_EDATA,
                         "censored window trend needs at least %zu uncensored readings, got %zu",
                         q + 1 > 3 ? q + 1 : 3, mu_n);
    double *buf = malloc(6 * m * sizeof *buf);
    signed char *d = malloc(m);
    if (!buf || !d) {
        free(buf), free(d);
        return error_set(err, STAGECAL_ENOMEM, "out of memory (censored window trend)");
    }
    double *p0 = buf, *p1 = buf + m, *p2 = buf + 2 * m, *yy = buf + 3 * m, *ycm = buf + 4 * m,
           *vc = buf + 5 * m;
    double stt = 0, st3 = 0;
    for (size_t i = 0, k = 0; i < n; i++) {
        if (!(isfinite(y[i]) && isfinite(t[i])))
            continue;
        double u = t[i] - tbar;
        p0[k] = 1, p1[k] = u, yy[k] = y[i], d[k] = dir[i] > 0 ? 1 : dir[i] < 0 ? -1 : 0;
        stt += u * u, st3 += u * u * u;
        k++;
    }
    double c0 = stt / (double)m, c1 = stt > 0 ? st3 / stt : 0.0, s22 = 0;
    for (size_t k = 0; k < m; k++) {
        p2[k] = p1[k] * p1[k] - c0 - c1 * p1[k];
        s22 += p2[k] * p2[k];
    }
    /* the same terms the uncensored window mean would take (straight line without a spread
     * of times: the mean alone; a quadratic only when the times determine it) */
    if (!(stt > 0))
        q = 1;
    if (q == 3 && !(m >= 5 && s22 > 1e-12 * stt * stt / (double)m))
        q = 2;
    struct tobit tb = {m, q, {p0, p1, p2}, yy, d};
    double g[3], beta[3] = {0, 0, 0};
    for (size_t j = 0; j < q; j++) {
        g[j] = 0;
        for (size_t k = 0; k < m; k++)
            g[j] += tb.p[j][k] * tb.p[j][k];
    }
    /* start: the bounds taken as values */
    for (size_t k = 0; k < m; k++)
        ycm[k] = yy[k], vc[k] = 0;
    double sig = 0;
    int conv = 0;
    for (int it = 0; it < TOBIT_MAX_ITER && !conv; it++) {
        /* M step: least squares on the completed series (orthogonal columns), σ² from the
         * completed residuals plus the censored readings' conditional variances */
        double nb[3], ss = 0;
        for (size_t j = 0; j < q; j++) {
            double s = 0;
            for (size_t k = 0; k < m; k++)
                s += tb.p[j][k] * ycm[k];
            nb[j] = s / g[j];
        }
        for (size_t k = 0; k < m; k++) {
            double mu = 0;
            for (size_t j = 0; j < q; j++)
                mu += nb[j] * tb.p[j][k];
            ss += (ycm[k] - mu) * (ycm[k] - mu) + vc[k];
        }
        double ns = sqrt(ss / (double)m);
        if (it == 0 && !(ns > 0))
            ns = 1e-6 * (fabs(nb[0]) + 1e-12); /* exact values: any small σ starts */
        double dmax = fabs(ns - sig);
        for (size_t j = 0; j < q; j++) {
            double dj = fabs(nb[j] - beta[j]) * sqrt(g[j] / (double)m);
            dmax = dj > dmax ? dj : dmax;
            beta[j] = nb[j];
        }
        conv = it > 0 && dmax < TOBIT_TOL * ns;
        sig = ns;
        if (!(sig > 0))
            break;
        /* E step: a censored reading's conditional mean and variance given its bound */
        for (size_t k = 0; k < m; k++) {
            if (!d[k])
                continue;
            double mu = 0;
            for (size_t j = 0; j < q; j++)
                mu += beta[j] * tb.p[j][k];
            double w = d[k] * (yy[k] - mu) / sig, lam = mills(w);
            ycm[k] = mu + d[k] * sig * lam;
            vc[k] = sig * sig * fmax(0.0, 1 + w * lam - lam * lam);
        }
    }
    double v0 = conv && sig > 0 ? tobit_var0(&tb, beta, log(sig), g) : NAN;
    int rc = STAGECAL_OK;
    if (!(isfinite(v0) && v0 > 0))
        rc = error_set(
            err, STAGECAL_EDATA, "censored window trend: %s (%zu of %zu readings censored)",
            conv ? "the information is not positive definite" : "the EM iteration did not converge",
            mc, m);
    else {
        *var_ratio = fmax(1.0, v0 / (sig * sig / (double)m));
        for (size_t i = 0, k = 0; i < n; i++) {
            if (!(isfinite(y[i]) && isfinite(t[i])))
                continue;
            double mu = 0;
            for (size_t j = 0; j < q; j++)
                mu += beta[j] * tb.p[j][k];
            trend[i] = mu;
            yc[i] = ycm[k];
            k++;
        }
    }
    free(buf), free(d);
    return rc;
}
