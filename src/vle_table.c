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

/* Cubic Hermite on [x0, x0 + h] in s = (x − x0)/h: H(s) = y0 + s(h m0 + s(c2 + s c3)). */
typedef struct {
    double x0, h, y0, d1, c2, c3;
} hseg;

static hseg hseg_make(const stagecal_vle *v, const double *ys, const double *ms, size_t i)
{
    hseg g;
    double h = v->xs[i + 1] - v->xs[i], dy = ys[i + 1] - ys[i];
    g.x0 = v->xs[i];
    g.h = h;
    g.y0 = ys[i];
    g.d1 = h * ms[i];
    g.c2 = 3.0 * dy - 2.0 * h * ms[i] - h * ms[i + 1];
    g.c3 = h * ms[i] + h * ms[i + 1] - 2.0 * dy;
    return g;
}

/* A segment of the y* table as the queries use it: the cubic, dy = ys[i+1] − ys[i], and the
 * end slopes a, b of the inverse's Hermite start (vle_herm_invert), 0 where not positive. */
struct vle_seg {
    hseg g;
    double dy, a, b;
};

static struct vle_seg seg_make(const stagecal_vle *v, size_t i)
{
    struct vle_seg c;
    c.g = hseg_make(v, v->ys, v->ms, i);
    c.dy = v->ys[i + 1] - v->ys[i];
    c.a = c.g.d1 > 0.0 ? c.dy / c.g.d1 : 0.0;
    c.b = v->ms[i + 1] > 0.0 ? c.dy / (c.g.h * v->ms[i + 1]) : 0.0;
    return c;
}

/* Segment i of the y* table: from the cache when built (the same doubles). */
static hseg yseg(const stagecal_vle *v, size_t i)
{
    return v->seg ? v->seg[i].g : hseg_make(v, v->ys, v->ms, i);
}

static double hseg_val(const hseg *g, double s)
{
    return g->y0 + s * (g->d1 + s * (g->c2 + s * g->c3));
}

static double hseg_ds(const hseg *g, double s) /* dH/ds */
{
    return g->d1 + s * (2.0 * g->c2 + 3.0 * s * g->c3);
}

size_t vle_locate(const double *a, double v, size_t lo, size_t hi)
{
    return gsl_interp_bsearch(a, v, lo, hi);
}

/* Interval i (0 ≤ i ≤ n−2) with xs[i] ≤ x ≤ xs[i+1], x in [0, 1]. */
static size_t locate_x(const stagecal_vle *v, double x)
{
    size_t b = (size_t)(x * (double)v->nb);
    if (b >= v->nb)
        return v->n - 2;
    size_t i = vle_locate(v->xs, x, v->bx[b], v->bx[b + 1] + 1);
    return i > v->n - 2 ? v->n - 2 : i;
}

/* Interval i (0 ≤ i < iend) with ys[i] ≤ y ≤ ys[i+1], y in [0, ytop]. */
static size_t locate_y(const stagecal_vle *v, double y)
{
    size_t b = (size_t)(y / v->ytop * (double)v->nb);
    if (b >= v->nb)
        return v->iend - 1;
    size_t hi = v->by[b + 1] + 1;
    size_t i = vle_locate(v->ys, y, v->by[b], hi > v->iend ? v->iend : hi);
    return i > v->iend - 1 ? v->iend - 1 : i;
}

/* Builds bx/by once the nodes and the branch end are known; bx copied from same_x (a model
 * with the same nodes) when it is not NULL. */
int vle_build_buckets_like(stagecal_vle *v, const stagecal_vle *same_x)
{
    v->nb = 2 * v->n < 64 ? 64 : 2 * v->n;
    v->ytop = v->ys[v->iend];
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
    size_t i = v->bx ? locate_x(v, x) : vle_locate(v->xs, x, 0, v->n - 1);
    if (i >= v->n - 1)
        i = v->n - 2;
    if (x == v->xs[i + 1]) /* the node value itself, not the cubic's rounding of it */
        return ys[i + 1];
    hseg g = ys == v->ys && ms == v->ms ? yseg(v, i) : hseg_make(v, ys, ms, i);
    return hseg_val(&g, (x - g.x0) / g.h);
}

double vle_herm_deriv(const stagecal_vle *v, double x)
{
    size_t i = locate_x(v, x);
    hseg g = yseg(v, i);
    return hseg_ds(&g, (x - g.x0) / g.h) / g.h;
}

/* Smallest x on the first increasing branch with H(x) = y. Each segment of the branch
 * is monotone (checked at alloc), so Newton safeguarded by bisection on [0, 1] in s
 * converges; ≤ 60 steps (bisection halves the bracket each time Newton misbehaves). */
static int herm_invert_on(const stagecal_vle *v, double y, double *x, size_t *iseg, hseg *gseg)
{
    if (y > v->ytop)
        return STAGECAL_EINVAL;
    size_t i = locate_y(v, y);
    *iseg = i;
    struct vle_seg c = v->seg ? v->seg[i] : seg_make(v, i);
    hseg g = c.g;
    double dy = c.dy;
    *gseg = g;
    if (!(dy > 0.0)) { /* flat segment: any point, take its start */
        *x = g.x0;
        return STAGECAL_OK;
    }
    /* Start from the Hermite interpolant of the inverse s(y) (end slopes dy/(h m)):
     * its error is O(h⁴), so one or two Newton steps reach rounding. */
    double t = (y - g.y0) / dy, s = t, a = c.a, b = c.b;
    if (a > 0.0 && b > 0.0 && a < 3.0 && b < 3.0)
        s = t * (1.0 + (1.0 - t) * ((a - 1.0) * (1.0 - t) + (1.0 - b) * t));
    double lo = 0.0, hi = 1.0;
    for (int it = 0; it < VLE_NEWTON_MAX; it++) {
        double f = hseg_val(&g, s) - y;
        if (f == 0.0)
            break;
        if (f < 0.0)
            lo = s;
        else
            hi = s;
        double sn = s - f / hseg_ds(&g, s);
        if (!(sn > lo && sn < hi)) /* Newton left the bracket (or a zero slope): bisect */
            sn = 0.5 * (lo + hi);
        double ds = fabs(sn - s);
        s = sn;
        /* quadratic convergence: after a step of 1e-7 the error left is ~1e-14·|H''/H'|
         * in s, i.e. below 1e-16 in x on these short segments */
        if (ds <= VLE_NEWTON_STEP || hi - lo <= 2.0 * DBL_EPSILON)
            break;
    }
    *x = g.x0 + s * g.h;
    if (*x > v->xs[i + 1])
        *x = v->xs[i + 1];
    return STAGECAL_OK;
}

int vle_herm_invert(const stagecal_vle *v, double y, double *x)
{
    size_t i;
    hseg g;
    return herm_invert_on(v, y, x, &i, &g);
}

/* 1 when locate_x(v, x) returns i: x in the bucket's search range [bx[b], bx[b+1] + 1] with
 * xs[i] ≤ x < xs[i+1] (a binary search over a range holding such an i returns it). */
static int locate_x_is(const stagecal_vle *v, double x, size_t i)
{
    if (!(x >= 0.0) || !v->bx)
        return 0;
    size_t b = (size_t)(x * (double)v->nb);
    return b < v->nb && v->bx[b] <= i && i <= v->bx[b + 1] && v->xs[i] <= x && x < v->xs[i + 1];
}

int vle_herm_invert_slope(const stagecal_vle *v, double y, double *x, double *slope)
{
    size_t i;
    hseg g;
    int rc = herm_invert_on(v, y, x, &i, &g);
    if (rc != STAGECAL_OK)
        return rc;
    /* vle_herm_deriv(v, *x) on the segment just inverted on, when it is the one it locates */
    *slope = locate_x_is(v, *x, i) ? hseg_ds(&g, (*x - g.x0) / g.h) / g.h : vle_herm_deriv(v, *x);
    return STAGECAL_OK;
}

/* A monotone segment stays between its node values, which lie in [0, 1]
 * (stagecal_vle_validate): anything outside is rounding (y*(1) = 1 + 2^-52). */
static double ystar_clamp(double y)
{
    return fmin(fmax(y, 0.0), 1.0);
}

double vle_table_ystar(const stagecal_vle *v, double x)
{
    return ystar_clamp(vle_herm_eval(v, v->ys, v->ms, x));
}

void vle_table_ystar_slope(const stagecal_vle *v, double x, double *y, double *slope)
{
    size_t i = locate_x(v, x); /* what vle_herm_eval and vle_herm_deriv locate (bx is built) */
    hseg g = yseg(v, i);
    double s = (x - g.x0) / g.h;
    *y = ystar_clamp(x == v->xs[i + 1] ? v->ys[i + 1] : hseg_val(&g, s));
    *slope = hseg_ds(&g, s) / g.h;
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
