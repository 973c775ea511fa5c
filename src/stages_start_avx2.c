/*
 * stages_start_avx2.c — the start of a table row of stagecal_stages_invert_many (stages_tab.c,
 * stages_tab_many): what invert_begin computes for a row on a Hermite table at E_MV = 1 with
 * tangents when the row goes on to step — the line m = R/(R + 1), b = xD/(R + 1), xD and x_target =
 * (y*(xB) − b)/m with their tangents, after the input checks, y*(xB) with its slope, the checks of
 * x_target and the pinch test at x_target — without the per-row machinery (the stepper, the model
 * dispatch, the status texts), and the row's result as invert_begin leaves it. A row that is not
 * plain (anything reject_inputs would reject, R = ∞, x_target above xD, at xD or not above 0, the
 * pinch test failing) is left to invert_begin, which then does everything for it, status and
 * message included. The four lanes also leave a row whose table query would take an uncommon
 * branch: a bucket whose search range holds more than four nodes (a table crowded in x), and two
 * kept as guards that the rows do not reach: a bucket past the last ((1 − 2^−53)·nb rounds below
 * nb) and x at the interval's upper node (a bucket's range ends at the node at or below its upper
 * edge: it would take a node within rounding of that edge).
 *
 * stages_start1: one row, scalar, the same operations in the same order as invert_begin (and
 * vle_table_ystar_slope, vle_table_ystar_inline), so the same doubles. stages_start4: four
 * rows, one per AVX2 lane, each lane the same IEEE operations in the same order (-ffp-contract=
 * off, no FMA in this target), the table read with gathers; elsewhere (not x86-64, not GCC or
 * Clang, -DSTAGECAL_NO_AVX2, or a processor without AVX2) four stages_start1.
 *
 * As in stages_avx2.c, the headers come first, outside the AVX2 region; only the four-lane
 * function is compiled for AVX2.
 */
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__)) && !defined(STAGECAL_NO_AVX2)
#define START_AVX2 1
#endif

#include <math.h>
#include <stddef.h>
#include <string.h>
#if defined(START_AVX2)
#include <immintrin.h>
#endif

#include "stages_internal.h"
#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

/* First azeotrope (stages_step.c, stages_azeotrope_below) is at or below xD exactly when the
 * least of those it inspects is: a row passes when xD < az_lo. */
void stages_start_prep(const stagecal_vle *vle, const stagecal_stages_params *par,
                       stages_start_ctx *c)
{
    memset(c, 0, sizeof *c);
    c->vle = vle;
    c->x_max = stagecal_vle_x_max(vle);
    c->top_tol = par->top_tol;
    c->az_lo = HUGE_VAL;
    for (size_t i = 0; i < vle->naz && i < 8; i++) /* (stages_step.c's MAX_AZ) */
        if (vle->az[i] < c->az_lo)
            c->az_lo = vle->az[i];
    c->nb = (long long)vle->nb;
    c->n2 = (long long)vle->n - 2;
#if defined(START_AVX2)
    c->avx2 = stages_have_avx2();
#endif
}

/* reject_inputs (stages.c) passes, at E = 1, and R is finite: NaN fails each test. */
static inline int start_plain_inputs(const stages_start_ctx *c, double xd, double xb, double r)
{
    return xd > 0.0 && xd < 1.0 && !(xd > c->x_max) && xb > 0.0 && xb < 1.0 && !(xb > c->x_max) &&
           xb < xd && r > 0.0 && r < HUGE_VAL && xd < c->az_lo;
}

/* The result invert_begin leaves a row that steps: all zero but status ok, lv and x_target. */
static inline void start_res(const tab_begin *o, stagecal_stages_result *res)
{
    memset(res, 0, sizeof *res);
    res->status = STAGECAL_STAGES_OK;
    res->lv = o->m[0];
    res->x_target = o->txt[0];
}

int stages_start1(const stages_start_ctx *c, double xd, double xb, double reflux, tab_begin *o,
                  stagecal_stages_result *res)
{
    const stagecal_vle *v = c->vle;
    if (!start_plain_inputs(c, xd, xb, reflux))
        return 0;
    /* stepper_init's line and invert_begin's tangents */
    double m = reflux / (reflux + 1.0), b = xd / (reflux + 1.0), q = 1.0 / (reflux + 1.0);
    double md[3] = {0.0, 0.0, q * q}, bd[3] = {q, 0.0, -xd * q * q};
    /* vle_table_ystar_slope at xB */
    size_t i = vle_locate_x(v, xb);
    const vle_hseg *g = &v->seg[i].g;
    double s = (xb - g->x0) / g->h;
    double ypot = vle_ystar_clamp(xb == v->xs[i + 1] ? v->ys[i + 1] : vle_hseg_val(g, s));
    double sxb = vle_hseg_ds(g, s) / g->h;
    /* tl_div(tl_sub(typot, b), m) with typot = (ypot; 0, sxb, 0) */
    double nd[3] = {0.0 - bd[0], sxb - bd[1], 0.0 - bd[2]};
    double xt = (ypot - b) / m;
    if (xt > xd + c->top_tol || xt >= xd || !(xt > 0.0))
        return 0;
    /* stepper_ystar at x_target and the pinch test */
    if (vle_table_ystar_inline(v, xt) <= m * xt + b)
        return 0;
    o->m[0] = m;
    o->b[0] = b;
    o->txd[0] = xd;
    o->txt[0] = xt;
    for (int k = 0; k < 3; k++) {
        o->m[k + 1] = md[k];
        o->b[k + 1] = bd[k];
        o->txd[k + 1] = k == TL_XD ? 1.0 : 0.0;
        o->txt[k + 1] = (nd[k] - xt * md[k]) / m;
    }
    start_res(o, res);
    return 1;
}

#if defined(START_AVX2) && defined(__clang__)
#pragma clang attribute push(__attribute__((target("avx2"))), apply_to = function)
#elif defined(START_AVX2)
#pragma GCC push_options
#pragma GCC target("avx2")
#endif

#if defined(START_AVX2)
typedef double v4d __attribute__((vector_size(32)));
typedef long long v4i __attribute__((vector_size(32))); /* indices; comparisons: −1 or 0 */

_Static_assert(sizeof(struct vle_seg) == 9 * sizeof(double), "vle_seg: nine doubles");

static inline v4d v4_set1(double x)
{
    v4d r = {x, x, x, x};
    return r;
}

static inline v4i v4_iset1(long long x)
{
    v4i r = {x, x, x, x};
    return r;
}

/* on ? a : b lane by lane (on: −1 or 0 in each lane). */
static inline v4i v4_isel(v4i on, v4i a, v4i b)
{
    return (a & on) | (b & ~on);
}

static inline v4d v4_gather(const double *base, v4i idx)
{
    return _mm256_i64gather_pd(base, (__m256i)idx, 8);
}

/* vle_ystar_clamp lane by lane: MAXPD(a, b) is a > b ? a : b and MINPD(a, b) is a < b ? a : b,
 * the clamp's expressions. */
static inline v4d v4_clamp01(v4d y)
{
    return _mm256_min_pd(_mm256_max_pd(y, v4_set1(0.0)), v4_set1(1.0));
}

/* vle_locate_x lane by lane for x in [0, 1] (a lane off is searched at x = 0): the bucket
 * (size_t)(x·nb) and vle_bsearch's answer on its range [lo, hi), which on strictly increasing
 * nodes is lo plus the nodes after lo in the range at or below x, counted here for a range of
 * at most four nodes. Clears in *on the lanes whose bucket is past the last or whose range is
 * wider (vle_locate_x's other cases) or whose x is the next node (the node value's branch). */
static inline v4i v4_locate_x(const stagecal_vle *v, const stages_start_ctx *c, v4d x, v4i *on)
{
    x = (v4d)((v4i)x & *on);
    __m128i b32 = _mm256_cvttpd_epi32(x * (double)v->nb); /* x·nb < 2^31 here */
    v4i bk = (v4i)_mm256_cvtepi32_epi64(b32);
    *on &= bk < v4_iset1(c->nb);
    bk &= *on;
    const long long *bx = (const long long *)v->bx;
    v4i lo = (v4i)_mm256_i64gather_epi64(bx, (__m256i)bk, 8);
    v4i hi = (v4i)_mm256_i64gather_epi64(bx, (__m256i)(bk + 1), 8) + 1;
    *on &= hi - lo <= 4;
    v4i i = lo;
    for (long long k = 1; k < 4; k++) {
        v4i in = lo + k < hi;
        v4d xk = v4_gather(v->xs, v4_isel(in, lo + k, lo));
        i -= in & (v4i)(xk <= x);
    }
    v4i n2 = v4_iset1(c->n2);
    i = v4_isel(i > n2, n2, i);
    *on &= (v4i)(x != v4_gather(v->xs, i + 1));
    return i;
}

/* The segment i's cubic (vle_hseg) lane by lane. */
typedef struct {
    v4d x0, h, y0, d1, c2, c3;
} v4seg;

static inline v4seg v4_seg(const stagecal_vle *v, v4i i)
{
    const double *s = (const double *)v->seg;
    v4i i9 = (i << 3) + i;
    v4seg g = {v4_gather(s + offsetof(struct vle_seg, g.x0) / sizeof(double), i9),
               v4_gather(s + offsetof(struct vle_seg, g.h) / sizeof(double), i9),
               v4_gather(s + offsetof(struct vle_seg, g.y0) / sizeof(double), i9),
               v4_gather(s + offsetof(struct vle_seg, g.d1) / sizeof(double), i9),
               v4_gather(s + offsetof(struct vle_seg, g.c2) / sizeof(double), i9),
               v4_gather(s + offsetof(struct vle_seg, g.c3) / sizeof(double), i9)};
    return g;
}

/* Lane j of the four vectors (value, ∂/∂xD, ∂/∂xB, ∂/∂R) to row j's four doubles at out[j]
 * (a 4×4 transpose). */
static inline void v4_store_rows(v4d a, v4d b, v4d c, v4d d, double *out0, double *out1,
                                 double *out2, double *out3)
{
    __m256d t0 = _mm256_unpacklo_pd(a, b), t1 = _mm256_unpackhi_pd(a, b);
    __m256d t2 = _mm256_unpacklo_pd(c, d), t3 = _mm256_unpackhi_pd(c, d);
    _mm256_storeu_pd(out0, _mm256_permute2f128_pd(t0, t2, 0x20));
    _mm256_storeu_pd(out1, _mm256_permute2f128_pd(t1, t3, 0x20));
    _mm256_storeu_pd(out2, _mm256_permute2f128_pd(t0, t2, 0x31));
    _mm256_storeu_pd(out3, _mm256_permute2f128_pd(t1, t3, 0x31));
}

/* start_res with the result zeroed by 32-byte stores (a memset of this size is a rep stos). */
static inline void v4_start_res(const tab_begin *o, stagecal_stages_result *res)
{
    unsigned char *p = (unsigned char *)res;
    size_t k = 0;
    for (; k + 32 <= sizeof *res; k += 32)
        _mm256_storeu_pd((double *)(p + k), v4_set1(0.0));
    memset(p + k, 0, sizeof *res - k);
    res->status = STAGECAL_STAGES_OK;
    res->lv = o->m[0];
    res->x_target = o->txt[0];
}

static unsigned start4_avx2(const stages_start_ctx *c, const double *xdp, const double *xbp,
                            const double *rp, tab_begin o[4], stagecal_stages_result res[4])
{
    const stagecal_vle *v = c->vle;
    v4d xd, xb, r;
    memcpy(&xd, xdp, sizeof xd);
    memcpy(&xb, xbp, sizeof xb);
    memcpy(&r, rp, sizeof r);
    v4d zero = v4_set1(0.0);
    /* start_plain_inputs */
    v4i on = (xd > 0.0) & (xd < 1.0) & ~(xd > c->x_max) & (xb > 0.0) & (xb < 1.0) &
             ~(xb > c->x_max) & (xb < xd) & (r > 0.0) & (r < HUGE_VAL) & (xd < c->az_lo);
    /* the line and its tangents */
    v4d m = r / (r + 1.0), b = xd / (r + 1.0), q = 1.0 / (r + 1.0);
    v4d mr = q * q, bx = q, br = -xd * q * q;
    /* vle_table_ystar_slope at xB */
    v4i i = v4_locate_x(v, c, xb, &on);
    v4seg g = v4_seg(v, i);
    v4d s = (xb - g.x0) / g.h;
    v4d ypot = v4_clamp01(g.y0 + s * (g.d1 + s * (g.c2 + s * g.c3)));
    v4d sxb = (g.d1 + s * (2.0 * g.c2 + 3.0 * s * g.c3)) / g.h;
    /* x_target with its tangents: typot = (ypot; 0, sxb, 0), m's ∂/∂xD and ∂/∂xB are 0 */
    v4d n0 = 0.0 - bx, n1 = sxb - zero, n2 = 0.0 - br;
    v4d xt = (ypot - b) / m;
    v4d t0 = (n0 - xt * zero) / m, t1 = (n1 - xt * zero) / m, t2 = (n2 - xt * mr) / m;
    on &= ~(xt > xd + c->top_tol) & ~(xt >= xd) & (xt > 0.0);
    /* vle_table_ystar_inline at x_target and the pinch test */
    v4i it = v4_locate_x(v, c, xt, &on);
    v4seg gt = v4_seg(v, it);
    v4d st = (xt - gt.x0) / gt.h;
    v4d yt = v4_clamp01(gt.y0 + st * (gt.d1 + st * (gt.c2 + st * gt.c3)));
    on &= ~(yt <= m * xt + b);
    v4d one = v4_set1(1.0);
    v4_store_rows(m, zero, zero, mr, o[0].m, o[1].m, o[2].m, o[3].m);
    v4_store_rows(b, bx, zero, br, o[0].b, o[1].b, o[2].b, o[3].b);
    v4_store_rows(xd, one, zero, zero, o[0].txd, o[1].txd, o[2].txd, o[3].txd);
    v4_store_rows(xt, t0, t1, t2, o[0].txt, o[1].txt, o[2].txt, o[3].txt);
    unsigned bits = (unsigned)_mm256_movemask_pd((__m256d)on);
    for (int j = 0; j < 4; j++)
        if (bits >> j & 1u)
            v4_start_res(&o[j], &res[j]);
    return bits;
}
#endif

#if defined(START_AVX2) && defined(__clang__)
#pragma clang attribute pop
#elif defined(START_AVX2)
#pragma GCC pop_options
#endif

unsigned stages_start4(const stages_start_ctx *c, const double *xd, const double *xb,
                       const double *reflux, tab_begin o[4], stagecal_stages_result res[4])
{
#if defined(START_AVX2)
    if (c->avx2)
        return start4_avx2(c, xd, xb, reflux, o, res);
#endif
    unsigned on = 0;
    for (int j = 0; j < 4; j++)
        on |= (unsigned)stages_start1(c, xd[j], xb[j], reflux[j], &o[j], &res[j]) << j;
    return on;
}
