/*
 * stages_avx2.c — the inversion's closed-form fast path (stages_internal.h,
 * alpha_closed_eval) with its tangents as 4-lane vectors, compiled for AVX2 and taken where
 * the processor has it (stages_have_avx2). The same source expressions as the scalar path:
 * each lane of a vector operation is the IEEE operation the scalar code does
 * (-ffp-contract=off, and no FMA in this target), so the same doubles, in about half the
 * time (docs/performance.md, eleventh pass). Elsewhere (no GCC/Clang, not x86-64) the fast
 * path stays scalar.
 */
#if defined(__GNUC__) && defined(__x86_64__)
#pragma GCC target("avx2")
#define TL_VECTOR 1
#endif

#include <math.h>

#include "stages_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

#if defined(TL_VECTOR)
int stages_alpha_closed_avx2(double a, double xd, double xb, double reflux, double cap,
                             alpha_closed_out *o)
{
    return alpha_closed_eval(a, xd, xb, reflux, cap, o);
}

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
