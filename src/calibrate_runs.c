/*
 * calibrate_runs.c — do the runs differ beyond the windows' errors? Wald's variance-component
 * F test of a run-to-run offset of the stage count on the stage-space fit (stagecal/calibrate.h,
 * stagecal_run_test_fit), the calibration's call and its warning (docs/calibration.md §4,
 * "Do the runs differ?").
 *
 * Why this test and not the plain one-way analysis of variance of the standardised residuals
 * by run: the residuals of a fitted curve are not independent (e = (I − H)ε) and the curve
 * takes up part of the between-run spread where the runs ran at different reflux ratios; the
 * extra-sum-of-squares form takes the curve's parameters out of both sums, which makes F exact
 * under H0 for a linear form with normal errors (Wald 1947; Seely & El-Bassiouni 1983, cited
 * in calibrate.h). Both were measured (tests/tool_batch_coverage ... runtest).
 */
#include <float.h>
#include <gsl/gsl_blas.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "calibrate_internal.h"
#include "internal.h"

/* A singular value below this share of the largest of the column-scaled Jacobian counts as
 * zero (rank): the run offsets can reproduce a column exactly (the constant form's), which
 * leaves rounding near 1e-16 there. */
#define RT_RANK_TOL 1e-9

static int cmp_size(const void *a, const void *b)
{
    size_t x = *(const size_t *)a, y = *(const size_t *)b;
    return (x > y) - (x < y);
}

static void not_tested(stagecal_run_test *out, const char *why)
{
    out->tested = 0;
    snprintf(out->why, sizeof out->why, "%s", why);
    out->f = out->dof1 = out->dof2 = out->p = NAN;
}

/* Projects v (n values) off the columns of U (n×k, orthonormal) in place. */
static void project_off(const gsl_matrix *u, size_t k, double *v)
{
    for (size_t j = 0; j < k; j++) {
        double c = 0;
        for (size_t i = 0; i < u->size1; i++)
            c += gsl_matrix_get(u, i, j) * v[i];
        for (size_t i = 0; i < u->size1; i++)
            v[i] -= c * gsl_matrix_get(u, i, j);
    }
}

/* The rank of a (n×p, overwritten by U of its SVD, columns in descending singular values):
 * singular values above tol, or with tol < 0 above RT_RANK_TOL times the largest (into *smax). */
static int svd_rank(gsl_matrix *a, gsl_matrix *v, gsl_vector *s, double tol, double *smax,
                    size_t *rank)
{
    if (gsl_linalg_SV_decomp_jacobi(a, v, s))
        return -1;
    if (tol < 0)
        *smax = gsl_vector_get(s, 0), tol = RT_RANK_TOL * *smax;
    *rank = 0;
    for (size_t j = 0; j < s->size; j++)
        *rank += gsl_vector_get(s, j) > tol;
    return 0;
}

int stagecal_run_test_fit(const stagecal_form *form, const double *theta, const double *r,
                          const double *f_load, const double *stages, const double *se,
                          const size_t *run, size_t n, stagecal_run_test *out, stagecal_error *err)
{
    if (!form || !theta || !out || (n > 0 && (!r || !stages || !se || !run)))
        return error_set(err, STAGECAL_EINVAL, "run test: missing argument");
    memset(out, 0, sizeof *out);
    out->windows = n;
    not_tested(out, "no window with a stage count");
    if (n == 0)
        return STAGECAL_OK;
    for (size_t i = 0; i < n; i++)
        if (!(se[i] > 0) || !isfinite(se[i]) || !isfinite(stages[i]))
            return error_set(err, STAGECAL_EINVAL,
                             "run test: window %zu has no finite stage count with se > 0", i);
    size_t p = form->p, *lab = malloc(n * sizeof *lab), *g = malloc(n * sizeof *g);
    double *e = malloc(n * sizeof *e), *ez = malloc(n * sizeof *ez), *sz2 = NULL;
    size_t *cnt = NULL;
    gsl_matrix *j = NULL, *b = NULL, *v = NULL;
    gsl_vector *s = NULL;
    int rc = STAGECAL_OK;
    if (!lab || !g || !e || !ez) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        goto done;
    }
    /* the runs: labels to 0..G−1 */
    memcpy(lab, run, n * sizeof *lab);
    qsort(lab, n, sizeof *lab, cmp_size);
    size_t ng = 0;
    for (size_t i = 0; i < n; i++)
        if (i == 0 || lab[i] != lab[ng - 1])
            lab[ng++] = lab[i];
    out->runs = ng;
    cnt = calloc(ng, sizeof *cnt);
    sz2 = calloc(ng, sizeof *sz2);
    if (!cnt || !sz2) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        goto done;
    }
    size_t most = 0;
    for (size_t i = 0; i < n; i++) {
        g[i] = (size_t)((const size_t *)bsearch(&run[i], lab, ng, sizeof *lab, cmp_size) - lab);
        cnt[g[i]]++;
        sz2[g[i]] += 1 / (se[i] * se[i]);
        if (cnt[g[i]] > most)
            most = cnt[g[i]];
    }
    if (ng < 3) {
        snprintf(out->why, sizeof out->why,
                 "windows with a stage count from %zu run(s); the test needs 3", ng);
        goto done;
    }
    if (most < 2) {
        not_tested(out, "no run has two windows with a stage count");
        goto done;
    }
    if (n <= p + ng) {
        snprintf(out->why, sizeof out->why,
                 "%zu windows for %zu parameters and %zu runs: no window left within the runs", n,
                 p, ng);
        goto done;
    }
    /* the standardised residuals and Jacobian at θ̂ */
    j = gsl_matrix_alloc(n, p);
    b = gsl_matrix_alloc(n, p);
    v = gsl_matrix_alloc(p, p);
    s = gsl_vector_alloc(p);
    if (!j || !b || !v || !s) {
        rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        goto done;
    }
    for (size_t i = 0; i < n; i++) {
        double val, grad[STAGECAL_FORM_MAXP];
        if (stagecal_form_eval(form, theta, r[i], f_load ? f_load[i] : 0, &val, grad) ||
            !isfinite(val)) {
            rc = error_set(err, STAGECAL_EINVAL, "run test: form '%s' undefined at window %zu",
                           form->name, i);
            goto done;
        }
        e[i] = (stages[i] - val) / se[i];
        for (size_t k = 0; k < p; k++)
            gsl_matrix_set(j, i, k, isfinite(grad[k]) ? grad[k] / se[i] : 0);
    }
    /* columns scaled to unit length: the rank does not depend on the parameters' units */
    for (size_t k = 0; k < p; k++) {
        gsl_vector_view c = gsl_matrix_column(j, k);
        double nrm = gsl_blas_dnrm2(&c.vector);
        if (nrm > 0)
            gsl_vector_scale(&c.vector, 1 / nrm);
    }
    /* M_Z J and M_Z e: each run's weighted mean taken out (Z_ik = 1/se_i) */
    gsl_matrix_memcpy(b, j);
    memcpy(ez, e, n * sizeof *ez);
    for (size_t k = 0; k <= p; k++) {
        double *c = calloc(ng, sizeof *c);
        if (!c) {
            rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
            goto done;
        }
        for (size_t i = 0; i < n; i++)
            c[g[i]] += (k < p ? gsl_matrix_get(b, i, k) : ez[i]) / se[i];
        for (size_t i = 0; i < n; i++) {
            double d = c[g[i]] / sz2[g[i]] / se[i];
            if (k < p)
                gsl_matrix_set(b, i, k, gsl_matrix_get(b, i, k) - d);
            else
                ez[i] -= d;
        }
        free(c);
    }
    size_t rj, rb;
    double smax = 0;
    if (svd_rank(j, v, s, -1, &smax, &rj) || svd_rank(b, v, s, RT_RANK_TOL * smax, &smax, &rb)) {
        rc = error_set(err, STAGECAL_ENOCONV, "run test: SVD failed");
        goto done;
    }
    project_off(j, rj, e);  /* RSS0: off J's span */
    project_off(b, rb, ez); /* RSS1: off [J Z]'s (Frisch–Waugh: M_Z, then M_Z J) */
    double rss0 = 0, rss1 = 0;
    for (size_t i = 0; i < n; i++)
        rss0 += e[i] * e[i], rss1 += ez[i] * ez[i];
    double d1 = (double)(ng + rb) - (double)rj, d2 = (double)n - (double)(ng + rb);
    if (!(d1 >= 1) || !(d2 >= 1)) {
        snprintf(out->why, sizeof out->why,
                 "no degrees of freedom left between (%g) or within (%g) the runs", d1, d2);
        goto done;
    }
    if (!(rss1 > DBL_MIN * (double)n)) {
        not_tested(out, "the windows of each run lie exactly on the curve plus its offset");
        goto done;
    }
    out->tested = 1;
    out->why[0] = '\0';
    out->dof1 = d1;
    out->dof2 = d2;
    out->f = fmax((rss0 - rss1) / d1, 0) / (rss1 / d2);
    out->p = gsl_cdf_fdist_Q(out->f, d1, d2);
done:
    free(lab);
    free(g);
    free(e);
    free(ez);
    free(cnt);
    free(sz2);
    gsl_matrix_free(j);
    gsl_matrix_free(b);
    gsl_matrix_free(v);
    gsl_vector_free(s);
    return rc;
}

int calibrate_run_test(stagecal_calibration *cal, stagecal_error *err)
{
    stagecal_run_test *t = &cal->run_test;
    memset(t, 0, sizeof *t);
    t->f = t->dof1 = t->dof2 = t->p = NAN;
    if (cal->stage_status != STAGECAL_OK) {
        snprintf(t->why, sizeof t->why, "the stage-space fit %s",
                 cal->stage_status < 0 ? "was not run" : "failed");
        return STAGECAL_OK;
    }
    const stagecal_evidence *ev = cal->evidence.ev;
    size_t nev = cal->evidence.n, n = 0;
    double *buf = malloc((nev ? nev : 1) * 4 * sizeof *buf);
    size_t *run = malloc((nev ? nev : 1) * sizeof *run);
    if (!buf || !run) {
        free(buf);
        free(run);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    for (size_t i = 0; i < nev; i++) {
        if (!ev[i].stages_ok) /* the stage-space fit's windows (stagecal_evidence_points) */
            continue;
        buf[n] = ev[i].r;
        buf[nev + n] = ev[i].has_load ? ev[i].f_load : 0;
        buf[2 * nev + n] = ev[i].stages;
        buf[3 * nev + n] = ev[i].se_stages;
        run[n++] = ev[i].run;
    }
    const stagecal_regress_result *sf = &cal->stage_fit;
    stagecal_error e2;
    stagecal_error_clear(&e2);
    int rc = stagecal_run_test_fit(&sf->form, sf->theta, buf, sf->form.uses_load ? buf + nev : NULL,
                                   buf + 2 * nev, buf + 3 * nev, run, n, t, &e2);
    free(buf);
    free(run);
    if (rc == STAGECAL_ENOMEM)
        return error_set(err, rc, "%s", e2.text);
    if (rc != STAGECAL_OK) { /* a diagnostic: the calibration stands without it */
        memset(t, 0, sizeof *t);
        t->f = t->dof1 = t->dof2 = t->p = NAN;
        size_t k = strnlen(e2.text, sizeof t->why - 1);
        memcpy(t->why, e2.text, k); /* the error's text, cut to the field */
        t->why[k] = '\0';
    }
    return STAGECAL_OK;
}

int calibrate_run_test_warn(stagecal_calibration *cal, stagecal_error *err)
{
    const stagecal_run_test *t = &cal->run_test;
    const stagecal_regress_result *fit = stagecal_calibration_fit(cal);
    if (!t->tested || !(t->p < STAGECAL_RUN_TEST_ALPHA) || cal->used == STAGECAL_MODEL_CENSORED ||
        fit->cov_kind == STAGECAL_COV_CR2_RUN)
        return STAGECAL_OK;
    char text[800], few[64];
    snprintf(few, sizeof few, " (it needs windows from at least %d runs)",
             STAGECAL_CR2_MIN_CLUSTERS);
    snprintf(text, sizeof text,
             "RUNS DIFFER beyond the windows' errors: the windows of one run agree more than "
             "windows of different runs (F = %.3g on %g and %g dof, p = %.2g; %zu windows with "
             "a stage count in %zu runs). The intervals (%s) take the windows as independent "
             "and were measured short in that case (8 runs whose stage counts differ by 0.05 "
             "and 0.2 stages from run to run: the mean law's 95 %% band covered 0.917 and "
             "0.892, the plateau's t interval 0.881 and 0.842; docs/calibration.md §4): "
             "consider --covariance cr2-run%s",
             t->f, t->dof1, t->dof2, t->p, t->windows, t->runs,
             stagecal_regress_cov_name(fit->cov_kind),
             t->runs < STAGECAL_CR2_MIN_CLUSTERS ? few : "");
    return stagecal_model_add_warning(&cal->model, text, err);
}
