/*
 * design.c — the correlation's Fisher information: what the current fit holds (the
 * inverse of its covariance), what one more quasi-steady window adds (g gᵀ/σ², g the
 * gradient of the form in θ), and the variance of the fitted stages at a condition with
 * the pseudo-inverse of the information (estimable conditions only).
 *
 * Workload: p ≤ 8, so every matrix lives on the stack. Inverses go through the
 * eigen-decomposition of the matrix scaled to unit diagonal (GSL's symmetric eigen
 * solver), which keeps parameters of very different sizes (a in stages, b per reflux
 * ratio) from looking singular and gives the numerical rank. Method and sources:
 * include/stagecal/design.h and docs/design.md.
 */
#include "stagecal/design.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_eigen.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_matrix.h>
#include <math.h>
#include <string.h>

#include "design_internal.h"
#include "stagecal/regress.h"
#include "internal.h"

#define P_MAX STAGECAL_FORM_MAXP

stagecal_design_params stagecal_design_default_params(void)
{
    stagecal_design_params p;
    memset(&p, 0, sizeof p);
    p.criterion = STAGECAL_DESIGN_I;
    p.tests = 4;
    p.r_lo = p.r_hi = NAN;
    p.f_lo = p.f_hi = p.f_max = NAN;
    p.starts = 24;
    p.seed = 1;
    p.xtol_rel = 1e-10;
    p.max_eval = 4000;
    p.joint_max = 12;
    p.exchange_starts = 4;
    p.exchange_sweeps = 50;
    p.exchange_max_eval = 200;
    p.exchange_tol = 1e-9;
    p.ridge = 1e-6;
    p.sample_interval_s = 600;
    p.settle_samples = 0;
    p.window_samples = 0;
    return p;
}

const char *stagecal_design_criterion_name(stagecal_design_criterion c)
{
    return c == STAGECAL_DESIGN_D ? "D-optimal" : "I-optimal";
}

const char *stagecal_design_criterion_key(stagecal_design_criterion c)
{
    return c == STAGECAL_DESIGN_D ? "d" : "i";
}

double design_tquant(double level, double dof)
{
    return gsl_cdf_tdist_Pinv(0.5 * (1 + level), dof);
}

int stagecal_design_init(stagecal_design_problem *pb, const stagecal_form *form,
                         const double *theta, double sigma, double dof, double level,
                         stagecal_error *err)
{
    if (!(isfinite(sigma) && sigma > 0))
        return error_set(err, STAGECAL_EINVAL,
                         "window standard deviation %g is not positive (expected stages > 0)",
                         sigma);
    if (!(isfinite(dof) && dof > 0))
        return error_set(err, STAGECAL_EINVAL, "degrees of freedom %g are not positive", dof);
    if (!(level > 0 && level < 1))
        return error_set(err, STAGECAL_EINVAL, "confidence level %g is outside (0, 1)", level);
    if (form->p < 1 || form->p > P_MAX)
        return error_set(err, STAGECAL_EINVAL, "form '%s' has %zu parameters (expected 1..%d)",
                         form->name, form->p, P_MAX);
    memset(pb, 0, sizeof *pb);
    pb->form = *form;
    for (size_t i = 0; i < form->p; i++) {
        if (!isfinite(theta[i]))
            return error_set(err, STAGECAL_EINVAL, "parameter %s = %g is not finite",
                             form->param_names[i], theta[i]);
        pb->theta[i] = theta[i];
    }
    pb->sigma = sigma;
    pb->dof = dof;
    pb->level = level;
    pb->rank_tol = 1e-9;
    return STAGECAL_OK;
}

void design_dof(const stagecal_design_problem *pb, const double *g, size_t k, double *before,
                double *after)
{
    double d;
    *before = pb->dof;
    *after = pb->dof + (double)k;
    if (pb->design && pb->n_design > 0 &&
        stagecal_regress_contrast_dof(pb->design, pb->n_design, pb->form.p, pb->design_run, g, &d,
                                      NULL) == STAGECAL_OK)
        *before = *after = d;
}

double design_weight(const stagecal_design_problem *pb, double r)
{
    double sd = pb->scatter.n > 0 ? stagecal_scatter_sd(&pb->scatter, r) : pb->sigma;
    return 1.0 / (sd * sd);
}

int design_grad(const stagecal_design_problem *pb, double r, double f_load, double *g,
                stagecal_error *err)
{
    double value;
    if (isnan(r) || r < 0)
        return error_set(err, STAGECAL_EINVAL, "reflux ratio %g is invalid (expected >= 0 or inf)",
                         r);
    if (pb->form.uses_load && !isfinite(f_load))
        return error_set(err, STAGECAL_EINVAL,
                         "form '%s' uses the vapour load: an F-factor is needed at R = %g",
                         pb->form.name, r);
    if (stagecal_form_eval(&pb->form, pb->theta, r, f_load, &value, g) || !isfinite(value))
        return error_set(err, STAGECAL_EINVAL, "form '%s' is undefined at R = %g, F = %g",
                         pb->form.name, r, f_load);
    for (size_t i = 0; i < pb->form.p; i++)
        if (!isfinite(g[i]))
            return error_set(err, STAGECAL_EINVAL,
                             "form '%s' has no finite gradient at R = %g, F = %g", pb->form.name, r,
                             f_load);
    return STAGECAL_OK;
}

int stagecal_design_window_info(const stagecal_design_problem *pb, double r, double f_load,
                                double *out, stagecal_error *err)
{
    double g[P_MAX];
    size_t p = pb->form.p;
    int rc = design_grad(pb, r, f_load, g, err);
    if (rc)
        return rc;
    double w = design_weight(pb, r);
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++)
            out[i * p + j] = w * g[i] * g[j];
    return STAGECAL_OK;
}

int stagecal_design_add_window(stagecal_design_problem *pb, double r, double f_load, double weight,
                               stagecal_error *err)
{
    double a[P_MAX * P_MAX];
    size_t p = pb->form.p;
    if (!(isfinite(weight) && weight > 0))
        return error_set(err, STAGECAL_EINVAL, "window weight %g is not positive", weight);
    int rc = stagecal_design_window_info(pb, r, f_load, a, err);
    if (rc)
        return rc;
    for (size_t i = 0; i < p * p; i++)
        pb->info[i] += weight * a[i];
    return STAGECAL_OK;
}

int design_info_with(const stagecal_design_problem *pb, const stagecal_design_test *tests, size_t k,
                     double *m, stagecal_error *err)
{
    size_t p = pb->form.p;
    double g[P_MAX];
    memcpy(m, pb->info, p * p * sizeof *m);
    for (size_t t = 0; t < k; t++) {
        int rc = design_grad(pb, tests[t].r, tests[t].f_load, g, err);
        if (rc)
            return rc;
        double w = design_weight(pb, tests[t].r);
        for (size_t i = 0; i < p; i++)
            for (size_t j = 0; j < p; j++)
                m[i * p + j] += w * g[i] * g[j];
    }
    return STAGECAL_OK;
}

int design_eig_compute(const double *m, size_t p, double rank_tol, design_eig *e,
                       stagecal_error *err)
{
    double a[P_MAX * P_MAX], lam[P_MAX], vv[P_MAX * P_MAX];
    memset(e, 0, sizeof *e);
    e->p = p;
    for (size_t i = 0; i < p; i++) {
        double d = m[i * p + i];
        if (!isfinite(d) || d < 0)
            return error_set(err, STAGECAL_EDATA,
                             "information matrix has diagonal entry %g (expected finite >= 0)", d);
        e->s[i] = d > 0 ? 1.0 / sqrt(d) : 1.0;
    }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++) {
            /* symmetrise: sums of outer products are symmetric only to rounding */
            double mij = 0.5 * (m[i * p + j] + m[j * p + i]);
            if (!isfinite(mij))
                return error_set(err, STAGECAL_EDATA, "information matrix is not finite");
            a[i * p + j] = e->s[i] * mij * e->s[j];
        }
    gsl_matrix_view av = gsl_matrix_view_array(a, p, p);
    gsl_vector_view lv = gsl_vector_view_array(lam, p);
    gsl_matrix_view vw = gsl_matrix_view_array(vv, p, p);
    gsl_eigen_symmv_workspace *w = gsl_eigen_symmv_alloc(p);
    if (!w)
        return error_set(err, STAGECAL_ENOMEM, "out of memory (eigen workspace)");
    int gs = gsl_eigen_symmv(&av.matrix, &lv.vector, &vw.matrix, w);
    gsl_eigen_symmv_free(w);
    if (gs == GSL_SUCCESS)
        gs = gsl_eigen_symmv_sort(&lv.vector, &vw.matrix, GSL_EIGEN_SORT_VAL_DESC);
    if (gs != GSL_SUCCESS)
        return error_set(err, STAGECAL_EINTERNAL, "eigen-decomposition failed: %s",
                         gsl_strerror(gs));
    double top = lam[0] > 0 ? lam[0] : 0;
    e->rank = 0;
    e->log_det = 0;
    for (size_t i = 0; i < p; i++) {
        e->lambda[i] = lam[i];
        if (top > 0 && lam[i] > rank_tol * top) {
            e->rank++;
            e->log_det += log(lam[i]);
        }
    }
    if (e->rank < p)
        e->log_det = -INFINITY;
    else
        for (size_t i = 0; i < p; i++)
            e->log_det -= 2 * log(e->s[i]);
    memcpy(e->v, vv, sizeof vv);
    return STAGECAL_OK;
}

double design_eig_quad(const design_eig *e, const double *g, double rank_tol, int *determined)
{
    size_t p = e->p;
    double gs[P_MAX], norm2 = 0, null2 = 0, q = 0;
    for (size_t i = 0; i < p; i++) {
        gs[i] = e->s[i] * g[i];
        norm2 += gs[i] * gs[i];
    }
    for (size_t k = 0; k < p; k++) {
        double c = 0;
        for (size_t i = 0; i < p; i++)
            c += e->v[i * p + k] * gs[i];
        if (k < e->rank)
            q += c * c / e->lambda[k];
        else
            null2 += c * c;
    }
    /* A component in the null space: the information says nothing about that
     * combination, so the variance there is unbounded. */
    *determined = null2 <= rank_tol * norm2;
    return *determined ? q : NAN;
}

int stagecal_design_variance(const stagecal_design_problem *pb, const stagecal_design_test *tests,
                             size_t k, double r, double f_load, double *var, int *determined,
                             stagecal_error *err)
{
    double m[P_MAX * P_MAX], g[P_MAX];
    design_eig e;
    int rc = design_info_with(pb, tests, k, m, err);
    if (!rc)
        rc = design_eig_compute(m, pb->form.p, pb->rank_tol, &e, err);
    if (!rc)
        rc = design_grad(pb, r, f_load, g, err);
    if (rc)
        return rc;
    *var = design_eig_quad(&e, g, pb->rank_tol, determined);
    return STAGECAL_OK;
}

int stagecal_design_from_model(const stagecal_model *m, stagecal_design_problem *pb,
                               stagecal_error *err)
{
    size_t p = m->form.p;
    double level = m->level > 0 && m->level < 1 ? m->level : 0.95;
    if (!(m->sigma > 0))
        return error_set(err, STAGECAL_EDATA,
                         "model's residual sigma is %g: the information one more window adds "
                         "is undefined (expected sigma_stages > 0)",
                         m->sigma);
    int rc = stagecal_design_init(pb, &m->form, m->theta, m->sigma, m->dof, level, err);
    if (rc == STAGECAL_EINVAL) {
        /* the numbers come from the file: bad data, not a bad argument */
        if (err)
            err->code = STAGECAL_EDATA;
        return STAGECAL_EDATA;
    }
    if (rc)
        return rc;
    if (m->scatter.n > 0) /* σ of a new window by R (format 4); checked when the file loaded */
        pb->scatter = m->scatter;
    if (m->n_windows > 0)
        pb->window_samples = (m->n_samples + m->n_windows / 2) / m->n_windows;
    if (m->design && m->n_design > 0) { /* each band's dof is its own contrast's (format 3, 5) */
        pb->design = m->design;
        pb->n_design = m->n_design;
        pb->design_run = m->design_run;
    }
    /* I₀ = C⁻¹ through the eigen-decomposition of C scaled to unit diagonal (its
     * correlation matrix): C = D R D, R = V Λ Vᵀ, C⁻¹ = D⁻¹ V Λ⁻¹ Vᵀ D⁻¹. */
    design_eig e;
    if ((rc = design_eig_compute(m->cov, p, pb->rank_tol, &e, err)))
        return rc;
    for (size_t i = 0; i < p; i++)
        if (!(m->cov[i * p + i] > 0))
            return error_set(err, STAGECAL_EDATA,
                             "covariance of parameter %s is %g (expected > 0: a parameter "
                             "known exactly has no place in a fitted correlation)",
                             m->form.param_names[i], m->cov[i * p + i]);
    if (e.rank < p || !(e.lambda[p - 1] > 0))
        return error_set(err, STAGECAL_EDATA,
                         "the model's covariance is not positive definite (smallest eigenvalue "
                         "of its correlation matrix %.3g): its information cannot be formed",
                         e.lambda[p - 1]);
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++) {
            double sum = 0;
            for (size_t k = 0; k < p; k++)
                sum += e.v[i * p + k] * e.v[j * p + k] / e.lambda[k];
            /* e.s = 1/sqrt(C_ii) = 1/D_ii */
            pb->info[i * p + j] = e.s[i] * sum * e.s[j];
        }
    return STAGECAL_OK;
}
