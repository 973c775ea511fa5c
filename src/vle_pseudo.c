/*
 * vle_pseudo.c — the equal-latent-heat (pseudo-mole) transformation of an equilibrium
 * model. One mole of the light component counts as a = λ_light/λ_heavy pseudo-moles, the
 * heavy one as one; the pseudo-mole fraction is x' = a·x/(a·x + 1 − x), so the odds are
 * scaled: x'/(1 − x') = a·x/(1 − x). With constant per-component latent heats (no sensible
 * heat effects, no heat of mixing) the pseudo-molar flows are constant from stage to stage,
 * so McCabe–Thiele in pseudo-moles is exact under those assumptions (Wankat, P. C. (2012),
 * Separation Process Engineering, 3rd ed., Prentice Hall, ch. 4, from memory). The
 * transformed model answers y'*(x') = T(y*(T⁻¹(x'))); for constant α the odds scale on both
 * sides and the transformed model is the same constant α.
 */
#include "vle_internal.h"

#include <math.h>
#include <stdlib.h>

#include "internal.h"

/* x → x' and back; derivative dx'/dx. */
static double to_pseudo(double a, double x)
{
    return a * x / (a * x + 1.0 - x);
}

static double from_pseudo(double a, double xp)
{
    return xp / (xp + a * (1.0 - xp));
}

static double dpseudo(double a, double x)
{
    double d = a * x + 1.0 - x;
    return a / (d * d);
}

stagecal_vle *stagecal_vle_alloc_pseudo(const stagecal_vle *base, double ratio, stagecal_error *err)
{
    if (!base || !(ratio > 0) || !isfinite(ratio)) {
        error_set(err, STAGECAL_EINVAL, "pseudo-mole model: latent-heat ratio %g is not positive",
                  ratio);
        return NULL;
    }
    if (base->kind == STAGECAL_VLE_PSEUDO) {
        error_set(err, STAGECAL_EINVAL, "pseudo-mole model: the base is already transformed");
        return NULL;
    }
    stagecal_vle *v = vle_new(STAGECAL_VLE_PSEUDO, err);
    if (!v)
        return NULL;
    v->base = base;
    v->pseudo_a = ratio;
    v->has_t = base->has_t;
    v->t_lo = base->t_lo;
    v->t_hi = base->t_hi;
    v->antoine_flags = base->antoine_flags;
    v->naz = base->naz;
    for (size_t i = 0; i < base->naz; i++)
        v->az[i] = to_pseudo(ratio, base->az[i]);
    return v;
}

double vle_pseudo_x_max(const stagecal_vle *v)
{
    return to_pseudo(v->pseudo_a, stagecal_vle_x_max(v->base));
}

int vle_pseudo_ystar(const stagecal_vle *v, double xp, double *yp)
{
    double y;
    int rc = stagecal_vle_ystar(v->base, from_pseudo(v->pseudo_a, xp), &y);
    if (rc == STAGECAL_OK)
        *yp = to_pseudo(v->pseudo_a, y);
    return rc;
}

int vle_pseudo_xstar(const stagecal_vle *v, double yp, double *xp)
{
    double x;
    int rc = stagecal_vle_xstar(v->base, from_pseudo(v->pseudo_a, yp), &x);
    if (rc == STAGECAL_OK)
        *xp = to_pseudo(v->pseudo_a, x);
    return rc;
}

int vle_pseudo_dydx(const stagecal_vle *v, double xp, double *dydx)
{
    double a = v->pseudo_a, x = from_pseudo(a, xp), y, d;
    int rc = stagecal_vle_ystar(v->base, x, &y);
    if (rc == STAGECAL_OK)
        rc = stagecal_vle_dydx(v->base, x, &d);
    if (rc == STAGECAL_OK)
        *dydx = dpseudo(a, y) * d / dpseudo(a, x);
    return rc;
}

int vle_pseudo_tbubble(const stagecal_vle *v, double xp, double *t_k)
{
    return stagecal_vle_tbubble(v->base, from_pseudo(v->pseudo_a, xp), t_k);
}

double stagecal_vle_to_pseudo(double ratio, double x)
{
    return to_pseudo(ratio, x);
}

double stagecal_vle_from_pseudo(double ratio, double xp)
{
    return from_pseudo(ratio, xp);
}
