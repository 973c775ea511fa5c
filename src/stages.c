/*
 * stages.c — McCabe–Thiele stepping for a batch rectifier, forward and inverse
 * (DESIGN §2), plus the constant-α closed forms (Fenske, Smoker) and the minimum
 * reflux ratio for a general equilibrium model.
 *
 * Method. With L/V = m and b = (1 − m)·xD the operating line is y = m·x + b. From the
 * top, x_0 = xD and for n = 1, 2, …: y_n = m·x_(n−1) + b and x_n solves
 * (1 − E)·(m·x + b) + E·y*(x) = y_n (x_n = x*(y_n) when E = 1; otherwise GSL's Brent
 * solver on a bracket that always holds the root, see pseudo_eq_solve). The pot
 * (ideal) fixes the target x_target = (y*(xB) − b)/m. Whole steps count while
 * x_n > x_target; the crossing step counts Smoker's fraction from x_(n−1) to x_target
 * with α_loc = y_n(1 − x_n)/(x_n(1 − y_n)) (REFERENCES §2; log-odds Fenske form at
 * total reflux, where Smoker's k = 0 and β = 1 reduce to it). For constant α and E = 1
 * the count equals Smoker's equation (Fenske at R = ∞) exactly, because Smoker's count
 * is additive and the pot step is whole. Forward stepping inverts that definition
 * (closed-form Smoker inverse for the fraction), so the two round-trip.
 *
 * Pinch detection (xB unreachable at this L/V): the stepping never crosses a point
 * where the operating line meets the equilibrium curve (the pseudo-equilibrium curve
 * meets it at the same points), so a pinch shows as (1) the line at or above the curve
 * at x_target (checked before stepping), (2) a step that makes no progress, (3) the
 * line at or above the curve somewhere on a grid between x_target and the current
 * liquid, checked once after params.pinch_scan_after steps (tangent pinches), or
 * (4) more than params.max_stages whole steps.
 *
 * Sensitivities ∂stages/∂xD, ∂xB, ∂R (on request): finite differences of the inversion
 * itself, central with h = fd_rel_step·min(x, 1 − x) for compositions and fd_rel_step·R
 * for the reflux ratio (cbrt(ε) balances truncation ~h² against rounding ~ε/h); a side
 * that leaves the domain (xB ≥ xD, x_max) or is not ok (pinch) is dropped and the
 * difference becomes one-sided; ∂/∂R = 0 at total reflux. The count is continuous but
 * may have a kink at whole-stage boundaries (for E_MV < 1 or a curved y*, α_loc of the
 * crossing step jumps there), so a difference straddling one is only O(h) accurate.
 *
 * Assumptions: binary, constant molar overflow, total condenser, y*(x) increasing on
 * the range stepped (true below the first azeotrope). Everything is dimensionless
 * (mole fractions of the light component, ratios).
 */
#include "stagecal/stages.h"

#include <float.h>
#include <stdarg.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_roots.h>

#include "internal.h"

#define MAX_AZ 8 /* azeotropes inspected (vle finds at most a handful) */
/* stagecal_min_reflux has no params argument (fixed signature), so its tunables are here:
 * the slope of the line from (xD, xD) to the curve is scanned on RMIN_NGRID points of
 * [xB, xD) (a tangent pinch narrower than (xD − xB)/RMIN_NGRID could be missed), then
 * refined by GSL Brent minimisation to RMIN_XTOL in x within RMIN_MAXIT iterations. */
#define RMIN_NGRID 128
#define RMIN_MAXIT 100
#define RMIN_XTOL 1e-13

const char *stagecal_stages_status_name(int status)
{
    static const char *const names[] = {"ok", "pinch", "azeotrope", "invalid"};
    return (status >= 0 && status <= 3) ? names[status] : "unknown";
}

stagecal_stages_params stagecal_stages_default_params(void)
{
    stagecal_stages_params p;
    memset(&p, 0, sizeof p);
    p.max_stages = 10000;
    p.top_tol = 1e-12;
    p.want_sensitivities = 0;
    p.x_epsabs = 1e-15;
    p.max_iter = 200;
    p.pinch_scan_after = 200;
    p.pinch_scan_points = 256;
    p.fd_rel_step = 6.0554544523933395e-06; /* cbrt(DBL_EPSILON) */
    return p;
}

/* ---- Smoker's equation on a general straight operating line (REFERENCES §2) ---------- */

/* Constants of Smoker's equation for equilibrium αx/(1+(α−1)x) and line y = m x + b. */
typedef struct {
    double k;    /* pinch root in [0, 1) */
    double beta; /* fixed point of the linear recursion in u = 1/(x − k) */
    double lna;  /* ln(α/(m c²)) > 0: ln of the per-stage factor */
} smoker_consts;

/* Returns 0 when the constants are usable (α > 1, 0 < m ≤ 1, b ≥ 0, ln factor > 0). */
static int smoker_setup(double alpha, double m, double b, smoker_consts *sc)
{
    double a2 = m * (alpha - 1.0);
    double a1 = m + b * (alpha - 1.0) - alpha;
    double disc = a1 * a1 - 4.0 * a2 * b;
    if (!(alpha > 1.0) || !(m > 0.0) || !(disc >= 0.0))
        return -1;
    /* The small root, in the cancellation-free form (a1 < 0): k = 2b/(−a1 + √disc). At
     * total reflux b = 0 gives k = 0 exactly, c = 1, β = 1: the Fenske log-odds form. */
    double k = 2.0 * b / (-a1 + sqrt(disc));
    double c = 1.0 + (alpha - 1.0) * k;
    double den = alpha - m * c * c;
    if (!(den > 0.0))
        return -1;
    sc->k = k;
    sc->beta = m * c * (alpha - 1.0) / den;
    sc->lna = log(alpha / (m * c * c));
    if (!(sc->lna > 0.0) || !isfinite(sc->lna) || !isfinite(sc->beta))
        return -1;
    return 0;
}

/* Stage count from top liquid x0 down to xn (both > k); NaN when outside the domain. */
static double smoker_count(const smoker_consts *sc, double x0, double xn)
{
    double u0 = 1.0 / (x0 - sc->k), un = 1.0 / (xn - sc->k);
    return log((un - sc->beta) / (u0 - sc->beta)) / sc->lna;
}

/* Closed-form inverse: the liquid after n (real) stages from x0. */
static double smoker_inverse(const smoker_consts *sc, double x0, double n)
{
    double u0 = 1.0 / (x0 - sc->k);
    return sc->k + 1.0 / (sc->beta + (u0 - sc->beta) * exp(n * sc->lna));
}

int stagecal_fenske(double alpha, double xd, double xb, double *stages, stagecal_error *err)
{
    if (!stages)
        return error_set(err, STAGECAL_EINVAL, "fenske: stages is NULL");
    if (!(alpha > 1.0) || !isfinite(alpha))
        return error_set(err, STAGECAL_EINVAL, "fenske: relative volatility %g outside (1, inf)",
                         alpha);
    if (!(xd > 0.0 && xd < 1.0) || !(xb > 0.0 && xb < xd))
        return error_set(err, STAGECAL_EINVAL,
                         "fenske: compositions xD = %g, xB = %g, expected 0 < xB < xD < 1", xd, xb);
    *stages = log((xd / (1.0 - xd)) * ((1.0 - xb) / xb)) / log(alpha);
    return STAGECAL_OK;
}

int stagecal_smoker(double alpha, double reflux, double xd, double xb, double *stages,
                    stagecal_error *err)
{
    if (!stages)
        return error_set(err, STAGECAL_EINVAL, "smoker: stages is NULL");
    if (isinf(reflux) && reflux > 0)
        return stagecal_fenske(alpha, xd, xb, stages, err);
    if (!(alpha > 1.0) || !isfinite(alpha))
        return error_set(err, STAGECAL_EINVAL, "smoker: relative volatility %g outside (1, inf)",
                         alpha);
    if (!(reflux > 0.0))
        return error_set(err, STAGECAL_EINVAL, "smoker: reflux ratio %g, expected R > 0", reflux);
    if (!(xd > 0.0 && xd < 1.0) || !(xb > 0.0 && xb < xd))
        return error_set(err, STAGECAL_EINVAL,
                         "smoker: compositions xD = %g, xB = %g, expected 0 < xB < xD < 1", xd, xb);
    smoker_consts sc;
    double m = reflux / (reflux + 1.0), b = xd / (reflux + 1.0);
    if (smoker_setup(alpha, m, b, &sc) != 0)
        return error_set(err, STAGECAL_EINTERNAL, "smoker: no pinch root for alpha %g, R %g", alpha,
                         reflux);
    if (!(xb > sc.k))
        return error_set(err, STAGECAL_EINVAL,
                         "smoker: xB = %.10g is at or below the pinch %.10g, no finite count", xb,
                         sc.k);
    *stages = smoker_count(&sc, xd, xb);
    return STAGECAL_OK;
}

/* ---- the stepper ------------------------------------------------------------------- */

typedef struct {
    const stagecal_vle *vle;
    const stagecal_stages_params *par;
    double xd, m, b, e;  /* top composition, L/V, (1 − L/V)·xD, E_MV */
    double y;            /* vapour of the step being solved (pseudo-equilibrium target) */
    int vle_rc;          /* first vle failure inside the GSL callback */
    gsl_root_fsolver *s; /* Brent solver when E < 1, else NULL */
    stagecal_error *err;
} stepper;

static double op_line(const stepper *st, double x)
{
    return st->m * x + st->b;
}

static int vle_y(stepper *st, double x, double *y)
{
    int rc = stagecal_vle_ystar(st->vle, x, y);
    if (rc != STAGECAL_OK)
        return error_set(st->err, rc == STAGECAL_EINVAL ? STAGECAL_EINTERNAL : rc,
                         "equilibrium y*(%.17g) failed: %s", x, stagecal_strerror(rc));
    return STAGECAL_OK;
}

static int vle_x(stepper *st, double y, double *x)
{
    int rc = stagecal_vle_xstar(st->vle, y, x);
    if (rc != STAGECAL_OK)
        return error_set(st->err, rc == STAGECAL_EINVAL ? STAGECAL_EINTERNAL : rc,
                         "equilibrium x*(%.17g) failed: %s", y, stagecal_strerror(rc));
    return STAGECAL_OK;
}

/* Pseudo-equilibrium curve minus the target vapour: increasing in x when y* is. */
static double pseudo_eq_f(double x, void *p)
{
    stepper *st = p;
    double ys;
    int rc = stagecal_vle_ystar(st->vle, x, &ys);
    if (rc != STAGECAL_OK) {
        if (!st->vle_rc)
            st->vle_rc = rc;
        return GSL_NAN;
    }
    return (1.0 - st->e) * op_line(st, x) + st->e * ys - st->y;
}

/* Vapour on the (pseudo-)equilibrium curve at liquid x. */
static int pseudo_eq_y(stepper *st, double x, double *y)
{
    double ys;
    int rc = vle_y(st, x, &ys);
    if (rc)
        return rc;
    *y = st->e == 1.0 ? ys : (1.0 - st->e) * op_line(st, x) + st->e * ys;
    return STAGECAL_OK;
}

/* Liquid x leaving a stage whose vapour is st->y, given the liquid from above x_prev.
 * The root is bracketed: at x_prev the pseudo-equilibrium lies above y_n (otherwise the
 * line meets the curve there and x_prev is returned, which the caller reports as a
 * pinch); the E = 1 solution x_e = x*(y_n) lies below the root when the
 * line is below y_n at x_e (then [x_e, x_prev]), otherwise [0, x_e] holds it. */
static int pseudo_eq_solve(stepper *st, double x_prev, double *x)
{
    double xe, fhi, lo, hi;
    int rc = vle_x(st, st->y, &xe);
    if (rc)
        return rc;
    if (st->e == 1.0) {
        *x = xe;
        return STAGECAL_OK;
    }
    st->vle_rc = 0;
    fhi = pseudo_eq_f(x_prev, st);
    if (st->vle_rc)
        return error_set(st->err, STAGECAL_EINTERNAL, "equilibrium y*(%.17g) failed", x_prev);
    if (!(fhi > 0.0)) {
        *x = x_prev; /* the line meets the curve at x_prev: no progress, reported as pinch */
        return STAGECAL_OK;
    }
    if (op_line(st, xe) <= st->y) {
        lo = xe;
        hi = x_prev;
    } else {
        lo = 0.0;
        hi = xe;
    }
    if (lo >= hi) {
        *x = lo;
        return STAGECAL_OK;
    }
    gsl_function fn = {pseudo_eq_f, st};
    int gs = gsl_root_fsolver_set(st->s, &fn, lo, hi);
    if (gs == GSL_EINVAL) {
        /* A bracket end is itself the root (f = 0 there within rounding). */
        double flo = pseudo_eq_f(lo, st);
        *x = fabs(flo) <= fabs(fhi) ? lo : hi;
        return STAGECAL_OK;
    }
    if (gs != GSL_SUCCESS)
        return error_set(st->err, STAGECAL_ENOCONV, "pseudo-equilibrium solve: %s",
                         gsl_strerror(gs));
    for (size_t it = 0; it < st->par->max_iter; it++) {
        gs = gsl_root_fsolver_iterate(st->s);
        if (gs != GSL_SUCCESS || st->vle_rc)
            return error_set(st->err, STAGECAL_ENOCONV,
                             "pseudo-equilibrium solve for y = %.17g: %s", st->y,
                             st->vle_rc ? stagecal_strerror(st->vle_rc) : gsl_strerror(gs));
        lo = gsl_root_fsolver_x_lower(st->s);
        hi = gsl_root_fsolver_x_upper(st->s);
        if (gsl_root_test_interval(lo, hi, st->par->x_epsabs, 4.0 * DBL_EPSILON) == GSL_SUCCESS) {
            *x = gsl_root_fsolver_root(st->s);
            return STAGECAL_OK;
        }
    }
    return error_set(st->err, STAGECAL_ENOCONV,
                     "pseudo-equilibrium solve for y = %.17g: no convergence in %zu iterations",
                     st->y, st->par->max_iter);
}

/* One step from x_prev: fills *x, *y. Returns STAGECAL_OK; *pinch = 1 when no progress. */
static int step_once(stepper *st, double x_prev, double *x, double *y, int *pinch)
{
    st->y = op_line(st, x_prev);
    *y = st->y;
    int rc = pseudo_eq_solve(st, x_prev, x);
    if (rc)
        return rc;
    *pinch = !(*x < x_prev);
    return STAGECAL_OK;
}

/* Is the operating line at or above the equilibrium curve somewhere on [lo, hi]? */
static int scan_pinch(stepper *st, double lo, double hi, size_t npts, int *found)
{
    *found = 0;
    for (size_t i = 0; i <= npts; i++) {
        double x = lo + (hi - lo) * (double)i / (double)npts, ys;
        int rc = vle_y(st, x, &ys);
        if (rc)
            return rc;
        if (ys <= op_line(st, x)) {
            *found = 1;
            return STAGECAL_OK;
        }
    }
    return STAGECAL_OK;
}

/* Smoker's fraction of the crossing step: from x_prev to x_target with α_loc of (xn, yn). */
static double crossing_fraction(const stepper *st, double x_prev, double xn, double yn,
                                double x_target)
{
    double alpha_loc = yn * (1.0 - xn) / (xn * (1.0 - yn));
    smoker_consts sc;
    double f = NAN;
    if (smoker_setup(alpha_loc, st->m, st->b, &sc) == 0 && x_target > sc.k)
        f = smoker_count(&sc, x_prev, x_target);
    if (!isfinite(f)) /* α_loc within rounding of 1: the curve is locally the line */
        f = (x_prev - x_target) / (x_prev - xn);
    return f < 0.0 ? 0.0 : (f > 1.0 ? 1.0 : f);
}

static int stepper_init(stepper *st, const stagecal_vle *vle, const stagecal_stages_params *par,
                        double xd, double reflux, double e, stagecal_error *err)
{
    memset(st, 0, sizeof *st);
    st->vle = vle;
    st->par = par;
    st->xd = xd;
    st->e = e;
    st->err = err;
    if (isinf(reflux)) {
        st->m = 1.0;
        st->b = 0.0;
    } else {
        st->m = reflux / (reflux + 1.0);
        st->b = xd / (reflux + 1.0); /* (1 − L/V)·xD without the cancellation */
    }
    if (e < 1.0) {
        st->s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
        if (!st->s)
            return error_set(err, STAGECAL_ENOMEM, "out of memory (root solver)");
    }
    return STAGECAL_OK;
}

static void stepper_free(stepper *st)
{
    if (st->s)
        gsl_root_fsolver_free(st->s);
    st->s = NULL;
}

/* First azeotrope at or below xd, or −1 when none. */
static double azeotrope_below(const stagecal_vle *vle, double xd)
{
    double az[MAX_AZ];
    size_t n = stagecal_vle_azeotropes(vle, az, MAX_AZ);
    for (size_t i = 0; i < n && i < MAX_AZ; i++)
        if (az[i] <= xd)
            return az[i];
    return -1.0;
}

/* ---- inversion ------------------------------------------------------------------------ */

static void set_status(stagecal_stages_result *res, int status, const char *fmt, ...)
    SC_PRINTF(3, 4);

static void set_status(stagecal_stages_result *res, int status, const char *fmt, ...)
{
    va_list ap;
    res->status = status;
    res->stages = 0.0;
    res->column_stages = 0.0;
    va_start(ap, fmt);
    vsnprintf(res->reason, sizeof res->reason, fmt, ap);
    va_end(ap);
}

static int invert_core(const stagecal_vle *vle, double xd, double xb, double reflux, double e,
                       const stagecal_stages_params *par, stagecal_stages_result *res,
                       stagecal_error *err)
{
    memset(res, 0, sizeof *res);
    res->status = STAGECAL_STAGES_OK;
    double x_max = stagecal_vle_x_max(vle);

    if (isnan(xd) || isnan(xb) || isnan(reflux) || isnan(e)) {
        set_status(res, STAGECAL_STAGES_INVALID, "an input is NaN (xD %g, xB %g, R %g, E_MV %g)",
                   xd, xb, reflux, e);
        return STAGECAL_OK;
    }
    if (!(xd > 0.0 && xd < 1.0) || xd > x_max) {
        set_status(res, STAGECAL_STAGES_INVALID, "xD = %.10g outside (0, %.10g)", xd,
                   x_max < 1.0 ? x_max : 1.0);
        return STAGECAL_OK;
    }
    if (!(xb > 0.0 && xb < 1.0) || xb > x_max) {
        set_status(res, STAGECAL_STAGES_INVALID, "xB = %.10g outside (0, %.10g)", xb,
                   x_max < 1.0 ? x_max : 1.0);
        return STAGECAL_OK;
    }
    if (!(xb < xd)) {
        set_status(res, STAGECAL_STAGES_INVALID, "xB = %.10g is not below xD = %.10g", xb, xd);
        return STAGECAL_OK;
    }
    if (!(e > 0.0 && e <= 1.0)) {
        set_status(res, STAGECAL_STAGES_INVALID, "Murphree efficiency %g outside (0, 1]", e);
        return STAGECAL_OK;
    }
    if (reflux < 0.0) {
        set_status(res, STAGECAL_STAGES_INVALID, "reflux ratio %g is negative", reflux);
        return STAGECAL_OK;
    }
    if (reflux == 0.0) {
        set_status(res, STAGECAL_STAGES_INVALID,
                   "reflux ratio 0: the stage count is not identifiable without reflux");
        return STAGECAL_OK;
    }
    double az = azeotrope_below(vle, xd);
    if (az >= 0.0) {
        if (az >= xb)
            set_status(res, STAGECAL_STAGES_AZEOTROPE,
                       "azeotrope at x = %.6f lies between xB = %.6g and xD = %.6g", az, xb, xd);
        else
            set_status(res, STAGECAL_STAGES_AZEOTROPE,
                       "azeotrope at x = %.6f lies below xB = %.6g: stepping beyond it is not "
                       "supported",
                       az, xb);
        return STAGECAL_OK;
    }

    stepper st;
    int rc = stepper_init(&st, vle, par, xd, reflux, e, err);
    if (rc)
        goto done;
    res->lv = st.m;

    double ypot, x_target;
    if ((rc = vle_y(&st, xb, &ypot)))
        goto done;
    x_target = (ypot - st.b) / st.m;
    res->x_target = isfinite(x_target) ? x_target : 0.0;
    if (x_target > xd + par->top_tol) {
        set_status(res, STAGECAL_STAGES_INVALID,
                   "the pot alone out-performs the data: its vapour %.10g needs x_target = %.10g "
                   "above xD = %.10g",
                   ypot, x_target, xd);
        goto done;
    }
    if (x_target >= xd) {
        res->stages = 1.0;
        res->column_stages = 0.0;
        goto done;
    }
    /* The line at or above the curve at x_target: it meets the curve in [x_target, xD). */
    double yt;
    if (!(x_target > 0.0)) {
        set_status(res, STAGECAL_STAGES_PINCH,
                   "pinch: the operating line at L/V = %.10g reaches the pot vapour %.10g only "
                   "at x = %.6g",
                   st.m, ypot, x_target);
        goto done;
    }
    if ((rc = vle_y(&st, x_target, &yt)))
        goto done;
    if (yt <= op_line(&st, x_target)) {
        set_status(res, STAGECAL_STAGES_PINCH,
                   "pinch: the operating line at L/V = %.10g meets the equilibrium curve above "
                   "x_target = %.10g",
                   st.m, x_target);
        goto done;
    }

    double x_prev = xd, xn = xd, yn = xd;
    int scanned = 0;
    size_t n = 0;
    for (;;) {
        int pinch = 0;
        n++;
        if ((rc = step_once(&st, x_prev, &xn, &yn, &pinch)))
            goto done;
        if (pinch) {
            set_status(res, STAGECAL_STAGES_PINCH,
                       "pinch: no progress at step %zu (x = %.10g) above x_target = %.10g", n,
                       x_prev, x_target);
            goto done;
        }
        if (xn <= x_target)
            break;
        if (n >= par->max_stages) {
            set_status(res, STAGECAL_STAGES_PINCH,
                       "pinch: more than %zu whole steps (x = %.10g, x_target = %.10g)",
                       par->max_stages, xn, x_target);
            goto done;
        }
        if (!scanned && n >= par->pinch_scan_after) {
            int found;
            scanned = 1;
            if ((rc = scan_pinch(&st, x_target, xn, par->pinch_scan_points, &found)))
                goto done;
            if (found) {
                set_status(res, STAGECAL_STAGES_PINCH,
                           "pinch: the operating line at L/V = %.10g meets the equilibrium "
                           "curve between x_target = %.10g and x = %.10g",
                           st.m, x_target, xn);
                goto done;
            }
        }
        x_prev = xn;
    }
    double f = crossing_fraction(&st, x_prev, xn, yn, x_target);
    res->column_stages = (double)(n - 1) + f;
    res->stages = res->column_stages + 1.0;
done:
    stepper_free(&st);
    if (rc) {
        res->stages = res->column_stages = 0.0;
        res->status = STAGECAL_STAGES_INVALID;
        const char *why = err ? err->text : "inner solve failed";
        size_t nw = strlen(why);
        if (nw >= sizeof res->reason)
            nw = sizeof res->reason - 1;
        memcpy(res->reason, why, nw);
        res->reason[nw] = '\0';
    }
    return rc;
}

/* Stages at a neighbouring point, or NAN when that point is not ok. */
static double stages_at(const stagecal_vle *vle, double xd, double xb, double reflux, double e,
                        const stagecal_stages_params *par)
{
    stagecal_stages_result r;
    if (invert_core(vle, xd, xb, reflux, e, par, &r, NULL) != STAGECAL_OK ||
        r.status != STAGECAL_STAGES_OK)
        return NAN;
    return r.stages;
}

/* Central difference when both neighbours are ok, one-sided when one is, else 0. */
static double fd_combine(double s0, double sm, double sp, double hm, double hp)
{
    if (isfinite(sm) && isfinite(sp))
        return (sp - sm) / (hp + hm);
    if (isfinite(sp))
        return (sp - s0) / hp;
    if (isfinite(sm))
        return (s0 - sm) / hm;
    return 0.0;
}

/* Sensitivities by finite differences of the inversion itself. Steps: h = fd_rel_step ·
 * min(x, 1 − x) for a composition (so x ± h stays in (0, 1)); a side that would cross
 * xB < xD, x_max or give a non-ok status is dropped (one-sided difference); h = fd_rel_step
 * · R for the reflux ratio (R − h > 0), and ∂/∂R = 0 at total reflux. */
static void sensitivities(const stagecal_vle *vle, double xd, double xb, double reflux, double e,
                          const stagecal_stages_params *par, stagecal_stages_result *res)
{
    double s0 = res->stages, x_max = stagecal_vle_x_max(vle);
    double h = par->fd_rel_step * fmin(xd, 1.0 - xd);
    double sp = xd + h <= x_max ? stages_at(vle, xd + h, xb, reflux, e, par) : NAN;
    double sm = xd - h > xb ? stages_at(vle, xd - h, xb, reflux, e, par) : NAN;
    res->dstages_dxd = fd_combine(s0, sm, sp, h, h);

    h = par->fd_rel_step * fmin(xb, 1.0 - xb);
    sp = xb + h < xd ? stages_at(vle, xd, xb + h, reflux, e, par) : NAN;
    sm = stages_at(vle, xd, xb - h, reflux, e, par);
    res->dstages_dxb = fd_combine(s0, sm, sp, h, h);

    if (isinf(reflux)) {
        res->dstages_dr = 0.0;
    } else {
        h = par->fd_rel_step * reflux;
        sp = stages_at(vle, xd, xb, reflux + h, e, par);
        sm = stages_at(vle, xd, xb, reflux - h, e, par);
        res->dstages_dr = fd_combine(s0, sm, sp, h, h);
    }
}

int stagecal_stages_invert(const stagecal_vle *vle, double xd, double xb, double reflux,
                           double murphree, const stagecal_stages_params *params,
                           stagecal_stages_result *res, stagecal_error *err)
{
    if (!vle || !res)
        return error_set(err, STAGECAL_EINVAL, "stages_invert: %s is NULL", vle ? "res" : "vle");
    stagecal_stages_params def = stagecal_stages_default_params();
    const stagecal_stages_params *par = params ? params : &def;
    int rc = invert_core(vle, xd, xb, reflux, murphree, par, res, err);
    if (rc == STAGECAL_OK && res->status == STAGECAL_STAGES_OK && par->want_sensitivities)
        sensitivities(vle, xd, xb, reflux, murphree, par, res);
    return rc;
}

/* ---- forward stepping ----------------------------------------------------------------- */

static void put_point(stagecal_stage_point *profile, size_t cap, size_t i, double stage, double x,
                      double y)
{
    if (profile && i < cap) {
        profile[i].stage = stage;
        profile[i].x = x;
        profile[i].y = y;
    }
}

int stagecal_stages_step(const stagecal_vle *vle, double xd, double reflux, double stages,
                         double murphree, const stagecal_stages_params *params, double *xb,
                         stagecal_stage_point *profile, size_t cap, size_t *len, int *status,
                         stagecal_error *err)
{
    if (!vle || !xb || !len || !status)
        return error_set(err, STAGECAL_EINVAL, "stages_step: a required pointer is NULL");
    stagecal_stages_params def = stagecal_stages_default_params();
    const stagecal_stages_params *par = params ? params : &def;
    double x_max = stagecal_vle_x_max(vle);
    *xb = 0.0;
    *len = 0;
    *status = STAGECAL_STAGES_INVALID;
    if (!(stages >= 1.0) || !isfinite(stages))
        return error_set(err, STAGECAL_EINVAL,
                         "stages %g: expected a finite count >= 1 (the pot included)", stages);
    if (!(xd > 0.0 && xd < 1.0) || xd > x_max)
        return error_set(err, STAGECAL_EINVAL, "xD = %g outside (0, %g)", xd,
                         x_max < 1.0 ? x_max : 1.0);
    if (!(murphree > 0.0 && murphree <= 1.0))
        return error_set(err, STAGECAL_EINVAL, "Murphree efficiency %g outside (0, 1]", murphree);
    if (!(reflux >= 0.0))
        return error_set(err, STAGECAL_EINVAL, "reflux ratio %g: expected R >= 0 or inf", reflux);
    double column = stages - 1.0;
    double nwhole_d = column > 0.0 ? ceil(column) - 1.0 : 0.0;
    if (nwhole_d >= (double)par->max_stages)
        return error_set(err, STAGECAL_EINVAL, "stages %g: more than max_stages = %zu", stages,
                         par->max_stages);
    if (reflux == 0.0) {
        error_set(err, STAGECAL_OK, "reflux ratio 0: stages are not defined without reflux");
        return STAGECAL_OK;
    }
    double az = azeotrope_below(vle, xd);
    if (az >= 0.0) {
        *status = STAGECAL_STAGES_AZEOTROPE;
        error_set(err, STAGECAL_OK, "azeotrope at x = %.6f at or below xD = %.6g", az, xd);
        return STAGECAL_OK;
    }

    stepper st;
    int rc = stepper_init(&st, vle, par, xd, reflux, murphree, err);
    if (rc)
        return rc;
    size_t nwhole = (size_t)nwhole_d, k = 0;
    double x_prev = xd, x_target = xd, xn = xd, yn = xd, y;
    int pinch = 0;
    if (column > 0.0) {
        double f = column - nwhole_d; /* in (0, 1] */
        for (size_t n = 1; n <= nwhole; n++) {
            if ((rc = step_once(&st, x_prev, &xn, &yn, &pinch)))
                goto done;
            if (pinch)
                goto pinched;
            put_point(profile, cap, k++, (double)n, xn, yn);
            x_prev = xn;
        }
        if ((rc = step_once(&st, x_prev, &xn, &yn, &pinch)))
            goto done;
        if (pinch)
            goto pinched;
        if (f == 1.0) {
            x_target = xn;
            put_point(profile, cap, k++, (double)(nwhole + 1), xn, yn);
        } else {
            /* The inverse of crossing_fraction: Smoker's closed-form inverse with α_loc. */
            double alpha_loc = yn * (1.0 - xn) / (xn * (1.0 - yn));
            smoker_consts sc;
            if (smoker_setup(alpha_loc, st.m, st.b, &sc) == 0)
                x_target = smoker_inverse(&sc, x_prev, f);
            else
                x_target = x_prev - f * (x_prev - xn);
            if (!(x_target >= xn && x_target <= x_prev))
                x_target = x_prev - f * (x_prev - xn);
            if ((rc = pseudo_eq_y(&st, x_target, &y)))
                goto done;
            put_point(profile, cap, k++, column, x_target, y);
        }
    }
    {
        double ypot = op_line(&st, x_target), ys;
        if ((rc = vle_x(&st, ypot, xb)))
            goto done;
        if ((rc = vle_y(&st, *xb, &ys)))
            goto done;
        put_point(profile, cap, k++, stages, *xb, ys);
        *len = k;
        *status = STAGECAL_STAGES_OK;
    }
    goto done;
pinched:
    /* The step made no progress: the liquid has reached the pinch of this operating line
     * to rounding, and more stages (the pot included) reach no further, so the pot ends
     * at the composition reached, the last x. */
    *status = STAGECAL_STAGES_PINCH;
    *xb = x_prev;
    *len = 0;
    error_set(err, STAGECAL_OK, "pinch: no progress below x = %.10g at L/V = %.10g", x_prev, st.m);
done:
    stepper_free(&st);
    if (rc) {
        *xb = 0.0;
        *len = 0;
        *status = STAGECAL_STAGES_INVALID;
    }
    return rc;
}

/* ---- minimum reflux ------------------------------------------------------------------- */

typedef struct {
    const stagecal_vle *vle;
    double xd;
    int rc;
} rmin_ctx;

/* Minus the slope of the line from (xD, xD) to (x, y*(x)); the line at L/V touches the
 * curve at x when L/V equals that slope, so L/V_min is its maximum over [xB, xD). */
static double neg_slope(double x, void *p)
{
    rmin_ctx *c = p;
    double y;
    int rc = stagecal_vle_ystar(c->vle, x, &y);
    if (rc) {
        c->rc = rc;
        return GSL_NAN;
    }
    return -(c->xd - y) / (c->xd - x);
}

int stagecal_min_reflux(const stagecal_vle *vle, double xd, double xb, double *rmin,
                        stagecal_error *err)
{
    if (!vle || !rmin)
        return error_set(err, STAGECAL_EINVAL, "min_reflux: a required pointer is NULL");
    double x_max = stagecal_vle_x_max(vle);
    if (!(xd > 0.0 && xd < 1.0) || xd > x_max || !(xb > 0.0 && xb < xd))
        return error_set(err, STAGECAL_EINVAL,
                         "min_reflux: xD = %g, xB = %g, expected 0 < xB < xD <= %g", xd, xb,
                         x_max < 1.0 ? x_max : 1.0);
    double az = azeotrope_below(vle, xd);
    if (az >= 0.0)
        return error_set(err, STAGECAL_EINVAL,
                         "min_reflux: azeotrope at x = %.6f at or below xD = %g, no reflux "
                         "ratio reaches xB = %g",
                         az, xd, xb);
    rmin_ctx c = {vle, xd, 0};
    /* Coarse scan (tangent pinches may sit anywhere), then Brent on the best bracket. */
    double best = HUGE_VAL, gx[RMIN_NGRID], gf[RMIN_NGRID];
    size_t ibest = 0;
    for (size_t i = 0; i < RMIN_NGRID; i++) {
        gx[i] = xb + (xd - xb) * (double)i / (double)RMIN_NGRID;
        gf[i] = neg_slope(gx[i], &c);
        if (c.rc)
            return error_set(err, STAGECAL_EINTERNAL, "min_reflux: y*(%g) failed: %s", gx[i],
                             stagecal_strerror(c.rc));
        if (gf[i] < best) {
            best = gf[i];
            ibest = i;
        }
    }
    if (ibest > 0 && ibest + 1 < RMIN_NGRID && gf[ibest] < gf[ibest - 1] &&
        gf[ibest] < gf[ibest + 1]) {
        gsl_min_fminimizer *s = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
        if (!s)
            return error_set(err, STAGECAL_ENOMEM, "out of memory (minimiser)");
        gsl_function fn = {neg_slope, &c};
        int gs = gsl_min_fminimizer_set_with_values(s, &fn, gx[ibest], gf[ibest], gx[ibest - 1],
                                                    gf[ibest - 1], gx[ibest + 1], gf[ibest + 1]);
        for (int it = 0; gs == GSL_SUCCESS && it < RMIN_MAXIT; it++) {
            gs = gsl_min_fminimizer_iterate(s);
            if (gs != GSL_SUCCESS || c.rc)
                break;
            if (gsl_min_test_interval(gsl_min_fminimizer_x_lower(s), gsl_min_fminimizer_x_upper(s),
                                      1e-13, 0.0) == GSL_SUCCESS)
                break;
        }
        if (gs == GSL_SUCCESS && !c.rc && gsl_min_fminimizer_f_minimum(s) <= best) {
            best = gsl_min_fminimizer_f_minimum(s);
        }
        gsl_min_fminimizer_free(s);
        if (c.rc || (gs != GSL_SUCCESS && gs != GSL_CONTINUE))
            return error_set(err, STAGECAL_ENOCONV, "min_reflux: tangent pinch search: %s",
                             c.rc ? stagecal_strerror(c.rc) : gsl_strerror(gs));
    }
    double lv = -best;
    if (lv <= 0.0) {
        *rmin = 0.0; /* the pot vapour alone is at least xD */
        return STAGECAL_OK;
    }
    if (!(lv < 1.0))
        return error_set(err, STAGECAL_EINVAL,
                         "min_reflux: the equilibrium curve meets the diagonal, no finite "
                         "reflux ratio");
    *rmin = lv / (1.0 - lv);
    return STAGECAL_OK;
}
