/*
 * plot_build.c — chart builders (see stagecal/plot.h): domain data in, a chart that
 * owns copies of everything it draws out.
 *
 * A builder collects its allocations in a small arena hung on chart->storage so that
 * stagecal_plot_chart_free releases them in one go. The McCabe–Thiele pinch (the
 * operating line meeting the equilibrium curve inside (0, xD)) is bracketed on a grid
 * from xD downwards and refined with GSL's Brent solver.
 */
#include "stagecal/plot.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_roots.h>

#include "internal.h"
#include "plot_internal.h"

#define PINCH_SCAN 400   /* grid points for bracketing the pinch between 0 and xD */
#define PINCH_XTOL 1e-12 /* Brent's absolute tolerance on the pinch composition */
#define PINCH_MAXITER 100

/* ---- McCabe–Thiele ------------------------------------------------------------------ */

typedef struct {
    const stagecal_vle *vle;
    double lv, xd;
} pinch_fn;

/* y*(x) − op(x): zero where the operating line meets the equilibrium curve. */
static double pinch_gap(double x, void *p)
{
    const pinch_fn *q = p;
    double y;
    if (stagecal_vle_ystar(q->vle, x, &y) != STAGECAL_OK)
        return NAN;
    return y - (q->lv * x + (1 - q->lv) * q->xd);
}

/* The pinch below xD at finite reflux: the largest x in (0, xD) where the gap changes
 * sign. Returns 1 and *xp when found. */
static int find_pinch(const stagecal_vle *vle, double lv, double xd, double *xp)
{
    pinch_fn q = {vle, lv, xd};
    double hi = xd, ghi = pinch_gap(hi * (1 - 1e-9), &q);
    if (!(ghi > 0))
        return 0;
    for (int i = PINCH_SCAN - 1; i >= 1; i--) {
        double lo = xd * i / PINCH_SCAN, glo = pinch_gap(lo, &q);
        if (isnan(glo))
            return 0;
        if (glo <= 0) {
            gsl_function fn = {pinch_gap, &q};
            gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
            if (!s)
                return 0;
            int found = 0;
            if (gsl_root_fsolver_set(s, &fn, lo, hi) == GSL_SUCCESS) {
                for (int it = 0; it < PINCH_MAXITER; it++) {
                    if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
                        break;
                    double a = gsl_root_fsolver_x_lower(s), b = gsl_root_fsolver_x_upper(s);
                    if (gsl_root_test_interval(a, b, PINCH_XTOL, 0) == GSL_SUCCESS) {
                        *xp = gsl_root_fsolver_root(s);
                        found = 1;
                        break;
                    }
                }
            }
            gsl_root_fsolver_free(s);
            return found;
        }
        hi = lo;
    }
    return 0;
}

/* The stage diagram's series over x in [x0, x1] (curves sampled there); labels only when
 * labelled (the inset repeats the main plot's series). */
typedef struct {
    const stagecal_plot_mccabe_data *d;
    double xmax, lv, xp;
    int total, has_pinch;
    size_t m;
} mccabe_ctx;

static void mccabe_series(plot_fig *f, const mccabe_ctx *q, double x0, double x1, int labelled)
{
    const stagecal_plot_mccabe_data *d = q->d;
    const double lv = q->lv, xd = d->xd;
    const size_t m = q->m;
    double *x = malloc(m * sizeof *x), *y = malloc(m * sizeof *y);
    size_t nst = 2 * d->n_profile + 1;
    double *sx = malloc(nst * sizeof *sx), *sy = malloc(nst * sizeof *sy);
    if (!x || !y || !sx || !sy) {
        f->oom = 1;
        goto done;
    }
    /* diagonal (the operating line itself at total reflux) */
    {
        double dx[2] = {x0, x1}, dy[2] = {x0, x1};
        plot_fig_add(f, STAGECAL_PLOT_LINE,
                     !labelled  ? NULL
                     : q->total ? "diagonal y = x = operating line (total reflux)"
                                : "diagonal y = x",
                     dx, dy, NULL, 2, 5, 2, 0);
    }
    for (size_t i = 0; i < m; i++) {
        x[i] = x0 + (x1 - x0) * (double)i / (double)(m - 1);
        if (stagecal_vle_ystar(d->vle, x[i], &y[i]) != STAGECAL_OK)
            y[i] = NAN;
    }
    plot_fig_add(f, STAGECAL_PLOT_LINE, labelled ? "equilibrium curve y*(x)" : NULL, x, y, NULL, m,
                 0, 0, 0);
    /* the pseudo-equilibrium curve from the pinch up to xD only (below the pinch the
     * operating line lies above the curve and steps cannot go) */
    if (d->murphree < 1) {
        double a = fmax(q->has_pinch ? q->xp : 0, x0), b = fmin(xd, x1);
        for (size_t i = 0; i < m; i++) {
            x[i] = a + (b - a) * (double)i / (double)(m - 1);
            double ys, op = lv * x[i] + (1 - lv) * xd;
            y[i] = stagecal_vle_ystar(d->vle, x[i], &ys) == STAGECAL_OK
                       ? op + d->murphree * (ys - op)
                       : NAN;
        }
        char lab[96];
        snprintf(lab, sizeof lab, "pseudo-equilibrium curve (E_MV = %.3g)", d->murphree);
        plot_fig_add(f, STAGECAL_PLOT_LINE, labelled ? lab : NULL, x, y, NULL, m, 2, 1, 0);
    }
    if (!q->total) {
        double ox[2] = {fmax(q->has_pinch ? q->xp : 0, x0), xd};
        double oy[2] = {lv * ox[0] + (1 - lv) * xd, xd};
        plot_fig_add(f, STAGECAL_PLOT_LINE, labelled ? "operating line" : NULL, ox, oy, NULL, 2, 6,
                     3, 0);
    }
    /* steps: horizontal at the vapour level to the stage's liquid, then down to the
     * operating line (the vapour from the stage below) */
    {
        size_t n = 0;
        double level = xd;
        sx[n] = xd;
        sy[n++] = xd;
        for (size_t k = 0; k < d->n_profile; k++) {
            sx[n] = d->profile[k].x;
            sy[n++] = level;
            if (k + 1 < d->n_profile) {
                level = lv * d->profile[k].x + (1 - lv) * xd;
                sx[n] = d->profile[k].x;
                sy[n++] = level;
            }
        }
        plot_fig_add(f, STAGECAL_PLOT_LINE, labelled ? "stages (steps)" : NULL, sx, sy, NULL, n, 1,
                     0, 0);
    }
    {
        const stagecal_stage_point *pot = &d->profile[d->n_profile - 1];
        double mx[2] = {xd, pot->x}, my[2] = {xd, pot->y};
        plot_fig_add(f, STAGECAL_PLOT_POINTS, labelled ? "distillate xD and pot xB" : NULL, mx, my,
                     NULL, 2, 4, 0, 0);
    }
    /* the pinch last, as a large ring: visible around the pot marker when the pot sits at
     * the pinch */
    if (q->has_pinch) {
        double px = q->xp, py = lv * q->xp + (1 - lv) * xd;
        char lab[64];
        snprintf(lab, sizeof lab, "pinch (x = %.4g)", q->xp);
        stagecal_plot_series *s = plot_fig_add(f, STAGECAL_PLOT_POINTS, labelled ? lab : NULL, &px,
                                               &py, NULL, 1, 3, 0, 6);
        if (s)
            s->width = 2.2;
    }
done:
    free(x);
    free(y);
    free(sx);
    free(sy);
}

int stagecal_plot_mccabe(const stagecal_plot_mccabe_data *d, stagecal_plot_chart **out,
                         stagecal_error *err)
{
    if (!d || !out || !d->vle || !d->profile || d->n_profile == 0)
        return error_set(err, STAGECAL_EINVAL,
                         "mccabe diagram: missing equilibrium model or stage profile");
    *out = NULL;
    double xmax = stagecal_vle_x_max(d->vle);
    if (!(d->xd > 0 && d->xd < xmax) || !(d->reflux >= 0) || !(d->murphree > 0) ||
        !(d->murphree <= 1))
        return error_set(err, STAGECAL_EINVAL,
                         "mccabe diagram: xD %g, R %g or E_MV %g outside its domain (expected xD "
                         "in (0, %g), R >= 0 or inf, E_MV in (0, 1])",
                         d->xd, d->reflux, d->murphree, xmax);
    for (size_t k = 0; k < d->n_profile; k++)
        if (!(d->profile[k].x >= 0 && d->profile[k].x <= xmax) || !isfinite(d->profile[k].y))
            return error_set(err, STAGECAL_EINVAL,
                             "mccabe diagram: profile point %zu (x %g, y %g) outside [0, %g]",
                             k + 1, d->profile[k].x, d->profile[k].y, xmax);
    mccabe_ctx q = {d, xmax, 0, NAN, isinf(d->reflux), 0, d->curve_points ? d->curve_points : 201};
    if (q.m < 3)
        q.m = 3;
    q.lv = q.total ? 1.0 : d->reflux / (d->reflux + 1);
    q.has_pinch = !q.total && find_pinch(d->vle, q.lv, d->xd, &q.xp);

    plot_fig f;
    int rc = plot_fig_open(&f, err);
    if (rc)
        return rc;
    char title[256], rtext[32];
    if (q.total)
        snprintf(rtext, sizeof rtext, "total reflux");
    else
        snprintf(rtext, sizeof rtext, "R = %.3g", d->reflux);
    if (d->title)
        snprintf(title, sizeof title, "%s", d->title);
    else if (isfinite(d->stages))
        snprintf(title, sizeof title,
                 "McCabe\xe2\x80\x93Thiele: %s, E_MV = %.3g, %.4g stages incl. pot", rtext,
                 d->murphree, d->stages);
    else
        snprintf(title, sizeof title, "McCabe\xe2\x80\x93Thiele: %s, E_MV = %.3g", rtext,
                 d->murphree);
    const char *yl = "vapour mole fraction y [mol/mol]";
    plot_fig_labels(&f, title, "liquid mole fraction x of the light component [mol/mol]", yl);
    f.c->x_min = 0;
    f.c->x_max = xmax;
    f.c->y_min = 0;
    f.c->y_max = 1;
    f.c->legend_pos = 1;
    /* many stages crowd the top corner: the top quarter of the steps (at least 4) again,
     * zoomed, in an inset below the diagonal (where the diagram is empty) */
    size_t n = d->n_profile, k = n / 4 > 4 ? n / 4 : 4;
    while (k > 4 && k < n && d->xd - d->profile[k].x > 0.25) /* a zoom of at most 0.25 */
        k--;
    int zoom = n >= STAGECAL_PLOT_MCCABE_INSET_STAGES && k < n;
    if (!zoom) {
        mccabe_series(&f, &q, 0, xmax, 1);
        return plot_fig_close(&f, out, err);
    }
    double lo = d->profile[k].x, ylo = q.lv * lo + (1 - q.lv) * d->xd;
    lo = fmin(lo, ylo);
    double pad = 0.06 * (d->xd - lo), x0 = fmax(0, lo - pad), x1 = fmin(xmax, d->xd + pad);
    plot_fig_panel(&f, yl, 1, 0, 1);
    mccabe_series(&f, &q, 0, xmax, 1);
    double rx[5] = {x0, x1, x1, x0, x0}, ry[5] = {x0, x0, fmin(1, x1), fmin(1, x1), x0};
    char lab[96];
    snprintf(lab, sizeof lab, "zoomed in the inset");
    plot_fig_add(&f, STAGECAL_PLOT_LINE, lab, rx, ry, NULL, 5, 6, 2, 0);
    snprintf(lab, sizeof lab, "top %zu stages, x and y in [%.4g, %.4g]", k, x0, fmin(1, x1));
    plot_fig_panel(&f, lab, 1, x0, fmin(1, x1));
    static const double box[4] = {0.50, 0.97, 0.05, 0.50};
    plot_fig_inset(&f, x0, x1, box);
    mccabe_series(&f, &q, x0, x1, 0);
    return plot_fig_close(&f, out, err);
}

int stagecal_plot_mccabe_condition(const stagecal_vle *vle, double xd, double xb, double reflux,
                                   double stages, double murphree, stagecal_plot_chart **out,
                                   stagecal_error *err)
{
    stagecal_stages_params par = stagecal_stages_default_params();
    int rc, status = 0;
    if (!vle || !out)
        return error_set(err, STAGECAL_EINVAL, "mccabe diagram: missing model or output");
    if (isnan(stages)) {
        stagecal_stages_result res;
        if ((rc = stagecal_stages_invert(vle, xd, xb, reflux, murphree, &par, &res, err)))
            return rc;
        if (res.status != STAGECAL_STAGES_OK)
            return error_set(err, STAGECAL_EDATA, "mccabe diagram: inversion gave %s: %s",
                             stagecal_stages_status_name(res.status), res.reason);
        stages = res.stages;
    }
    if (!(stages >= 1) || !isfinite(stages))
        return error_set(err, STAGECAL_EINVAL,
                         "mccabe diagram: %g stages (expected stages incl. the pot, >= 1)", stages);
    size_t cap = (size_t)ceil(stages) + 2, len = 0;
    stagecal_stage_point *prof = calloc(cap, sizeof *prof);
    double xb_out = 0;
    if (!prof)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    rc = stagecal_stages_step(vle, xd, reflux, stages, murphree, &par, &xb_out, prof, cap, &len,
                              &status, err);
    if (rc == STAGECAL_OK && status != STAGECAL_STAGES_OK)
        rc = error_set(err, STAGECAL_EDATA, "mccabe diagram: stepping gave %s",
                       stagecal_stages_status_name(status));
    if (rc == STAGECAL_OK) {
        stagecal_plot_mccabe_data d = {vle,    xd,   reflux, murphree, prof, len < cap ? len : cap,
                                       stages, NULL, 0};
        rc = stagecal_plot_mccabe(&d, out, err);
    }
    free(prof);
    return rc;
}

/* ---- stages against a predictor ------------------------------------------------------ */

/* Sample groups take the colours the fit does not use (blue, sky blue, black), then
 * cycle; the marker cycles independently so groups stay apart in greyscale. */
static const int group_colours[] = {1, 2, 3, 4, 7};
#define NGROUPCOL (sizeof group_colours / sizeof group_colours[0])

static int check_groups(const size_t *group, size_t n, size_t n_groups, const char *what,
                        stagecal_error *err)
{
    if (n_groups > MAX_GROUPS)
        return error_set(err, STAGECAL_EINVAL, "%s: %zu groups (expected at most %d)", what,
                         n_groups, MAX_GROUPS);
    for (size_t i = 0; group && i < n; i++)
        if (group[i] >= (n_groups ? n_groups : 1))
            return error_set(err, STAGECAL_EINVAL, "%s: sample %zu in group %zu (expected < %zu)",
                             what, i + 1, group[i], n_groups);
    return STAGECAL_OK;
}

/* Adds one POINTS series per group from (x, y); x values that are +inf go to x_inf. */
static void add_groups(plot_fig *f, const double *x, const double *y, const size_t *group, size_t n,
                       const char *const *names, size_t n_groups, double x_inf, const int *colours,
                       size_t ncol)
{
    size_t ng = n_groups ? n_groups : 1;
    double *gx = malloc(n * sizeof *gx), *gy = malloc(n * sizeof *gy);
    if (!gx || !gy) {
        f->oom = 1;
        free(gx);
        free(gy);
        return;
    }
    for (size_t g = 0; g < ng; g++) {
        size_t m = 0;
        for (size_t i = 0; i < n; i++) {
            if ((group ? group[i] : 0) != g)
                continue;
            gx[m] = isinf(x[i]) && x[i] > 0 ? x_inf : x[i];
            gy[m++] = y[i];
        }
        if (m == 0)
            continue;
        char lab[96];
        if (names && names[g])
            snprintf(lab, sizeof lab, "%s", names[g]);
        else if (ng == 1)
            snprintf(lab, sizeof lab, "samples");
        else
            snprintf(lab, sizeof lab, "group %zu", g + 1);
        plot_fig_add(f, STAGECAL_PLOT_POINTS, lab, gx, gy, NULL, m, colours[g % ncol], 0,
                     (int)(g % STAGECAL_PLOT_NMARKERS));
    }
    free(gx);
    free(gy);
}

/* ---- the fitted envelope ----------------------------------------------------------- */

/* Linear interpolation of y between grid points i and i + 1 at x. */
static double interp(const double *g, const double *y, size_t i, double x)
{
    if (g[i + 1] == g[i])
        return y[i];
    return y[i] + (y[i + 1] - y[i]) * (x - g[i]) / (g[i + 1] - g[i]);
}

void stagecal_plot_split_free(stagecal_plot_split *sp)
{
    if (!sp)
        return;
    free(sp->in_x);
    free(sp->out_x);
    for (size_t j = 0; j < STAGECAL_PLOT_SPLIT_MAX; j++) {
        free(sp->in_y[j]);
        free(sp->out_y[j]);
    }
    memset(sp, 0, sizeof *sp);
}

/* Value j at abscissa x of the merged list: exact at a grid point, else interpolated
 * between the grid points around x (an envelope edge). */
static double value_at(const double *grid, const double *y, size_t n, double x)
{
    if (!y)
        return NAN;
    size_t i = 0;
    while (i + 1 < n && grid[i + 1] <= x)
        i++;
    if (grid[i] == x || i + 1 >= n)
        return y[i];
    return interp(grid, y, i, x);
}

static void split_put(stagecal_plot_split *sp, int out, double x, const double *grid,
                      const double *const *ys, size_t n)
{
    double *px = out ? sp->out_x : sp->in_x;
    double *const *py = out ? sp->out_y : sp->in_y;
    size_t *m = out ? &sp->n_out : &sp->n_in;
    px[*m] = x;
    for (size_t j = 0; j < sp->k; j++)
        py[j][*m] = isnan(x) ? NAN : value_at(grid, ys[j], n, x);
    (*m)++;
}

int stagecal_plot_split_envelope(const double *grid, const double *const *ys, size_t k, size_t n,
                                 double lo, double hi, stagecal_plot_split *sp)
{
    memset(sp, 0, sizeof *sp);
    if (k > STAGECAL_PLOT_SPLIT_MAX || !grid || n == 0)
        return STAGECAL_EINVAL;
    size_t cap = n + 5;
    sp->k = k;
    sp->in_x = malloc(cap * sizeof *sp->in_x);
    sp->out_x = malloc(cap * sizeof *sp->out_x);
    int ok = sp->in_x && sp->out_x;
    for (size_t j = 0; j < k && ok; j++) {
        sp->in_y[j] = malloc(cap * sizeof **sp->in_y);
        sp->out_y[j] = malloc(cap * sizeof **sp->out_y);
        ok = sp->in_y[j] && sp->out_y[j];
    }
    if (!ok) {
        stagecal_plot_split_free(sp);
        return STAGECAL_ENOMEM;
    }
    lo = isnan(lo) ? -INFINITY : lo;
    hi = isnan(hi) ? INFINITY : hi;
    /* the abscissae: the grid with the edges that fall strictly inside it added */
    double g0 = grid[0], g1 = grid[n - 1];
    int add_lo = lo > g0 && lo<g1, add_hi = hi> g0 && hi < g1;
    for (size_t i = 0; i < n; i++) /* an edge on a grid point is that point */
        add_lo &= grid[i] != lo, add_hi &= grid[i] != hi;
    size_t nleft = 0;
    for (int pass = 0; pass < 3; pass++) { /* left of lo, inside, right of hi */
        int lo_done = !add_lo, hi_done = !add_hi;
        for (size_t i = 0; i <= n; i++) {
            /* the next abscissa in order: an edge before grid[i], or grid[i] */
            double x;
            if (!lo_done && (i == n || lo < grid[i])) {
                x = lo, lo_done = 1, i--;
            } else if (!hi_done && (i == n || hi < grid[i])) {
                x = hi, hi_done = 1, i--;
            } else if (i < n) {
                x = grid[i];
            } else {
                break;
            }
            if (pass == 0 && x <= lo && isfinite(lo)) {
                split_put(sp, 1, x, grid, ys, n);
                nleft++;
            } else if (pass == 1 && x >= lo && x <= hi) {
                split_put(sp, 0, x, grid, ys, n);
            } else if (pass == 2 && x >= hi && isfinite(hi)) {
                split_put(sp, 1, x, grid, ys, n);
            }
        }
        if (pass == 0 && nleft == 1) /* the edge alone: no outside part on the left */
            sp->n_out = nleft = 0;
        if (pass == 0 && nleft > 0)
            split_put(sp, 1, NAN, grid, ys, n);
    }
    if (sp->n_out == nleft + (nleft > 0) + 1) /* the right edge alone */
        sp->n_out--;
    if (sp->n_out > 0 && isnan(sp->out_x[sp->n_out - 1])) /* nothing on the right */
        sp->n_out--;
    return STAGECAL_OK;
}

int stagecal_plot_fit(const stagecal_plot_fit_data *d, stagecal_plot_chart **out,
                      stagecal_error *err)
{
    int rc;
    if (!d || !out || (d->n > 0 && (!d->x || !d->stages)) ||
        (d->grid && (!d->fit || d->n_grid < 2)) || (d->n == 0 && !d->grid))
        return error_set(err, STAGECAL_EINVAL,
                         "stages chart: missing samples or fit arrays (expected samples and/or "
                         "a fitted curve of at least 2 points)");
    *out = NULL;
    if ((rc = check_groups(d->group, d->n, d->n_groups, "stages chart", err)))
        return rc;
    /* right edge for total-reflux samples: beyond every finite abscissa */
    double xmax = -INFINITY, xmin = INFINITY, ymin = INFINITY, ymax = -INFINITY;
    int any_inf = 0;
    for (size_t i = 0; i < d->n; i++) {
        if (isinf(d->x[i]) && d->x[i] > 0)
            any_inf = 1;
        else if (isfinite(d->x[i]))
            xmax = fmax(xmax, d->x[i]), xmin = fmin(xmin, d->x[i]);
        if (isfinite(d->stages[i]))
            ymin = fmin(ymin, d->stages[i]), ymax = fmax(ymax, d->stages[i]);
    }
    const double *edges[5] = {d->fit, d->ci_lo, d->ci_hi, d->pi_lo, d->pi_hi};
    for (size_t i = 0; d->grid && i < d->n_grid; i++) {
        if (isfinite(d->grid[i]))
            xmax = fmax(xmax, d->grid[i]), xmin = fmin(xmin, d->grid[i]);
        for (int e = 0; e < 5; e++)
            if (edges[e] && isfinite(edges[e][i]))
                ymin = fmin(ymin, edges[e][i]), ymax = fmax(ymax, edges[e][i]);
    }
    if (isfinite(d->env_hi))
        xmax = fmax(xmax, d->env_hi);
    if (!isfinite(xmax) || !isfinite(ymin))
        return error_set(err, STAGECAL_EINVAL, "stages chart: no finite point to draw");
    double x_inf = xmax + 0.08 * fmax(xmax - fmin(xmin, 0), 1e-9);

    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    const char *pl = d->predictor_label ? d->predictor_label : "reflux ratio R [-]";
    char title[192], xl[192], lab[96];
    if (d->title)
        snprintf(title, sizeof title, "%s", d->title);
    else
        snprintf(title, sizeof title, "Stages against %s", pl);
    snprintf(xl, sizeof xl, "%s%s", pl, any_inf ? "  (total reflux drawn at the right edge)" : "");
    plot_fig_labels(&f, title, xl, "equilibrium stages incl. pot [-]");
    double level = d->level > 0 && d->level < 1 ? d->level : 0.95;
    /* the curve and its bands inside the fitted envelope, and beyond it (extrapolated:
     * dashed line, lighter bands), each part ending exactly at the envelope's edge */
    if (d->grid) {
        stagecal_plot_split sp;
        const double *ys[5] = {d->fit, d->pi_lo, d->pi_hi, d->ci_lo, d->ci_hi};
        if (stagecal_plot_split_envelope(d->grid, ys, 5, d->n_grid, d->env_lo, d->env_hi, &sp) !=
            STAGECAL_OK) {
            f.oom = 1;
            return plot_fig_close(&f, out, err);
        }
        for (int part = 0; part < 2; part++) {
            const double *x = part ? sp.out_x : sp.in_x;
            double *const *y = part ? sp.out_y : sp.in_y;
            size_t m = part ? sp.n_out : sp.n_in;
            if (m == 0)
                continue;
            if (d->pi_lo && d->pi_hi) {
                snprintf(lab, sizeof lab, "%.0f %% prediction band (new window)", 100 * level);
                plot_fig_add(&f, STAGECAL_PLOT_BAND, part ? NULL : lab, x, y[1], y[2], m, 5, part,
                             0);
            }
            if (d->ci_lo && d->ci_hi) {
                snprintf(lab, sizeof lab, "%.0f %% confidence band (mean)", 100 * level);
                plot_fig_add(&f, STAGECAL_PLOT_BAND, part ? NULL : lab, x, y[3], y[4], m, 0, part,
                             0);
            }
            plot_fig_add(&f, STAGECAL_PLOT_LINE,
                         part ? "extrapolated (outside the envelope): dashed, light bands"
                              : "fitted correlation",
                         x, y[0], NULL, m, 0, part ? 1 : 0, 0);
        }
        stagecal_plot_split_free(&sp);
    }
    if (isfinite(d->env_lo) || isfinite(d->env_hi)) {
        double pad = 0.04 * fmax(ymax - ymin, 1e-9);
        double ex[5] = {d->env_lo, d->env_lo, NAN, d->env_hi, d->env_hi};
        double ey[5] = {ymin - pad, ymax + pad, NAN, ymin - pad, ymax + pad};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "fitted envelope", ex, ey, NULL, 5, 6, 1, 0);
    }
    if (d->n > 0)
        add_groups(&f, d->x, d->stages, d->group, d->n, d->group_names, d->n_groups, x_inf,
                   group_colours, NGROUPCOL);
    f.c->legend_pos = 1;
    return plot_fig_close(&f, out, err);
}

/* ---- residuals ------------------------------------------------------------------------ */

int stagecal_plot_resid(const stagecal_plot_resid_data *d, stagecal_plot_chart **out,
                        stagecal_error *err)
{
    int rc;
    if (!d || !out || d->n == 0 || !d->fitted || !d->resid)
        return error_set(err, STAGECAL_EINVAL, "residual chart: no residuals to draw");
    *out = NULL;
    if ((rc = check_groups(d->group, d->n, d->n_groups, "residual chart", err)))
        return rc;
    const double *x = d->time_s ? d->time_s : d->fitted;
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < d->n; i++)
        if (isfinite(x[i]))
            lo = fmin(lo, x[i]), hi = fmax(hi, x[i]);
    if (!isfinite(lo))
        return error_set(err, STAGECAL_EINVAL, "residual chart: no finite abscissa");
    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(
        &f,
        d->title ? d->title
                 : (d->time_s ? "Residuals against time" : "Residuals against fitted stages"),
        d->time_s ? "sample time [UTC date]" : "fitted stages incl. pot [-]",
        "residual, observed \xe2\x88\x92 fitted [stages]");
    f.c->x_time = d->time_s != NULL;
    double pad = hi > lo ? 0.04 * (hi - lo) : 0.5;
    double zx[2] = {lo - pad, hi + pad}, zy[2] = {0, 0};
    f.c->x_min = zx[0];
    f.c->x_max = zx[1];
    plot_fig_add(&f, STAGECAL_PLOT_LINE, "zero", zx, zy, NULL, 2, 6, 2, 0);
    static const int cols[] = {0, 1, 2, 3, 4, 5, 7};
    add_groups(&f, x, d->resid, d->group, d->n, d->group_names, d->n_groups, hi, cols,
               sizeof cols / sizeof cols[0]);
    f.c->legend_pos = 1;
    return plot_fig_close(&f, out, err);
}

/* ---- trend --------------------------------------------------------------------------- */

int stagecal_plot_trend(const stagecal_plot_trend_data *d, stagecal_plot_chart **out,
                        stagecal_error *err)
{
    int rc;
    if (!d || !out || d->n == 0 || !d->time_s || !d->stages || (d->line_t && !d->line) ||
        (d->fc_t && !d->fc))
        return error_set(err, STAGECAL_EINVAL, "trend chart: no calibrations to draw");
    *out = NULL;
    double t0 = INFINITY, t1 = -INFINITY;
    for (size_t i = 0; i < d->n; i++)
        if (isfinite(d->time_s[i]))
            t0 = fmin(t0, d->time_s[i]), t1 = fmax(t1, d->time_s[i]);
    for (size_t i = 0; d->fc_t && i < d->n_fc; i++)
        if (isfinite(d->fc_t[i]))
            t0 = fmin(t0, d->fc_t[i]), t1 = fmax(t1, d->fc_t[i]);
    if (!isfinite(t0))
        return error_set(err, STAGECAL_EINVAL, "trend chart: no finite calibration time");
    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(&f, d->title ? d->title : "Stage trend with control limits and forecast",
                    "calibration date [UTC]", "equilibrium stages incl. pot [-]");
    f.c->x_time = 1;
    if (d->fc_t && d->fc_lo && d->fc_hi)
        plot_fig_add(&f, STAGECAL_PLOT_BAND, "forecast band", d->fc_t, d->fc_lo, d->fc_hi, d->n_fc,
                     5, 0, 0);
    if (d->line_t && d->n_line > 0)
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "trend", d->line_t, d->line, NULL, d->n_line, 0, 0, 0);
    if (d->fc_t && d->n_fc > 0)
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "forecast", d->fc_t, d->fc, NULL, d->n_fc, 5, 1, 0);
    if (isfinite(d->lcl) || isfinite(d->ucl)) {
        double cx[5] = {t0, t1, NAN, t0, t1};
        double cy[5] = {d->lcl, d->lcl, NAN, d->ucl, d->ucl};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "control limits", cx, cy, NULL, 5, 4, 1, 0);
    }
    if (isfinite(d->spec_stages)) {
        double sx[2] = {t0, t1}, sy[2] = {d->spec_stages, d->spec_stages};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "minimum for product specification", sx, sy, NULL, 2,
                     3, 3, 0);
    }
    plot_fig_add(&f, STAGECAL_PLOT_POINTS, "calibrations", d->time_s, d->stages, NULL, d->n, 6, 0,
                 0);
    if (d->alarm) {
        size_t m = 0;
        double *ax = malloc(d->n * sizeof *ax), *ay = malloc(d->n * sizeof *ay);
        if (!ax || !ay)
            f.oom = 1;
        for (size_t i = 0; ax && ay && i < d->n; i++)
            if (d->alarm[i]) {
                ax[m] = d->time_s[i];
                ay[m++] = d->stages[i];
            }
        if (m > 0)
            plot_fig_add(&f, STAGECAL_PLOT_POINTS, "alarm", ax, ay, NULL, m, 1, 0, 6);
        if (m > 0 && !f.oom)
            f.s[f.c->n_series - 1].width = 2.2; /* a large ring around the calibration */
        free(ax);
        free(ay);
    }
    f.c->legend_pos = 2;
    return plot_fig_close(&f, out, err);
}

/* ---- batch prediction ---------------------------------------------------------------- */

int stagecal_plot_batch(const stagecal_plot_batch_data *d, stagecal_plot_chart **out,
                        stagecal_error *err)
{
    int rc;
    if (!d || !out || !d->t_s || d->n_t < 2 || !d->curves || d->n_curves == 0 ||
        d->n_curves > STAGECAL_PLOT_NCOLOURS)
        return error_set(err, STAGECAL_EINVAL,
                         "batch chart: expected at least 2 times and 1..%d curves",
                         STAGECAL_PLOT_NCOLOURS);
    *out = NULL;
    for (size_t c = 0; c < d->n_curves; c++)
        if (!d->curves[c].y)
            return error_set(err, STAGECAL_EINVAL, "batch chart: curve %zu has no values", c + 1);
    plot_fig f;
    if ((rc = plot_fig_open(&f, err)))
        return rc;
    plot_fig_labels(&f, d->title ? d->title : "Batch prediction", "time since start of batch [h]",
                    d->y_label ? d->y_label : "predicted value");
    double *th = malloc(d->n_t * sizeof *th);
    if (!th) {
        f.oom = 1;
        return plot_fig_close(&f, out, err);
    }
    for (size_t i = 0; i < d->n_t; i++)
        th[i] = d->t_s[i] / 3600.0; /* SI seconds → hours at the edge */
    /* curve c: colour c (skipping black, kept for the specification line) */
    for (size_t c = 0; c < d->n_curves; c++) {
        const stagecal_plot_batch_curve *cv = &d->curves[c];
        int col = (int)(c < 6 ? c : c + 1) % STAGECAL_PLOT_NCOLOURS;
        char lab[96];
        if (cv->y_lo && cv->y_hi) {
            snprintf(lab, sizeof lab, "%s band", cv->name ? cv->name : "curve");
            plot_fig_add(&f, STAGECAL_PLOT_BAND, lab, th, cv->y_lo, cv->y_hi, d->n_t, col, 0, 0);
        }
    }
    for (size_t c = 0; c < d->n_curves; c++) {
        const stagecal_plot_batch_curve *cv = &d->curves[c];
        int col = (int)(c < 6 ? c : c + 1) % STAGECAL_PLOT_NCOLOURS;
        plot_fig_add(&f, STAGECAL_PLOT_LINE, cv->name ? cv->name : "curve", th, cv->y, NULL, d->n_t,
                     col, (int)(c % STAGECAL_PLOT_NLINES), 0);
    }
    if (isfinite(d->spec)) {
        double sx[2] = {th[0], th[d->n_t - 1]}, sy[2] = {d->spec, d->spec};
        plot_fig_add(&f, STAGECAL_PLOT_LINE, "specification", sx, sy, NULL, 2, 6, 2, 0);
    }
    free(th);
    f.c->legend_pos = 1;
    return plot_fig_close(&f, out, err);
}
