/*
 * cr2.c — the cluster-robust CR2 sandwich (Bell & McCaffrey 2002) and the Bell–McCaffrey
 * degrees of freedom of a contrast in the form of Imbens & Kolesár (2016) and Pustejovsky &
 * Tipton (2018), shared by the history fit and the regression's run-clustered covariance.
 * Sources and formulas: src/cr2.h.
 *
 * Workload: m windows (tens to a few hundred), P parameters (under 20), G runs (tens);
 * the dof of one contrast builds an m×G matrix, so a few hundred kB at most.
 */
#include "cr2.h"

#include <gsl/gsl_blas.h>
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "parallel.h"

/* The CR2 sandwich: V = B·Σ_g X̃_g' A_g ẽ_g ẽ_g' A_g X̃_g·B with X̃ = W^½J, ẽ = W^½r,
 * A_g = (I − X̃_g B X̃_g')^−½. cl[i] is window i's cluster, ncl clusters. */
int cr2_sandwich(const gsl_matrix *J, const double *w, const double *res, const size_t *cl,
                 size_t ncl, const gsl_matrix *B, gsl_matrix *V, gsl_matrix *D, stagecal_error *err)
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
double cr2_bm_dof(const struct cr2_work *wk, const double *c)
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

size_t cr2_clusters(const size_t *lab, size_t n, size_t *cl)
{
    size_t G = 0;
    for (size_t i = 0; i < n; i++) {
        size_t j = 0;
        while (j < i && lab[j] != lab[i])
            j++;
        cl[i] = j < i ? cl[j] : G++;
    }
    return G;
}

int cr2_design_dof(const double *x, size_t n, size_t p, const size_t *lab, const double *c,
                   double *dof, stagecal_error *err)
{
    if (!x || !lab || !c || !dof || p < 1 || n <= p)
        return error_set(err, STAGECAL_EINVAL,
                         "cluster dof: %zu rows of %zu values (expected more rows than values)", n,
                         p);
    int rc = STAGECAL_OK;
    size_t *cl = malloc(n * sizeof *cl);
    double *zero = calloc(2 * n, sizeof *zero), *one = zero ? zero + n : NULL;
    gsl_matrix *X = gsl_matrix_alloc(n, p), *B = gsl_matrix_alloc(p, p);
    gsl_matrix *V = gsl_matrix_alloc(p, p), *D = gsl_matrix_alloc(n, p);
    double *cs = malloc(p * sizeof *cs);
    if (!cl || !zero || !X || !B || !V || !D || !cs) {
        rc = error_set(err, STAGECAL_ENOMEM, "cluster dof: out of memory");
        goto done;
    }
    size_t G = cr2_clusters(lab, n, cl);
    if (G < 2) {
        rc = error_set(err, STAGECAL_EINVAL, "cluster dof: %zu cluster(s) (at least 2 needed)", G);
        goto done;
    }
    /* columns equilibrated (as stagecal_regress_bm_dof): the dof does not depend on the
     * parameters' scale, and c'θ = (c/cn)'(cn·θ) */
    for (size_t k = 0; k < p; k++) {
        double s = 0;
        for (size_t i = 0; i < n; i++)
            s += x[i * p + k] * x[i * p + k];
        if (!(s > 0) || !isfinite(s)) {
            rc = error_set(err, STAGECAL_EDATA,
                           "cluster dof: column %zu of the design is zero or not finite", k + 1);
            goto done;
        }
        s = sqrt(s);
        cs[k] = c[k] / s;
        for (size_t i = 0; i < n; i++)
            gsl_matrix_set(X, i, k, x[i * p + k] / s);
    }
    for (size_t i = 0; i < n; i++)
        one[i] = 1.0;
    gsl_blas_dgemm(CblasTrans, CblasNoTrans, 1.0, X, X, 0.0, B);
    gsl_quiet q = gsl_quiet_begin();
    int gs = gsl_linalg_cholesky_decomp1(B);
    if (gs == GSL_SUCCESS)
        gs = gsl_linalg_cholesky_invert(B);
    gsl_quiet_end(q);
    if (gs != GSL_SUCCESS) {
        rc = error_set(err, STAGECAL_EDATA, "cluster dof: the design is rank deficient");
        goto done;
    }
    /* zero residuals: only D (the dof's A_g X̃_g B) is wanted */
    if ((rc = cr2_sandwich(X, one, zero, cl, G, B, V, D, err)))
        goto done;
    struct cr2_work wk = {n, p, G, X->data, D->data, B->data, cl};
    double d = cr2_bm_dof(&wk, cs);
    if (!(d > 0)) {
        rc = error_set(err, STAGECAL_EDATA, "cluster dof: the contrast has no variance");
        goto done;
    }
    *dof = fmax(d, 1.0);
done:
    free(cs);
    gsl_matrix_free(D);
    gsl_matrix_free(V);
    gsl_matrix_free(B);
    gsl_matrix_free(X);
    free(zero);
    free(cl);
    return rc;
}
