/*
 * evidence.c — the unit of evidence (see stagecal/evidence.h): a window's
 * autocorrelation-aware means, its stage count and standard error, the builder that
 * turns a run log's windows into evidence, and the regression points.
 *
 * Logged samples minutes apart are strongly autocorrelated, so a window's N samples
 * carry far fewer than N independent pieces of information. The window mean's standard
 * error uses the effective sample size of an AR(1) process, n_eff = n·(1 − ρ1)/(1 + ρ1),
 * ρ1 the lag-1 autocorrelation of the detrended series (Wilks, Statistical Methods in the
 * Atmospheric Sciences, 3rd ed. 2011, eq. 5.12; also Bayley & Hammersley 1946 — citations
 * from memory; the means, their statistics and the pooling are in evidence_mean.c). ρ1 is
 * pooled per analyser over the windows (stagecal_evidence_pool_rho):
 * with each window's own ρ1 the 95 % intervals covered 0.937–0.940, pooled 0.947–0.949
 * (20 000 synthetic calibrations, tests/tool_coverage.c, docs/calibration.md §5).
 *
 * The stage count of a window is the mean of the inversions of locally smoothed
 * compositions at the carried sample times, not the mean of the per-sample counts: the
 * latter is biased by the count's curvature in xB for noisy samples near a pinch, and
 * its standard error (independent samples) is a lower bound (docs/calibration.md §3).
 */
#include "stagecal/evidence.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_blas.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_multifit.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "evidence_internal.h"
#include "internal.h"
#include "stagecal/stages.h"

#define RHO_MAX EVIDENCE_RHO_MAX

/* Points in each local fit of the smoother below. */
#define SMOOTH_POINTS 9

/* Most samples the stage count and the window statistics use (the first ones carried). */
#define EV_MAX_SMOOTH 64

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

/* The smoother of smoother_matrix applied to y (out = S·y), one local fit at a time with
 * GSL's multifit (SVD): the stage count's own numerics, kept as they were so that a
 * calibration's numbers do not move with the statistics' matrix form (which agrees to
 * rounding). Returns 0, or −1 when GSL fails. */
static int smooth_quadratic(const double *t, const double *y, size_t n, double *out)
{
    size_t k = n < SMOOTH_POINTS ? n : SMOOTH_POINTS;
    gsl_matrix *x = gsl_matrix_alloc(k, 3), *cov = gsl_matrix_alloc(3, 3);
    gsl_vector *c = gsl_vector_alloc(3);
    gsl_multifit_linear_workspace *w = gsl_multifit_linear_alloc(k, 3);
    int rc = (x && cov && c && w) ? 0 : -1;
    for (size_t j = 0; j < n && rc == 0; j++) {
        size_t lo = j >= k / 2 ? j - k / 2 : 0;
        if (lo + k > n)
            lo = n - k;
        double tb = t[j], ts = 0, chisq;
        for (size_t i = lo; i < lo + k; i++)
            ts = fmax(ts, fabs(t[i] - tb));
        if (!(ts > 0))
            ts = 1;
        for (size_t i = 0; i < k; i++) {
            double u = (t[lo + i] - tb) / ts;
            gsl_matrix_set(x, i, 0, 1);
            gsl_matrix_set(x, i, 1, u);
            gsl_matrix_set(x, i, 2, u * u);
        }
        gsl_vector_const_view yv = gsl_vector_const_view_array(y + lo, k);
        if (gsl_multifit_linear(x, &yv.vector, c, cov, &chisq, w) != GSL_SUCCESS)
            rc = -1;
        else
            out[j] = gsl_vector_get(c, 0); /* the quadratic at u = 0, i.e. at t[j] */
    }
    gsl_multifit_linear_free(w);
    gsl_vector_free(c);
    gsl_matrix_free(cov);
    gsl_matrix_free(x);
    return rc;
}

/* ---- window statistics from the smoother's residuals ------------------------------- */

/* Fewest carried samples for the smoother's statistics (3 residual degrees of freedom). */
#define STATS_MIN 6

/* One window's samples of one analyser for the statistics below. */
struct wseries {
    const double *t, *y;
    size_t m;
    double v, l; /* Σ r_j², Σ r_j r_{j+1} of the smoother's residuals r = (I − S) y */
};

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

struct pool {
    const struct wseries *w;
    size_t n;
    double dt_ref;
    double *scratch;
    int failed;
};

/* Σ_k l_k − Σ_k v_k·B_k(ρ)/A_k(ρ): zero at the pooled ρ (the moment equation). */
static double pool_eq(double rho, void *ctx)
{
    struct pool *p = ctx;
    double f = 0;
    for (size_t k = 0; k < p->n; k++) {
        double A, B;
        if (resid_moments(&p->w[k], 2, rho, p->dt_ref, p->scratch, &A, &B) || !(A > 0)) {
            p->failed = 1;
            return 0;
        }
        f += p->w[k].l - p->w[k].v * B / A;
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
    struct pool p = {w, n, span / gaps, scratch, 0};
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
        if (resid_moments(&w[q], 2, rho, p.dt_ref, scratch, &A, &B)) {
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

/* The inversion under the window's conditions (physics.h), or the plain one. */
static int window_invert(const stagecal_vle *vle, double murphree, const stagecal_evidence *ev,
                         double xd, double xb, const stagecal_stages_params *sp,
                         stagecal_stages_result *res, stagecal_error *err)
{
    if (ev->cond)
        return stagecal_physics_invert(ev->cond, xd, xb, murphree, sp, res, err);
    return stagecal_stages_invert(vle, xd, xb, ev->r, murphree, sp, res, err);
}

int stagecal_evidence_stages(const stagecal_vle *vle, double murphree, stagecal_evidence *ev,
                             stagecal_error *err)
{
    stagecal_stages_params sp = stagecal_stages_default_params();
    stagecal_stages_result res;
    int rc;
    sp.want_sensitivities = 1;
    ev->stages_ok = 0;
    ev->stages = 0;
    ev->se_stages = 0;
    if (!(ev->xd > 0 && ev->xd < 1 && ev->xb > 0 && ev->xb < ev->xd))
        return STAGECAL_OK;
    if ((rc = window_invert(vle, murphree, ev, ev->xd, ev->xb, &sp, &res, err)))
        return rc;
    if (res.status != STAGECAL_STAGES_OK)
        return STAGECAL_OK;
    /* the standard errors of what is inverted: the smoothed compositions' mean when the
     * window statistics were built from the smoother, else the plain means' */
    double a = res.dstages_dxd * (ev->se_sxd > 0 ? ev->se_sxd : ev->u_xd);
    double b = res.dstages_dxb * (ev->se_sxb > 0 ? ev->se_sxb : ev->u_xb);
    double c = isfinite(ev->r) ? res.dstages_dr * ev->u_r : 0.0; /* u(R) of the set point */
    double value = res.stages;
    if (ev->m >= 3 && ev->s_t && ev->s_xd && ev->s_xb) {
        /* follow the drift: invert the smoothed trends at every sample time */
        double sd[EV_MAX_SMOOTH], sb[EV_MAX_SMOOTH], sum = 0;
        size_t m = ev->m < EV_MAX_SMOOTH ? ev->m : EV_MAX_SMOOTH;
        if (smooth_quadratic(ev->s_t, ev->s_xd, m, sd) ||
            smooth_quadratic(ev->s_t, ev->s_xb, m, sb))
            return error_set(err, STAGECAL_EINTERNAL, "window trend fit failed");
        sp.want_sensitivities = 0;
        for (size_t j = 0; j < m; j++) {
            if (!(sd[j] > 0 && sd[j] < 1 && sb[j] > 0 && sb[j] < sd[j]))
                return STAGECAL_OK;
            if ((rc = window_invert(vle, murphree, ev, sd[j], sb[j], &sp, &res, err)))
                return rc;
            if (res.status != STAGECAL_STAGES_OK)
                return STAGECAL_OK;
            sum += res.stages;
        }
        value = sum / (double)m;
    }
    ev->stages = value;
    ev->se_stages = sqrt(a * a + b * b + c * c);
    ev->stages_ok = ev->se_stages > 0 && isfinite(ev->se_stages);
    return STAGECAL_OK;
}

size_t stagecal_evidence_points(const stagecal_evidence *ev, size_t nev, double *buf,
                                stagecal_regress_data *data)
{
    size_t n = 0;
    int any_load = 1;
    for (size_t i = 0; i < nev; i++) {
        if (!ev[i].stages_ok) /* stages_ok implies a finite se > 0 */
            continue;
        buf[n] = ev[i].r;
        buf[nev + n] = ev[i].has_load ? ev[i].f_load : 0;
        buf[2 * nev + n] = ev[i].stages;
        buf[3 * nev + n] = ev[i].se_stages;
        any_load &= ev[i].has_load;
        n++;
    }
    data->n = n;
    data->r = buf;
    data->f_load = any_load ? buf + nev : NULL;
    data->stages = buf + 2 * nev;
    data->sigma = buf + 3 * nev;
    return n;
}

/* ---- the evidence of a run log ------------------------------------------------------ */

/* Largest max_samples: the stage count smooths at most 64 samples. */
#define EV_MAX_SAMPLES 64

stagecal_evidence_params stagecal_evidence_default_params(void)
{
    /* one initializer: a member added later starts as 0/NULL, never as stack garbage
     * (skip_run once did, and invert read through it; found by the fuzz corpus replay) */
    return (stagecal_evidence_params){.max_samples = 24,
                                      .min_ok = 3,
                                      .noise = STAGECAL_EVIDENCE_NOISE_LINE_POOLED,
                                      .holdup = STAGECAL_EVIDENCE_HOLDUP_AUTO,
                                      .physics = 1,
                                      .tobit_means = 1};
}

void stagecal_evidence_set_free(stagecal_evidence_set *set)
{
    if (!set)
        return;
    evidence_physics_free(set);
    free(set->ev);
    free(set->samples);
    free(set->cens);
    free(set->cens_samples);
    free(set->cens_flags);
    memset(set, 0, sizeof *set);
}

const stagecal_evidence *stagecal_evidence_find(const stagecal_evidence_set *set, size_t k)
{
    for (size_t i = 0; set && i < set->n; i++)
        if (set->ev[i].window == k)
            return &set->ev[i];
    return NULL;
}

/* Keeps up to cap of the window's len samples with finite xd and xb and 0 < xb < xd < 1,
 * evenly spread over the finite ones, in s_t/s_xd/s_xb; returns how many. */
static size_t thin_samples(const double *t, const double *xd, const double *xb, size_t len,
                           size_t cap, double *s_t, double *s_xd, double *s_xb)
{
    size_t nfin = 0, ms = 0;
    for (size_t j = 0; j < len; j++)
        nfin += isfinite(xd[j]) && isfinite(xb[j]);
    for (size_t j = 0, kf = 0; j < len && ms < cap; j++) {
        if (!(isfinite(xd[j]) && isfinite(xb[j])))
            continue;
        /* keep the k-th finite sample when it is the next of an even spread */
        if ((nfin <= cap || kf * cap / nfin == ms) && xb[j] > 0 && xd[j] < 1 && xb[j] < xd[j]) {
            s_t[ms] = t[j];
            s_xd[ms] = xd[j];
            s_xb[ms] = xb[j];
            ms++;
        }
        kf++;
    }
    return ms;
}

/* Window w's means, load and carried samples into e; 1 when the window is evidence (at
 * least 3 finite compositions of each analyser). t, xd, xb, f are scratch of the
 * window's length; s_* receive the carried samples. */
static int window_summary(const stagecal_runlog *log, const double *xd_src,
                          const stagecal_runlog_result *res, const stagecal_uncertainty *u,
                          size_t k, size_t cap, double *t, double *xd, double *xb, double *f,
                          double *s, const double *quad_rho, int tobit_q, double *tb,
                          signed char *dir, stagecal_evidence *e)
{
    const stagecal_runlog_window *w = &res->windows[k];
    size_t len = w->last - w->first + 1, nok = 0, nf = 0, ncd = 0, ncb = 0;
    double fsum = 0;
    for (size_t j = 0; j < len; j++) {
        size_t i = w->first + j;
        int outlier = (res->flags[i] & STAGECAL_SAMPLE_OUTLIER) != 0;
        ncd += log->xd_cens[i] != STAGECAL_CENSOR_NONE;
        ncb += log->xb_cens[i] != STAGECAL_CENSOR_NONE;
        t[j] = log->t_s[i];
        /* a censored reading is not a value: left out here; the Tobit trend below takes
         * censored xD readings as censored observations (docs/runlog.md); xD is the
         * holdup-compensated one (evidence_physics.c) */
        xd[j] = outlier || log->xd_cens[i] ? NAN : xd_src[i];
        xb[j] = outlier || log->xb_cens[i] ? NAN : log->xb[i];
        f[j] = res->f_factor[i];
        if (!outlier && res->status[i] == STAGECAL_STAGES_OK)
            nok++;
        if (isfinite(f[j])) {
            fsum += f[j];
            nf++;
        }
    }
    /* censored xD readings as censored observations (tb non-NULL): the Tobit trend of the
     * window (the straight line, or the quadratic of QUAD_POOLED) completes the series with
     * their conditional expectations, so the mean below is the trend's level; the carried
     * samples are the trend itself. Kept only when the trend stays inside (0, 1); otherwise
     * (e.g. nearly every reading at the bound) the censored readings stay left out. */
    int tobit = 0;
    double ratio = 1;
    if (tb && ncd > 0) {
        double *yr = tb, *trend = tb + len, *yc = xd;
        size_t nc = 0;
        for (size_t j = 0; j < len; j++) {
            size_t i = w->first + j;
            int c = log->xd_cens[i];
            int use = !(res->flags[i] & STAGECAL_SAMPLE_OUTLIER) && isfinite(xd_src[i]);
            yr[j] = use ? (c ? log->xd[i] : xd_src[i]) : NAN;
            dir[j] = (signed char)(!use || !c ? 0 : c == STAGECAL_CENSOR_ABOVE ? 1 : -1);
            nc += dir[j] != 0;
        }
        if (nc > 0 && stagecal_evidence_tobit(t, yr, dir, len, tobit_q, tb + 2 * len, trend, &ratio,
                                              NULL) == STAGECAL_OK) {
            tobit = 1;
            for (size_t j = 0; j < len; j++)
                tobit &= !isfinite(trend[j]) || (trend[j] > 0 && trend[j] < 1);
        }
        if (tobit)
            for (size_t j = 0; j < len; j++)
                yc[j] = tb[2 * len + j];
    }
    memset(e, 0, sizeof *e);
    e->xd_tobit = tobit;
    e->window = k;
    e->run = w->run;
    e->first = w->first;
    e->last = w->last;
    e->n_samples = len;
    e->n_ok = nok;
    e->n_cens_xd = ncd;
    e->n_cens_xb = ncb;
    e->total_reflux = w->total_reflux;
    e->r = w->total_reflux ? INFINITY : w->r_mean; /* the set point (runlog_setpoint.c) */
    e->u_r = w->total_reflux ? 0.0 : w->u_r;
    e->t_mid_s = 0.5 * (log->t_s[w->first] + log->t_s[w->last]);
    if (nf * 2 >= len && nf > 0) {
        e->has_load = 1;
        e->f_load = fsum / (double)nf;
    }
    if (quad_rho) { /* STAGECAL_EVIDENCE_NOISE_QUAD_POOLED: ρ given (pooled) or NAN (own) */
        int a = stagecal_evidence_mean_quad(t, xd, len, u->xd, quad_rho[0], &e->xd, &e->u_xd,
                                            &e->rho_xd, &e->m_xd, NULL);
        int b = a ? a
                  : stagecal_evidence_mean_quad(t, xb, len, u->xb, quad_rho[1], &e->xb, &e->u_xb,
                                                &e->rho_xb, &e->m_xb, NULL);
        if (a == STAGECAL_ENOMEM || b == STAGECAL_ENOMEM)
            return -1;
        if (a || b)
            return 0;
    } else if (stagecal_evidence_mean_rho(t, xd, len, u->xd, &e->xd, &e->u_xd, &e->rho_xd, &e->m_xd,
                                          NULL) != STAGECAL_OK ||
               stagecal_evidence_mean_rho(t, xb, len, u->xb, &e->xb, &e->u_xb, &e->rho_xb, &e->m_xb,
                                          NULL) != STAGECAL_OK)
        return 0; /* too few usable compositions: not evidence */
    if (tobit) {
        e->u_xd *= sqrt(ratio); /* the information the censoring costs */
        for (size_t j = 0; j < len; j++)
            xd[j] = tb[len + j];
    }
    e->s_t = s;
    e->s_xd = s + cap;
    e->s_xb = s + 2 * cap;
    e->m = thin_samples(t, xd, xb, len, cap, s, s + cap, s + 2 * cap);
    return 1;
}

/* The smaller of an estimated σ and a stated u, either of which may be 0 (not known). */
static double noise_cap(double sd, double stated)
{
    return stated > 0 && !(sd > 0 && sd < stated) ? stated : sd;
}

int stagecal_evidence_build(const stagecal_runlog *log, const stagecal_runlog_result *res,
                            const stagecal_column *col, double murphree,
                            const stagecal_evidence_params *params, stagecal_evidence_set *set,
                            stagecal_error *err)
{
    stagecal_evidence_params par = params ? *params : stagecal_evidence_default_params();
    memset(set, 0, sizeof *set);
    if (!log || !res || !col || !col->system.vle)
        return error_set(err, STAGECAL_EINVAL,
                         "evidence: needs a run log, its analysis and a "
                         "column with an equilibrium model");
    if (par.max_samples < 1 || par.max_samples > EV_MAX_SAMPLES)
        return error_set(err, STAGECAL_EINVAL, "evidence: max_samples %zu (expected 1 to %d)",
                         par.max_samples, EV_MAX_SAMPLES);
    size_t nw = res->nwindows, maxlen = 0, cap = par.max_samples;
    for (size_t k = 0; k < nw; k++) {
        size_t len = res->windows[k].last - res->windows[k].first + 1;
        maxlen = len > maxlen ? len : maxlen;
    }
    set->ev = calloc(nw ? nw : 1, sizeof *set->ev);
    set->samples = malloc((nw ? nw : 1) * 3 * cap * sizeof *set->samples);
    double *buf = malloc((maxlen ? maxlen : 1) * 7 * sizeof *buf);
    signed char *dir = malloc(maxlen ? maxlen : 1);
    double *xd_src = malloc((log->n ? log->n : 1) * 2 * sizeof *xd_src), *u2 = xd_src + log->n;
    if (!set->ev || !buf || !set->samples || !xd_src || !dir) {
        free(buf), free(xd_src), free(dir);
        stagecal_evidence_set_free(set);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    int rc = evidence_holdup(log, col, &par, set, xd_src, u2, err);
    /* QUAD_POOLED: each window's own ρ first, then again at ρ pooled per analyser over the
     * windows (weighted by lag pairs, as stagecal_evidence_pool_rho), which also sets σ² =
     * RSS/A(ρ) at the pooled ρ */
    int quad = par.noise == STAGECAL_EVIDENCE_NOISE_QUAD_POOLED ||
               par.noise == STAGECAL_EVIDENCE_NOISE_QUAD_STATS;
    int tobit_q = par.noise == STAGECAL_EVIDENCE_NOISE_QUAD_POOLED ? 3 : 2;
    double qrho[2] = {NAN, NAN};
    for (int pass = 0; pass < 1 + quad && rc == STAGECAL_OK; pass++) {
        set->n = 0;
        for (size_t k = 0; k < nw && rc == STAGECAL_OK; k++) {
            if (par.skip_run && par.skip_run[res->windows[k].run])
                continue;
            int ok = window_summary(
                log, xd_src, res, &col->u, k, cap, buf, buf + maxlen, buf + 2 * maxlen,
                buf + 3 * maxlen, set->samples + 3 * cap * set->n, quad ? qrho : NULL, tobit_q,
                par.tobit_means ? buf + 4 * maxlen : NULL, dir, &set->ev[set->n]);
            if (ok < 0)
                rc = error_set(err, STAGECAL_ENOMEM, "out of memory (window means)");
            set->n += ok > 0;
        }
        double w[2] = {0, 0}, r[2] = {0, 0};
        for (size_t k = 0; k < set->n; k++) {
            const stagecal_evidence *e = &set->ev[k];
            w[0] += e->m_xd >= 2 ? (double)(e->m_xd - 1) : 0.0;
            r[0] += e->m_xd >= 2 ? (double)(e->m_xd - 1) * e->rho_xd : 0.0;
            w[1] += e->m_xb >= 2 ? (double)(e->m_xb - 1) : 0.0;
            r[1] += e->m_xb >= 2 ? (double)(e->m_xb - 1) * e->rho_xb : 0.0;
        }
        for (int a = 0; a < 2; a++)
            qrho[a] = w[a] > 0 ? r[a] / w[a] : NAN;
    }
    free(buf), free(dir);
    if (rc == STAGECAL_OK && par.physics)
        rc = evidence_conditions(log, col, set, err);
    if (rc != STAGECAL_OK) {
        free(xd_src);
        return rc;
    }
    /* One ρ per analyser for all windows (docs/calibration.md §3), then the stage counts,
     * which propagate the standard errors. */
    if (par.noise == STAGECAL_EVIDENCE_NOISE_LINE_POOLED)
        stagecal_evidence_pool_rho(set->ev, set->n);
    for (size_t k = 0; k < set->n; k++) {
        stagecal_evidence *e = &set->ev[k];
        /* n_eff of the pot analyser series: how many independent samples the window holds */
        e->n_eff = fmax(1.0, (double)e->m_xb * (1 - e->rho_xb) / (1 + e->rho_xb));
    }
    rc = par.noise == STAGECAL_EVIDENCE_NOISE_SMOOTHER
             ? stagecal_evidence_window_stats(set->ev, set->n, col->u.xd, col->u.xb, err)
             : stagecal_evidence_noise_sd(set->ev, set->n, err);
    /* the reading noise for the composition fit's convexity correction: the smaller of the
     * estimate and the analyser's stated uncertainty (the estimate's failure is upward: with
     * strongly correlated noise the pooled ρ can sit at its bound and σ then comes out several
     * times too large) */
    for (size_t k = 0; k < set->n; k++) {
        stagecal_evidence *e = &set->ev[k];
        e->sd_xd = noise_cap(e->sd_xd, stagecal_runlog_u_xd(col, e->xd));
        e->sd_xb = noise_cap(e->sd_xb, stagecal_runlog_u_xb(col, e->xb));
    }
    for (size_t k = 0; k < set->n && rc == STAGECAL_OK; k++) {
        stagecal_evidence *e = &set->ev[k];
        /* the time constant's uncertainty is common to the window: add its mean variance */
        double u2m = 0;
        for (size_t i = e->first; i <= e->last; i++)
            u2m += isfinite(u2[i]) ? u2[i] : 0;
        e->u_xd = sqrt(e->u_xd * e->u_xd + u2m / (double)(e->last - e->first + 1));
        rc = stagecal_evidence_stages(col->system.vle, murphree, e, err);
        if (rc != STAGECAL_OK)
            break;
        if (e->n_ok < par.min_ok)
            e->stages_ok = 0; /* too few samples of the window invert on their own */
    }
    if (rc == STAGECAL_OK)
        rc = evidence_build_cens(log, xd_src, res, cap, set, err);
    free(xd_src);
    return rc;
}

/* σ in stage space (what a planner's prediction band needs): the scatter of the windows
 * with stage counts about the curve, with its degrees of freedom m − p (0, 0 when m ≤ p). */
void evidence_stage_scatter(const stagecal_evidence *ev, size_t n, const stagecal_form *form,
                            const double *theta, double *sigma, double *dof)
{
    double ss = 0;
    size_t m = 0;
    for (size_t i = 0; i < n; i++) {
        double v;
        if (!ev[i].stages_ok ||
            stagecal_form_eval(form, theta, ev[i].r, ev[i].f_load, &v, NULL) != STAGECAL_OK)
            continue;
        ss += (ev[i].stages - v) * (ev[i].stages - v);
        m++;
    }
    *dof = m > form->p ? (double)(m - form->p) : 0;
    *sigma = *dof > 0 ? sqrt(ss / *dof) : 0;
}
