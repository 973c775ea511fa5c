/*
 * vle.c — binary vapour–liquid equilibrium models (see stagecal/vle.h).
 *
 * Constant α: y* = αx/(1+(α−1)x), x* = y/(α−(α−1)y) (closed forms).
 * Constant K: y* = Kx on [0, 1/K].
 * Other models: see below.
 */
#include "stagecal/vle.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

#define VLE_MAX_AZ 4

struct stagecal_vle {
    stagecal_vle_kind kind;
    double alpha; /* ALPHA: α > 1 */
    double k;     /* KVALUE: K > 1 */
    size_t naz;   /* number of azeotropes found at alloc */
    double az[VLE_MAX_AZ];
};

static const char *const kind_names[] = {
    [STAGECAL_VLE_ALPHA] = "alpha",     [STAGECAL_VLE_KVALUE] = "kvalue",
    [STAGECAL_VLE_TABLE] = "table",     [STAGECAL_VLE_IDEAL] = "ideal",
    [STAGECAL_VLE_WILSON] = "wilson",   [STAGECAL_VLE_NRTL] = "nrtl",
    [STAGECAL_VLE_VANLAAR] = "vanlaar", [STAGECAL_VLE_MARGULES] = "margules",
};

const char *stagecal_vle_kind_name(stagecal_vle_kind kind)
{
    if ((unsigned)kind >= sizeof kind_names / sizeof kind_names[0])
        return "unknown";
    return kind_names[kind];
}

stagecal_vle *stagecal_vle_alloc_alpha(double alpha, stagecal_error *err)
{
    if (!(alpha > 1.0) || !isfinite(alpha)) {
        error_set(err, STAGECAL_EINVAL, "relative volatility %g is outside (1, inf)", alpha);
        return NULL;
    }
    stagecal_vle *v = calloc(1, sizeof *v);
    if (!v) {
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    v->kind = STAGECAL_VLE_ALPHA;
    v->alpha = alpha;
    return v;
}

stagecal_vle *stagecal_vle_alloc_kvalue(double k, stagecal_error *err)
{
    if (!(k > 1.0) || !isfinite(k)) {
        error_set(err, STAGECAL_EINVAL, "K value %g is outside (1, inf)", k);
        return NULL;
    }
    stagecal_vle *v = calloc(1, sizeof *v);
    if (!v) {
        error_set(err, STAGECAL_ENOMEM, "out of memory");
        return NULL;
    }
    v->kind = STAGECAL_VLE_KVALUE;
    v->k = k;
    return v;
}

void stagecal_vle_free(stagecal_vle *vle)
{
    free(vle);
}

stagecal_vle_kind stagecal_vle_get_kind(const stagecal_vle *vle)
{
    return vle->kind;
}

int stagecal_vle_has_temperature(const stagecal_vle *vle)
{
    (void)vle;
    return 0;
}

double stagecal_vle_x_max(const stagecal_vle *vle)
{
    return vle->kind == STAGECAL_VLE_KVALUE ? 1.0 / vle->k : 1.0;
}

int stagecal_vle_ystar(const stagecal_vle *vle, double x, double *y)
{
    if (!(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA:
        *y = vle->alpha * x / (1.0 + (vle->alpha - 1.0) * x);
        return STAGECAL_OK;
    case STAGECAL_VLE_KVALUE:
        *y = vle->k * x;
        return STAGECAL_OK;
    default:
        return STAGECAL_EINTERNAL;
    }
}

int stagecal_vle_xstar(const stagecal_vle *vle, double y, double *x)
{
    if (!(y >= 0.0 && y <= 1.0))
        return STAGECAL_EINVAL;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA:
        *x = y / (vle->alpha - (vle->alpha - 1.0) * y);
        return STAGECAL_OK;
    case STAGECAL_VLE_KVALUE:
        *x = y / vle->k;
        return STAGECAL_OK;
    default:
        return STAGECAL_EINTERNAL;
    }
}

int stagecal_vle_dydx(const stagecal_vle *vle, double x, double *dydx)
{
    if (!(x >= 0.0 && x <= stagecal_vle_x_max(vle)))
        return STAGECAL_EINVAL;
    switch (vle->kind) {
    case STAGECAL_VLE_ALPHA: {
        double d = 1.0 + (vle->alpha - 1.0) * x;
        *dydx = vle->alpha / (d * d);
        return STAGECAL_OK;
    }
    case STAGECAL_VLE_KVALUE:
        *dydx = vle->k;
        return STAGECAL_OK;
    default:
        return STAGECAL_EINTERNAL;
    }
}

int stagecal_vle_tbubble(const stagecal_vle *vle, double x, double *t_k)
{
    (void)vle;
    (void)x;
    (void)t_k;
    return STAGECAL_EINVAL;
}

size_t stagecal_vle_azeotropes(const stagecal_vle *vle, double *x_az, size_t cap)
{
    for (size_t i = 0; i < vle->naz && i < cap; i++)
        x_az[i] = vle->az[i];
    return vle->naz;
}

double stagecal_vle_mass_to_mole(double w_light, double m_light, double m_heavy)
{
    double a = w_light / m_light, b = (1.0 - w_light) / m_heavy;
    return a / (a + b);
}

double stagecal_vle_mole_to_mass(double x_light, double m_light, double m_heavy)
{
    double a = x_light * m_light, b = (1.0 - x_light) * m_heavy;
    return a / (a + b);
}

double stagecal_antoine_psat(const stagecal_antoine *ant, double t_k)
{
    return 1e5 * pow(10.0, ant->a - ant->b / (t_k + ant->c));
}
