/*
 * stages_avx2.c — the inversion's closed-form fast path (stages_internal.h,
 * alpha_closed_eval) with its tangents as 4-lane vectors, compiled for AVX2 and taken where
 * the processor has it (stages_have_avx2). The same source expressions as the scalar path:
 * each lane of a vector operation is the IEEE operation the scalar code does
 * (-ffp-contract=off, and no FMA in this target), so the same doubles, in about two thirds of
 * the time (docs/performance.md, eleventh pass); and four rows side by side, one per lane
 * (stages_alpha_closed4_avx2, for stagecal_stages_invert_many). Also the crossing step of four
 * table rows in the lanes (stages_crossing4_avx2, stepper_crossing's doubles, for the crossing
 * phase of stages.c's tab_many). Elsewhere (not x86-64, not GCC or Clang, or built with
 * -DSTAGECAL_NO_AVX2, the way to test the other path on an AVX2 machine) the fast path stays
 * scalar and rows go one at a time.
 *
 * Only the functions of stages_internal.h and the four-row ones below are compiled for AVX2
 * (the headers come first, outside the AVX2 region); stages_have_avx2, which runs on any
 * processor, is outside it too.
 */
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__)) && !defined(STAGECAL_NO_AVX2)
#define TL_VECTOR 1
#endif

#include <gsl/gsl_roots.h>
#include <math.h>
#include <string.h>
#if defined(TL_VECTOR)
#include <immintrin.h>
#endif

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

/* ---- four rows at a time -------------------------------------------------------------- */

/* Four rows side by side: lane j of every vector belongs to row j. A tl4 is four tl3 (the
 * value and the three derivatives, each a vector over the rows), and each t4_* operation is
 * tl3's (stages_internal.h, scalar branch) lane by lane: the same IEEE operations in the same
 * order, so lane j holds the double row j's scalar computation gives. Where alpha_closed_eval
 * returns early, a lane is marked off instead (the lanes go on computing; nothing of a lane
 * marked off is used). */
typedef double v4d __attribute__((vector_size(32)));
typedef long long v4m __attribute__((vector_size(32))); /* comparison results: −1 or 0 */

typedef struct {
    v4d v;       /* values */
    v4d d[TL_N]; /* ∂/∂xD, ∂/∂xB, ∂/∂R */
} tl4;

static inline v4d v4_set1(double x)
{
    v4d r = {x, x, x, x};
    return r;
}

static inline tl4 t4_const(v4d v)
{
    tl4 r = {v, {v4_set1(0.0), v4_set1(0.0), v4_set1(0.0)}};
    return r;
}

static inline tl4 t4_seed(v4d v, int i, v4d s)
{
    tl4 r = t4_const(v);
    r.d[i] = s;
    return r;
}

static inline tl4 t4_add(tl4 a, tl4 b)
{
    tl4 r = {a.v + b.v, {a.d[0] + b.d[0], a.d[1] + b.d[1], a.d[2] + b.d[2]}};
    return r;
}

static inline tl4 t4_sub(tl4 a, tl4 b)
{
    tl4 r = {a.v - b.v, {a.d[0] - b.d[0], a.d[1] - b.d[1], a.d[2] - b.d[2]}};
    return r;
}

static inline tl4 t4_mul(tl4 a, tl4 b)
{
    tl4 r;
    r.v = a.v * b.v;
    for (int i = 0; i < TL_N; i++)
        r.d[i] = a.d[i] * b.v + a.v * b.d[i];
    return r;
}

static inline tl4 t4_div(tl4 a, tl4 b)
{
    tl4 r;
    r.v = a.v / b.v;
    for (int i = 0; i < TL_N; i++)
        r.d[i] = (a.d[i] - r.v * b.d[i]) / b.v;
    return r;
}

static inline tl4 t4_scale(double s, tl4 a)
{
    tl4 r = {s * a.v, {s * a.d[0], s * a.d[1], s * a.d[2]}};
    return r;
}

static inline tl4 t4_sqrt(tl4 a)
{
    tl4 r;
    r.v = _mm256_sqrt_pd(a.v); /* IEEE square root, correctly rounded as sqrt() */
    for (int i = 0; i < TL_N; i++)
        r.d[i] = a.d[i] / (2.0 * r.v);
    return r;
}

/* glibc's log, lane by lane (the same double as the scalar call); a lane marked off gets
 * log(1) instead of a value the scalar code would not have taken the log of. Through memory:
 * no lane inserts (valgrind 3.19 cannot decode their VEX vmovq). */
static inline tl4 t4_log(tl4 a, v4m on)
{
    double in[4], out[4];
    v4d x = (v4d)(((v4m)a.v & on) | ((v4m)v4_set1(1.0) & ~on));
    memcpy(in, &x, sizeof in);
    for (int j = 0; j < 4; j++)
        out[j] = log(in[j]);
    tl4 r;
    memcpy(&r.v, out, sizeof out);
    for (int i = 0; i < TL_N; i++)
        r.d[i] = a.d[i] / a.v;
    return r;
}

/* isfinite lane by lane: x − x is 0 exactly for a finite x, NaN for ±inf and NaN. */
static inline v4m v4_finite(v4d x)
{
    return (x - x) == 0.0;
}

/* alpha_closed_eval (stages_internal.h) on rows j = 0..3 with (xd[j], xb[j], reflux[j]), α
 * and cap common, and the input checks of stages.c's fast path (0 < xD < 1, 0 < xB < xD,
 * 0 < R < ∞) and, with want = 1, finite derivatives; the expressions are alpha_closed_eval's,
 * smoker_setup's and smoker_count_top's, in their order. Returns the lanes that hold (bit j
 * for row j) with o[j] filled for each; a row whose bit is 0 needs the per-row path. */
unsigned stages_alpha_closed4_avx2(double a, const double *xdp, const double *xbp, const double *rp,
                                   double cap, int want, alpha_closed_out o[4])
{
    v4d xd, xb, reflux;
    memcpy(&xd, xdp, sizeof xd);
    memcpy(&xb, xbp, sizeof xb);
    memcpy(&reflux, rp, sizeof reflux);
    v4d one = v4_set1(1.0), zero = v4_set1(0.0);
    /* stages.c, alpha_closed_fast: the inputs (NaN fails each test) */
    v4m on = (xd > 0.0) & (xd < 1.0) & (xb > 0.0) & (xb < xd) & (reflux > 0.0) &
             (reflux < v4_set1(HUGE_VAL));
    /* alpha_closed_eval: the seeds */
    v4d q = 1.0 / (reflux + 1.0);
    tl4 m = t4_seed(reflux / (reflux + 1.0), TL_R, q * q);
    tl4 b = t4_add(t4_seed(xd / (reflux + 1.0), TL_XD, q), t4_seed(zero, TL_R, -xd * q * q));
    tl4 txd = t4_seed(xd, TL_XD, one);
    v4d dp = 1.0 + (a - 1.0) * xb;
    tl4 typot = t4_seed(a * xb / dp, TL_XB, a / (dp * dp));
    tl4 txt = t4_div(t4_sub(typot, b), m);
    v4d xt = txt.v;
    on &= (xt > 0.0) & (xt < xd) & (a * xt / (1.0 + (a - 1.0) * xt) > m.v * xt + b.v);
    /* smoker_setup(tl_const(a), m, b) */
    tl4 alpha = t4_const(v4_set1(a));
    tl4 am1 = t4_sub(alpha, t4_const(one));
    tl4 a2 = t4_mul(m, am1);
    tl4 a1 = t4_sub(t4_add(m, t4_mul(b, am1)), alpha);
    tl4 disc = t4_sub(t4_mul(a1, a1), t4_mul(t4_scale(4.0, a2), b));
    on &= (alpha.v > 1.0) & (m.v > 0.0) & (disc.v >= 0.0);
    tl4 k = t4_div(t4_scale(2.0, b), t4_add(t4_scale(-1.0, a1), t4_sqrt(disc)));
    tl4 c = t4_add(t4_const(one), t4_mul(am1, k));
    tl4 mcc = t4_mul(t4_mul(m, c), c);
    tl4 den = t4_sub(alpha, mcc);
    on &= den.v > 0.0;
    tl4 beta = t4_div(t4_mul(t4_mul(m, c), am1), den);
    tl4 lna = t4_log(t4_div(alpha, mcc), on);
    on &= (lna.v > 0.0) & v4_finite(lna.v) & v4_finite(beta.v);
    /* alpha_closed_eval: the margin above the pinch root */
    on &= txt.v - k.v > CLOSED_MARGIN;
    /* smoker_count_top(&sc, m, txd, txt) */
    tl4 g = t4_sub(txd, k);
    tl4 u0mb =
        t4_div(t4_mul(t4_mul(beta, txd), t4_sub(t4_const(one), txd)), t4_mul(m, t4_mul(g, g)));
    tl4 unmb = t4_sub(t4_div(t4_const(one), t4_sub(txt, k)), beta);
    tl4 cnt = t4_div(t4_log(t4_div(unmb, u0mb), on), lna);
    on &= v4_finite(cnt.v) & (cnt.v >= 0.0) & (cnt.v < cap);
    if (want == 1) /* stages.c, alpha_closed_fast */
        on &= v4_finite(cnt.d[0]) & v4_finite(cnt.d[1]) & v4_finite(cnt.d[2]);
    long long onl[4];
    double cv[4], d0[4], d1[4], d2[4], lv[4], xtv[4];
    memcpy(onl, &on, sizeof onl);
    memcpy(cv, &cnt.v, sizeof cv);
    memcpy(d0, &cnt.d[0], sizeof d0);
    memcpy(d1, &cnt.d[1], sizeof d1);
    memcpy(d2, &cnt.d[2], sizeof d2);
    memcpy(lv, &m.v, sizeof lv);
    memcpy(xtv, &xt, sizeof xtv);
    unsigned mask = 0;
    for (int j = 0; j < 4; j++) {
        if (!onl[j])
            continue;
        mask |= 1u << j;
        o[j].count = cv[j];
        o[j].d[0] = d0[j];
        o[j].d[1] = d1[j];
        o[j].d[2] = d2[j];
        o[j].lv = lv[j];
        o[j].x_target = xtv[j];
    }
    return mask;
}

/* ---- the crossing of four rows -------------------------------------------------------- */

/* A 4×4 transpose: row j of r in (value, ∂/∂xD, ∂/∂xB, ∂/∂R) order becomes lane j of the four
 * vectors (and back). Moves only. */
static inline void v4_transpose(v4d r[4])
{
    __m256d t0 = _mm256_unpacklo_pd((__m256d)r[0], (__m256d)r[1]);
    __m256d t1 = _mm256_unpackhi_pd((__m256d)r[0], (__m256d)r[1]);
    __m256d t2 = _mm256_unpacklo_pd((__m256d)r[2], (__m256d)r[3]);
    __m256d t3 = _mm256_unpackhi_pd((__m256d)r[2], (__m256d)r[3]);
    r[0] = (v4d)_mm256_permute2f128_pd(t0, t2, 0x20);
    r[1] = (v4d)_mm256_permute2f128_pd(t1, t3, 0x20);
    r[2] = (v4d)_mm256_permute2f128_pd(t0, t2, 0x31);
    r[3] = (v4d)_mm256_permute2f128_pd(t1, t3, 0x31);
}

/* The tl4 of one argument of four rows: row j's four doubles at p[j]. */
static inline tl4 t4_rows(const double *p0, const double *p1, const double *p2, const double *p3)
{
    v4d r[4] = {(v4d)_mm256_loadu_pd(p0), (v4d)_mm256_loadu_pd(p1), (v4d)_mm256_loadu_pd(p2),
                (v4d)_mm256_loadu_pd(p3)};
    v4_transpose(r);
    tl4 x = {r[0], {r[1], r[2], r[3]}};
    return x;
}

#define T4_ROWS(c, arg) t4_rows((c)[0].arg, (c)[1].arg, (c)[2].arg, (c)[3].arg)

/* a where on, else b, lane by lane (bit for bit). */
static inline v4d v4_pick(v4m on, v4d a, v4d b)
{
    return (v4d)(((v4m)a & on) | ((v4m)b & ~on));
}

/* glibc's log of a.v where on1 and of b.v where on2, lane by lane, 1 elsewhere (as t4_log,
 * the eight calls in one loop: the vectors live across the calls are stored once). */
static inline void t4_log2(tl4 a, v4m on1, tl4 b, v4m on2, tl4 *la, tl4 *lb)
{
    double in[8], out[8];
    _mm256_storeu_pd(in, (__m256d)v4_pick(on1, a.v, v4_set1(1.0)));
    _mm256_storeu_pd(in + 4, (__m256d)v4_pick(on2, b.v, v4_set1(1.0)));
    for (int j = 0; j < 8; j++)
        out[j] = log(in[j]);
    la->v = (v4d)_mm256_loadu_pd(out);
    lb->v = (v4d)_mm256_loadu_pd(out + 4);
    for (int i = 0; i < TL_N; i++) {
        la->d[i] = a.d[i] / a.v;
        lb->d[i] = b.d[i] / b.v;
    }
}

/* stepper_crossing (stages_step.c) lane by lane: α_loc, smoker_setup and smoker_count
 * (stages_internal.h) with each tl3 operation's IEEE operations in their order, so each lane
 * the scalar doubles. Both sides of each branch are computed in every lane and blended: a lane
 * where smoker_setup rejects the constants or x_target ≤ k takes the linear fraction, as does
 * a lane whose count is not finite, derivatives and all; then the value clamped to [0, 1]. The
 * count's log does not depend on the setup's ln factor, so both logs are taken in one loop,
 * each of 1 in a lane where the scalar code has returned before it (a lane whose ln factor
 * then fails its test has its count's log taken and not used). */
void stages_crossing4_avx2(const tab_cross c[4], double out[4][4])
{
    tl4 m = T4_ROWS(c, m), b = T4_ROWS(c, b), x_prev = T4_ROWS(c, x_prev);
    tl4 xn = T4_ROWS(c, xn), yn = T4_ROWS(c, yn), x_target = T4_ROWS(c, x_target);
    tl4 one = t4_const(v4_set1(1.0));
    tl4 alpha = t4_div(t4_mul(yn, t4_sub(one, xn)), t4_mul(xn, t4_sub(one, yn)));
    /* smoker_setup(alpha, m, b) */
    tl4 am1 = t4_sub(alpha, one);
    tl4 a2 = t4_mul(m, am1);
    tl4 a1 = t4_sub(t4_add(m, t4_mul(b, am1)), alpha);
    tl4 disc = t4_sub(t4_mul(a1, a1), t4_mul(t4_scale(4.0, a2), b));
    v4m on = (alpha.v > 1.0) & (m.v > 0.0) & (disc.v >= 0.0);
    tl4 k = t4_div(t4_scale(2.0, b), t4_add(t4_scale(-1.0, a1), t4_sqrt(disc)));
    tl4 cc = t4_add(one, t4_mul(am1, k));
    tl4 mcc = t4_mul(t4_mul(m, cc), cc);
    tl4 den = t4_sub(alpha, mcc);
    on &= den.v > 0.0;
    tl4 beta = t4_div(t4_mul(t4_mul(m, cc), am1), den);
    v4m on_count = on & (x_target.v > k.v);
    /* smoker_count(&sc, x_prev, x_target), up to its log */
    tl4 u0 = t4_div(one, t4_sub(x_prev, k)), un = t4_div(one, t4_sub(x_target, k));
    tl4 ratio = t4_div(t4_sub(un, beta), t4_sub(u0, beta)), lna, lr;
    t4_log2(t4_div(alpha, mcc), on, ratio, on_count, &lna, &lr);
    /* smoker_setup's last test, then the count */
    on_count &= (lna.v > 0.0) & v4_finite(lna.v) & v4_finite(beta.v);
    tl4 cnt = t4_div(lr, lna);
    on_count &= v4_finite(cnt.v);
    /* the linear fraction where the count is not taken (α_loc within rounding of 1) */
    tl4 lin = t4_div(t4_sub(x_prev, x_target), t4_sub(x_prev, xn));
    tl4 f;
    f.v = v4_pick(on_count, cnt.v, lin.v);
    for (int i = 0; i < TL_N; i++)
        f.d[i] = v4_pick(on_count, cnt.d[i], lin.d[i]);
    v4m below = f.v < 0.0;
    v4m above = f.v > 1.0;
    f.v = v4_pick(below, v4_set1(0.0), v4_pick(above, v4_set1(1.0), f.v));
    v4d r[4] = {f.v, f.d[0], f.d[1], f.d[2]};
    v4_transpose(r);
    for (int j = 0; j < 4; j++)
        _mm256_storeu_pd(out[j], (__m256d)r[j]);
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

unsigned stages_alpha_closed4_avx2(double a, const double *xd, const double *xb,
                                   const double *reflux, double cap, int want,
                                   alpha_closed_out o[4])
{
    (void)a, (void)xd, (void)xb, (void)reflux, (void)cap, (void)want, (void)o;
    return 0;
}

void stages_crossing4_avx2(const tab_cross c[4], double f[4][4])
{
    (void)c, (void)f;
}

int stages_have_avx2(void)
{
    return 0;
}
#endif
