/*
 * vle_activity.c — IDEAL and activity models (Wilson, NRTL, van Laar, two-parameter
 * Margules) in the γ–φ form with an ideal vapour: Antoine, ln γ in complex arithmetic
 * (complex-step slopes), the bubble solve (GSL Brent on T), the exact queries, and
 * stagecal_vle_alloc_activity, which tabulates the bubble curve (vle_table.c).
 */
#include <complex.h>
#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

typedef double complex cplx;

/* ---- γ–φ models ---------------------------------------------------------------------- */

static cplx lnpsat_c(const stagecal_antoine *a, cplx t)
{
    return 5.0 * VLE_LN10 + VLE_LN10 * (a->a - a->b / (t + a->c));
}

/* ln γ1, ln γ2 at (x1, T); complex so that derivatives come from a complex step. */
static void lngamma_c(const stagecal_vle *v, cplx x1, cplx t, cplx *l1, cplx *l2)
{
    cplx x2 = 1.0 - x1;
    const double *p = v->par;
    switch (v->kind) {
    case STAGECAL_VLE_WILSON: {
        cplx rt = VLE_R_GAS * t;
        cplx l12 = (p[3] / p[2]) * cexp(-p[0] / rt), l21 = (p[2] / p[3]) * cexp(-p[1] / rt);
        cplx d1 = x1 + l12 * x2, d2 = x2 + l21 * x1, q = l12 / d1 - l21 / d2;
        *l1 = -clog(d1) + x2 * q;
        *l2 = -clog(d2) - x1 * q;
        return;
    }
    case STAGECAL_VLE_NRTL: {
        cplx t12 = p[0] + p[1] / t, t21 = p[2] + p[3] / t;
        cplx g12 = cexp(-p[4] * t12), g21 = cexp(-p[4] * t21);
        cplx d1 = x1 + x2 * g21, d2 = x2 + x1 * g12;
        *l1 = x2 * x2 * (t21 * (g21 / d1) * (g21 / d1) + t12 * g12 / (d2 * d2));
        *l2 = x1 * x1 * (t12 * (g12 / d2) * (g12 / d2) + t21 * g21 / (d1 * d1));
        return;
    }
    case STAGECAL_VLE_VANLAAR: {
        cplx d = p[0] * x1 + p[1] * x2;
        if (p[0] == 0.0 && p[1] == 0.0) {
            *l1 = *l2 = 0.0;
            return;
        }
        cplx a = p[1] * x2 / d, b = p[0] * x1 / d;
        *l1 = p[0] * a * a;
        *l2 = p[1] * b * b;
        return;
    }
    case STAGECAL_VLE_MARGULES:
        *l1 = x2 * x2 * (p[0] + 2.0 * (p[1] - p[0]) * x1);
        *l2 = x1 * x1 * (p[1] + 2.0 * (p[0] - p[1]) * x2);
        return;
    default: /* IDEAL */
        *l1 = *l2 = 0.0;
        return;
    }
}

/* Bubble residual f = ln(x γ1 P1 + (1−x) γ2 P2) − ln P and vapour y = x γ1 P1 / Σ. */
static void model_eval(const stagecal_vle *v, cplx x, cplx t, cplx *f, cplx *y)
{
    cplx l1, l2;
    lngamma_c(v, x, t, &l1, &l2);
    cplx s1 = x * cexp(l1 + lnpsat_c(&v->ant[0], t));
    cplx s2 = (1.0 - x) * cexp(l2 + lnpsat_c(&v->ant[1], t));
    cplx s = s1 + s2;
    *f = clog(s) - v->ln_p;
    *y = s1 / s;
}

/* ln γ1, ln γ2 at a real (x1, T) for the models whose ln γ uses only products and quotients
 * (IDEAL, van Laar, Margules): lngamma_c's operations in its order, every imaginary part zero. */
static void lngamma_r(const stagecal_vle *v, double x1, double *l1, double *l2)
{
    double x2 = 1.0 - x1;
    const double *p = v->par;
    if (v->kind == STAGECAL_VLE_MARGULES) {
        *l1 = x2 * x2 * (p[0] + 2.0 * (p[1] - p[0]) * x1);
        *l2 = x1 * x1 * (p[1] + 2.0 * (p[0] - p[1]) * x2);
    } else if (v->kind == STAGECAL_VLE_VANLAAR && !(p[0] == 0.0 && p[1] == 0.0)) {
        double d = p[0] * x1 + p[1] * x2, a = p[1] * x2 / d, b = p[0] * x1 / d;
        *l1 = p[0] * a * a;
        *l2 = p[1] * b * b;
    } else {
        *l1 = *l2 = 0.0;
    }
}

/* model_eval at a real (x, T) in real arithmetic, bit for bit the real parts model_eval gives:
 * with every imaginary part zero, a complex product or sum is the real one, the complex
 * quotient of two reals is their real quotient (Smith's method, Smith 1962, "Algorithm 116:
 * Complex division", Commun. ACM 5:435, with a zero ratio), cexp of a real a below ~709 is
 * exp(a)·cos 0, and the real part of clog of a real s in [2, 1e300] is log(hypot(s, 0)) =
 * log(s) (glibc's clog takes log1p for |s| in [0.5, 2)). Where a value leaves those ranges (or
 * is not finite), and for Wilson and NRTL (whose ln γ takes complex logarithms), the complex
 * evaluation answers. Checked on every query of the benzene–toluene and ethanol–water models at
 * 9 pressures and 24000 bubble points at pressures from 0.3 Pa to 300 MPa: identical to the
 * last bit (docs/performance.md, seventh pass). A dense model builds 2.2x faster (no complex
 * exp, log or division in the ~13 evaluations of each node's bubble solve). */
static void model_eval_real(const stagecal_vle *v, double x, double t, double *f, double *y)
{
    stagecal_vle_kind k = v->kind;
    if (k == STAGECAL_VLE_IDEAL || k == STAGECAL_VLE_VANLAAR || k == STAGECAL_VLE_MARGULES) {
        double l1, l2;
        lngamma_r(v, x, &l1, &l2);
        double e1 =
            l1 + (5.0 * VLE_LN10 + VLE_LN10 * (v->ant[0].a - v->ant[0].b / (t + v->ant[0].c)));
        double e2 =
            l2 + (5.0 * VLE_LN10 + VLE_LN10 * (v->ant[1].a - v->ant[1].b / (t + v->ant[1].c)));
        if (fabs(e1) < 700.0 && fabs(e2) < 700.0) {
            double s1 = x * exp(e1), s = s1 + (1.0 - x) * exp(e2);
            if (s >= 2.0 && s <= 1e300) {
                *f = log(s) - v->ln_p;
                *y = s1 / s;
                return;
            }
        }
    }
    cplx fc, yc;
    model_eval(v, x, t, &fc, &yc);
    *f = creal(fc);
    *y = creal(yc);
}

/* A model and one fixed variable: x for the bubble residual in T, y for the inverse. */
typedef struct {
    const stagecal_vle *v;
    double fixed;
} fix_ctx;

static double bub_f(double t, void *ctx)
{
    const fix_ctx *c = ctx;
    double f, y;
    model_eval_real(c->v, c->fixed, t, &f, &y);
    return f;
}

/* Bubble T at x by Brent from guess t0. s may be NULL (allocated here). */
int vle_bubble_solve(const stagecal_vle *v, double x, double t0, gsl_root_fsolver *s, double *t_k,
                     double *y)
{
    fix_ctx c = {v, x};
    double tmin = fmax(-v->ant[0].c, -v->ant[1].c) + VLE_T_GUARD;
    double d = 0.5, lo, hi, flo, fhi;
    if (!(t0 > tmin))
        t0 = tmin + 1.0;
    for (int k = 0;; k++) {
        lo = fmax(t0 - d, tmin);
        hi = t0 + d;
        flo = bub_f(lo, &c);
        fhi = bub_f(hi, &c);
        if (flo <= 0.0 && fhi >= 0.0)
            break;
        if (k > 60 || !isfinite(flo) || !isfinite(fhi))
            return STAGECAL_ENOCONV;
        d *= 4.0;
    }
    double t;
    if (flo == 0.0 || fhi == 0.0) {
        t = flo == 0.0 ? lo : hi;
    } else {
        gsl_root_fsolver *own = NULL;
        if (!s && !(s = own = gsl_root_fsolver_alloc(gsl_root_fsolver_brent)))
            return STAGECAL_ENOMEM;
        gsl_function fn = {bub_f, &c};
        int st = gsl_root_fsolver_set(s, &fn, lo, hi);
        size_t it = 0;
        while (st == GSL_SUCCESS && it++ < v->vp.max_iter) {
            st = gsl_root_fsolver_iterate(s);
            if (st != GSL_SUCCESS)
                break;
            st = gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                        0.0, v->vp.t_epsrel);
            if (st == GSL_SUCCESS)
                break;
            if (st != GSL_CONTINUE)
                break;
            st = GSL_SUCCESS;
        }
        t = gsl_root_fsolver_root(s);
        gsl_root_fsolver_free(own);
        if (st != GSL_SUCCESS)
            return STAGECAL_ENOCONV;
    }
    double f, yr;
    model_eval_real(v, x, t, &f, &yr);
    if (!isfinite(yr))
        return STAGECAL_ENOCONV;
    *t_k = t;
    *y = yr;
    return STAGECAL_OK;
}

/* Exact slopes at a solved bubble point (x, t): d(y*)/dx and dT/dx, by the implicit
 * function theorem on f(x, T) = 0 with complex-step partial derivatives. */
void vle_exact_slopes(const stagecal_vle *v, double x, double t, double *dydx, double *dtdx)
{
    cplx fx, yx, ft, yt;
    model_eval(v, x + I * VLE_CSTEP, t, &fx, &yx);
    model_eval(v, x, t + I * VLE_CSTEP, &ft, &yt);
    double f_x = cimag(fx) / VLE_CSTEP, y_x = cimag(yx) / VLE_CSTEP;
    double f_t = cimag(ft) / VLE_CSTEP, y_t = cimag(yt) / VLE_CSTEP;
    double tx = -f_x / f_t;
    *dtdx = tx;
    *dydx = y_x + y_t * tx;
}

/* Initial T guess at x from the table (Hermite on T when built, else linear). */
double vle_t_guess(const stagecal_vle *v, double x)
{
    if (v->ts && v->mts)
        return vle_herm_eval(v, v->ts, v->mts, x);
    return stagecal_antoine_tboil(&v->ant[1], v->p_pa);
}

static int check_antoine(const stagecal_antoine *a, const char *which, stagecal_error *err)
{
    if (!isfinite(a->a) || !isfinite(a->b) || !isfinite(a->c) || !(a->b > 0.0))
        return error_set(err, STAGECAL_EINVAL,
                         "antoine constants of the %s component (%g, %g, %g): expected finite "
                         "a, b > 0, c",
                         which, a->a, a->b, a->c);
    if (!(a->t_min_k >= 0.0 && a->t_max_k >= a->t_min_k && isfinite(a->t_max_k)) ||
        (a->t_max_k > 0.0 && !(a->t_min_k + a->c > 0.0)))
        return error_set(err, STAGECAL_EINVAL,
                         "antoine range of the %s component [%g, %g] K: expected "
                         "0 <= t_min_k <= t_max_k with t_min_k + c > 0 (or 0, 0 for none)",
                         which, a->t_min_k, a->t_max_k);
    return STAGECAL_OK;
}

static int check_params(stagecal_vle_kind kind, const double *p, size_t np, stagecal_error *err)
{
    const char *name = stagecal_vle_kind_name(kind);
    if (kind == STAGECAL_VLE_IDEAL)
        return STAGECAL_OK;
    if (np != vle_nparam_of(kind) || !p)
        return error_set(err, STAGECAL_EINVAL, "%s model has %zu parameters, expected %zu", name,
                         np, vle_nparam_of(kind));
    for (size_t i = 0; i < np; i++)
        if (!isfinite(p[i]))
            return error_set(err, STAGECAL_EINVAL,
                             "%s parameter %zu is %g, expected a finite "
                             "value",
                             name, i + 1, p[i]);
    if (kind == STAGECAL_VLE_WILSON && !(p[2] > 0.0 && p[3] > 0.0))
        return error_set(err, STAGECAL_EINVAL,
                         "wilson molar volumes (%g, %g) m3/mol: expected both > 0", p[2], p[3]);
    if (kind == STAGECAL_VLE_NRTL && !(p[4] > 0.0 && p[4] <= 1.0))
        return error_set(err, STAGECAL_EINVAL, "nrtl non-randomness %g is outside (0, 1]", p[4]);
    if (kind == STAGECAL_VLE_VANLAAR && !(p[0] * p[1] > 0.0) && !(p[0] == 0.0 && p[1] == 0.0))
        return error_set(err, STAGECAL_EINVAL,
                         "van laar constants (%g, %g): expected the same sign, both nonzero "
                         "(or both 0)",
                         p[0], p[1]);
    return STAGECAL_OK;
}

static int antoine_outside(const stagecal_antoine *a, double lo, double hi)
{
    if (a->t_min_k == 0.0 && a->t_max_k == 0.0)
        return 0;
    return lo < a->t_min_k || hi > a->t_max_k;
}

stagecal_vle *stagecal_vle_alloc_activity(stagecal_vle_kind kind, const stagecal_antoine ant[2],
                                          const double *params, size_t nparam, double p_pa,
                                          const stagecal_vle_params *vp, stagecal_error *err)
{
    stagecal_vle_params prm = vp ? *vp : stagecal_vle_default_params();
    if (!vle_is_activity(kind)) {
        error_set(err, STAGECAL_EINVAL, "model kind '%s' is not ideal or an activity model",
                  stagecal_vle_kind_name(kind));
        return NULL;
    }
    if (!ant || check_antoine(&ant[0], "light", err) || check_antoine(&ant[1], "heavy", err) ||
        check_params(kind, params, nparam, err))
        return NULL;
    if (!(p_pa > 0.0) || !isfinite(p_pa)) {
        error_set(err, STAGECAL_EINVAL, "pressure %g Pa is outside (0, inf)", p_pa);
        return NULL;
    }
    if (prm.grid_n < 17 || prm.grid_n > 1000000 || !(prm.t_epsrel > 0.0) || prm.max_iter < 10) {
        error_set(err, STAGECAL_EINVAL,
                  "vle params: grid_n %zu, t_epsrel %g, max_iter %zu; expected grid_n in "
                  "[17, 1e6], t_epsrel > 0, max_iter >= 10",
                  prm.grid_n, prm.t_epsrel, prm.max_iter);
        return NULL;
    }
    stagecal_vle *v = vle_new(kind, err);
    if (!v)
        return NULL;
    v->vp = prm;
    v->ant[0] = ant[0];
    v->ant[1] = ant[1];
    for (size_t i = 0; i < nparam && i < STAGECAL_VLE_MAXPARAM && kind != STAGECAL_VLE_IDEAL; i++)
        v->par[i] = params[i];
    v->p_pa = p_pa;
    v->ln_p = log(p_pa);
    v->has_t = 1;
    size_t n = prm.grid_n;
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s || !vle_alloc_nodes(v, n, 1)) {
        gsl_root_fsolver_free(s);
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    double t = stagecal_antoine_tboil(&ant[1], p_pa);
    for (size_t i = 0; i < n; i++) {
        /* x_i = sin²(πi/(2(n−1))), mirrored above the middle so both ends are exact */
        size_t j = i <= (n - 1) / 2 ? i : n - 1 - i;
        double sn = sin(0.5 * 3.14159265358979323846 * (double)j / (double)(n - 1));
        v->xs[i] = i <= (n - 1) / 2 ? sn * sn : 1.0 - sn * sn;
        int rc = vle_bubble_solve(v, v->xs[i], t, s, &v->ts[i], &v->ys[i]);
        if (rc != STAGECAL_OK) {
            error_set(err, rc, "%s model: bubble point at x = %.6g did not converge",
                      stagecal_vle_kind_name(kind), v->xs[i]);
            gsl_root_fsolver_free(s);
            stagecal_vle_free(v);
            return NULL;
        }
        vle_exact_slopes(v, v->xs[i], v->ts[i], &v->ms[i], &v->mts[i]);
        t = v->ts[i];
    }
    gsl_root_fsolver_free(s);
    v->ys[0] = 0.0;
    v->ys[n - 1] = 1.0;
    v->t_lo = v->t_hi = v->ts[0];
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(v->ms[i]) || !isfinite(v->mts[i])) {
            error_set(err, STAGECAL_ENOCONV, "%s model: slope at x = %.6g is not finite",
                      stagecal_vle_kind_name(kind), v->xs[i]);
            stagecal_vle_free(v);
            return NULL;
        }
        v->t_lo = fmin(v->t_lo, v->ts[i]);
        v->t_hi = fmax(v->t_hi, v->ts[i]);
    }
    if (!(v->ts[n - 1] < v->ts[0])) {
        error_set(err, STAGECAL_EINVAL,
                  "component 1 boils at %.2f K and component 2 at %.2f K at %g Pa: component 1 "
                  "must be the light (lower-boiling) one",
                  v->ts[n - 1], v->ts[0], p_pa);
        stagecal_vle_free(v);
        return NULL;
    }
    vle_find_branch_end(v);
    if (v->iend == 0) {
        error_set(err, STAGECAL_EINVAL, "%s model: y* does not increase from x = 0",
                  stagecal_vle_kind_name(kind));
        stagecal_vle_free(v);
        return NULL;
    }
    if (vle_build_buckets(v) != STAGECAL_OK) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    if (antoine_outside(&ant[0], v->t_lo, v->t_hi))
        v->antoine_flags |= STAGECAL_VLE_ANTOINE_LIGHT;
    if (antoine_outside(&ant[1], v->t_lo, v->t_hi))
        v->antoine_flags |= STAGECAL_VLE_ANTOINE_HEAVY;
    vle_find_azeotropes(v);
    return v;
}

/* A model at p_pa whose table is Σ w[j]·(table of m[j]): node values and slopes combined
 * node by node. A cubic Hermite interpolant is linear in its node data, so the blend's
 * y*(x) is exactly Σ w[j]·y*_j(x). */
stagecal_vle *vle_alloc_blend(const stagecal_vle *const *m, const double *w, size_t k, double p_pa,
                              stagecal_error *err)
{
    const stagecal_vle *a = m[0];
    int ok = k > 0 && vle_is_activity(a->kind) && p_pa > 0.0 && isfinite(p_pa);
    for (size_t j = 0; ok && j < k; j++)
        ok = m[j]->kind == a->kind && m[j]->n == a->n && m[j]->vp.exact == a->vp.exact &&
             m[j]->ts && isfinite(w[j]);
    if (!ok) {
        error_set(err, STAGECAL_EINVAL, "blend: tables of one activity model expected");
        return NULL;
    }
    stagecal_vle *v = vle_new(a->kind, err);
    if (!v)
        return NULL;
    v->vp = a->vp;
    v->ant[0] = a->ant[0];
    v->ant[1] = a->ant[1];
    memcpy(v->par, a->par, sizeof v->par);
    v->p_pa = p_pa;
    v->ln_p = log(p_pa);
    v->has_t = 1;
    size_t n = a->n;
    if (!vle_alloc_nodes(v, n, 1)) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    for (size_t i = 0; i < n; i++) {
        double y = 0.0, my = 0.0, t = 0.0, mt = 0.0;
        for (size_t j = 0; j < k; j++) {
            y += w[j] * m[j]->ys[i];
            my += w[j] * m[j]->ms[i];
            t += w[j] * m[j]->ts[i];
            mt += w[j] * m[j]->mts[i];
        }
        v->xs[i] = a->xs[i];
        v->ys[i] = y, v->ms[i] = my, v->ts[i] = t, v->mts[i] = mt;
        v->t_lo = i == 0 || t < v->t_lo ? t : v->t_lo;
        v->t_hi = i == 0 || t > v->t_hi ? t : v->t_hi;
    }
    v->ys[0] = 0.0;
    v->ys[n - 1] = 1.0;
    vle_find_branch_end(v);
    if (v->iend == 0 || vle_build_buckets_like(v, a->bx ? a : NULL) != STAGECAL_OK ||
        stagecal_vle_validate(v, NULL, NULL) != STAGECAL_OK) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_EDATA, "blend: not a valid table (or out of memory)");
        return NULL;
    }
    if (antoine_outside(&v->ant[0], v->t_lo, v->t_hi))
        v->antoine_flags |= STAGECAL_VLE_ANTOINE_LIGHT;
    if (antoine_outside(&v->ant[1], v->t_lo, v->t_hi))
        v->antoine_flags |= STAGECAL_VLE_ANTOINE_HEAVY;
    vle_find_azeotropes(v);
    return v;
}

int stagecal_vle_ystar_exact(const stagecal_vle *vle, double x, double *y, double *t_k)
{
    if (!(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    if (!vle_is_activity(vle->kind)) {
        if (t_k && vle->has_t)
            stagecal_vle_tbubble(vle, x, t_k);
        return stagecal_vle_ystar(vle, x, y);
    }
    double t, yy;
    int rc = vle_bubble_solve(vle, x, vle_t_guess(vle, x), NULL, &t, &yy);
    if (rc != STAGECAL_OK)
        return rc;
    *y = yy;
    if (t_k)
        *t_k = t;
    return STAGECAL_OK;
}

static double inv_f(double x, void *ctx)
{
    const fix_ctx *c = ctx;
    double y;
    if (stagecal_vle_ystar_exact(c->v, x, &y, NULL) != STAGECAL_OK)
        return GSL_NAN;
    return y - c->fixed;
}

/* Exact inverse: Brent on y*_exact(x) − y, bracketed around the table's answer. */
int vle_xstar_exact(const stagecal_vle *v, double y, double *x)
{
    double x0;
    int rc = vle_herm_invert(v, y, &x0);
    if (rc != STAGECAL_OK)
        return rc;
    if (y == 0.0 || y == 1.0) {
        *x = y;
        return STAGECAL_OK;
    }
    fix_ctx c = {v, y};
    size_t i = vle_locate(v->xs, x0, 0, v->n - 1);
    size_t lo_i = i > 0 ? i - 1 : 0, hi_i = i + 2 < v->n ? i + 2 : v->n - 1;
    double lo = v->xs[lo_i], hi = v->xs[hi_i];
    double flo = inv_f(lo, &c), fhi = inv_f(hi, &c);
    if (flo == 0.0 || fhi == 0.0) {
        *x = flo == 0.0 ? lo : hi;
        return STAGECAL_OK;
    }
    if (!(flo < 0.0 && fhi > 0.0))
        return STAGECAL_ENOCONV;
    gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
    if (!s)
        return STAGECAL_ENOMEM;
    gsl_function fn = {inv_f, &c};
    int st = gsl_root_fsolver_set(s, &fn, lo, hi);
    for (size_t it = 0; st == GSL_SUCCESS && it < v->vp.max_iter; it++) {
        if ((st = gsl_root_fsolver_iterate(s)) != GSL_SUCCESS)
            break;
        st = gsl_root_test_interval(gsl_root_fsolver_x_lower(s), gsl_root_fsolver_x_upper(s),
                                    1e-300, 4.0 * DBL_EPSILON);
        if (st == GSL_SUCCESS)
            break;
        st = GSL_SUCCESS;
        if (it + 1 == v->vp.max_iter)
            st = GSL_EMAXITER;
    }
    *x = gsl_root_fsolver_root(s);
    gsl_root_fsolver_free(s);
    return st == GSL_SUCCESS ? STAGECAL_OK : STAGECAL_ENOCONV;
}

int stagecal_vle_gamma(const stagecal_vle *vle, double x, double t_k, double *g1, double *g2)
{
    if (!vle_is_activity(vle->kind) || !(x >= 0.0 && x <= 1.0) || !(t_k > 0.0 && isfinite(t_k)))
        return STAGECAL_EINVAL;
    cplx l1, l2;
    lngamma_c(vle, x, t_k, &l1, &l2);
    *g1 = exp(creal(l1));
    *g2 = exp(creal(l2));
    return isfinite(*g1) && isfinite(*g2) ? STAGECAL_OK : STAGECAL_ENOCONV;
}

double stagecal_antoine_psat(const stagecal_antoine *ant, double t_k)
{
    return 1e5 * pow(10.0, ant->a - ant->b / (t_k + ant->c));
}

double stagecal_antoine_tboil(const stagecal_antoine *ant, double p_pa)
{
    return ant->b / (ant->a - log10(p_pa / 1e5)) - ant->c;
}
