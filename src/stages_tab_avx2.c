/*
 * stages_tab_avx2.c — the stepping phase of stages_invert_many's table rows (stages_tab.c,
 * tab_block_step: a Hermite table at E_MV = 1 with tangents) four rows to a group of AVX2 lanes
 * in lockstep, TAB4_GROUPS groups stepped together.
 *
 * Each lane performs, per stage, what stages_tab.c's tab_step does for its row — y = m·x + b, the
 * table's x*(y) with its slope (tab_xstar_slope: the bucket from y·yscale, the count of the
 * bucket's nodes at or below y, the segment's Hermite guess and one Newton step, the clamp at
 * the segment's end, the slope there), the tangents and the crossing test — with the same IEEE
 * operations in the same order (-ffp-contract=off, and no FMA in this target), so the same
 * doubles. The table's arrays are read per lane (each lane's two or four neighbouring elements in
 * one read, the lanes then transposed: on this machine four reads and a transpose cost about a
 * third of two gathers). Where a lane meets one of tab_xstar_slope's uncommon cases — a bucket
 * guess the exact locate must confirm, a bucket range wider than four nodes (near the ethanol–water
 * azeotrope y* is flat), a range near the table's end, Newton's step outside its bracket or too
 * long (coarse tables), x outside the segment vle_locate_x finds, a flat segment — that lane's
 * number is computed by the scalar function tab_xstar_slope calls there, and the lane goes on.
 * What tab_step answers with −1 (a query outside [0, y_top], no progress, the step cap or the
 * pinch scan due) marks the row for stages_invert, as tab_step's −1 does. A lane whose row is
 * done takes the block's next row.
 *
 * Elsewhere (not x86-64, not GCC or Clang, or built with -DSTAGECAL_NO_AVX2) the function below
 * takes no row and every row steps in stages_tab.c's scalar loop.
 */
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__)) && !defined(STAGECAL_NO_AVX2)
#define TAB4_AVX2 1
#endif

#include <gsl/gsl_roots.h>
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>
#if defined(TAB4_AVX2)
#include <immintrin.h>
#endif

#include "stagecal/stages.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"
#include "stages_internal.h"
#include "vle_internal.h"

#if defined(TAB4_AVX2) && defined(__clang__)
#pragma clang attribute push(__attribute__((target("avx2"))), apply_to = function)
#elif defined(TAB4_AVX2)
#pragma GCC push_options
#pragma GCC target("avx2")
#endif

#if defined(TAB4_AVX2)

/* Groups of four lanes, TAB4_GROUPS of them stepped together: each operation below is done for
 * every group in turn, so that the groups' chains of dependent operations (one stage of one
 * group ~150 cycles with the table's reads) go through the core side by side instead of one
 * filling its window while the other waits (docs/performance.md, fifteenth pass). */
#ifndef TAB4_GROUPS
#define TAB4_GROUPS 3
#endif
#define TW TAB4_GROUPS
#define TL (4 * TW) /* lanes */

/* The segment's nine doubles, read at 9·i. */
_Static_assert(sizeof(struct vle_seg) == 9 * sizeof(double), "struct vle_seg: nine doubles");
_Static_assert(offsetof(struct vle_seg, g.x0) == 0 * sizeof(double) &&
                   offsetof(struct vle_seg, g.h) == 1 * sizeof(double) &&
                   offsetof(struct vle_seg, g.y0) == 2 * sizeof(double) &&
                   offsetof(struct vle_seg, g.d1) == 3 * sizeof(double) &&
                   offsetof(struct vle_seg, g.c2) == 4 * sizeof(double) &&
                   offsetof(struct vle_seg, g.c3) == 5 * sizeof(double) &&
                   offsetof(struct vle_seg, dy) == 6 * sizeof(double) &&
                   offsetof(struct vle_seg, a) == 7 * sizeof(double) &&
                   offsetof(struct vle_seg, b) == 8 * sizeof(double),
               "struct vle_seg: the fields in this order");
_Static_assert(sizeof(size_t) == sizeof(long long), "64-bit indices");

/* TL lanes of doubles or of 64-bit integers (comparison results: −1 or 0). */
typedef struct {
    __m256d h[TW];
} vd;
typedef struct {
    __m256i h[TW];
} vi;

#define VOP(T, name, expr)                                                                         \
    static inline T name(T a, T b)                                                                 \
    {                                                                                              \
        T r;                                                                                       \
        for (int k = 0; k < TW; k++)                                                               \
            r.h[k] = expr(a.h[k], b.h[k]);                                                         \
        return r;                                                                                  \
    }
#define GE(x, y) _mm256_cmp_pd(x, y, _CMP_GE_OQ)
#define GT(x, y) _mm256_cmp_pd(x, y, _CMP_GT_OQ)
#define LE(x, y) _mm256_cmp_pd(x, y, _CMP_LE_OQ)
#define LT(x, y) _mm256_cmp_pd(x, y, _CMP_LT_OQ)
#define NE(x, y) _mm256_cmp_pd(x, y, _CMP_NEQ_UQ)  /* C's !=: true when unordered */
#define NGT(x, y) _mm256_cmp_pd(x, y, _CMP_NGT_UQ) /* !(x > y) */
VOP(vd, vadd, _mm256_add_pd)
VOP(vd, vsub, _mm256_sub_pd)
VOP(vd, vmul, _mm256_mul_pd)
VOP(vd, vdiv, _mm256_div_pd)
VOP(vd, vand, _mm256_and_pd)
VOP(vd, vandn, _mm256_andnot_pd) /* ~a & b */
VOP(vd, vor, _mm256_or_pd)
VOP(vd, vge, GE)
VOP(vd, vgt, GT)
VOP(vd, vle, LE)
VOP(vd, vlt, LT)
VOP(vd, vne, NE)
VOP(vd, vngt, NGT)
VOP(vi, iadd, _mm256_add_epi64)
VOP(vi, isub, _mm256_sub_epi64)
VOP(vi, iand, _mm256_and_si256)
VOP(vi, iandn, _mm256_andnot_si256) /* ~a & b */
VOP(vi, ior, _mm256_or_si256)
VOP(vi, igt, _mm256_cmpgt_epi64)
VOP(vi, ieq, _mm256_cmpeq_epi64)

static inline vd vset(double c)
{
    vd r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_set1_pd(c);
    return r;
}

static inline vi iset(long long c)
{
    vi r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_set1_epi64x(c);
    return r;
}

static inline vd vblend(vd a, vd b, vd m) /* m ? b : a */
{
    vd r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_blendv_pd(a.h[k], b.h[k], m.h[k]);
    return r;
}

static inline vi iblend(vi a, vi b, vi m)
{
    vi r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_blendv_epi8(a.h[k], b.h[k], m.h[k]);
    return r;
}

static inline vi asi(vd a)
{
    vi r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_castpd_si256(a.h[k]);
    return r;
}

static inline vd asd(vi a)
{
    vd r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_castsi256_pd(a.h[k]);
    return r;
}

/* (size_t)(v) for v in [0, 2^31) (C's truncation); any other v gives a negative lane. */
static inline vi vtrunc(vd a)
{
    vi r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_cvtepi32_epi64(_mm256_cvttpd_epi32(a.h[k]));
    return r;
}

static inline vd vld(const double *p)
{
    vd r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_load_pd(p + 4 * k);
    return r;
}

static inline void vst(double *p, vd a)
{
    for (int k = 0; k < TW; k++)
        _mm256_store_pd(p + 4 * k, a.h[k]);
}

static inline vi ild(const long long *p)
{
    vi r;
    for (int k = 0; k < TW; k++)
        r.h[k] = _mm256_load_si256((const __m256i *)(p + 4 * k));
    return r;
}

static inline void ist(long long *p, vi a)
{
    for (int k = 0; k < TW; k++)
        _mm256_store_si256((__m256i *)(p + 4 * k), a.h[k]);
}

static inline unsigned vbits(vd m) /* bit l: lane l's sign */
{
    unsigned r = 0;
    for (int k = 0; k < TW; k++)
        r |= (unsigned)_mm256_movemask_pd(m.h[k]) << (4 * k);
    return r;
}

/* The 4×4 transpose: lane l of *c0..*c3 from r_l's elements 0..3. */
static inline void tr4(__m256d r0, __m256d r1, __m256d r2, __m256d r3, __m256d *c0, __m256d *c1,
                       __m256d *c2, __m256d *c3)
{
    __m256d t0 = _mm256_unpacklo_pd(r0, r1), t1 = _mm256_unpackhi_pd(r0, r1);
    __m256d t2 = _mm256_unpacklo_pd(r2, r3), t3 = _mm256_unpackhi_pd(r2, r3);
    *c0 = _mm256_permute2f128_pd(t0, t2, 0x20);
    *c1 = _mm256_permute2f128_pd(t1, t3, 0x20);
    *c2 = _mm256_permute2f128_pd(t0, t2, 0x31);
    *c3 = _mm256_permute2f128_pd(t1, t3, 0x31);
}

/* Lane l of *c0, *c1 from r_l's two elements. */
static inline void tr2(__m128d r0, __m128d r1, __m128d r2, __m128d r3, __m256d *c0, __m256d *c1)
{
    __m256d a = _mm256_insertf128_pd(_mm256_castpd128_pd256(r0), r2, 1);
    __m256d b = _mm256_insertf128_pd(_mm256_castpd128_pd256(r1), r3, 1);
    *c0 = _mm256_unpacklo_pd(a, b);
    *c1 = _mm256_unpackhi_pd(a, b);
}

/* Lane l of *c0, *c1: the two 8-byte elements at p + 8·il[l] (doubles, or integers' bits). */
static inline void rd2(const void *p, const long long *il, vd *c0, vd *c1)
{
    const char *q = p;
    for (int k = 0; k < TW; k++) {
        const long long *j = il + 4 * k;
        tr2(_mm_loadu_pd((const double *)(q + 8 * j[0])),
            _mm_loadu_pd((const double *)(q + 8 * j[1])),
            _mm_loadu_pd((const double *)(q + 8 * j[2])),
            _mm_loadu_pd((const double *)(q + 8 * j[3])), &c0->h[k], &c1->h[k]);
    }
}

/* Lane l of c[0..3]: the four doubles at p + il[l]·stride. */
static inline void rd4(const double *p, const long long *il, long long stride, vd c[4])
{
    for (int k = 0; k < TW; k++) {
        const long long *j = il + 4 * k;
        tr4(_mm256_loadu_pd(p + stride * j[0]), _mm256_loadu_pd(p + stride * j[1]),
            _mm256_loadu_pd(p + stride * j[2]), _mm256_loadu_pd(p + stride * j[3]), &c[0].h[k],
            &c[1].h[k], &c[2].h[k], &c[3].h[k]);
    }
}

/* The table as the lanes read it. */
typedef struct {
    const stagecal_vle *v;
    const double *ys, *xs, *seg;
    const long long *by, *bx;
    double yscale, ytop, nbd;
    long long nb, iend, nm4, cap1; /* nb, iend, n − 4, the step cap − 1 */
} tab4_table;

/* TL rows' stepping state, lane l for block row row[l]: tab_lane's x_prev (= tprev.v), tprev's
 * derivatives, m, b and x_target's value, and the whole steps so far. */
typedef struct {
    double xp[TL], tp[3][TL], mv[TL], md[3][TL], bv[TL], bd[3][TL], tt[TL];
    long long n[TL];
    size_t row[TL];
    unsigned live; /* bit l: lane l holds a row */
} __attribute__((aligned(32))) tab4_group;

/* A stage's results: x_n and y_n with their derivatives; the lanes whose rows crossed x_target
 * and those whose rows go through stages_invert (rest). */
typedef struct {
    double x[TL], xd[3][TL], y[TL], yd[3][TL];
    unsigned cross, rest;
} __attribute__((aligned(32))) tab4_out;

/* One stage of the lanes (tab_step for each): *o filled, G->n counted; G's x_prev and tprev
 * untouched (tab4_finish moves x_n there). */
static inline __attribute__((always_inline)) void tab4_stage(const tab4_table *T, tab4_group *G,
                                                             tab4_out *o)
{
    const vd zero = vset(0.0), one = vset(1.0), two = vset(2.0), three = vset(3.0);
    const vi one64 = iset(1), none = iset(-1), nbv = iset(T->nb), iend = iset(T->iend);
    long long il[TL] __attribute__((aligned(32)));
    vd xp = vld(G->xp), mv = vld(G->mv), bv = vld(G->bv);
    vd y = vadd(vmul(mv, xp), bv);
    /* tab_step's !(y >= 0 && y <= 1), tab_xstar_slope's y > ytop: stages_invert */
    vd good = vandn(vgt(y, vset(T->ytop)), vand(vge(y, zero), vle(y, one)));
    vst(o->y, y);
    /* tab_locate_y: the bucket (outside it or not confirmed: the lane's search alone, below) */
    vi g = vtrunc(vmul(y, vset(T->yscale)));
    vi ok = iand(asi(good), iandn(igt(none, g), igt(nbv, g)));
    if (T->ytop != 1.0)
        ok = iand(ok, ieq(g, vtrunc(vmul(vdiv(y, vset(T->ytop)), vset(T->nbd)))));
    ist(il, iand(g, ok));
    vd byl, byh;
    rd2(T->by, il, &byl, &byh);
    vi lo = asi(byl), hi = iadd(asi(byh), one64);
    hi = iblend(hi, iend, igt(hi, iend));
    ok = iand(ok, iandn(igt(isub(hi, lo), iset(4)), igt(hi, lo)));
    /* ys[lo .. lo + 3] read whole (a range within four nodes of the table's end: below) */
    ok = iandn(igt(lo, iset(T->nm4)), ok);
    lo = iand(lo, ok);
    ist(il, lo);
    vd q[4];
    rd4(T->ys, il, 1, q);
    vi i = lo;
    for (int k = 1; k < 4; k++)
        i = isub(i, iand(igt(hi, iadd(lo, iset(k))), asi(vle(q[k], y))));
    i = iblend(i, iset(T->iend - 1), igt(i, iset(T->iend - 1)));
    i = iand(i, ok);
    /* the lanes whose bucket is unconfirmed or whose range is wider than four nodes (near an
     * azeotrope, where y* is flat) or ends near the table's end: tab_locate_y itself */
    unsigned fix = G->live & vbits(good) & ~vbits(asd(ok));
    if (VLE_UNLIKELY(fix)) {
        ist(il, i);
        for (; fix; fix &= fix - 1) {
            int l = __builtin_ctz(fix);
            il[l] = (long long)stages_tab_locate_y(T->v, o->y[l]);
        }
        i = ild(il);
    }
    /* the segment's nine doubles and xs[i], xs[i + 1] */
    ist(il, i);
    vd sg[8], b, xsi, xs1;
    rd4(T->seg, il, 9, sg);
    rd4(T->seg + 4, il, 9, sg + 4);
    for (int k = 0; k < TW; k++) {
        const long long *j = il + 4 * k;
        b.h[k] = _mm256_set_pd(T->seg[9 * j[3] + 8], T->seg[9 * j[2] + 8], T->seg[9 * j[1] + 8],
                               T->seg[9 * j[0] + 8]);
    }
    rd2(T->xs, il, &xsi, &xs1);
    vd x0 = sg[0], h = sg[1], y0 = sg[2], d1 = sg[3], c2 = sg[4], c3 = sg[5], dy = sg[6], a = sg[7];
    vd flat = vngt(dy, zero); /* !(dy > 0): x = x0 */
    /* the inverse's Hermite start, Newton's first step */
    vd t = vdiv(vsub(y, y0), dy), omt = vsub(one, t);
    vd sp = vmul(t, vadd(one, vmul(omt, vadd(vmul(vsub(a, one), omt), vmul(vsub(one, b), t)))));
    vd ab = vand(vand(vgt(a, zero), vgt(b, zero)), vand(vlt(a, three), vlt(b, three)));
    vd s = vblend(t, sp, ab);
    vd f = vsub(vadd(y0, vmul(s, vadd(d1, vmul(s, vadd(c2, vmul(s, c3)))))), y);
    vd dsv = vadd(d1, vmul(s, vadd(vmul(two, c2), vmul(vmul(three, s), c3))));
    vd sn = vsub(s, vdiv(f, dsv));
    vd neg = vlt(f, zero);
    vd in =
        vor(vand(neg, vand(vgt(sn, s), vlt(sn, one))), vandn(neg, vand(vgt(sn, zero), vlt(sn, s))));
    in = vand(in, vle(vandn(vset(-0.0), vsub(sn, s)), vset(VLE_NEWTON_STEP)));
    vd fnz = vne(f, zero);
    s = vblend(s, sn, fnz);
    /* Newton's step outside its bracket or too long: vle_seg_invert itself */
    unsigned nf = G->live & vbits(good) & ~vbits(flat) & vbits(vandn(in, fnz));
    if (VLE_UNLIKELY(nf)) {
        double sl[TL] __attribute__((aligned(32)));
        vst(sl, s);
        for (; nf; nf &= nf - 1) {
            int l = __builtin_ctz(nf);
            sl[l] = vle_seg_invert((const struct vle_seg *)(T->seg + 9 * il[l]), o->y[l]);
        }
        s = vld(sl);
    }
    vd x = vadd(x0, vmul(s, h));
    x = vblend(vblend(x, xs1, vgt(x, xs1)), x0, flat);
    /* vle_locate_x_is(v, x, i), else vle_herm_deriv (scalar) */
    vi bb = vtrunc(vmul(x, vset(T->nbd)));
    vi inb = iand(asi(vge(x, zero)), iandn(igt(none, bb), igt(nbv, bb)));
    ist(il, iand(bb, inb));
    vd bxl, bxh;
    rd2(T->bx, il, &bxl, &bxh);
    vi is = iandn(ior(igt(asi(bxl), i), igt(i, asi(bxh))), inb);
    is = iand(is, asi(vand(vle(xsi, x), vlt(x, xs1))));
    vd sx = vdiv(vsub(x, x0), h);
    vd slope = vdiv(vadd(d1, vmul(sx, vadd(vmul(two, c2), vmul(vmul(three, sx), c3)))), h);
    vst(o->x, x);
    /* x not in the segment vle_locate_x finds: vle_herm_deriv itself */
    unsigned nx = G->live & vbits(good) & ~vbits(asd(is));
    if (VLE_UNLIKELY(nx)) {
        double sl[TL] __attribute__((aligned(32)));
        vst(sl, slope);
        for (; nx; nx &= nx - 1) {
            int l = __builtin_ctz(nx);
            sl[l] = vle_herm_deriv(T->v, o->x[l]);
        }
        slope = vld(sl);
    }
    /* the tangents: y_n = m·x_(n−1) + b, then step_tangent at E = 1 */
    vd den = vadd(vmul(zero, mv), slope);
    for (int k = 0; k < 3; k++) {
        vd mdk = vld(G->md[k]), bdk = vld(G->bd[k]);
        vd yd = vadd(vadd(vmul(mdk, xp), vmul(mv, vld(G->tp[k]))), bdk);
        vst(o->yd[k], yd);
        vst(o->xd[k], vdiv(vsub(yd, vmul(zero, vadd(vmul(x, mdk), bdk))), den));
    }
    vi n = iadd(ild(G->n), one64);
    ist(G->n, n);
    /* the lanes' ends, tab_step's order */
    unsigned live = G->live, mgood = vbits(good);
    unsigned mprog = vbits(vlt(x, xp)), mcross = vbits(vle(x, vld(G->tt)));
    unsigned mcap = vbits(asd(igt(n, iset(T->cap1))));
    o->cross = live & mgood & mprog & mcross;
    o->rest = live & ~o->cross & (~mgood | ~mprog | mcap);
}

/* Lane l of the doubles at f set to *v: the four-lane vector holding it read, blended, written
 * (a double written alone would hold up the next whole read until it reached the cache). */
static inline void tab4_put(double *f, int l, __m256d lm, const double *v)
{
    double *p = f + (l & ~3);
    _mm256_store_pd(p, _mm256_blendv_pd(_mm256_load_pd(p), _mm256_broadcast_sd(v), lm));
}

/* Lane l takes block row i (its start beg[i]). */
static void tab4_load(tab4_group *G, int l, size_t i, const tab_begin *beg)
{
    static const long long lanes[4][4]
        __attribute__((aligned(32))) = {{-1, 0, 0, 0}, {0, -1, 0, 0}, {0, 0, -1, 0}, {0, 0, 0, -1}};
    __m256i lmi = _mm256_load_si256((const __m256i *)lanes[l & 3]);
    __m256d lm = _mm256_castsi256_pd(lmi);
    const tab_begin *r = &beg[i];
    __m256i *pn = (__m256i *)(G->n + (l & ~3));
    G->row[l] = i;
    _mm256_store_si256(pn, _mm256_andnot_si256(lmi, _mm256_load_si256(pn)));
    tab4_put(G->xp, l, lm, &r->txd[0]);
    tab4_put(G->mv, l, lm, &r->m[0]);
    tab4_put(G->bv, l, lm, &r->b[0]);
    tab4_put(G->tt, l, lm, &r->txt[0]);
    for (int k = 0; k < 3; k++) {
        tab4_put(G->tp[k], l, lm, &r->txd[1 + k]);
        tab4_put(G->md[k], l, lm, &r->m[1 + k]);
        tab4_put(G->bd[k], l, lm, &r->b[1 + k]);
    }
    G->live |= 1u << l;
}

/* The next block row that steps, from *next; nb when none is left. */
static size_t tab4_next(size_t *next, size_t nb, const signed char *mark)
{
    while (*next < nb && mark[*next] != TAB_STEPS)
        ++*next;
    return *next < nb ? (*next)++ : nb;
}

/* After tab4_stage: the lanes done leave their rows' ends (a tab_cross appended at cr[*nc], a
 * mark); x_n becomes the others' x_prev; each lane done takes the next row. */
static void tab4_finish(tab4_group *G, const tab4_out *o, const tab_begin *beg, size_t nb,
                        size_t *next, signed char *mark, tab_cross *cr, size_t *nc)
{
    unsigned done = o->cross | o->rest;
    for (unsigned c = o->cross; c; c &= c - 1) {
        int l = __builtin_ctz(c);
        size_t i = G->row[l];
        tab_cross *e = &cr[(*nc)++];
        e->i = i;
        e->n = (size_t)G->n[l];
        memcpy(e->m, beg[i].m, sizeof e->m);
        memcpy(e->b, beg[i].b, sizeof e->b);
        memcpy(e->x_target, beg[i].txt, sizeof e->x_target);
        e->x_prev[0] = G->xp[l];
        e->xn[0] = o->x[l];
        e->yn[0] = o->y[l];
        for (int k = 0; k < 3; k++) {
            e->x_prev[1 + k] = G->tp[k][l];
            e->xn[1 + k] = o->xd[k][l];
            e->yn[1 + k] = o->yd[k][l];
        }
        mark[i] = TAB_CROSSED;
    }
    for (unsigned c = o->rest; c; c &= c - 1)
        mark[G->row[__builtin_ctz(c)]] = TAB_REST;
    vst(G->xp, vld(o->x));
    for (int k = 0; k < 3; k++)
        vst(G->tp[k], vld(o->xd[k]));
    for (unsigned c = done; c; c &= c - 1) {
        int l = __builtin_ctz(c);
        size_t i = tab4_next(next, nb, mark);
        if (i < nb)
            tab4_load(G, l, i, beg);
        else
            G->live &= ~(1u << l);
    }
}

size_t stages_tab_step4(const stagecal_vle *vle, size_t cap, size_t nb, const tab_begin *beg,
                        signed char *mark, tab_cross *cr)
{
    /* the lanes' conversions hold indices below 2^31 */
    if (vle->nb >= ((size_t)1 << 30) || vle->n >= ((size_t)1 << 30) || !(vle->ytop > 0.0))
        return 0;
    tab4_table T;
    T.v = vle;
    T.ys = vle->ys;
    T.xs = vle->xs;
    T.seg = (const double *)vle->seg;
    T.by = (const long long *)vle->by;
    T.bx = (const long long *)vle->bx;
    T.yscale = vle->yscale;
    T.ytop = vle->ytop;
    T.nbd = (double)vle->nb;
    T.nb = (long long)vle->nb;
    T.iend = (long long)vle->iend;
    T.nm4 = (long long)vle->n - 4;
    T.cap1 = (long long)(cap < ((size_t)1 << 62) ? cap : ((size_t)1 << 62)) - 1;

    tab4_group G;
    tab4_out o;
    size_t next = 0, nc = 0;
    memset(&G, 0, sizeof G);
    for (int l = 0; l < TL; l++) {
        size_t i = tab4_next(&next, nb, mark);
        if (i < nb)
            tab4_load(&G, l, i, beg);
    }
    while (G.live) {
        tab4_stage(&T, &G, &o);
        tab4_finish(&G, &o, beg, nb, &next, mark, cr, &nc);
    }
    return nc;
}
#else
size_t stages_tab_step4(const stagecal_vle *vle, size_t cap, size_t nb, const tab_begin *beg,
                        signed char *mark, tab_cross *cr)
{
    (void)vle, (void)cap, (void)nb, (void)beg, (void)mark, (void)cr;
    return 0;
}
#endif

#if defined(TAB4_AVX2) && defined(__clang__)
#pragma clang attribute pop
#elif defined(TAB4_AVX2)
#pragma GCC pop_options
#endif
