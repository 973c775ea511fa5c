/*
 * evidence_stats.c — the window statistics (stagecal_evidence_window_stats,
 * stagecal_evidence_noise_sd; see stagecal/evidence.h): the local quadratic smoother as a
 * matrix, the moments of its residuals under an exponential noise correlation, and the
 * lag-1 autocorrelation pooled per analyser over the windows (split from evidence.c).
 */
#include "stagecal/evidence.h"

#include <gsl/gsl_blas.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "evidence_internal.h"
#include "internal.h"

#define RHO_MAX EVIDENCE_RHO_MAX

/* The local quadratic smoother as a matrix (Savitzky & Golay, Anal. Chem. 36 (1964) 1627,
 * here on irregular times — citation from memory): row j of S (m×m, row-major) holds the
 * weights that give the value at t[j] of the least-squares quadratic through the
 * SMOOTH_POINTS samples nearest j (fewer at hand → all of them), so smoothed = S·y. One
 * quadratic over a long window misses a batch pot's curving trajectory; a local one follows
 * it while still averaging the analyser noise. As a matrix it also gives the window
 * statistics that belong to this estimator (stagecal_evidence_window_stats). Weights from
 * the normal equations on a centred, scaled time (Cholesky, GSL). Returns 0, or −1 when m
 * < 3 or the times do not determine a quadratic (repeated times). The same with local
 * polynomials of degree deg (2 to 4) for the noise estimate's fallback below. */
static int smoother_matrix_deg(const double *t, size_t m, int deg, double *S)
{
    size_t k = m < SMOOTH_POINTS ? m : SMOOTH_POINTS, d = (size_t)deg + 1;
    if (m < 3 || k < d)
        return -1;
    memset(S, 0, m * m * sizeof *S);
    for (size_t j = 0; j < m; j++) {
        size_t lo = j >= k / 2 ? j - k / 2 : 0;
        if (lo + k > m)
            lo = m - k;
        double tb = t[j], ts = 0, xtx[25] = {0}, z[5] = {1, 0, 0, 0, 0};
        for (size_t i = lo; i < lo + k; i++)
            ts = fmax(ts, fabs(t[i] - tb));
        if (!(ts > 0))
            return -1;
        for (size_t i = lo; i < lo + k; i++) {
            double u = (t[i] - tb) / ts, x[5] = {1, u, u * u, u * u * u, u * u * u * u};
            for (size_t a = 0; a < d; a++)
                for (size_t b = 0; b < d; b++)
                    xtx[d * a + b] += x[a] * x[b];
        }
        /* the fitted value at u = 0 is e1ᵀ(XᵀX)⁻¹Xᵀy: weights X·z with (XᵀX) z = e1 */
        gsl_matrix_view A = gsl_matrix_view_array(xtx, d, d);
        gsl_vector_view zv = gsl_vector_view_array(z, d);
        if (gsl_linalg_cholesky_decomp1(&A.matrix) != GSL_SUCCESS ||
            gsl_linalg_cholesky_svx(&A.matrix, &zv.vector) != GSL_SUCCESS)
            return -1;
        for (size_t i = lo; i < lo + k; i++) {
            double u = (t[i] - tb) / ts, v = 0, pw = 1;
            for (size_t a = 0; a < d; a++, pw *= u)
                v += z[a] * pw;
            S[j * m + i] = v;
        }
    }
    return 0;
}

/* The local quadratic smoother (degree 2), the one of the stage count. */
static int smoother_matrix(const double *t, size_t m, double *S)
{
    return smoother_matrix_deg(t, m, 2, S);
}

/* out = S·y for the m×m smoother S. */
static void smooth_apply(const double *S, const double *y, size_t m, double *out)
{
    for (size_t j = 0; j < m; j++) {
        double v = 0;
        for (size_t i = 0; i < m; i++)
            v += S[j * m + i] * y[i];
        out[j] = v;
    }
}

/* ---- window statistics from the smoother's residuals ------------------------------- */

/* Fewest carried samples for the smoother's statistics (3 residual degrees of freedom). */
#define STATS_MIN 6

/* One window's samples of one analyser for the statistics below. */
struct wseries {
    const double *t, *y;
    size_t m;
    double v, l;  /* Σ r_j², Σ r_j r_{j+1} of the smoother's residuals r = (I − S) y */
    double *band; /* the smoother's nonzero weights: row j's SMOOTH_POINTS (fewer when m is
                   * smaller) from column band_lo(j) on (NULL: not kept) */
};

/* The first column of row j's local fit among m samples fitted k at a time (as in
 * smoother_matrix_deg). */
static size_t band_lo(size_t j, size_t m, size_t k)
{
    size_t lo = j >= k / 2 ? j - k / 2 : 0;
    return lo + k > m ? m - k : lo;
}

/* Noise correlation of the exponential (continuous-time AR(1)) model between times a and b:
 * rho per dt_ref (0: white noise). */
static double corr(double rho, double dt_ref, double a, double b)
{
    if (a == b)
        return 1;
    return rho > 0 ? pow(rho, fabs(a - b) / dt_ref) : 0;
}

/* E[Σ r²]/σ² and E[Σ r_j r_{j+1}]/σ² of the smoother's residuals under correlation rho:
 * the trace and first superdiagonal sum of (I − S) R (I − S)ᵀ. Scratch: 3·m² doubles. */
static int resid_moments(const struct wseries *w, int deg, double rho, double dt_ref,
                         double *scratch, double *A, double *B)
{
    size_t m = w->m;
    double *M = scratch, *R = M + m * m, *T = R + m * m;
    if (smoother_matrix_deg(w->t, m, deg, M))
        return -1;
    for (size_t i = 0; i < m; i++)
        for (size_t j = 0; j < m; j++) {
            M[i * m + j] = (i == j) - M[i * m + j];
            R[i * m + j] = corr(rho, dt_ref, w->t[i], w->t[j]);
        }
    gsl_matrix_view Mv = gsl_matrix_view_array(M, m, m), Rv = gsl_matrix_view_array(R, m, m),
                    Tv = gsl_matrix_view_array(T, m, m);
    /* T = M R, then R = T Mᵀ */
    gsl_blas_dgemm(CblasNoTrans, CblasNoTrans, 1.0, &Mv.matrix, &Rv.matrix, 0.0, &Tv.matrix);
    gsl_blas_dgemm(CblasNoTrans, CblasTrans, 1.0, &Tv.matrix, &Mv.matrix, 0.0, &Rv.matrix);
    *A = 0;
    *B = 0;
    for (size_t j = 0; j < m; j++) {
        *A += R[j * m + j];
        if (j + 1 < m)
            *B += R[j * m + j + 1];
    }
    return 0;
}

/* resid_moments of the degree-2 smoother from the window's kept band, the same doubles: the
 * pooled autocorrelation's root search evaluates every window a dozen times, and the
 * smoother does not depend on rho. Operation for operation what resid_moments does with
 * GSL's reference BLAS (gslcblas: each element of a product summed in the order of the
 * inner index from 0, a zero factor of the left matrix skipped in T = M R), less the work
 * that is not needed: S rebuilt, R's lower triangle (the correlation is symmetric in the
 * two times, fabs(a − b) = fabs(b − a)), and T Mᵀ off its diagonal and first
 * superdiagonal, the only elements the moments read. Checked against resid_moments on every
 * call of the 5·10^5-row bench_calibrate log, the demo logs and test_evidence/test_calibrate
 * (A and B identical bit for bit). Scratch: 2·m² doubles. */
static void resid_moments_band(const struct wseries *w, double rho, double dt_ref, double *scratch,
                               double *A, double *B)
{
    size_t m = w->m, k = m < SMOOTH_POINTS ? m : SMOOTH_POINTS;
    double *R = scratch, *T = R + m * m;
    /* corr's pow, remembered per lag j − i: evenly logged samples repeat the same exponent
     * along each diagonal (the same arguments, so the same double) */
    double lag_e[EV_MAX_SMOOTH], lag_c[EV_MAX_SMOOTH];
    for (size_t d = 0; d < m; d++)
        lag_e[d] = -1.0; /* no exponent is negative */
    for (size_t i = 0; i < m; i++) {
        R[i * m + i] = corr(rho, dt_ref, w->t[i], w->t[i]);
        for (size_t j = i + 1; j < m; j++) {
            double a = w->t[i], b = w->t[j], c;
            if (a == b || !(rho > 0)) {
                c = corr(rho, dt_ref, a, b);
            } else {
                double e = fabs(a - b) / dt_ref; /* as corr computes it */
                if (e != lag_e[j - i]) {
                    lag_e[j - i] = e;
                    lag_c[j - i] = pow(rho, e);
                }
                c = lag_c[j - i];
            }
            R[i * m + j] = R[j * m + i] = c;
        }
    }
    /* T = M R with M = I − S, S zero off the band */
    for (size_t i = 0; i < m; i++) {
        size_t lo = band_lo(i, m, k);
        double *ti = T + i * m;
        for (size_t j = 0; j < m; j++)
            ti[j] = 0.0;
        for (size_t c = 0; c < k; c++) {
            double mik = (double)(i == lo + c) - w->band[i * k + c];
            if (mik == 0.0)
                continue;
            const double *rk = R + (lo + c) * m;
            for (size_t j = 0; j < m; j++)
                ti[j] += mik * rk[j];
        }
    }
    /* (T Mᵀ)_jj and (T Mᵀ)_j,j+1 over every column (zero products off the band included) */
    *A = 0;
    *B = 0;
    for (size_t j = 0; j < m; j++) {
        for (size_t r = j; r <= j + 1 && r < m; r++) {
            size_t lo = band_lo(r, m, k);
            double v = 0.0;
            for (size_t c = 0; c < m; c++) {
                double mrc = (c >= lo && c < lo + k) ? (double)(r == c) - w->band[r * k + c - lo]
                                                     : (double)(r == c) - 0.0;
                v += T[j * m + c] * mrc;
            }
            v = 0.0 + 1.0 * v; /* the product's C = β·C + α·temp, β = 0, α = 1 */
            if (r == j)
                *A += v;
            else
                *B += v;
        }
    }
}

/* resid_moments for the pooled root search: from the band when the window kept one. */
static int resid_moments2(const struct wseries *w, double rho, double dt_ref, double *scratch,
                          double *A, double *B)
{
    if (!w->band)
        return resid_moments(w, 2, rho, dt_ref, scratch, A, B);
    resid_moments_band(w, rho, dt_ref, scratch, A, B);
    return 0;
}

struct pool {
    const struct wseries *w;
    size_t n;
    double dt_ref;
    double *scratch;
    int failed;
    size_t nseen;      /* values below kept (the bracket's ends, which GSL's solver evaluates */
    double seen[2][2]; /* again when it is set): {rho, pool_eq(rho)} */
};

/* Σ_k l_k − Σ_k v_k·B_k(ρ)/A_k(ρ): zero at the pooled ρ (the moment equation). */
static double pool_eq(double rho, void *ctx)
{
    struct pool *p = ctx;
    double f = 0;
    for (size_t q = 0; q < p->nseen; q++)
        if (p->seen[q][0] == rho)
            return p->seen[q][1]; /* the same sum of the same terms */
    for (size_t k = 0; k < p->n; k++) {
        double A, B;
        if (resid_moments2(&p->w[k], rho, p->dt_ref, p->scratch, &A, &B) || !(A > 0)) {
            p->failed = 1;
            return 0;
        }
        f += p->w[k].l - p->w[k].v * B / A;
    }
    if (p->nseen < 2) {
        p->seen[p->nseen][0] = rho;
        p->seen[p->nseen++][1] = f;
    }
    return f;
}

/* Solves pool_eq on [0, RHO_MAX] with GSL's Brent solver; the bound when the observed lag
 * products lie outside what the model reaches there. */
static int pool_solve(struct pool *p, double *rho)
{
    double f0 = pool_eq(0, p), f1 = pool_eq(RHO_MAX, p);
    if (p->failed)
        return -1;
    if (!(f0 > 0)) { /* residuals no more correlated than white noise's */
        *rho = 0;
        return 0;
    }
    if (!(f1 < 0)) {
        *rho = RHO_MAX;
        return 0;
    }
    gsl_function F = {pool_eq, p};
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s || gsl_root_fsolver_set(s, &F, 0, RHO_MAX) != GSL_SUCCESS) {
        gsl_root_fsolver_free(s);
        return -1;
    }
    int status = GSL_CONTINUE;
    for (int it = 0; it < 100 && status == GSL_CONTINUE && !p->failed; it++) {
        if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
            break;
        status = gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                        1e-6, 0);
    }
    *rho = gsl_root_fsolver_root(s);
    gsl_root_fsolver_free(s);
    return status == GSL_SUCCESS && !p->failed ? 0 : -1;
}

/* The statistics of one analyser (pot = 0: xD, 1: xB) over the windows: σ into sd_xd/sd_xb
 * of every window with samples; with set_u also the standard errors (see evidence.h). */
static int analyser_stats(stagecal_evidence *ev, size_t nev, int pot, double u_floor, int set_u,
                          stagecal_error *err)
{
    struct wseries *w = calloc(nev ? nev : 1, sizeof *w);
    size_t *idx = calloc(nev ? nev : 1, sizeof *idx);
    double *scratch = malloc(3 * EV_MAX_SMOOTH * EV_MAX_SMOOTH * sizeof *scratch);
    double r[EV_MAX_SMOOTH], span = 0, gaps = 0;
    size_t n = 0;
    int rc = STAGECAL_OK;
    if (!w || !idx || !scratch) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        goto done;
    }
    for (size_t k = 0; k < nev; k++) {
        stagecal_evidence *e = &ev[k];
        size_t m = e->m < EV_MAX_SMOOTH ? e->m : EV_MAX_SMOOTH;
        if (m < STATS_MIN || !e->s_t || !e->s_xd || !e->s_xb || (!pot && e->xd_tobit))
            continue; /* (a Tobit window carries its xD trend, not readings: no noise in it) */
        struct wseries *s = &w[n];
        s->t = e->s_t;
        s->y = pot ? e->s_xb : e->s_xd;
        s->m = m;
        if (smoother_matrix(s->t, m, scratch))
            continue; /* repeated times: the window keeps its plain statistics */
        size_t kb = m < SMOOTH_POINTS ? m : SMOOTH_POINTS;
        s->band = malloc(m * kb * sizeof *s->band); /* NULL: rebuilt at each use */
        for (size_t j = 0; j < m && s->band; j++)
            memcpy(s->band + j * kb, scratch + j * m + band_lo(j, m, kb), kb * sizeof *s->band);
        smooth_apply(scratch, s->y, m, r);
        for (size_t j = 0; j < m; j++) {
            r[j] = s->y[j] - r[j];
            s->v += r[j] * r[j];
            if (j > 0)
                s->l += r[j] * r[j - 1];
        }
        span += s->t[m - 1] - s->t[0];
        gaps += (double)(m - 1);
        idx[n++] = k;
    }
    if (n == 0 || !(span > 0))
        goto done;
    struct pool p = {w, n, span / gaps, scratch, 0, 0, {{0, 0}, {0, 0}}};
    double rho;
    if (pool_solve(&p, &rho)) {
        rc = error_set(err, STAGECAL_EINTERNAL,
                       "window statistics: the pooled autocorrelation "
                       "could not be solved for");
        goto done;
    }
    /* one σ per analyser, like ρ: a window's own σ from its few residual degrees of freedom
     * scatters, and the fits' relative weights would inherit that scatter */
    double sv = 0, sa = 0;
    for (size_t q = 0; q < n; q++) {
        double A, B;
        if (resid_moments2(&w[q], rho, p.dt_ref, scratch, &A, &B)) {
            rc = error_set(err, STAGECAL_EINTERNAL, "window statistics failed");
            goto done;
        }
        sv += w[q].v;
        sa += A;
    }
    double sigma = fmax(sqrt(sv / sa), u_floor), sd = sqrt(sv / sa);
    if (!(rho < RHO_MAX)) {
        /* residuals more correlated than the noise model reaches: a trajectory the local
         * quadratic does not follow (a whole batch in one window, a noise-free log), not
         * noise. The reading noise is then taken from the residuals of local quartics
         * (which follow such a trajectory about 100× closer: 1e-5 against 1e-3 on the
         * noise-free round-trip logs, tests/cli/test_roundtrip.sh) at its white-noise value,
         * the smaller one (A falls with ρ) */
        double sv4 = 0, sa4 = 0;
        for (size_t q = 0; q < n; q++) {
            double A, B, *S = scratch;
            size_t m = w[q].m;
            if (resid_moments(&w[q], 4, 0, p.dt_ref, scratch, &A, &B) ||
                smoother_matrix_deg(w[q].t, m, 4, S)) {
                rc = error_set(err, STAGECAL_EINTERNAL, "window statistics failed");
                goto done;
            }
            smooth_apply(S, w[q].y, m, r);
            for (size_t j = 0; j < m; j++)
                sv4 += (w[q].y[j] - r[j]) * (w[q].y[j] - r[j]);
            sa4 += A;
        }
        sd = sqrt(sv4 / sa4);
    }
    for (size_t k = 0; k < nev; k++)
        if (ev[k].m > 0)
            *(pot ? &ev[k].sd_xb : &ev[k].sd_xd) = sd;
    for (size_t q = 0; q < n && set_u; q++) {
        stagecal_evidence *e = &ev[idx[q]];
        const struct wseries *s = &w[q];
        size_t m = s->m;
        double *S = scratch;
        if (smoother_matrix(s->t, m, S)) {
            rc = error_set(err, STAGECAL_EINTERNAL, "window statistics failed");
            goto done;
        }
        /* variance factors of the plain mean (weights 1/m) and of the mean of the smoothed
         * values (weights Sᵀ1/m) under the pooled correlation */
        double wS[EV_MAX_SMOOTH], vp = 0, vs = 0;
        for (size_t i = 0; i < m; i++) {
            wS[i] = 0;
            for (size_t j = 0; j < m; j++)
                wS[i] += S[j * m + i] / (double)m;
        }
        for (size_t i = 0; i < m; i++)
            for (size_t j = 0; j < m; j++) {
                double c = corr(rho, p.dt_ref, s->t[i], s->t[j]);
                vp += c / ((double)m * (double)m);
                vs += wS[i] * wS[j] * c;
            }
        double *u = pot ? &e->u_xb : &e->u_xd, *se_s = pot ? &e->se_sxb : &e->se_sxd;
        *u = sigma * sqrt(vp);
        *se_s = sigma * sqrt(vs);
        *(pot ? &e->rho_xb : &e->rho_xd) = rho;
        if (pot)
            e->n_eff = 1 / vp; /* samples' worth of independent information */
    }
done:
    for (size_t q = 0; w && q < n; q++)
        free(w[q].band);
    free(w);
    free(idx);
    free(scratch);
    return rc;
}

int stagecal_evidence_window_stats(stagecal_evidence *ev, size_t nev, double u_xd, double u_xb,
                                   stagecal_error *err)
{
    int rc = analyser_stats(ev, nev, 0, u_xd, 1, err);
    return rc ? rc : analyser_stats(ev, nev, 1, u_xb, 1, err);
}

int stagecal_evidence_noise_sd(stagecal_evidence *ev, size_t nev, stagecal_error *err)
{
    int rc = analyser_stats(ev, nev, 0, 0, 0, err);
    return rc ? rc : analyser_stats(ev, nev, 1, 0, 0, err);
}
