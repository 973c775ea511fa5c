/*
 * stages_avx2.c — the inversion's closed-form fast path (stages_internal.h,
 * alpha_closed_eval) with its tangents as 4-lane vectors, compiled for AVX2 and taken where
 * the processor has it (stages_have_avx2). The same source expressions as the scalar path:
 * each lane of a vector operation is the IEEE operation the scalar code does
 * (-ffp-contract=off, and no FMA in this target), so the same doubles, in about two thirds of
 * the time (docs/performance.md, eleventh pass). Elsewhere (not x86-64, not GCC or Clang) the
 * fast path stays scalar.
 *
 * Only the functions of stages_internal.h are compiled for AVX2 (the headers it includes come
 * first, outside the AVX2 region); stages_have_avx2, which runs on any processor, is outside
 * it too.
 */
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#define TL_VECTOR 1
#endif

#include <gsl/gsl_roots.h>
#include <math.h>
#include <string.h>

#include "stagecal/stages.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

#if defined(TL_VECTOR) && defined(__clang__)
#pragma clang attribute push(__attribute__((target("avx2"))), apply_to = function)
#elif defined(TL_VECTOR)
#pragma GCC push_options
#pragma GCC target("avx2")
#endif

#include "stages_internal.h"

#if defined(TL_VECTOR)
int stages_alpha_closed_avx2(double a, double xd, double xb, double reflux, double cap,
                             alpha_closed_out *o)
{
    return alpha_closed_eval(a, xd, xb, reflux, cap, o);
}
#endif

#if defined(TL_VECTOR) && defined(__clang__)
#pragma clang attribute pop
#elif defined(TL_VECTOR)
#pragma GCC pop_options
#endif

#if defined(TL_VECTOR)
int stages_have_avx2(void)
{
    return __builtin_cpu_supports("avx2");
}
#else
int stages_alpha_closed_avx2(double a, double xd, double xb, double reflux, double cap,
                             alpha_closed_out *o)
{
    (void)a, (void)xd, (void)xb, (void)reflux, (void)cap, (void)o;
    return 0;
}

int stages_have_avx2(void)
{
    return 0;
}
#endif
