/*
 * plot_mccabe.c — the McCabe–Thiele diagram (stagecal_plot_mccabe and
 * stagecal_plot_mccabe_condition, include/stagecal/plot.h): equilibrium curve, diagonal,
 * operating line, the stage steps (the pseudo-equilibrium curve when E_MV < 1) and, when
 * many stages crowd the top corner, an inset zoomed on them.
 *
 * The pinch (the operating line meeting the equilibrium curve inside (0, xD)) is
 * bracketed on a grid from xD downwards and refined with GSL's Brent solver.
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
