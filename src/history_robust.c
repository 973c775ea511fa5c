/*
 * history_robust.c — the history fit's cluster-robust covariance: the bread (J'WJ)^−1,
 * the moment estimate of the excess variance, the CR2 sandwich over runs (Bell &
 * McCaffrey 2002) and the Bell–McCaffrey degrees of freedom of a contrast in the form
 * of Imbens & Kolesár (2016); also the honesty check of an estimate and the conversion of
 * the evidence module's windows. Sources and the model: include/stagecal/history.h.
 *
 * Workload: m windows (tens to a few hundred), P parameters (under 20), G runs (tens);
 * the dof of one contrast builds an m×G matrix, so a few hundred kB at most.
 */
#include <gsl/gsl_blas.h>
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/history.h"
#include "history_internal.h"
#include "internal.h"
#include "parallel.h"

/* (J'WJ)^{-1} into B (P×P) by Cholesky; EDATA when singular. */
int history_bread(const gsl_matrix *J, const double *w, gsl_matrix *B, stagecal_error *err)
{
    size_t n = J->size1, P = J->size2;
    gsl_matrix_set_zero(B);
    for (size_t i = 0; i < n; i++)
        for (size_t a = 0; a < P; a++)
            for (size_t b = 0; b <= a; b++)
                B->data[a * P + b] += w[i] * gsl_matrix_get(J, i, a) * gsl_matrix_get(J, i, b);
    for (size_t a = 0; a < P; a++)
        for (size_t b = 0; b < a; b++)
            gsl_matrix_set(B, b, a, gsl_matrix_get(B, a, b));
    gsl_quiet q = gsl_quiet_begin();
    int g = gsl_linalg_cholesky_decomp1(B);
    if (g == GSL_SUCCESS)
        g = gsl_linalg_cholesky_invert(B);
    gsl_quiet_end(q);
    if (g != GSL_SUCCESS)
        return error_set(err, STAGECAL_EDATA,
                         "the history's design is singular (a segment's level and loss cannot "
                         "both be estimated, or the correlation's parameters are not identified)");
    return STAGECAL_OK;
}

/* Method-of-moments excess variance (DerSimonian–Laird in regression form). */
double history_moment_tau2(const gsl_matrix *J, const double *w, const double *res,
                           const gsl_matrix *B)
{
    size_t n = J->size1, P = J->size2;
    double q = 0, sw = 0, tr = 0;
    for (size_t i = 0; i < n; i++) {
        q += w[i] * res[i] * res[i];
        sw += w[i];
        double h = 0; /* J_i B J_i' */
        for (size_t a = 0; a < P; a++)
            for (size_t b = 0; b < P; b++)
                h += gsl_matrix_get(J, i, a) * gsl_matrix_get(B, a, b) * gsl_matrix_get(J, i, b);
        tr += w[i] * w[i] * h;
    }
    double den = sw - tr, t2 = den > 0 ? (q - ((double)n - (double)P)) / den : 0;
    return t2 > 0 ? t2 : 0;
}

/* The CR2 sandwich: V = B·Σ_g X̃_g' A_g ẽ_g ẽ_g' A_g X̃_g·B with X̃ = W^½J, ẽ = W^½r,
 * A_g = (I − X̃_g B X̃_g')^−½. cl[i] is window i's cluster, ncl clusters. */
int history_sandwich(const gsl_matrix *J, const double *w, const double *res, const size_t *cl,
                     size_t ncl, const gsl_matrix *B, gsl_matrix *V, gsl_matrix *D,
                     stagecal_error *err)
{
    size_t n = J->size1, P = J->size2, maxg = 0;
    size_t *cnt = calloc(ncl, sizeof *cnt);
    if (!cnt)
        return error_set(err, STAGECAL_ENOMEM, "out of memory for the sandwich");
    for (size_t i = 0; i < n; i++)
        if (++cnt[cl[i]] > maxg)
            maxg = cnt[cl[i]];
    size_t *idx = malloc(maxg * sizeof *idx);
    gsl_matrix *Xg = gsl_matrix_alloc(maxg, P), *H = gsl_matrix_alloc(maxg, maxg);
    gsl_matrix *Q = gsl_matrix_alloc(maxg, maxg), *M = gsl_matrix_calloc(P, P);
    gsl_vector *ev = gsl_vector_alloc(maxg), *e = gsl_vector_alloc(maxg), *u = gsl_vector_alloc(P);
    gsl_vector *ae = gsl_vector_alloc(maxg), *tmp = gsl_vector_alloc(maxg);
    gsl_eigen_symmv_workspace *ew = gsl_eigen_symmv_alloc(maxg);
    gsl_matrix *XB = gsl_matrix_alloc(maxg, P);
    int rc = STAGECAL_OK;
    if (!idx || !Xg || !H || !Q || !M || !ev || !e || !u || !ae || !tmp || !ew || !XB) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory for the sandwich");
        goto done;
    }
    for (size_t g = 0; g < ncl; g++) {
        size_t m = 0;
        for (size_t i = 0; i < n; i++)
            if (cl[i] == g)
                idx[m++] = i;
        if (m == 0)
            continue;
        gsl_matrix_view xg = gsl_matrix_submatrix(Xg, 0, 0, m, P);
        gsl_matrix_view xb = gsl_matrix_submatrix(XB, 0, 0, m, P);
        gsl_matrix_view hg = gsl_matrix_submatrix(H, 0, 0, m, m);
        gsl_matrix_view qg = gsl_matrix_submatrix(Q, 0, 0, m, m);
        gsl_vector_view evg = gsl_vector_subvector(ev, 0, m), eg = gsl_vector_subvector(e, 0, m);
        gsl_vector_view aeg = gsl_vector_subvector(ae, 0, m), tg = gsl_vector_subvector(tmp, 0, m);
        for (size_t a = 0; a < m; a++) {
            double sw = sqrt(w[idx[a]]);
            for (size_t b = 0; b < P; b++)
                gsl_matrix_set(&xg.matrix, a, b, sw * gsl_matrix_get(J, idx[a], b));
            gsl_vector_set(&eg.vector, a, sw * res[idx[a]]);
        }
        /* H = I − X̃_g B X̃_g' */
        gsl_blas_dgemm(CblasNoTrans, CblasNoTrans, 1.0, &xg.matrix, B, 0.0, &xb.matrix);
        gsl_blas_dgemm(CblasNoTrans, CblasTrans, -1.0, &xb.matrix, &xg.matrix, 0.0, &hg.matrix);
        for (size_t a = 0; a < m; a++)
            gsl_matrix_set(&hg.matrix, a, a, 1.0 + gsl_matrix_get(&hg.matrix, a, a));
        gsl_eigen_symmv_workspace *wsub = gsl_eigen_symmv_alloc(m);
        if (!wsub) {
            rc = error_set(err, STAGECAL_ENOMEM, "out of memory for the sandwich");
            goto done;
        }
        gsl_eigen_symmv(&hg.matrix, &evg.vector, &qg.matrix, wsub);
        gsl_eigen_symmv_free(wsub);
        /* A_g ẽ_g = Q diag(λ^−½) Q' ẽ_g; a leverage of 1 (λ → 0) leaves a zero residual,
         * so the floor only guards the division. */
        gsl_blas_dgemv(CblasTrans, 1.0, &qg.matrix, &eg.vector, 0.0, &tg.vector);
        for (size_t a = 0; a < m; a++) {
            double lam = gsl_vector_get(&evg.vector, a);
            gsl_vector_set(&tg.vector, a, gsl_vector_get(&tg.vector, a) / sqrt(fmax(lam, 1e-8)));
        }
        gsl_blas_dgemv(CblasNoTrans, 1.0, &qg.matrix, &tg.vector, 0.0, &aeg.vector);
        gsl_blas_dgemv(CblasTrans, 1.0, &xg.matrix, &aeg.vector, 0.0, u);
        gsl_blas_dger(1.0, u, u, M);
        /* D_g = A_g X̃_g B = Q diag(λ^−½) Q' (X̃_g B), row i of D for window idx[i] */
        for (size_t b = 0; b < P; b++) {
            for (size_t a = 0; a < m; a++) {
                double sum = 0;
                for (size_t c = 0; c < m; c++)
                    sum += gsl_matrix_get(&qg.matrix, c, a) * gsl_matrix_get(&xb.matrix, c, b);
                gsl_vector_set(&tg.vector, a,
                               sum / sqrt(fmax(gsl_vector_get(&evg.vector, a), 1e-8)));
            }
            for (size_t a = 0; a < m; a++) {
                double sum = 0;
                for (size_t c = 0; c < m; c++)
                    sum += gsl_matrix_get(&qg.matrix, a, c) * gsl_vector_get(&tg.vector, c);
                gsl_matrix_set(D, idx[a], b, sum);
            }
        }
    }
    {
        gsl_matrix *BM = gsl_matrix_alloc(P, P);
        if (!BM) {
            rc = error_set(err, STAGECAL_ENOMEM, "out of memory for the sandwich");
            goto done;
        }
        gsl_blas_dgemm(CblasNoTrans, CblasNoTrans, 1.0, B, M, 0.0, BM);
        gsl_blas_dgemm(CblasNoTrans, CblasNoTrans, 1.0, BM, B, 0.0, V);
        gsl_matrix_free(BM);
    }
done:
    gsl_matrix_free(XB);
    if (ew)
        gsl_eigen_symmv_free(ew);
    gsl_vector_free(tmp);
    gsl_vector_free(ae);
    gsl_vector_free(u);
    gsl_vector_free(e);
    gsl_vector_free(ev);
    gsl_matrix_free(M);
    gsl_matrix_free(Q);
    gsl_matrix_free(H);
    gsl_matrix_free(Xg);
    free(idx);
    free(cnt);
    return rc;
}

/* Bell–McCaffrey dof of the contrast c'β (Imbens & Kolesár 2016, eq. for K_BM): with
 * G_g = (I − H)_{·,g} A_g X̃_g B c (an m-vector per cluster) and K = [G_g·G_h],
 * dof = (tr K)² / tr(K²). Capped at G − 1; 0 when the contrast has no variance. */
double history_bm_dof(const struct stagecal_history_work *wk, const double *c)
{
    size_t m = wk->m, P = wk->P, G = wk->ncl;
    double *gm = calloc(m * G + m + P, sizeof *gm), *v = gm + m * G, *bx = v + m;
    if (!gm)
        return 0;
    for (size_t i = 0; i < m; i++) { /* v_i = D_i·c, cluster-blocked */
        double sum = 0;
        for (size_t a = 0; a < P; a++)
            sum += wk->d[i * P + a] * c[a];
        v[i] = sum;
    }
    for (size_t g = 0; g < G; g++) {
        /* bx = B X̃_g' v_g */
        double xv[64];
        memset(xv, 0, P * sizeof *xv);
        for (size_t i = 0; i < m; i++)
            if (wk->cl[i] == g)
                for (size_t a = 0; a < P; a++)
                    xv[a] += wk->xt[i * P + a] * v[i];
        for (size_t a = 0; a < P; a++) {
            double sum = 0;
            for (size_t b = 0; b < P; b++)
                sum += wk->b[a * P + b] * xv[b];
            bx[a] = sum;
        }
        for (size_t i = 0; i < m; i++) {
            double sum = 0;
            for (size_t a = 0; a < P; a++)
                sum += wk->xt[i * P + a] * bx[a];
            gm[i * G + g] = (wk->cl[i] == g ? v[i] : 0.0) - sum;
        }
    }
    double tr = 0, tr2 = 0;
    for (size_t g = 0; g < G; g++)
        for (size_t h = 0; h <= g; h++) {
            double k = 0;
            for (size_t i = 0; i < m; i++)
                k += gm[i * G + g] * gm[i * G + h];
            if (g == h)
                tr += k;
            tr2 += (g == h ? 1.0 : 2.0) * k * k;
        }
    free(gm);
    double dof = tr2 > 0 ? tr * tr / tr2 : 0;
    return fmin(dof, (double)G - 1);
}

int stagecal_history_check(stagecal_history_estimate *e, double lo_phys, double hi_phys,
                           const char *what)
{
    if (!e->determined && e->reason[0])
        return 0;
    e->determined = 0;
    if (!(e->dof >= 2))
        snprintf(e->reason, sizeof e->reason,
                 "%s not determined: %.2g degree(s) of freedom (at least 2 needed)", what, e->dof);
    else if (!(isfinite(e->low) && isfinite(e->high) && isfinite(e->se)))
        snprintf(e->reason, sizeof e->reason, "%s not determined: the evidence does not bound it",
                 what);
    else if (e->low < lo_phys || e->high > hi_phys)
        snprintf(e->reason, sizeof e->reason,
                 "%s not determined: its interval [%.3g, %.3g] is wider than the physical range",
                 what, e->low, e->high);
    else
        e->determined = 1, e->reason[0] = '\0';
    return e->determined;
}

size_t stagecal_history_points_from_evidence(const stagecal_evidence_set *set,
                                             stagecal_history_point *out)
{
    size_t m = 0;
    for (size_t i = 0; i < set->n; i++) {
        const stagecal_evidence *e = &set->ev[i];
        if (!e->stages_ok || !(e->se_stages > 0) || !isfinite(e->t_mid_s))
            continue;
        stagecal_history_point *p = &out[m++];
        p->t_s = e->t_mid_s;
        p->run = (long)e->run;
        p->r = e->r;
        p->f_load = e->has_load ? e->f_load : NAN;
        p->stages = e->stages;
        p->se = e->se_stages;
    }
    return m;
}
