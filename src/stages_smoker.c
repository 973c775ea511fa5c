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

int smoker_setup(tl3 alpha, tl3 m, tl3 b, smoker_consts *sc)
{
    tl3 am1 = tl_sub(alpha, tl_const(1.0));
    tl3 a2 = tl_mul(m, am1);
    tl3 a1 = tl_sub(tl_add(m, tl_mul(b, am1)), alpha);
    tl3 disc = tl_sub(tl_mul(a1, a1), tl_mul(tl_scale(4.0, a2), b));
    if (!(alpha.v > 1.0) || !(m.v > 0.0) || !(disc.v >= 0.0))
        return -1;
    /* The small root, in the cancellation-free form (a1 < 0): k = 2b/(−a1 + √disc). At
     * total reflux b = 0 gives k = 0 exactly, c = 1, β = 1: the Fenske log-odds form. */
    tl3 k = tl_div(tl_scale(2.0, b), tl_add(tl_scale(-1.0, a1), tl_sqrt(disc)));
    tl3 c = tl_add(tl_const(1.0), tl_mul(am1, k));
    tl3 mcc = tl_mul(tl_mul(m, c), c);
    tl3 den = tl_sub(alpha, mcc);
    if (!(den.v > 0.0))
        return -1;
    sc->k = k;
    sc->beta = tl_div(tl_mul(tl_mul(m, c), am1), den);
    sc->lna = tl_log(tl_div(alpha, mcc));
    if (!(sc->lna.v > 0.0) || !isfinite(sc->lna.v) || !isfinite(sc->beta.v))
        return -1;
    return 0;
}

tl3 smoker_count(const smoker_consts *sc, tl3 x0, tl3 xn)
{
    tl3 one = tl_const(1.0);
    tl3 u0 = tl_div(one, tl_sub(x0, sc->k)), un = tl_div(one, tl_sub(xn, sc->k));
    return tl_div(tl_log(tl_div(tl_sub(un, sc->beta), tl_sub(u0, sc->beta))), sc->lna);
}

tl3 smoker_count_top(const smoker_consts *sc, tl3 m, tl3 xd, tl3 xn)
{
    /* u_0 − β = β·(k2 − xD)/(xD − k) with k2 the other root; the quadratic whose roots
     * are k and k2 is −(α − 1)·xD·(1 − xD) at xD (the line passes through (xD, xD)), so
     * u_0 − β = β·xD·(1 − xD)/(m·(xD − k)²) without the cancellation of u_0 − β near
     * xD → 1, where xD approaches k2. */
    tl3 one = tl_const(1.0), g = tl_sub(xd, sc->k);
    tl3 u0mb = tl_div(tl_mul(tl_mul(sc->beta, xd), tl_sub(one, xd)), tl_mul(m, tl_mul(g, g)));
    tl3 unmb = tl_sub(tl_div(one, tl_sub(xn, sc->k)), sc->beta);
    return tl_div(tl_log(tl_div(unmb, u0mb)), sc->lna);
}

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
