/*
 * vle_table.c — the cubic Hermite table behind TABLE models (x–y data, GSL's Steffen
 * slopes) and behind IDEAL/activity models (exact values and slopes on a dense grid):
 * evaluation, slope and safeguarded-Newton inversion on one segment, located through
 * a bucket index; stagecal_vle_alloc_table.
 */
#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* GSL's inline gsl_interp_bsearch (gsl_interp.h): the same search without a call into the
 * shared library on every table query */
#define HAVE_INLINE 1
#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>

#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

/* ---- Hermite kernel ------------------------------------------------------------------ */
/* vle_hseg, struct vle_seg and the hot queries (locate, evaluate, invert) are inline in
 * vle_internal.h; the functions below are their out-of-line forms. */

static vle_hseg hseg_make(const stagecal_vle *v, const double *ys, const double *ms, size_t i)
{
    vle_hseg g;
    double h = v->xs[i + 1] - v->xs[i], dy = ys[i + 1] - ys[i];
    g.x0 = v->xs[i];
    g.h = h;
    g.y0 = ys[i];
    g.d1 = h * ms[i];
    g.c2 = 3.0 * dy - 2.0 * h * ms[i] - h * ms[i + 1];
    g.c3 = h * ms[i] + h * ms[i + 1] - 2.0 * dy;
    return g;
}

static struct vle_seg seg_make(const stagecal_vle *v, size_t i)
{
    struct vle_seg c;
    c.g = hseg_make(v, v->ys, v->ms, i);
    c.dy = v->ys[i + 1] - v->ys[i];
    c.a = c.g.d1 > 0.0 ? c.dy / c.g.d1 : 0.0;
    c.b = v->ms[i + 1] > 0.0 ? c.dy / (c.g.h * v->ms[i + 1]) : 0.0;
    return c;
}

size_t vle_locate(const double *a, double v, size_t lo, size_t hi)
{
    return gsl_interp_bsearch(a, v, lo, hi);
}

size_t vle_locate_y_exact(const stagecal_vle *v, double y)
{
    size_t b = (size_t)(y / v->ytop * (double)v->nb);
    if (b >= v->nb)
        return v->iend - 1;
    size_t hi = v->by[b + 1] + 1;
    size_t i = vle_bsearch(v->ys, y, v->by[b], hi > v->iend ? v->iend : hi);
    return i > v->iend - 1 ? v->iend - 1 : i;
}

/* Builds bx/by once the nodes and the branch end are known; bx copied from same_x (a model
 * with the same nodes) when it is not NULL. */
int vle_build_buckets_like(stagecal_vle *v, const stagecal_vle *same_x)
{
    v->nb = 2 * v->n < 64 ? 64 : 2 * v->n;
    v->ytop = v->ys[v->iend];
    v->yscale = (double)v->nb / v->ytop;
    if (!isfinite(v->yscale)) /* a branch top below ~1e-305: no product guess (0 · inf) */
        v->yscale = 0.0;
    v->bx = malloc((v->nb + 1) * sizeof *v->bx);
    v->by = malloc((v->nb + 1) * sizeof *v->by);
    v->seg = malloc((v->n - 1) * sizeof *v->seg);
    if (!v->bx || !v->by || !v->seg)
        return STAGECAL_ENOMEM;
    for (size_t k = 0; k + 1 < v->n; k++)
        v->seg[k] = seg_make(v, k);
    size_t i = 0, j = 0;
    if (same_x)
        memcpy(v->bx, same_x->bx, (v->nb + 1) * sizeof *v->bx);
    for (size_t b = 0; b <= v->nb; b++) {
        double yb = v->ytop * (double)b / (double)v->nb;
        if (!same_x) {
            double xb = (double)b / (double)v->nb;
            while (i + 2 < v->n && v->xs[i + 1] <= xb)
                i++;
            v->bx[b] = i;
        }
        while (j + 1 < v->iend && v->ys[j + 1] <= yb)
            j++;
        v->by[b] = j;
    }
    return STAGECAL_OK;
}

int vle_build_buckets(stagecal_vle *v)
{
    return vle_build_buckets_like(v, NULL);
}

double vle_herm_eval(const stagecal_vle *v, const double *ys, const double *ms, double x)
{
    size_t i = v->bx ? vle_locate_x(v, x) : vle_locate(v->xs, x, 0, v->n - 1);
    if (i >= v->n - 1)
        i = v->n - 2;
    if (x == v->xs[i + 1]) /* the node value itself, not the cubic's rounding of it */
        return ys[i + 1];
    vle_hseg g = ys == v->ys && ms == v->ms && v->seg ? v->seg[i].g : hseg_make(v, ys, ms, i);
    return vle_hseg_val(&g, (x - g.x0) / g.h);
}

double vle_herm_deriv(const stagecal_vle *v, double x)
{
    size_t i = vle_locate_x(v, x);
    vle_hseg g = v->seg ? v->seg[i].g : hseg_make(v, v->ys, v->ms, i);
    return vle_hseg_ds(&g, (x - g.x0) / g.h) / g.h;
}

/* Smallest x on the first increasing branch with H(x) = y. Each segment of the branch
 * is monotone (checked at alloc), so Newton safeguarded by bisection on [0, 1] in s
 * converges; ≤ 60 steps (bisection halves the bracket each time Newton misbehaves). */
int vle_herm_invert(const stagecal_vle *v, double y, double *x)
{
    if (y > v->ytop)
        return STAGECAL_EINVAL;
    size_t i;
    vle_herm_invert_inline(v, y, x, &i);
    return STAGECAL_OK;
}

int vle_herm_invert_slope(const stagecal_vle *v, double y, double *x, double *slope)
{
    return vle_herm_invert_slope_inline(v, y, x, slope);
}

double vle_table_ystar(const stagecal_vle *v, double x)
{
    return vle_ystar_clamp(vle_herm_eval(v, v->ys, v->ms, x));
}

void vle_table_ystar_slope(const stagecal_vle *v, double x, double *y, double *slope)
{
    size_t i = vle_locate_x(v, x); /* what vle_herm_eval and vle_herm_deriv locate (bx is built) */
    const vle_hseg *g = &v->seg[i].g;
    double s = (x - g->x0) / g->h;
    *y = vle_ystar_clamp(x == v->xs[i + 1] ? v->ys[i + 1] : vle_hseg_val(g, s));
    *slope = vle_hseg_ds(g, s) / g->h;
}

/* Fritsch–Carlson sufficient condition for a monotone increasing Hermite segment. */
static int seg_increasing(const stagecal_vle *v, size_t i)
{
    double h = v->xs[i + 1] - v->xs[i], dy = v->ys[i + 1] - v->ys[i];
    if (!(dy > 0.0) || v->ms[i] < 0.0 || v->ms[i + 1] < 0.0)
        return 0;
    double a = v->ms[i] * h / dy, b = v->ms[i + 1] * h / dy;
    return a * a + b * b <= 9.0 || (2.0 * a + b <= 3.0) || (a + 2.0 * b <= 3.0);
}

void vle_find_branch_end(stagecal_vle *v)
{
    v->iend = v->n - 1;
    for (size_t i = 0; i + 1 < v->n; i++)
        if (!seg_increasing(v, i)) {
            v->iend = i;
            break;
        }
}

int stagecal_vle_validate(const stagecal_vle *vle, double *x_fail, stagecal_error *err)
{
    if (vle->kind == STAGECAL_VLE_PSEUDO)
        return stagecal_vle_validate(vle->base, x_fail, err);
    if (vle->kind == STAGECAL_VLE_ALPHA || vle->kind == STAGECAL_VLE_KVALUE)
        return STAGECAL_OK;
    const char *kind = stagecal_vle_kind_name(vle->kind);
    for (size_t i = 0; i < vle->n; i++)
        if (!(vle->ys[i] >= 0.0 && vle->ys[i] <= 1.0)) {
            if (x_fail)
                *x_fail = vle->xs[i];
            return error_set(err, STAGECAL_EDATA,
                             "%s model: y* = %.9g at x = %.9g is outside [0, 1]", kind, vle->ys[i],
                             vle->xs[i]);
        }
    if (vle->iend + 1 < vle->n) {
        size_t i = vle->iend, jmin = i + 1;
        for (size_t j = i + 1; j < vle->n; j++)
            if (vle->ys[j] < vle->ys[jmin])
                jmin = j;
        if (x_fail)
            *x_fail = vle->xs[i];
        return error_set(err, STAGECAL_EDATA,
                         "%s model: y* stops rising at x = %.6g (y* = %.6g) and %s %.3g "
                         "at x = %.6g; expected y* to rise from 0 to 1 over [0, 1] (a liquid "
                         "phase split, or parameters outside their range?)",
                         kind, vle->xs[i], vle->ys[i],
                         vle->ys[jmin] < vle->ys[i] ? "falls to" : "stays at", vle->ys[jmin],
                         vle->xs[jmin]);
    }
    return STAGECAL_OK;
}

/* Node slopes of GSL's Steffen interpolant of ya over v->xs. */
static int steffen_slopes(const stagecal_vle *v, const double *ya, double *ma, stagecal_error *err)
{
    gsl_interp *it = gsl_interp_alloc(gsl_interp_steffen, v->n);
    if (!it)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    int st = gsl_interp_init(it, v->xs, ya, v->n);
    for (size_t i = 0; st == GSL_SUCCESS && i < v->n; i++)
        st = gsl_interp_eval_deriv_e(it, v->xs, ya, v->xs[i], NULL, &ma[i]);
    gsl_interp_free(it);
    if (st != GSL_SUCCESS)
        return error_set(err, STAGECAL_EINTERNAL, "steffen interpolation failed: %s",
                         gsl_strerror(st));
    return STAGECAL_OK;
}

/* Azeotropes from sign changes of y − x at interior nodes; root of g on each. */
stagecal_vle *stagecal_vle_alloc_table(const double *x, const double *y, const double *t_k,
                                       size_t n, stagecal_error *err)
{
    if (n < 3 || !x || !y) {
        error_set(err, STAGECAL_EINVAL, "x-y table has %zu points, expected at least 3", n);
        return NULL;
    }
    for (size_t i = 0; i < n; i++) {
        if (!(x[i] >= 0.0 && x[i] <= 1.0) || !(y[i] >= 0.0 && y[i] <= 1.0)) {
            error_set(err, STAGECAL_EINVAL,
                      "x-y table point %zu: (%g, %g) is outside [0, 1] x [0, 1]", i + 1, x[i],
                      y[i]);
            return NULL;
        }
        if (i > 0 && !(x[i] > x[i - 1])) {
            error_set(err, STAGECAL_EINVAL,
                      "x-y table point %zu: x = %g does not increase, expected x > %g", i + 1, x[i],
                      x[i - 1]);
            return NULL;
        }
        if (t_k && !(t_k[i] > 0.0 && isfinite(t_k[i]))) {
            error_set(err, STAGECAL_EINVAL, "x-y table point %zu: temperature %g K is not > 0",
                      i + 1, t_k[i]);
            return NULL;
        }
    }
    if ((x[0] == 0.0 && y[0] != 0.0) || (x[n - 1] == 1.0 && y[n - 1] != 1.0)) {
        error_set(err, STAGECAL_EINVAL, "x-y table: a pure component needs y = x at x = 0 and 1");
        return NULL;
    }
    if (t_k && (x[0] != 0.0 || x[n - 1] != 1.0)) {
        error_set(err, STAGECAL_EINVAL,
                  "x-y table with temperatures needs the pure-component points x = 0 and x = 1");
        return NULL;
    }
    int add0 = x[0] > 0.0, add1 = x[n - 1] < 1.0;
    size_t m = n + (size_t)add0 + (size_t)add1;
    stagecal_vle *v = vle_new(STAGECAL_VLE_TABLE, err);
    if (!v)
        return NULL;
    if (!vle_alloc_nodes(v, m, t_k != NULL)) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    size_t j = 0;
    if (add0)
        v->xs[j] = v->ys[j] = 0.0, j++;
    for (size_t i = 0; i < n; i++, j++) {
        v->xs[j] = x[i];
        v->ys[j] = y[i];
        if (t_k)
            v->ts[j] = t_k[i];
    }
    if (add1)
        v->xs[j] = v->ys[j] = 1.0;
    if (steffen_slopes(v, v->ys, v->ms, err) != STAGECAL_OK ||
        (t_k && steffen_slopes(v, v->ts, v->mts, err) != STAGECAL_OK)) {
        stagecal_vle_free(v);
        return NULL;
    }
    vle_find_branch_end(v);
    if (v->iend == 0) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_EINVAL, "x-y table: y does not increase from x = 0");
        return NULL;
    }
    if (vle_build_buckets(v) != STAGECAL_OK) {
        stagecal_vle_free(v);
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    if (t_k) {
        v->has_t = 1;
        v->t_lo = v->t_hi = v->ts[0];
        for (size_t i = 1; i < m; i++) {
            v->t_lo = fmin(v->t_lo, v->ts[i]);
            v->t_hi = fmax(v->t_hi, v->ts[i]);
        }
    }
    vle_find_azeotropes(v);
    return v;
}
