/*
 * stages_tab.c — stagecal_stages_invert_many's rows on a Hermite table at E_MV = 1 with tangents
 * (the run-log mode's batch for the table and activity models): in blocks, each block through
 * three phases — start, stepping, crossing — and the rows that leave the plain path through the
 * per-row inversion (stages.c). Each phase takes its rows four to a group of AVX2 lanes where the
 * processor has them: the start in stages_start_avx2.c, the stepping in stages_tab_avx2.c, the
 * crossing in stages_avx2.c (stepper_crossing4); the scalar functions here are the same
 * operations, the path without AVX2 and the tests' reference.
 */
#include "stagecal/stages.h"

#include <math.h>
#include <string.h>

#include "stages_internal.h"
#include "vle_internal.h"
/* after every system header: banned.h redefines libc names */
#include "internal.h"

/* stages_invert_many's rows on a table at E_MV = 1 with tangents (stages_tab_many) go in blocks of
 * TAB_BLOCK rows through three phases, each a loop over the block calling one per-row function
 * or its four-row counterpart:
 *  - start (tab_block_start, stages_start4, tab_row_start): invert_core's start, each row's line
 *    and x_target with their tangents into a tab_begin, or the row done (its final status) or
 *    marked for stages_invert;
 *  - stepping (tab_block_step): the rows that step, in the AVX2 lanes (stages_tab_step4), else
 *    (no AVX2) TAB_LANES side by side in one loop here (tab_step), a lane taking the block's next
 *    row when its row is done; a row that crosses x_target leaves stepper_crossing's arguments in
 *    a tab_cross;
 *  - crossing (tab_block_cross, stepper_crossing4): the crossed rows' fractions, four at a time,
 *    and results (tab_row_result);
 * then the rows marked on the way go through stages_invert (tab_block_rest).
 * Each row's stepping is one chain of dependent operations (y → the table's x*(y) → the next y,
 * ~110 cycles a stage), so one row at a time leaves the core idle; TAB_LANES rows in one loop
 * let it overlap their chains. Two measured best in the scalar loop (bench_invert nrtl: 1 lane
 * 0.040 s, 2 0.038 s, 4 and 8 0.045 s): a mispredicted branch of one row (the table search, the
 * end of its stepping) discards the work done meanwhile on the others. The AVX2 lanes step in
 * lockstep, without those branches (docs/performance.md, fifteenth pass). */
#define TAB_LANES 2
#define TAB_BLOCK 128

/* One row being stepped: invert_core's loop state (tangents carried). */
typedef struct {
    size_t i, n; /* the row in the block, whole steps so far */
    double x_prev;
    tl3 m, b, txt, tprev;
} tab_lane;

/* Starts row j: stages_start1 (when plain) or invert_begin. TAB_STEPS with *o filled when the
 * row steps; TAB_DONE when res[j] is final with return value STAGECAL_OK (invert_core and
 * stages_invert stop there with a status that is not ok); else TAB_REST (stages_invert). */
static int tab_row_start(const stages_start_ctx *c, const double *xd, const double *xb,
                         const double *reflux, const stagecal_stages_params *par, int quiet,
                         stagecal_stages_result *res, size_t j, tab_begin *o, int plain)
{
    int rc;
    if (plain && stages_start1(c, xd[j], xb[j], reflux[j], o, &res[j]))
        return TAB_STEPS;
    if (!stages_table_begin(c->vle, xd[j], xb[j], reflux[j], par, quiet, &res[j], o, &rc))
        return rc == STAGECAL_OK && res[j].status != STAGECAL_STAGES_OK ? TAB_DONE : TAB_REST;
    return TAB_STEPS;
}

/* The start phase: rows j0 .. j0 + nb − 1, row j0 + i's mark into mark[i], its start into
 * beg[i] when it steps; four rows at a time (stages_start4), the rows it leaves one by one. */
static void tab_block_start(const stages_start_ctx *c, size_t j0, size_t nb, const double *xd,
                            const double *xb, const double *reflux,
                            const stagecal_stages_params *par, int quiet,
                            stagecal_stages_result *res, tab_begin *beg, signed char *mark)
{
    size_t i = 0;
    for (; i + 4 <= nb; i += 4) {
        size_t j = j0 + i;
        unsigned on = stages_start4(c, xd + j, xb + j, reflux + j, &beg[i], &res[j]);
        for (size_t k = 0; k < 4; k++)
            mark[i + k] = on >> k & 1u ? TAB_STEPS
                                       : (signed char)tab_row_start(c, xd, xb, reflux, par, quiet,
                                                                    res, j + k, &beg[i + k], 0);
    }
    for (; i < nb; i++)
        mark[i] =
            (signed char)tab_row_start(c, xd, xb, reflux, par, quiet, res, j0 + i, &beg[i], 1);
}

/* vle_locate_y with the bucket's search written without data-dependent branches where the
 * bucket's range holds at most four nodes (with nb = 2n buckets, one or two): on the increasing
 * branch (ys non-decreasing up to iend) vle_bsearch's answer is lo plus the nodes after lo in
 * the range at or below y, counted here; wider ranges and the guess's exceptions as there. */
static inline size_t tab_locate_y(const stagecal_vle *v, double y)
{
    size_t g = (size_t)(y * v->yscale);
    if (VLE_UNLIKELY(g >= v->nb || (v->ytop != 1.0 && g != (size_t)(y / v->ytop * (double)v->nb))))
        return vle_locate_y_exact(v, y);
    size_t lo = v->by[g], hi = v->by[g + 1] + 1;
    hi = hi > v->iend ? v->iend : hi;
    size_t i = lo;
    if (VLE_UNLIKELY(!(hi > lo && hi - lo <= 4))) {
        i = vle_bsearch(v->ys, y, lo, hi);
    } else {
        for (size_t k = 1; k < 4; k++) {
            size_t at = lo + k < hi ? lo + k : lo; /* (a node in the range either way) */
            i += (size_t)((lo + k < hi) & (v->ys[at] <= y));
        }
    }
    return i > v->iend - 1 ? v->iend - 1 : i;
}

/* vle_herm_invert_slope_inline (y in [0, 1], buckets built), the same doubles: the table's
 * x*(y) and y*' there. vle_seg_invert's Newton stops after its first step on almost every
 * query; that step is taken here with its bracket test free of a branch on the sign of the
 * residual (taken either way about half the time), and any other case runs vle_seg_invert
 * itself. */
static inline int tab_xstar_slope(const stagecal_vle *v, double y, double *x, double *slope)
{
    if (y > v->ytop)
        return STAGECAL_EINVAL;
    size_t i = tab_locate_y(v, y);
    const struct vle_seg *c = &v->seg[i];
    const vle_hseg *g = &c->g;
    if (!(c->dy > 0.0)) {
        *x = g->x0;
    } else {
        double t = (y - g->y0) / c->dy, s = t, a = c->a, b = c->b;
        if (a > 0.0 && b > 0.0 && a < 3.0 && b < 3.0)
            s = t * (1.0 + (1.0 - t) * ((a - 1.0) * (1.0 - t) + (1.0 - b) * t));
        double f = vle_hseg_val(g, s) - y;
        if (f != 0.0) {
            double sn = s - f / vle_hseg_ds(g, s);
            int neg = f < 0.0; /* the bracket [s, 1] when below, else [0, s] */
            int in = (neg & (sn > s) & (sn < 1.0)) | (!neg & (sn > 0.0) & (sn < s));
            if (VLE_UNLIKELY(!(in && fabs(sn - s) <= VLE_NEWTON_STEP)))
                sn = vle_seg_invert(c, y);
            s = sn;
        }
        *x = g->x0 + s * g->h;
        if (*x > v->xs[i + 1])
            *x = v->xs[i + 1];
    }
    *slope = vle_locate_x_is(v, *x, i) ? vle_hseg_ds(g, (*x - g->x0) / g->h) / g->h
                                       : vle_herm_deriv(v, *x);
    return STAGECAL_OK;
}

size_t stages_tab_locate_y(const stagecal_vle *v, double y)
{
    return tab_locate_y(v, y);
}

int stages_table_xstar_slope(const stagecal_vle *v, double y, double *x, double *slope)
{
    return tab_xstar_slope(v, y, x, slope);
}

/* One step of lane L: invert_core's loop body with tl on a table at E = 1 (stepper_step's
 * inline x*(y) with its slope, step_tangent with that slope), the same operations in the same
 * order. 0: more steps; 1: the row crossed x_target, *c filled with stepper_crossing's arguments
 * and the whole steps; -1: anything else (a query outside the table, no progress, the step cap
 * or the pinch scan due): the row goes through stages_invert. */
static inline int tab_step(const stagecal_vle *vle, const stagecal_stages_params *par, tab_lane *L,
                           tab_cross *c)
{
    double x_prev = L->x_prev, y = L->m.v * x_prev + L->b.v, xn, s;
    L->n++;
    if (!(y >= 0.0 && y <= 1.0) || tab_xstar_slope(vle, y, &xn, &s) != STAGECAL_OK ||
        !(xn < x_prev))
        return -1;
    tl3 m = L->m, b = L->b;
    tl3 tyn = tl_add(tl_mul(m, L->tprev), b); /* y_n = m·x_(n−1) + b */
    double e = 1.0, den = (1.0 - e) * m.v + e * s;
    tl3 txn;
    txn.v = xn;
    for (int i = 0; i < TL_N; i++)
        txn.d[i] = (tyn.d[i] - (1.0 - e) * (xn * m.d[i] + b.d[i])) / den;
    if (xn <= L->txt.v) {
        c->i = L->i;
        c->n = L->n;
        tl_put(c->m, m);
        tl_put(c->b, b);
        tl_put(c->x_prev, L->tprev);
        tl_put(c->xn, txn);
        tl_put(c->yn, tyn);
        tl_put(c->x_target, L->txt);
        return 1;
    }
    if (L->n >= par->max_stages || L->n >= par->pinch_scan_after)
        return -1;
    L->x_prev = xn;
    L->tprev = txn;
    return 0;
}

/* The stepping phase: the block's rows marked TAB_STEPS, in the AVX2 lanes where the processor
 * has them (stages_tab_step4, stages_tab_avx2.c), else (or those it leaves) TAB_LANES at a time
 * here, each lane taking the next such row when its row is done; a row that crosses is marked
 * TAB_CROSSED with its tab_cross appended to cr (*ncr of them), one that leaves the plain path
 * TAB_REST. */
static void tab_block_step(const stagecal_vle *vle, const stagecal_stages_params *par, int avx2,
                           size_t nb, const tab_begin *beg, signed char *mark, tab_cross *cr,
                           size_t *ncr)
{
    tab_lane L[TAB_LANES];
    int busy[TAB_LANES] = {0}, live = 0;
    size_t next = 0, nc = 0;
    if (avx2) {
        size_t cap =
            par->max_stages < par->pinch_scan_after ? par->max_stages : par->pinch_scan_after;
        nc = stages_tab_step4(vle, cap, nb, beg, mark, cr);
    }
    for (;;) {
        for (int k = 0; k < TAB_LANES; k++) {
            while (!busy[k] && next < nb) { /* the lane takes the next row that steps */
                size_t i = next++;
                if (mark[i] != TAB_STEPS)
                    continue;
                L[k].i = i;
                L[k].n = 0;
                L[k].x_prev = beg[i].txd[0];
                L[k].m = tl_get(beg[i].m);
                L[k].b = tl_get(beg[i].b);
                L[k].txt = tl_get(beg[i].txt);
                L[k].tprev = tl_get(beg[i].txd);
                busy[k] = 1;
                live++;
            }
        }
        if (!live)
            break;
        for (int k = 0; k < TAB_LANES; k++) {
            if (!busy[k])
                continue;
            int st = tab_step(vle, par, &L[k], &cr[nc]);
            if (!st)
                continue;
            if (st > 0) {
                mark[L[k].i] = TAB_CROSSED;
                nc++;
            } else {
                mark[L[k].i] = TAB_REST;
            }
            busy[k] = 0;
            live--;
        }
    }
    *ncr = nc;
}

/* A crossed row's result from its fraction f (stepper_crossing's value, ∂/∂xD, ∂/∂xB, ∂/∂R), as
 * invert_core and stages_invert fill res (rows j0 + c->i of the block starting at res). 1; -1
 * when a derivative is not finite (the row goes through stages_invert). */
static int tab_row_result(const tab_cross *c, const double f[4], stagecal_stages_result *res)
{
    if (!(isfinite(f[1 + TL_XD]) && isfinite(f[1 + TL_XB]) && isfinite(f[1 + TL_R])))
        return -1;
    res->column_stages = (double)(c->n - 1) + f[0];
    res->stages = res->column_stages + 1.0;
    res->dstages_dxd = f[1 + TL_XD];
    res->dstages_dxb = f[1 + TL_XB];
    res->dstages_dr = f[1 + TL_R];
    return 1;
}

/* The crossing phase: the ncr crossed rows of cr, res the block's first row's result. The
 * fractions four rows at a time (stepper_crossing4: the AVX2 lanes where avx2, the caller's
 * stages_have_avx2()), the last ncr mod 4 one at a time (stepper_crossing); the same doubles. */
static void tab_block_cross(const tab_cross *cr, size_t ncr, stagecal_stages_result *res,
                            signed char *mark, int avx2)
{
    double f[4][4];
    size_t k = 0;
    for (; k + 4 <= ncr; k += 4) {
        stepper_crossing4(cr + k, f, avx2);
        for (size_t j = k; j < k + 4; j++)
            if (tab_row_result(&cr[j], f[j - k], &res[cr[j].i]) < 0)
                mark[cr[j].i] = TAB_REST;
    }
    for (; k < ncr; k++) {
        const tab_cross *c = &cr[k];
        tl_put(f[0], stepper_crossing(tl_get(c->m), tl_get(c->b), tl_get(c->x_prev), tl_get(c->xn),
                                      tl_get(c->yn), tl_get(c->x_target)));
        if (tab_row_result(c, f[0], &res[c->i]) < 0)
            mark[c->i] = TAB_REST;
    }
}

/* The block's rows marked TAB_REST through stages_invert; each row's return value into rc (may
 * be NULL); the first error of all the rows so far into *first (*err then its message). */
static void tab_block_rest(const stagecal_vle *vle, size_t j0, size_t nb, const double *xd,
                           const double *xb, const double *reflux,
                           const stagecal_stages_params *par, int quiet, const signed char *mark,
                           stagecal_stages_result *res, int *rc, stagecal_error *err, int *first)
{
    stagecal_error e1;
    for (size_t i = 0; i < nb; i++) {
        size_t j = j0 + i;
        int r = STAGECAL_OK;
        if (mark[i] == TAB_REST &&
            (r = quiet ? stages_invert_quiet(vle, xd[j], xb[j], reflux[j], 1.0, par, &res[j],
                                             err ? &e1 : NULL)
                       : stagecal_stages_invert(vle, xd[j], xb[j], reflux[j], 1.0, par, &res[j],
                                                err ? &e1 : NULL)) &&
            !*first) {
            *first = r;
            if (err)
                *err = e1;
        }
        if (rc)
            rc[j] = r;
    }
}

/* stages_invert_many's rows on a table (stages.c, tab_applies), block by block through the three
 * phases above; a row that leaves the plain path goes through stages_invert, so every row's res, rc
 * and error are what stages_invert gives it. Returns the first row's error (err then holds its
 * message), else STAGECAL_OK. */
int stages_tab_many(const stagecal_vle *vle, size_t n, const double *xd, const double *xb,
                    const double *reflux, const stagecal_stages_params *par, int quiet,
                    stagecal_stages_result *res, int *rc, stagecal_error *err)
{
    tab_begin beg[TAB_BLOCK];
    tab_cross cr[TAB_BLOCK];
    signed char mark[TAB_BLOCK];
    int first = STAGECAL_OK, avx2 = stages_have_avx2();
    stages_start_ctx c;
    stages_start_prep(vle, par, &c);
    for (size_t j0 = 0; j0 < n; j0 += TAB_BLOCK) {
        size_t nb = n - j0 < TAB_BLOCK ? n - j0 : TAB_BLOCK, ncr;
        tab_block_start(&c, j0, nb, xd, xb, reflux, par, quiet, res, beg, mark);
        tab_block_step(vle, par, avx2, nb, beg, mark, cr, &ncr);
        tab_block_cross(cr, ncr, res + j0, mark, avx2);
        tab_block_rest(vle, j0, nb, xd, xb, reflux, par, quiet, mark, res, rc, err, &first);
    }
    return first;
}
