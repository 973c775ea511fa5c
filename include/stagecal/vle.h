/*
 * stagecal/vle.h — binary vapour–liquid equilibrium models.
 *
 * x and y are mole fractions of the light (more volatile) component, in [0, 1].
 * Temperatures in K, pressures in Pa. A model is built once (alloc), then queried
 * many times from any thread (the object is read-only after alloc).
 *
 * Models:
 *   ALPHA     constant relative volatility α > 1: y* = αx / (1 + (α − 1)x)
 *   KVALUE    constant K (dilute systems): y* = K·x, valid for x ≤ 1/K (K > 1)
 *   TABLE     tabulated x–y data, monotone (Steffen) interpolation, optional T
 *   IDEAL     Raoult's law + Antoine for both components at a stated pressure
 *   WILSON, NRTL, VANLAAR, MARGULES  activity coefficient (γ–φ, ideal vapour)
 *             + Antoine at a stated pressure
 * For each: y*(x), its inverse x*(y), d(y*)/dx, bubble-point temperature where the
 * model has temperatures, and the azeotropes in (0, 1), found at alloc and cached.
 */
#ifndef STAGECAL_VLE_H
#define STAGECAL_VLE_H

#include <stddef.h>

#include "stagecal/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum {
    STAGECAL_VLE_ALPHA = 0,
    STAGECAL_VLE_KVALUE,
    STAGECAL_VLE_TABLE,
    STAGECAL_VLE_IDEAL,
    STAGECAL_VLE_WILSON,
    STAGECAL_VLE_NRTL,
    STAGECAL_VLE_VANLAAR,
    STAGECAL_VLE_MARGULES
} stagecal_vle_kind;

/* Antoine equation in the NIST WebBook form: log10(P/bar) = a − b/(T/K + c),
 * valid on [t_min_k, t_max_k] (0, 0 = range not stated). */
typedef struct {
    double a, b, c;
    double t_min_k, t_max_k;
} stagecal_antoine;

/* Activity-coefficient parameters; component 1 is the light one.
 *   WILSON:   Λ12 = (V2/V1)·exp(−a12/(R·T)), Λ21 = (V1/V2)·exp(−a21/(R·T));
 *             p[0]=a12 [J/mol], p[1]=a21 [J/mol], p[2]=V1, p[3]=V2 [m³/mol]
 *   NRTL:     τ12 = p[0] + p[1]/T, τ21 = p[2] + p[3]/T (T in K), α12 = p[4]
 *   VANLAAR:  ln γ1 = A12 (A21 x2 / (A12 x1 + A21 x2))², ...; p[0]=A12, p[1]=A21
 *   MARGULES: two-parameter, ln γ1 = x2² (A12 + 2 (A21 − A12) x1), ...;
 *             p[0]=A12, p[1]=A21 */
#define STAGECAL_VLE_MAXPARAM 6

typedef struct stagecal_vle stagecal_vle; /* opaque, read-only after alloc */

/* Constructors. Each returns NULL on failure and fills err (EINVAL for a
 * parameter outside its domain, ENOMEM). The caller frees with stagecal_vle_free. */
stagecal_vle *stagecal_vle_alloc_alpha(double alpha, stagecal_error *err);
stagecal_vle *stagecal_vle_alloc_kvalue(double k, stagecal_error *err);
/* x, y: n ≥ 3 points with x strictly increasing; endpoints (0,0) and (1,1) are
 * added when missing; t_k may be NULL (no temperatures). The data are copied. */
stagecal_vle *stagecal_vle_alloc_table(const double *x, const double *y, const double *t_k,
                                       size_t n, stagecal_error *err);
/* Ideal (kind IDEAL, params ignored) or activity model; ant[0] light, ant[1] heavy;
 * p_pa > 0; params holds nparam values as documented above. */
stagecal_vle *stagecal_vle_alloc_activity(stagecal_vle_kind kind, const stagecal_antoine ant[2],
                                          const double *params, size_t nparam, double p_pa,
                                          stagecal_error *err);
void stagecal_vle_free(stagecal_vle *vle); /* NULL is a no-op */

stagecal_vle_kind stagecal_vle_get_kind(const stagecal_vle *vle);
const char *stagecal_vle_kind_name(stagecal_vle_kind kind); /* "alpha", "nrtl", ... */
/* 1 when the model has temperatures (IDEAL, activity, TABLE with T). */
int stagecal_vle_has_temperature(const stagecal_vle *vle);
/* Upper end of the valid x range: 1 for every model but KVALUE (1/K). */
double stagecal_vle_x_max(const stagecal_vle *vle);

/* Equilibrium vapour y*(x) for x in [0, x_max]. Returns STAGECAL_OK, EINVAL for x
 * outside the domain, ENOCONV if an inner solve failed. */
int stagecal_vle_ystar(const stagecal_vle *vle, double x, double *y);
/* Inverse x*(y) (the liquid in equilibrium with vapour y) for y in [0, 1]; on the
 * branch of the curve that contains y, below the first azeotrope from x = 0 when
 * the curve is not monotone overall. */
int stagecal_vle_xstar(const stagecal_vle *vle, double y, double *x);
/* Slope d(y*)/dx at x. */
int stagecal_vle_dydx(const stagecal_vle *vle, double x, double *dydx);
/* Bubble-point temperature [K] at x; EINVAL when the model has no temperatures. */
int stagecal_vle_tbubble(const stagecal_vle *vle, double x, double *t_k);

/* Azeotropes (y* = x with 0 < x < 1), ascending, found at alloc. Writes up to cap
 * compositions into x_az (may be NULL when cap is 0) and returns how many exist. */
size_t stagecal_vle_azeotropes(const stagecal_vle *vle, double *x_az, size_t cap);

/* Mass fraction ↔ mole fraction of the light component, molar masses in kg/mol. */
double stagecal_vle_mass_to_mole(double w_light, double m_light, double m_heavy);
double stagecal_vle_mole_to_mass(double x_light, double m_light, double m_heavy);

/* Saturation pressure [Pa] from an Antoine set at t_k. */
double stagecal_antoine_psat(const stagecal_antoine *ant, double t_k);

#ifdef __cplusplus
}
#endif
#endif
