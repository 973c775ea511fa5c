/*
 * internal.h — helpers shared by library files; not installed, no stagecal_ prefix.
 */
#ifndef STAGECAL_INTERNAL_H
#define STAGECAL_INTERNAL_H

#include "stagecal/error.h"
#include "stagecal/physics.h"
#include "banned.h"

#include <math.h>
#include <string.h>

#if defined(__GNUC__)
#define SC_PRINTF(a, b) __attribute__((format(printf, a, b)))
#define SC_NOINLINE __attribute__((noinline))
#else
#define SC_PRINTF(a, b)
#define SC_NOINLINE
#endif

/* Fill err (may be NULL) with code and a formatted message; returns code. */
int error_set(stagecal_error *err, int code, const char *fmt, ...) SC_PRINTF(3, 4);

/* As error_set, with a location: the message becomes "source:line: text"
 * ("source: text" when line is 0). */
int error_set_at(stagecal_error *err, int code, const char *source, long line, long column,
                 const char *fmt, ...) SC_PRINTF(6, 7);

/* The name of enum value v in a table of names indexed by value; "unknown" outside the
 * table or where it has no name. Use NAME_OF(table, v) with a static array. */
const char *name_of(const char *const *names, size_t n, int v);
#define NAME_OF(names, v) name_of((names), sizeof(names) / sizeof((names)[0]), (int)(v))

/* Frees each of the n pointers in p (a release function's owned members). */
void free_each(void *const *p, size_t n);
#define FREE_EACH(...)                                                                             \
    free_each((void *const[]){__VA_ARGS__}, sizeof((void *const[]){__VA_ARGS__}) / sizeof(void *))

/* The fractional stage of the stage convention (stages_step.c): the liquid reached after a
 * fraction f in (0, 1] of the step from liquid x_prev whose full outlet pair is (xn, yn), on
 * the operating line y = m·x + b: Smoker's closed-form inverse with the step's local α
 * (exactly xn at f = 1). Shared by forward stepping and the dynamic batch model. */
double stages_fraction_target(double x_prev, double xn, double yn, double m, double b, double f);

/* stagecal_stages_invert and stagecal_physics_invert without the reason text of a count that
 * is not ok (res->reason left empty; every other member the same), for run-log mode, which
 * records the status alone. */
int stages_invert_quiet(const stagecal_vle *vle, double xd, double xb, double reflux,
                        double murphree, const stagecal_stages_params *params,
                        stagecal_stages_result *res, stagecal_error *err);
/* stagecal_stages_invert_many without the reason texts; rc (may be NULL) receives each row's
 * return value. */
int stages_invert_many_quiet(const stagecal_vle *vle, size_t n, const double *xd, const double *xb,
                             const double *reflux, double murphree,
                             const stagecal_stages_params *params, stagecal_stages_result *res,
                             int *rc, stagecal_error *err);
/* 1 when stagecal_stages_invert_many steps several rows of this model at E_MV = murphree side
 * by side (a Hermite table at E_MV = 1, tangent-linear sensitivities asked for). */
int stages_many_by_table(const stagecal_vle *vle, double murphree);
/* Four rows through the constant-α closed form's fast path at once (AVX2 lanes): row j is
 * (xd[j], xb[j], reflux[j]); bit j of the result set when row j took it, res[j] then filled with
 * exactly what stages_invert_quiet gives (status ok, stages, column_stages, lv, x_target, the
 * sensitivities, an empty reason); a row whose bit is 0 (no AVX2, not constant α at E_MV = 1,
 * want_sensitivities = 2, or the row outside the fast path) needs stages_invert_quiet, and its
 * res[j] is untouched. par may not be NULL. */
unsigned stages_invert4_fast(const stagecal_vle *vle, const double xd[4], const double xb[4],
                             const double reflux[4], double murphree,
                             const stagecal_stages_params *par, stagecal_stages_result res[4]);
/* stages_invert4_fast's test, once for many calls: 1 when its four-row path applies to vle at
 * murphree under par, with *alpha and *cap the arguments it then gives
 * stages_alpha_closed4_avx2 (stages_internal.h); row j's stages_invert_quiet result is then, where
 * bit j of that call's result is set: stages o[j].count + 1.0, ∂/∂xD o[j].d[0], ∂/∂xB o[j].d[1],
 * ∂/∂R o[j].d[2] (0.0 for each when want_sensitivities is not 1), status ok. */
int stages_fast4_applies(const stagecal_vle *vle, double murphree,
                         const stagecal_stages_params *par, double *alpha, double *cap);
int physics_invert_quiet(const stagecal_physics_cond *cond, double xd, double xb, double murphree,
                         const stagecal_stages_params *params, stagecal_stages_result *res,
                         stagecal_error *err);

/* Copies the NUL-terminated src into dst of cap bytes; −1 (dst untouched) when it does
 * not fit. */
/* The liquid-to-vapour ratio L/V = R/(R + 1) of a reflux ratio R ≥ 0 (total reflux: 1), the
 * bounded coordinate of R that envelopes and the scatter function use. */
static inline double lv_of(double r)
{
    return isinf(r) ? 1.0 : r / (r + 1.0);
}

static inline int copy_text(char *dst, size_t cap, const char *src)
{
    size_t n = strlen(src);
    if (n >= cap)
        return -1;
    memcpy(dst, src, n + 1);
    return 0;
}

#endif
