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
 * Azeotropes are found from sign changes of y* − x between table nodes and refined
 * on the exact model; a tangent azeotrope (y* touching the diagonal without
 * crossing) is not reported. Queries return statuses and never write NaN or inf.
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
    STAGECAL_VLE_MARGULES,
    STAGECAL_VLE_PSEUDO /* another model in pseudo-moles (stagecal_vle_alloc_pseudo) */
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
/* Tunables of the IDEAL/activity models.
 *
 * IDEAL and activity models answer y*(x), x*(y) and d(y*)/dx from a table built at
 * alloc: the bubble point is solved exactly (GSL Brent on T) on grid_n nodes
 * x_i = sin²(π i / (2 (grid_n − 1))) (dense near both ends), the exact slope d(y*)/dx
 * is taken at each node (complex-step derivatives of the model, implicit in T), and
 * y*(x) between nodes is the cubic Hermite interpolant of those values and slopes.
 * x*(y) inverts that same cubic (safeguarded Newton), so x*(y*(x)) = x to rounding,
 * and dydx is the slope of that same cubic. With the default grid the table is
 * within ~1e-11 of the exact solve (tests/test_vle.c measures it, bound 1e-9);
 * alloc costs ~5 ms (2049 bubble solves); ystar ~25 ns, xstar ~55 ns per call
 * (tests/bench_vle.c, random x, CPU time).
 * tbubble always solves the model exactly. */
typedef struct {
    size_t grid_n;   /* table nodes for IDEAL/activity models, in [17, 1e6]; default 2049 */
    int exact;       /* 1: ystar/xstar/dydx solve the model directly (slow, ~µs) */
    double t_epsrel; /* relative tolerance of each bubble-T solve; default 1e-14 */
    size_t max_iter; /* iteration cap of each root solve; default 100 */
} stagecal_vle_params;

stagecal_vle_params stagecal_vle_default_params(void);

/* Ideal (kind IDEAL, params ignored) or activity model; ant[0] light, ant[1] heavy;
 * p_pa > 0; params holds nparam values as documented above; vp holds the tunables
 * (NULL = stagecal_vle_default_params()). */
stagecal_vle *stagecal_vle_alloc_activity(stagecal_vle_kind kind, const stagecal_antoine ant[2],
                                          const double *params, size_t nparam, double p_pa,
                                          const stagecal_vle_params *vp, stagecal_error *err);
/* The equal-latent-heat (pseudo-mole) transform of base: one mole of the light component
 * counts as ratio = λ_light/λ_heavy pseudo-moles, so x' = ratio·x/(ratio·x + 1 − x) and the
 * model answers y'*(x') = T(y*(T⁻¹(x'))) (src/vle_pseudo.c). base is not copied and must
 * outlive the result; it cannot itself be a pseudo model. Not storable: its definition is
 * the base's. NULL with EINVAL or ENOMEM. */
stagecal_vle *stagecal_vle_alloc_pseudo(const stagecal_vle *base, double ratio,
                                        stagecal_error *err);
/* The transformation of a mole fraction to pseudo-moles and back. */
double stagecal_vle_to_pseudo(double ratio, double x);
double stagecal_vle_from_pseudo(double ratio, double xp);
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
/* Inverse x*(y) (the liquid in equilibrium with vapour y) for y in [0, 1]: the
 * smallest x with y*(x) = y, searched on the first increasing branch of y*(x) from
 * x = 0. A minimum-boiling azeotrope (ethanol–water) does not end that branch: y*
 * crosses the diagonal but keeps rising, so x*(y) is unique on all of [0, 1]. Only
 * when y*(x) itself turns down (a non-monotone table, an unstable parameter set) is
 * the branch cut there; y above its top is EINVAL. For KVALUE, x = y/K. */
int stagecal_vle_xstar(const stagecal_vle *vle, double y, double *x);
/* Checks the whole curve, as the column and model-file readers do before they accept a
 * model: over [0, x_max] y* stays inside [0, 1] and rises from x = 0 without falling,
 * going flat or collapsing (a drop back towards 0). Tables and activity models are
 * judged on their nodes: each monotone node interval of the Hermite interpolant stays
 * between its node values, so nodes inside [0, 1] and rising keep the curve inside and
 * rising. ALPHA and KVALUE pass by construction; PSEUDO is judged by its base model.
 * Returns STAGECAL_OK, or EDATA with a message naming the x where the curve fails and
 * *x_fail set to it (x_fail may be NULL). */
int stagecal_vle_validate(const stagecal_vle *vle, double *x_fail, stagecal_error *err);
/* Slope d(y*)/dx at x: exact for ALPHA/KVALUE, the slope of the interpolant that
 * stagecal_vle_ystar evaluates for TABLE and IDEAL/activity (exact with params.exact). */
int stagecal_vle_dydx(const stagecal_vle *vle, double x, double *dydx);
/* Bubble-point temperature [K] at x; EINVAL when the model has no temperatures. */
int stagecal_vle_tbubble(const stagecal_vle *vle, double x, double *t_k);

/* Azeotropes (y* = x with 0 < x < 1), ascending, found at alloc. Writes up to cap
 * compositions into x_az (may be NULL when cap is 0) and returns how many exist. */
size_t stagecal_vle_azeotropes(const stagecal_vle *vle, double *x_az, size_t cap);

/* Mass fraction ↔ mole fraction of the light component, molar masses in kg/mol.
 * Preconditions (asserted): fraction in [0, 1], molar masses > 0. */
double stagecal_vle_mass_to_mole(double w_light, double m_light, double m_heavy);
double stagecal_vle_mole_to_mass(double x_light, double m_light, double m_heavy);

/* Saturation pressure [Pa] from an Antoine set at t_k (no range check; see
 * stagecal_vle_antoine_flags for how a model reports use outside the stated range). */
double stagecal_antoine_psat(const stagecal_antoine *ant, double t_k);
/* Boiling point [K] of an Antoine set at p_pa [Pa] (normal boiling point at 101325 Pa),
 * closed form T = b/(a − log10(p_pa/1e5)) − c. */
double stagecal_antoine_tboil(const stagecal_antoine *ant, double p_pa);

/* Exact y*(x) and bubble T [K] by a direct solve (IDEAL/activity); for the other
 * models the same as stagecal_vle_ystar (t_k NULL allowed; set only when the model
 * has temperatures). EINVAL for x outside [0, x_max], ENOCONV when the solve fails. */
int stagecal_vle_ystar_exact(const stagecal_vle *vle, double x, double *y, double *t_k);
/* Activity coefficients γ1 (light), γ2 at x and t_k (1, 1 for IDEAL). EINVAL for
 * other kinds, x outside [0, 1] or t_k <= 0. */
int stagecal_vle_gamma(const stagecal_vle *vle, double x, double t_k, double *g1, double *g2);
/* Antoine range flags, decided at alloc: bit 0 (STAGECAL_VLE_ANTOINE_LIGHT) when the
 * light set is used outside its stated [t_min_k, t_max_k] somewhere on the bubble
 * curve x in [0, 1], bit 1 (..._HEAVY) likewise for the heavy set. 0 for models
 * without Antoine sets or when no range is stated. Use outside the range is allowed
 * (the results are still computed, since a bubble curve nearly always stretches one
 * of the two sets); callers that talk to people should warn when it is nonzero. */
#define STAGECAL_VLE_ANTOINE_LIGHT 1u
#define STAGECAL_VLE_ANTOINE_HEAVY 2u
unsigned stagecal_vle_antoine_flags(const stagecal_vle *vle);
/* Range [K] of bubble temperatures over x in [0, 1] (IDEAL/activity: from the table
 * nodes; TABLE with T: of the data). EINVAL when the model has no temperatures. */
int stagecal_vle_t_range(const stagecal_vle *vle, double *t_lo_k, double *t_hi_k);
/* Pressure [Pa] of an IDEAL/activity model, 0 for the others. */
double stagecal_vle_pressure(const stagecal_vle *vle);

/* ---- definition: the parameters that define a model, and back -----------------------
 *
 * stagecal_vle_get_definition returns everything a model was built from, so that it can
 * be stored (the model file, src/model.c) and rebuilt with stagecal_vle_alloc_definition
 * into a model that answers y*(x), x*(y) and d(y*)/dx bit for bit like the original
 * (tests/test_model.c checks every kind). Only the members of the model's kind are set;
 * the others are zero (NULL for pointers). */
typedef struct {
    stagecal_vle_kind kind;
    double alpha; /* ALPHA: relative volatility, > 1 */
    double k;     /* KVALUE: K value, > 1 */
    /* TABLE: the n nodes the interpolant runs through, the added end points (0, 0) and
     * (1, 1) included; t_k NULL when the table has no temperatures. From the getter they
     * point into the model (valid while it lives, not to be freed); the constructor
     * copies them. */
    size_t n;
    const double *x, *y, *t_k;
    /* IDEAL and activity models */
    stagecal_antoine ant[2];              /* light, heavy */
    double params[STAGECAL_VLE_MAXPARAM]; /* as documented above the kinds */
    size_t nparam;                        /* 0 IDEAL, 4 WILSON, 5 NRTL, 2 VANLAAR/MARGULES */
    double p_pa;                          /* pressure [Pa], > 0 */
    stagecal_vle_params vp;               /* tunables the table was built with */
} stagecal_vle_definition;

/* Fills def with the defining parameters of vle (see above). Never fails. */
void stagecal_vle_get_definition(const stagecal_vle *vle, stagecal_vle_definition *def);
/* Builds a model from a definition: dispatches to the alloc_* constructor of def->kind
 * (for TABLE with def->n, def->x, def->y, def->t_k; for IDEAL/activity with def->vp).
 * Returns NULL and fills err as those do (EINVAL also for an unknown kind). */
stagecal_vle *stagecal_vle_alloc_definition(const stagecal_vle_definition *def,
                                            stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif
