/*
 * stages.c — McCabe–Thiele inversion for a batch rectifier
 * (docs/methods.md, "Stage counting"), plus the constant-α closed forms (Fenske, Smoker) and the
 * minimum reflux ratio for a general equilibrium model.
 *
 * Files: stages.c (this: the inversion, its sensitivities, rows in batches), stages_step.c
 * (the stepper, forward stepping), stages_smoker.c (Smoker, Fenske), stages_avx2.c (the closed
 * form in vector lanes, four crossings at once), stages_rmin.c (the minimum reflux ratio),
 * stages_tab.c (a batch's table rows in blocks and phases), stages_start_avx2.c and
 * stages_tab_avx2.c (their start and stepping in vector lanes).
 *
 * Method. With L/V = m and b = (1 − m)·xD the operating line is y = m·x + b. From the
 * top, x_0 = xD and for n = 1, 2, …: y_n = m·x_(n−1) + b and x_n solves
 * (1 − E)·(m·x + b) + E·y*(x) = y_n (stages_step.c). The pot
 * (ideal) fixes the target x_target = (y*(xB) − b)/m. Whole steps count while
 * x_n > x_target; the crossing step counts Smoker's fraction from x_(n−1) to x_target
 * with α_loc = y_n(1 − x_n)/(x_n(1 − y_n)) (Smoker 1938, "Analytic determination of plates in
 * fractionating columns", Trans. AIChE 34, citation from memory; log-odds Fenske form at total
 * reflux, where Smoker's k = 0 and β = 1 reduce to it). For constant α and E = 1 the count equals
 * Smoker's equation (Fenske at R = ∞) exactly, because Smoker's count is additive and the pot step
 * is whole — so for constant α at E = 1 the inversion evaluates Smoker's closed form directly
 * (count below params.pinch_scan_after, x_target not within CLOSED_MARGIN of the pinch root;
 * stepping otherwise). Forward stepping inverts that definition (closed-form Smoker inverse for the
 * fraction), so the two round-trip.
 *
 * Pinch detection (xB unreachable at this L/V): the stepping never crosses a point
 * where the operating line meets the equilibrium curve (the pseudo-equilibrium curve
 * meets it at the same points), so a pinch shows as (1) the line at or above the curve
 * at x_target (checked before stepping), (2) a step that makes no progress, (3) the
 * line at or above the curve somewhere on a grid between x_target and the current
 * liquid, checked once after params.pinch_scan_after steps (tangent pinches), or
 * (4) more than params.max_stages whole steps.
 *
 * Sensitivities ∂stages/∂xD, ∂xB, ∂R (on request): tangent-linear (forward-mode)
 * derivatives carried along the stepping (stages_internal.h): each step's liquid moves
 * with its vapour through the slope of the (pseudo-)equilibrium curve, the crossing
 * step's fraction through Smoker's count with α_loc; for constant α at E = 1 they are
 * the exact derivatives of Smoker's closed form. One inversion instead of the seven that
 * central finite differences need. The count is continuous but has a kink at whole-stage
 * boundaries where α_loc of the crossing step jumps (E_MV < 1, a curved y*): there the
 * tangent is the derivative of the branch the point lies on. want_sensitivities = 2
 * gives the former finite differences (central, h = fd_rel_step·min(x, 1 − x) for
 * compositions and fd_rel_step·R for R, one-sided where a neighbour leaves the domain
 * or is not ok), which also serve where a tangent comes out non-finite.
 *
 * Assumptions: binary, constant molar overflow, total condenser, y*(x) increasing on
 * the range stepped (true below the first azeotrope). Everything is dimensionless
 * (mole fractions of the light component, ratios).
 */
#include "stagecal/stages.h"

#include <float.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "stages_internal.h"
#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

/* CLOSED_MARGIN (stages_internal.h): how far above the pinch root x_target must lie for the
 * closed form. */

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
    p.closed_form = 1;
    return p;
}

/* ---- inversion ------------------------------------------------------------------------ */

static void set_status(stagecal_stages_result *res, int quiet, int status, const char *fmt, ...)
    SC_PRINTF(4, 5);

/* The status and its reason; quiet: no reason (an empty one), for callers that never read it
 * (printf's exact conversion of the numbers in it costs more than a whole closed-form count). */
static void set_status(stagecal_stages_result *res, int quiet, int status, const char *fmt, ...)
{
    va_list ap;
    res->status = status;
    res->stages = 0.0;
    res->column_stages = 0.0;
    if (quiet) {
        res->reason[0] = '\0';
        return;
    }
    va_start(ap, fmt);
    vsnprintf(res->reason, sizeof res->reason, fmt, ap);
    va_end(ap);
}

/* The checks that need no stepping: fills res (status invalid or azeotrope, reason) and
 * returns 1 when the inputs cannot be inverted, 0 otherwise. */
static int reject_inputs(const stagecal_vle *vle, double xd, double xb, double reflux, double e,
                         int quiet, stagecal_stages_result *res)
{
    double x_max = stagecal_vle_x_max(vle);
    if (isnan(xd) || isnan(xb) || isnan(reflux) || isnan(e)) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID,
                   "an input is NaN (xD %g, xB %g, R %g, E_MV %g)", xd, xb, reflux, e);
        return 1;
    }
    if (!(xd > 0.0 && xd < 1.0) || xd > x_max) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID, "xD = %.10g outside (0, %.10g)", xd,
                   x_max < 1.0 ? x_max : 1.0);
        return 1;
    }
    if (!(xb > 0.0 && xb < 1.0) || xb > x_max) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID, "xB = %.10g outside (0, %.10g)", xb,
                   x_max < 1.0 ? x_max : 1.0);
        return 1;
    }
    if (!(xb < xd)) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID, "xB = %.10g is not below xD = %.10g", xb,
                   xd);
        return 1;
    }
    if (!(e > 0.0 && e <= 1.0)) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID, "Murphree efficiency %g outside (0, 1]", e);
        return 1;
    }
    if (reflux < 0.0) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID, "reflux ratio %g is negative", reflux);
        return 1;
    }
    if (reflux == 0.0) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID,
                   "reflux ratio 0: the stage count is not identifiable without reflux");
        return 1;
    }
    double az = stages_azeotrope_below(vle, xd);
    if (az >= 0.0) {
        if (az >= xb)
            set_status(res, quiet, STAGECAL_STAGES_AZEOTROPE,
                       "azeotrope at x = %.6f lies between xB = %.6g and xD = %.6g", az, xb, xd);
        else
            set_status(res, quiet, STAGECAL_STAGES_AZEOTROPE,
                       "azeotrope at x = %.6f lies below xB = %.6g: stepping beyond it is not "
                       "supported",
                       az, xb);
        return 1;
    }

    return 0;
}

/* Tangent of the liquid x leaving a stage whose vapour is ty (its tangent carried),
 * from (1 − E)·(m·x + b) + E·y*(x) = y: dx = (dy − (1 − E)(x·dm + db)) / ((1 − E)·m +
 * E·y*'(x)). The value is x itself. */
static int step_tangent(stepper *st, tl3 m, tl3 b, tl3 ty, double x, tl3 *tx)
{
    double s;
    int rc = stepper_dydx(st, x, &s);
    if (rc != STAGECAL_OK)
        return error_set(st->err, rc == STAGECAL_EINVAL ? STAGECAL_EINTERNAL : rc,
                         "equilibrium slope at %.17g failed: %s", x, stagecal_strerror(rc));
    double e = st->e, den = (1.0 - e) * m.v + e * s;
    tx->v = x;
    for (int i = 0; i < TL_N; i++)
        tx->d[i] = (ty.d[i] - (1.0 - e) * (x * m.d[i] + b.d[i])) / den;
    return STAGECAL_OK;
}

/* Constant α at E_MV = 1: Smoker's count from xD down to x_target, which is what stepping
 * with the fractional-stage rule gives (docs/methods.md), with exact derivatives. Used
 * while the count stays below the pinch scan (so every pinch stepping would report is
 * still found by stepping) and x_target is not within CLOSED_MARGIN of the pinch root.
 * Returns 1 and sets *count when it applies. */
static int closed_form(const stagecal_vle *vle, const stagecal_stages_params *par, tl3 m, tl3 b,
                       tl3 txd, tl3 txt, tl3 *count)
{
    smoker_consts sc;
    double scan = (double)par->pinch_scan_after, most = (double)par->max_stages;
    double cap = scan < most ? scan : most; /* (fmin's double, without the call) */
    if (stagecal_vle_get_kind(vle) != STAGECAL_VLE_ALPHA ||
        smoker_setup(tl_const(vle->alpha), m, b, &sc) != 0 || !(txt.v - sc.k.v > CLOSED_MARGIN))
        return 0;
    tl3 c = smoker_count_top(&sc, m, txd, txt);
    if (!(isfinite(c.v) && c.v >= 0.0 && c.v < cap))
        return 0;
    *count = c;
    return 1;
}

/* The line of an inversion and what it needs before stepping (invert_core's start, shared
 * with the interleaved table rows of stagecal_stages_invert_many). */
typedef struct {
    stepper st;
    tl3 m, b, txd, txt; /* the line m = L/V, b, xD and x_target with their tangents */
} invert_start;

/* invert_core up to the stepping: the checks, the line and x_target with their tangents (with
 * tl non-NULL), the pinch checks at x_target. Returns 1 when stepping follows (*s filled, its
 * stepper initialised); 0 when res is final or *rc an error, the caller then finishing as
 * invert_core does at done (s->st freeable either way). */
static inline __attribute__((always_inline)) int
invert_begin(const stagecal_vle *vle, double xd, double xb, double reflux, double e,
             const stagecal_stages_params *par, int quiet, stagecal_stages_result *res, tl3 *tl,
             stagecal_error *err, invert_start *s, int *rc)
{
    memset(res, 0, sizeof *res);
    res->status = STAGECAL_STAGES_OK;
    s->st.s = NULL;
    *rc = STAGECAL_OK;
    if (tl)
        *tl = tl_const(0.0);
    if (reject_inputs(vle, xd, xb, reflux, e, quiet, res))
        return 0;

    stepper *st = &s->st;
    if ((*rc = stepper_init(st, vle, par, xd, reflux, e, err)))
        return 0;
    st->want_slope = tl != NULL;
    res->lv = st->m;
    /* the line and its tangents: m = R/(R + 1), b = xD/(R + 1), constant at R = ∞ */
    tl3 m = tl_const(st->m), b = tl_const(st->b), txd = tl_const(xd);
    if (tl) {
        txd.d[TL_XD] = 1.0;
        if (!isinf(reflux)) {
            double q = 1.0 / (reflux + 1.0);
            m.d[TL_R] = q * q;
            b.d[TL_XD] = q;
            b.d[TL_R] = -xd * q * q;
        }
    }

    double ypot, x_target, sxb;
    int with_sxb = tl && stepper_ystar_slope(st, xb, &ypot, &sxb);
    if (!with_sxb && (*rc = stepper_ystar(st, xb, &ypot)))
        return 0;
    tl3 typot = tl_const(ypot);
    if (with_sxb)
        typot.d[TL_XB] = sxb;
    else if (tl && (*rc = stagecal_vle_dydx(vle, xb, &typot.d[TL_XB]))) {
        *rc = error_set(err, STAGECAL_EINTERNAL, "equilibrium slope at %.17g failed", xb);
        return 0;
    }
    tl3 txt = tl_div(tl_sub(typot, b), m); /* x_target = (y*(xB) − b)/m */
    x_target = txt.v;
    res->x_target = isfinite(x_target) ? x_target : 0.0;
    if (x_target > xd + par->top_tol) {
        set_status(res, quiet, STAGECAL_STAGES_INVALID,
                   "the pot alone out-performs the data: its vapour %.10g needs x_target = %.10g "
                   "above xD = %.10g",
                   ypot, x_target, xd);
        return 0;
    }
    if (x_target >= xd) {
        res->stages = 1.0;
        res->column_stages = 0.0;
        return 0;
    }
    /* The line at or above the curve at x_target: it meets the curve in [x_target, xD). */
    double yt;
    if (!(x_target > 0.0)) {
        set_status(res, quiet, STAGECAL_STAGES_PINCH,
                   "pinch: the operating line at L/V = %.10g reaches the pot vapour %.10g only "
                   "at x = %.6g",
                   st->m, ypot, x_target);
        return 0;
    }
    if ((*rc = stepper_ystar(st, x_target, &yt)))
        return 0;
    if (yt <= op_line(st, x_target)) {
        set_status(res, quiet, STAGECAL_STAGES_PINCH,
                   "pinch: the operating line at L/V = %.10g meets the equilibrium curve above "
                   "x_target = %.10g",
                   st->m, x_target);
        return 0;
    }
    s->m = m;
    s->b = b;
    s->txd = txd;
    s->txt = txt;
    return 1;
}

/* The inversion. With tl non-NULL the derivatives of stages with respect to (xD, xB, R)
 * are carried along and written to tl->d (tl->v = stages); otherwise none are computed. */
static int invert_core(const stagecal_vle *vle, double xd, double xb, double reflux, double e,
                       const stagecal_stages_params *par, int quiet, stagecal_stages_result *res,
                       tl3 *tl, stagecal_error *err)
{
    invert_start s0;
    stepper *st = &s0.st;
    int rc;
    if (!invert_begin(vle, xd, xb, reflux, e, par, quiet, res, tl, err, &s0, &rc))
        goto done;
    tl3 m = s0.m, b = s0.b, txd = s0.txd, txt = s0.txt;
    double x_target = txt.v;

    tl3 count;
    if (e == 1.0 && par->closed_form && closed_form(vle, par, m, b, txd, txt, &count)) {
        res->column_stages = count.v;
        res->stages = res->column_stages + 1.0;
        if (tl)
            *tl = count;
        goto done;
    }

    double x_prev = xd, xn = xd, yn = xd;
    tl3 tprev = txd, txn = txd, tyn = txd;
    int scanned = 0;
    size_t n = 0;
    for (;;) {
        int pinch = 0;
        n++;
        if ((rc = stepper_step(st, x_prev, &xn, &yn, &pinch)))
            goto done;
        if (pinch) {
            set_status(res, quiet, STAGECAL_STAGES_PINCH,
                       "pinch: no progress at step %zu (x = %.10g) above x_target = %.10g", n,
                       x_prev, x_target);
            goto done;
        }
        tyn = tl_const(yn);
        txn = tl_const(xn);
        if (tl) {
            tyn = tl_add(tl_mul(m, tprev), b); /* y_n = m·x_(n−1) + b */
            if ((rc = step_tangent(st, m, b, tyn, xn, &txn)))
                goto done;
        }
        if (xn <= x_target)
            break;
        if (n >= par->max_stages) {
            set_status(res, quiet, STAGECAL_STAGES_PINCH,
                       "pinch: more than %zu whole steps (x = %.10g, x_target = %.10g)",
                       par->max_stages, xn, x_target);
            goto done;
        }
        if (!scanned && n >= par->pinch_scan_after) {
            int found;
            scanned = 1;
            if ((rc = stepper_scan_pinch(st, x_target, xn, par->pinch_scan_points, &found)))
                goto done;
            if (found) {
                set_status(res, quiet, STAGECAL_STAGES_PINCH,
                           "pinch: the operating line at L/V = %.10g meets the equilibrium "
                           "curve between x_target = %.10g and x = %.10g",
                           st->m, x_target, xn);
                goto done;
            }
        }
        x_prev = xn;
        tprev = txn;
    }
    tl3 f = stepper_crossing(m, b, tprev, txn, tyn, txt);
    res->column_stages = (double)(n - 1) + f.v;
    res->stages = res->column_stages + 1.0;
    if (tl)
        *tl = f;
done:
    stepper_free(st);
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
    if (invert_core(vle, xd, xb, reflux, e, par, 1, &r, NULL, NULL) != STAGECAL_OK ||
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

/* Sensitivities by finite differences of the inversion itself (want_sensitivities = 2,
 * and where the tangents are not finite). Steps: h = fd_rel_step ·
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

/* The fast path without AVX2: the same expressions as alpha_closed_eval, written with
 * closed_form (alpha_closed_eval compiled with the scalar tl3 in one function ran 1.3× slower
 * than this, which GCC vectorises better); alpha_closed_fast has checked the inputs. */
static int alpha_closed_fast_scalar(const stagecal_vle *vle, double xd, double xb, double reflux,
                                    const stagecal_stages_params *par, alpha_closed_out *o)
{
    double a = vle->alpha, q = 1.0 / (reflux + 1.0);
    tl3 m = tl_const(reflux / (reflux + 1.0)), b = tl_const(xd / (reflux + 1.0));
    tl3 txd = tl_const(xd);
    txd.d[TL_XD] = 1.0;
    m.d[TL_R] = q * q;
    b.d[TL_XD] = q;
    b.d[TL_R] = -xd * q * q;
    double dp = 1.0 + (a - 1.0) * xb; /* y*(xB) and its slope as alpha_query has them */
    tl3 typot = tl_const(a * xb / dp);
    typot.d[TL_XB] = a / (dp * dp);
    tl3 txt = tl_div(tl_sub(typot, b), m);
    double xt = txt.v;
    if (!(xt > 0.0) || !(xt < xd) || !(a * xt / (1.0 + (a - 1.0) * xt) > m.v * xt + b.v))
        return 0;
    tl3 count;
    if (!closed_form(vle, par, m, b, txd, txt, &count))
        return 0;
    o->count = count.v;
    o->d[0] = count.d[TL_XD];
    o->d[1] = count.d[TL_XB];
    o->d[2] = count.d[TL_R];
    o->lv = m.v;
    o->x_target = xt;
    return 1;
}

/* res from the closed form's result o (an ok count; the derivatives when want == 1). */
static inline void closed_fill(const alpha_closed_out *o, int want, stagecal_stages_result *res)
{
    res->status = STAGECAL_STAGES_OK;
    res->column_stages = o->count;
    res->stages = res->column_stages + 1.0;
    res->lv = o->lv;
    res->x_target = o->x_target;
    res->dstages_dxd = want == 1 ? o->d[0] : 0.0;
    res->dstages_dxb = want == 1 ? o->d[1] : 0.0;
    res->dstages_dr = want == 1 ? o->d[2] : 0.0;
    res->reason[0] = '\0';
}

/* The common case of run-log mode on its own: constant α, E_MV = 1, finite R, no
 * azeotrope, the closed form applicable and ok. The same operations in the same order as
 * invert_core's path through reject_inputs, stepper_init, the line's tangents, x_target and
 * closed_form (alpha_closed_eval, stages_internal.h), without its generic machinery (status
 * texts, the stepper, the vle dispatch), so every number is the same double; on a core with
 * AVX2 the tangents as 4-lane vectors (stages_avx2.c), the same doubles again. Returns 1 when
 * res is filled; 0 for every other case, which invert_core then handles (it repeats the checks
 * and gives the reasons). */
static int alpha_closed_fast(const stagecal_vle *vle, double xd, double xb, double reflux,
                             const stagecal_stages_params *par, int want,
                             stagecal_stages_result *res)
{
    if (!(xd > 0.0 && xd < 1.0) || !(xb > 0.0 && xb < xd) || !(reflux > 0.0) || isinf(reflux) ||
        vle->naz != 0)
        return 0;
    double scan = (double)par->pinch_scan_after, most = (double)par->max_stages;
    double cap = scan < most ? scan : most; /* (fmin's double, without the call) */
    alpha_closed_out o;
    if (!(stages_have_avx2() ? stages_alpha_closed_avx2(vle->alpha, xd, xb, reflux, cap, &o)
                             : alpha_closed_fast_scalar(vle, xd, xb, reflux, par, &o)))
        return 0;
    if (want == 1 && !(isfinite(o.d[0]) && isfinite(o.d[1]) && isfinite(o.d[2])))
        return 0;
    closed_fill(&o, want, res);
    return 1;
}

/* stagecal_stages_invert; quiet: without the reason text (stages_invert_quiet). Not inlined
 * into the two: the closed form's fast path then stays inlined here, in its one caller. */
SC_NOINLINE static int stages_invert(const stagecal_vle *vle, double xd, double xb, double reflux,
                                     double murphree, const stagecal_stages_params *params,
                                     int quiet, stagecal_stages_result *res, stagecal_error *err)
{
    if (!vle || !res)
        return error_set(err, STAGECAL_EINVAL, "stages_invert: %s is NULL", vle ? "res" : "vle");
    stagecal_stages_params def;
    const stagecal_stages_params *par = params;
    if (!par) { /* the defaults are built only when asked for (hot path) */
        def = stagecal_stages_default_params();
        par = &def;
    }
    int want = par->want_sensitivities;
    if (want != 2 && murphree == 1.0 && par->closed_form &&
        stagecal_vle_get_kind(vle) == STAGECAL_VLE_ALPHA &&
        alpha_closed_fast(vle, xd, xb, reflux, par, want, res))
        return STAGECAL_OK;
    tl3 tl;
    int rc =
        invert_core(vle, xd, xb, reflux, murphree, par, quiet, res, want == 1 ? &tl : NULL, err);
    if (rc != STAGECAL_OK || res->status != STAGECAL_STAGES_OK || !want)
        return rc;
    if (want == 1 && isfinite(tl.d[TL_XD]) && isfinite(tl.d[TL_XB]) && isfinite(tl.d[TL_R])) {
        res->dstages_dxd = tl.d[TL_XD];
        res->dstages_dxb = tl.d[TL_XB];
        res->dstages_dr = tl.d[TL_R];
        return rc;
    }
    sensitivities(vle, xd, xb, reflux, murphree, par, res);
    return rc;
}

int stagecal_stages_invert(const stagecal_vle *vle, double xd, double xb, double reflux,
                           double murphree, const stagecal_stages_params *params,
                           stagecal_stages_result *res, stagecal_error *err)
{
    return stages_invert(vle, xd, xb, reflux, murphree, params, 0, res, err);
}

int stages_invert_quiet(const stagecal_vle *vle, double xd, double xb, double reflux,
                        double murphree, const stagecal_stages_params *params,
                        stagecal_stages_result *res, stagecal_error *err)
{
    return stages_invert(vle, xd, xb, reflux, murphree, params, 1, res, err);
}

/* Whether the four-row fast path can take rows of this model at E_MV = murphree with par
 * (the per-row path's conditions that do not depend on the row); its cap when so. */
static int many_applies(const stagecal_vle *vle, double murphree, const stagecal_stages_params *par,
                        double *cap)
{
    if (!(par->want_sensitivities != 2 && murphree == 1.0 && par->closed_form &&
          stagecal_vle_get_kind(vle) == STAGECAL_VLE_ALPHA && vle->naz == 0 && stages_have_avx2()))
        return 0;
    double scan = (double)par->pinch_scan_after, most = (double)par->max_stages;
    *cap = scan < most ? scan : most; /* as alpha_closed_fast */
    return 1;
}

/* Fills res[j] for each row j of o whose bit is set in on, as alpha_closed_fast does. */
static void many_fill(unsigned on, const alpha_closed_out o[4], int want,
                      stagecal_stages_result *res)
{
    for (int j = 0; j < 4; j++) {
        if (!(on >> j & 1u))
            continue;
        closed_fill(&o[j], want, &res[j]);
    }
}

int stages_fast4_applies(const stagecal_vle *vle, double murphree,
                         const stagecal_stages_params *par, double *alpha, double *cap)
{
    if (!vle || !par || !many_applies(vle, murphree, par, cap))
        return 0;
    *alpha = vle->alpha;
    return 1;
}

unsigned stages_invert4_fast(const stagecal_vle *vle, const double xd[4], const double xb[4],
                             const double reflux[4], double murphree,
                             const stagecal_stages_params *par, stagecal_stages_result res[4])
{
    double cap;
    if (!vle || !par || !many_applies(vle, murphree, par, &cap))
        return 0;
    alpha_closed_out o[4];
    unsigned on =
        stages_alpha_closed4_avx2(vle->alpha, xd, xb, reflux, cap, par->want_sensitivities, o);
    many_fill(on, o, par->want_sensitivities, res);
    return on;
}

/* ---- table rows side by side (stages_tab.c) ------------------------------------------ */

/* Whether stages_invert_many steps the rows side by side: a Hermite table with its buckets, at
 * E_MV = 1, with tangents (stages_invert then takes invert_core's table path with tl). */
static int tab_applies(const stagecal_vle *vle, double murphree, const stagecal_stages_params *par)
{
    return par->want_sensitivities == 1 && murphree == 1.0 && vle_on_table(vle) && vle->bx &&
           stagecal_vle_get_kind(vle) != STAGECAL_VLE_ALPHA;
}

int stages_many_by_table(const stagecal_vle *vle, double murphree)
{
    stagecal_stages_params p = stagecal_stages_default_params();
    p.want_sensitivities = 1;
    return vle && tab_applies(vle, murphree, &p);
}

/* invert_begin at E = 1 with tangents, as invert_core calls it (stages_internal.h). */
int stages_table_begin(const stagecal_vle *vle, double xd, double xb, double reflux,
                       const stagecal_stages_params *par, int quiet, stagecal_stages_result *res,
                       tab_begin *o, int *rc)
{
    invert_start s;
    tl3 tl;
    int go = invert_begin(vle, xd, xb, reflux, 1.0, par, quiet, res, &tl, NULL, &s, rc);
    stepper_free(&s.st);
    if (!go)
        return 0;
    tl_put(o->m, s.m);
    tl_put(o->b, s.b);
    tl_put(o->txd, s.txd);
    tl_put(o->txt, s.txt);
    return 1;
}

/* n rows; rc (may be NULL) receives each row's return value. On a table at E_MV = 1 with
 * tangents, stages_tab_many (stages_tab.c: rows in blocks, in phases). The rows the closed form's
 * fast path takes go four at a time through the AVX2 lanes (stages_alpha_closed4_avx2: each lane
 * the per-row path's doubles) when the model, E_MV and the parameters allow it, checked once; every
 * other row, and the last n mod 4, through stages_invert. Returns the first row's error (err then
 * holds its message), else STAGECAL_OK. */
static int stages_invert_many(const stagecal_vle *vle, size_t n, const double *xd, const double *xb,
                              const double *reflux, double murphree,
                              const stagecal_stages_params *params, int quiet,
                              stagecal_stages_result *res, int *rc, stagecal_error *err)
{
    if (!vle || (n && (!xd || !xb || !reflux || !res)))
        return error_set(err, STAGECAL_EINVAL, "stages_invert_many: a required pointer is NULL");
    stagecal_stages_params def;
    const stagecal_stages_params *par = params;
    if (!par) {
        def = stagecal_stages_default_params();
        par = &def;
    }
    if (tab_applies(vle, murphree, par))
        return stages_tab_many(vle, n, xd, xb, reflux, par, quiet, res, rc, err);
    int want = par->want_sensitivities, first = STAGECAL_OK;
    stagecal_error e1; /* each row's own (invert_core copies its text into the reason) */
    double cap;
    size_t n4 = many_applies(vle, murphree, par, &cap) ? n - n % 4 : 0;
    for (size_t i = 0, nj; i < n; i += nj) {
        unsigned on = 0;
        nj = i < n4 ? 4 : 1; /* four rows at once, else one */
        if (i < n4) {
            alpha_closed_out o[4];
            on = stages_alpha_closed4_avx2(vle->alpha, xd + i, xb + i, reflux + i, cap, want, o);
            many_fill(on, o, want, res + i);
        }
        for (size_t j = i; j < i + nj; j++) {
            int k = STAGECAL_OK;
            if (!(on >> (j - i) & 1u)) {
                k = stages_invert(vle, xd[j], xb[j], reflux[j], murphree, par, quiet, &res[j],
                                  err ? &e1 : NULL);
                if (k && !first && (first = k) && err)
                    *err = e1;
            }
            if (rc)
                rc[j] = k;
        }
    }
    return first;
}

int stagecal_stages_invert_many(const stagecal_vle *vle, size_t n, const double *xd,
                                const double *xb, const double *reflux, double murphree,
                                const stagecal_stages_params *params, stagecal_stages_result *res,
                                stagecal_error *err)
{
    return stages_invert_many(vle, n, xd, xb, reflux, murphree, params, 0, res, NULL, err);
}

int stages_invert_many_quiet(const stagecal_vle *vle, size_t n, const double *xd, const double *xb,
                             const double *reflux, double murphree,
                             const stagecal_stages_params *params, stagecal_stages_result *res,
                             int *rc, stagecal_error *err)
{
    return stages_invert_many(vle, n, xd, xb, reflux, murphree, params, 1, res, rc, err);
}
