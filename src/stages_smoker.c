/*
 * stages_smoker.c — Smoker's equation for constant α on a general straight operating
 * line y = m·x + b (Smoker 1938, "Analytic determination of plates in fractionating columns",
 * Trans. AIChE 34, citation from memory), written in tangent-linear arithmetic (stages_internal.h)
 * so that the inversion gets its derivatives with the count, and the public closed forms
 * stagecal_fenske and stagecal_smoker.
 *
 * With the pinch root k (the small root of the line meeting the curve) and
 * u = 1/(x − k), the stepping x_(n) → x_(n+1) is linear in u with fixed point β and
 * factor α/(m c²), c = 1 + (α − 1)·k; the count from x0 down to xn is
 * ln((u_n − β)/(u_0 − β)) / ln(α/(m c²)). At total reflux (b = 0) k = 0, c = 1, β = 1:
 * Fenske's log-odds form.
 */
#include <math.h>

#include "stages_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

double smoker_inverse(const smoker_consts *sc, double x0, double n)
{
    double u0 = 1.0 / (x0 - sc->k.v);
    return sc->k.v + 1.0 / (sc->beta.v + (u0 - sc->beta.v) * exp(n * sc->lna.v));
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
    if (smoker_setup(tl_const(alpha), tl_const(m), tl_const(b), &sc) != 0)
        return error_set(err, STAGECAL_EINTERNAL, "smoker: no pinch root for alpha %g, R %g", alpha,
                         reflux);
    if (!(xb > sc.k.v))
        return error_set(err, STAGECAL_EINVAL,
                         "smoker: xB = %.10g is at or below the pinch %.10g, no finite count", xb,
                         sc.k.v);
    *stages = smoker_count_top(&sc, tl_const(m), tl_const(xd), tl_const(xb)).v;
    return STAGECAL_OK;
}
