/*
 * vle.c — binary vapour–liquid equilibrium models (see stagecal/vle.h): the object,
 * constant α and K, queries and definitions; the tables, activity models and
 * azeotropes are in vle_table.c, vle_activity.c and vle_azeotrope.c.
 *
 * Constant α: y* = αx/(1+(α−1)x), x* = y/(α−(α−1)y) (closed forms).
 * Constant K: y* = Kx on [0, 1/K], x* = y/K.
 * TABLE: x–y data (optionally T) through GSL's Steffen interpolation
 *   (gsl_interp_steffen, monotone, C¹). Steffen's interpolant is a cubic Hermite
 *   spline; its node slopes are taken from GSL once at alloc and the spline is then
 *   evaluated and inverted by the Hermite kernel below (test_vle.c checks it against
 *   gsl_interp_eval).
 * IDEAL and activity models (Wilson, NRTL, van Laar, two-parameter Margules):
 *   γ–φ with an ideal vapour (modified Raoult): P = x γ1 P1(T) + (1−x) γ2 P2(T),
 *   y = x γ1 P1 / P, Antoine in the NIST WebBook form log10(P/bar) = A − B/(T + C).
 *   Bubble T by GSL Brent on ln(Σ x_i γ_i P_i) − ln P. Workload: the stages module
 *   calls y*(x) and x*(y) 10–30 times per inversion and must run ≥ 2·10⁵ inversions/s,
 *   so these are answered from a dense cubic Hermite table built at alloc with exact
 *   slopes (complex-step derivatives, see model_eval), not by solving each time.
 *   Hot-path Newton on a cubic is written here because GSL's root solvers need a
 *   heap-allocated, mutable workspace per call (the model object is read-only and
 *   shared between threads).
 * Azeotropes: sign changes of y* − x at interior nodes, refined with GSL Brent on the
 *   exact model (tables: on the interpolant). A tangent azeotrope (no sign change) is
 *   not reported.
 * Units: T in K, P in Pa; x, y mole fractions of the light component.
 */
#include "stagecal/vle.h"

#include <assert.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

static const char *const kind_names[] = {
    [STAGECAL_VLE_ALPHA] = "alpha",     [STAGECAL_VLE_KVALUE] = "kvalue",
    [STAGECAL_VLE_TABLE] = "table",     [STAGECAL_VLE_IDEAL] = "ideal",
    [STAGECAL_VLE_WILSON] = "wilson",   [STAGECAL_VLE_NRTL] = "nrtl",
    [STAGECAL_VLE_VANLAAR] = "vanlaar", [STAGECAL_VLE_MARGULES] = "margules",
    [STAGECAL_VLE_PSEUDO] = "pseudo",
};

const char *stagecal_vle_kind_name(stagecal_vle_kind kind)
{
    if ((unsigned)kind >= sizeof kind_names / sizeof kind_names[0])
        return "unknown";
    return kind_names[kind];
}

stagecal_vle_params stagecal_vle_default_params(void)
{
    stagecal_vle_params p = {.grid_n = 2049, .exact = 0, .t_epsrel = 1e-14, .max_iter = 100};
    return p;
}

/* Number of activity-model parameters of a kind (vle.h); 0 for the others. */
size_t vle_nparam_of(stagecal_vle_kind kind)
{
    switch (kind) {
    case STAGECAL_VLE_WILSON:
        return 4;
    case STAGECAL_VLE_NRTL:
        return 5;
    case STAGECAL_VLE_VANLAAR:
    case STAGECAL_VLE_MARGULES:
        return 2;
    default:
        return 0;
    }
}

/* ---- allocation ---------------------------------------------------------------------- */

stagecal_vle *vle_new(stagecal_vle_kind kind, stagecal_error *err)
{
    stagecal_vle *v = calloc(1, sizeof *v);
    if (!v) {
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    v->kind = kind;
    v->vp = stagecal_vle_default_params();
    return v;
}

int vle_alloc_nodes(stagecal_vle *v, size_t n, int with_t)
{
    v->n = n;
    v->xs = calloc(n, sizeof *v->xs);
    v->ys = calloc(n, sizeof *v->ys);
    v->ms = calloc(n, sizeof *v->ms);
    if (with_t) {
        v->ts = calloc(n, sizeof *v->ts);
        v->mts = calloc(n, sizeof *v->mts);
    }
    return v->xs && v->ys && v->ms && (!with_t || (v->ts && v->mts));
}

void stagecal_vle_free(stagecal_vle *vle)
{
    if (!vle)
        return;
    FREE_EACH(vle->xs, vle->ys, vle->ms, vle->ts, vle->mts, vle->bx, vle->by, vle->seg, vle);
}

/* Constant α or K: value > 1 and finite, else EINVAL naming `what`. */
static stagecal_vle *alloc_constant(stagecal_vle_kind kind, double value, const char *what,
                                    stagecal_error *err)
{
    if (!(value > 1.0) || !isfinite(value)) {
        error_set(err, STAGECAL_EINVAL, "%s %g is outside (1, inf)", what, value);
        return NULL;
    }
    stagecal_vle *v = vle_new(kind, err);
    if (v && kind == STAGECAL_VLE_ALPHA)
        v->alpha = value;
    else if (v)
        v->k = value;
    return v;
}

stagecal_vle *stagecal_vle_alloc_alpha(double alpha, stagecal_error *err)
{
    return alloc_constant(STAGECAL_VLE_ALPHA, alpha, "relative volatility", err);
}

stagecal_vle *stagecal_vle_alloc_kvalue(double k, stagecal_error *err)
{
    return alloc_constant(STAGECAL_VLE_KVALUE, k, "K value", err);
}

/* ---- definition ---------------------------------------------------------------------- */

void stagecal_vle_get_definition(const stagecal_vle *vle, stagecal_vle_definition *def)
{
    if (vle->kind == STAGECAL_VLE_PSEUDO) {
        stagecal_vle_get_definition(vle->base, def); /* a pseudo model is not stored */
        return;
    }
    memset(def, 0, sizeof *def);
    def->kind = vle->kind;
    def->vp = vle->vp;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA:
        def->alpha = vle->alpha;
        return;
    case STAGECAL_VLE_KVALUE:
        def->k = vle->k;
        return;
    case STAGECAL_VLE_TABLE:
        /* the stored nodes already hold the added end points, so a rebuild adds none
         * and GSL's Steffen slopes come out the same */
        def->n = vle->n;
        def->x = vle->xs;
        def->y = vle->ys;
        def->t_k = vle->has_t ? vle->ts : NULL;
        return;
    default:
        def->ant[0] = vle->ant[0];
        def->ant[1] = vle->ant[1];
        def->nparam = vle_nparam_of(vle->kind);
        memcpy(def->params, vle->par, sizeof def->params);
        def->p_pa = vle->p_pa;
        return;
    }
}

stagecal_vle *stagecal_vle_alloc_definition(const stagecal_vle_definition *def, stagecal_error *err)
{
    if (!def) {
        error_set(err, STAGECAL_EINVAL, "vle definition: expected a definition, got NULL");
        return NULL;
    }
    switch (def->kind) {
    case STAGECAL_VLE_ALPHA:
        return stagecal_vle_alloc_alpha(def->alpha, err);
    case STAGECAL_VLE_KVALUE:
        return stagecal_vle_alloc_kvalue(def->k, err);
    case STAGECAL_VLE_TABLE:
        return stagecal_vle_alloc_table(def->x, def->y, def->t_k, def->n, err);
    default:
        if (!vle_is_activity(def->kind)) {
            error_set(err, STAGECAL_EINVAL, "vle definition: unknown model kind %d",
                      (int)def->kind);
            return NULL;
        }
        return stagecal_vle_alloc_activity(def->kind, def->ant, def->params, def->nparam, def->p_pa,
                                           &def->vp, err);
    }
}

/* ---- queries ------------------------------------------------------------------------- */

stagecal_vle_kind stagecal_vle_get_kind(const stagecal_vle *vle)
{
    return vle->kind;
}

int stagecal_vle_has_temperature(const stagecal_vle *vle)
{
    return vle->has_t;
}

double stagecal_vle_x_max(const stagecal_vle *vle)
{
    if (vle->kind == STAGECAL_VLE_PSEUDO)
        return vle_pseudo_x_max(vle);
    return vle->kind == STAGECAL_VLE_KVALUE ? 1.0 / vle->k : 1.0;
}

unsigned stagecal_vle_antoine_flags(const stagecal_vle *vle)
{
    return vle->antoine_flags;
}

double stagecal_vle_pressure(const stagecal_vle *vle)
{
    if (vle->kind == STAGECAL_VLE_PSEUDO)
        return stagecal_vle_pressure(vle->base);
    return vle_is_activity(vle->kind) ? vle->p_pa : 0.0;
}

int stagecal_vle_t_range(const stagecal_vle *vle, double *t_lo_k, double *t_hi_k)
{
    if (!vle->has_t)
        return STAGECAL_EINVAL;
    *t_lo_k = vle->t_lo;
    *t_hi_k = vle->t_hi;
    return STAGECAL_OK;
}

/* ---- y*, x* and the slope: one function per kind ---------------------------------------- */

typedef enum { VLE_YSTAR, VLE_XSTAR, VLE_DYDX } vle_query;

/* Constant α: the closed forms. */
static int alpha_query(const stagecal_vle *v, vle_query q, double in, double *out)
{
    double a = v->alpha, d = 1.0 + (a - 1.0) * in;
    if (q == VLE_YSTAR)
        *out = a * in / d;
    else if (q == VLE_XSTAR)
        *out = in / (in + a * (1.0 - in)); /* no cancellation near y = 1 */
    else
        *out = a / (d * d);
    return STAGECAL_OK;
}

/* Constant K: y* = Kx. */
static int k_query(const stagecal_vle *v, vle_query q, double in, double *out)
{
    *out = q == VLE_YSTAR ? v->k * in : q == VLE_XSTAR ? in / v->k : v->k;
    return STAGECAL_OK;
}

/* TABLE (and the activity models when the exact answer is not asked for): the Hermite
 * table and its inverse. */
static int table_query(const stagecal_vle *v, vle_query q, double in, double *out)
{
    if (q == VLE_XSTAR)
        return vle_herm_invert(v, in, out);
    if (q == VLE_DYDX) {
        *out = vle_herm_deriv(v, in);
        return STAGECAL_OK;
    }
    *out = vle_table_ystar(v, in);
    return STAGECAL_OK;
}

/* IDEAL and the activity models: the table, or the bubble solve when vp.exact. */
static int activity_query(const stagecal_vle *v, vle_query q, double in, double *out)
{
    if (!v->vp.exact)
        return table_query(v, q, in, out);
    if (q == VLE_XSTAR)
        return vle_xstar_exact(v, in, out);
    double y, t, dtdx;
    int rc = stagecal_vle_ystar_exact(v, in, &y, &t);
    if (rc != STAGECAL_OK || q == VLE_YSTAR) {
        *out = y;
        return rc;
    }
    vle_exact_slopes(v, in, t, out, &dtdx);
    return isfinite(*out) ? STAGECAL_OK : STAGECAL_ENOCONV;
}

/* PSEUDO: the transformed model (vle_pseudo.c). */
static int pseudo_query(const stagecal_vle *v, vle_query q, double in, double *out)
{
    if (q == VLE_YSTAR)
        return vle_pseudo_ystar(v, in, out);
    return q == VLE_XSTAR ? vle_pseudo_xstar(v, in, out) : vle_pseudo_dydx(v, in, out);
}

typedef int (*vle_query_fn)(const stagecal_vle *v, vle_query q, double in, double *out);

static const vle_query_fn query_of[] = {
    [STAGECAL_VLE_ALPHA] = alpha_query,      [STAGECAL_VLE_KVALUE] = k_query,
    [STAGECAL_VLE_TABLE] = table_query,      [STAGECAL_VLE_IDEAL] = activity_query,
    [STAGECAL_VLE_WILSON] = activity_query,  [STAGECAL_VLE_NRTL] = activity_query,
    [STAGECAL_VLE_VANLAAR] = activity_query, [STAGECAL_VLE_MARGULES] = activity_query,
    [STAGECAL_VLE_PSEUDO] = pseudo_query,
};

/* in checked against [0, x_max] (x) or [0, 1] (y), then the kind's function */
static int query(const stagecal_vle *vle, vle_query q, double in, double *out)
{
    double top = q == VLE_XSTAR ? 1.0 : stagecal_vle_x_max(vle);
    if (!(in >= 0.0 && in <= top))
        return STAGECAL_EINVAL;
    return query_of[vle->kind](vle, q, in, out);
}

int stagecal_vle_ystar(const stagecal_vle *vle, double x, double *y)
{
    return query(vle, VLE_YSTAR, x, y);
}

int stagecal_vle_xstar(const stagecal_vle *vle, double y, double *x)
{
    return query(vle, VLE_XSTAR, y, x);
}

int stagecal_vle_dydx(const stagecal_vle *vle, double x, double *dydx)
{
    return query(vle, VLE_DYDX, x, dydx);
}

int stagecal_vle_tbubble(const stagecal_vle *vle, double x, double *t_k)
{
    if (!vle->has_t || !(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    if (vle->kind == STAGECAL_VLE_PSEUDO)
        return vle_pseudo_tbubble(vle, x, t_k);
    if (vle->kind == STAGECAL_VLE_TABLE) {
        *t_k = vle_herm_eval(vle, vle->ts, vle->mts, x);
        return STAGECAL_OK;
    }
    double y;
    return stagecal_vle_ystar_exact(vle, x, &y, t_k);
}

double stagecal_vle_mass_to_mole(double w_light, double m_light, double m_heavy)
{
    assert(w_light >= 0.0 && w_light <= 1.0 && m_light > 0.0 && m_heavy > 0.0);
    double a = w_light / m_light, b = (1.0 - w_light) / m_heavy;
    return a / (a + b);
}

double stagecal_vle_mole_to_mass(double x_light, double m_light, double m_heavy)
{
    assert(x_light >= 0.0 && x_light <= 1.0 && m_light > 0.0 && m_heavy > 0.0);
    double a = x_light * m_light, b = (1.0 - x_light) * m_heavy;
    return a / (a + b);
}
