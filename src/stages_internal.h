/*
 * stages_internal.h — what the stages*.c files share; not installed.
 *
 * stages.c: the inversion (stepping or, for constant α at E_MV = 1, Smoker's closed
 * form) with its sensitivities, and the minimum reflux ratio; stages_smoker.c: Smoker's
 * equation on a straight operating line, Fenske; stages_step.c: the stepper and forward
 * stepping.
 *
 * Sensitivities are carried forward (tangent-linear, forward-mode differentiation): a
 * `tl3` is a value with its derivatives with respect to (xD, xB, R). Each operation
 * computes the value exactly as the plain double expression would (same operations in
 * the same order; the build turns off FP contraction), so a result taken from `.v` is
 * bit-identical to the plain computation.
 */
#ifndef STAGECAL_STAGES_INTERNAL_H
#define STAGECAL_STAGES_INTERNAL_H

#include <gsl/gsl_roots.h>
#include <math.h>

#include "stagecal/stages.h"

/* ---- tangent-linear arithmetic ------------------------------------------------------- */

enum { TL_XD = 0, TL_XB, TL_R, TL_N };

#if defined(TL_VECTOR)
/* TL_VECTOR (stages_avx2.c): the derivatives as one GCC/Clang vector of four doubles (the
 * fourth lane spare), each lane the same IEEE operation as the scalar expression below, so
 * the same double; a core with 256-bit vectors does the three in one instruction. */
typedef double tl_v4 __attribute__((vector_size(32)));

typedef struct {
    double v; /* value */
    tl_v4 d;  /* ∂v/∂xD, ∂v/∂xB, ∂v/∂R, spare */
} tl3;

static inline tl3 tl_const(double v)
{
    tl3 r = {v, {0.0, 0.0, 0.0, 0.0}};
    return r;
}

static inline tl3 tl_add(tl3 a, tl3 b)
{
    tl3 r = {a.v + b.v, a.d + b.d};
    return r;
}

static inline tl3 tl_sub(tl3 a, tl3 b)
{
    tl3 r = {a.v - b.v, a.d - b.d};
    return r;
}

static inline tl3 tl_mul(tl3 a, tl3 b)
{
    tl3 r = {a.v * b.v, a.d * b.v + a.v * b.d};
    return r;
}

static inline tl3 tl_div(tl3 a, tl3 b)
{
    tl3 r;
    r.v = a.v / b.v;
    r.d = (a.d - r.v * b.d) / b.v;
    return r;
}

static inline tl3 tl_scale(double s, tl3 a)
{
    tl3 r = {s * a.v, s * a.d};
    return r;
}

static inline tl3 tl_log(tl3 a)
{
    tl3 r = {log(a.v), a.d / a.v};
    return r;
}

static inline tl3 tl_sqrt(tl3 a)
{
    tl3 r;
    r.v = sqrt(a.v);
    r.d = a.d / (2.0 * r.v);
    return r;
}

/* A seed: value v and derivative s in one lane (i), +0 in the others, as s·e_i (a finite s
 * gives those lanes +0 or −0, and −0 + x is x; the seeds below are finite): whole-vector
 * arithmetic, no lane inserts (an insert's VEX vmovq is an instruction valgrind 3.19 cannot
 * decode). */
static inline tl3 tl_seed(double v, int i, double s)
{
    static const tl_v4 e[TL_N] = {{1.0, 0.0, 0.0, 0.0}, {0.0, 1.0, 0.0, 0.0}, {0.0, 0.0, 1.0, 0.0}};
    tl3 r = {v, s * e[i]};
    return r;
}

#else
typedef struct {
    double v;       /* value */
    double d[TL_N]; /* ∂v/∂xD, ∂v/∂xB, ∂v/∂R */
} tl3;

static inline tl3 tl_const(double v)
{
    tl3 r = {v, {0.0, 0.0, 0.0}};
    return r;
}

static inline tl3 tl_add(tl3 a, tl3 b)
{
    tl3 r = {a.v + b.v, {a.d[0] + b.d[0], a.d[1] + b.d[1], a.d[2] + b.d[2]}};
    return r;
}

static inline tl3 tl_sub(tl3 a, tl3 b)
{
    tl3 r = {a.v - b.v, {a.d[0] - b.d[0], a.d[1] - b.d[1], a.d[2] - b.d[2]}};
    return r;
}

static inline tl3 tl_mul(tl3 a, tl3 b)
{
    tl3 r = {a.v * b.v, {0.0, 0.0, 0.0}};
    for (int i = 0; i < TL_N; i++)
        r.d[i] = a.d[i] * b.v + a.v * b.d[i];
    return r;
}

static inline tl3 tl_div(tl3 a, tl3 b)
{
    tl3 r = {a.v / b.v, {0.0, 0.0, 0.0}};
    for (int i = 0; i < TL_N; i++)
        r.d[i] = (a.d[i] - r.v * b.d[i]) / b.v;
    return r;
}

/* s·a for a constant s (the value is s * a.v). */
static inline tl3 tl_scale(double s, tl3 a)
{
    tl3 r = {s * a.v, {s * a.d[0], s * a.d[1], s * a.d[2]}};
    return r;
}

static inline tl3 tl_log(tl3 a)
{
    tl3 r = {log(a.v), {a.d[0] / a.v, a.d[1] / a.v, a.d[2] / a.v}};
    return r;
}

static inline tl3 tl_sqrt(tl3 a)
{
    tl3 r = {sqrt(a.v), {0.0, 0.0, 0.0}};
    for (int i = 0; i < TL_N; i++)
        r.d[i] = a.d[i] / (2.0 * r.v);
    return r;
}

/* A seed: value v and derivative s in lane i, 0 in the others. */
static inline tl3 tl_seed(double v, int i, double s)
{
    tl3 r = tl_const(v);
    r.d[i] = s;
    return r;
}

#endif /* TL_VECTOR */

/* ---- stages_smoker.c ------------------------------------------------------------------ */

/* Constants of Smoker's equation for equilibrium αx/(1+(α−1)x) and line y = m x + b. */
typedef struct {
    tl3 k;    /* pinch root in [0, 1) */
    tl3 beta; /* fixed point of the linear recursion in u = 1/(x − k) */
    tl3 lna;  /* ln(α/(m c²)) > 0: ln of the per-stage factor */
} smoker_consts;

/* Returns 0 when the constants are usable (α > 1, 0 < m ≤ 1, b ≥ 0, ln factor > 0).
 * smoker_count: stage count from top liquid x0 down to xn (both > k); NaN when outside the
 * domain. smoker_count_top: as smoker_count from the top x0 = xD of a line y = m·x + b
 * through (xD, xD), accurate also for xD near 1. Inline (here rather than in
 * stages_smoker.c) so that the inversion's hot path keeps the tangents in registers. */
static inline int smoker_setup(tl3 alpha, tl3 m, tl3 b, smoker_consts *sc)
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

/* smoker_setup's values alone (its .v members; the derivative members 0), for callers that
 * need no derivatives: the same operations in the same order, so the same doubles. */
static inline int smoker_setup_v(double alpha, double m, double b, smoker_consts *sc)
{
    double am1 = alpha - 1.0;
    double a2 = m * am1;
    double a1 = (m + b * am1) - alpha;
    double disc = a1 * a1 - (4.0 * a2) * b;
    if (!(alpha > 1.0) || !(m > 0.0) || !(disc >= 0.0))
        return -1;
    double k = (2.0 * b) / (-1.0 * a1 + sqrt(disc));
    double c = 1.0 + am1 * k;
    double mcc = (m * c) * c;
    double den = alpha - mcc;
    if (!(den > 0.0))
        return -1;
    sc->k = tl_const(k);
    sc->beta = tl_const(((m * c) * am1) / den);
    sc->lna = tl_const(log(alpha / mcc));
    if (!(sc->lna.v > 0.0) || !isfinite(sc->lna.v) || !isfinite(sc->beta.v))
        return -1;
    return 0;
}

static inline tl3 smoker_count(const smoker_consts *sc, tl3 x0, tl3 xn)
{
    tl3 one = tl_const(1.0);
    tl3 u0 = tl_div(one, tl_sub(x0, sc->k)), un = tl_div(one, tl_sub(xn, sc->k));
    return tl_div(tl_log(tl_div(tl_sub(un, sc->beta), tl_sub(u0, sc->beta))), sc->lna);
}

static inline tl3 smoker_count_top(const smoker_consts *sc, tl3 m, tl3 xd, tl3 xn)
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

/* The closed form is used while x_target lies more than this above the pinch root
 * [mol/mol]: closer, stepping's own rounding (its steps shrink towards the root) decides
 * whether the pinch is reached, and stepping is kept. */
#define CLOSED_MARGIN 1e-9

/* What the fast path of the inversion computes (stages.c, alpha_closed_fast). */
typedef struct {
    double count, d[3]; /* column stages and ∂/∂(xD, xB, R) */
    double lv, x_target;
} alpha_closed_out;

/* The fast path's numbers for constant α at E_MV = 1 and a finite R > 0 with 0 < xB < xD <
 * 1: the line and its tangents, x_target, the pinch check at x_target, Smoker's count with its
 * tangents, and the closed form's conditions (see stages.c, closed_form); cap = min(pinch
 * scan, max stages). 1 with *o filled when they hold. The same expressions whichever tl3
 * (stages.c scalar, stages_avx2.c vector): the same doubles. */
static inline int alpha_closed_eval(double a, double xd, double xb, double reflux, double cap,
                                    alpha_closed_out *o)
{
    /* the seeds: m = R/(R + 1), b = xD/(R + 1) and y*(xB) with their derivatives (each finite
     * here: R > 0 finite, 0 < xB < 1), as invert_core sets them */
    double q = 1.0 / (reflux + 1.0);
    tl3 m = tl_seed(reflux / (reflux + 1.0), TL_R, q * q);
    tl3 b = tl_add(tl_seed(xd / (reflux + 1.0), TL_XD, q), tl_seed(0.0, TL_R, -xd * q * q));
    tl3 txd = tl_seed(xd, TL_XD, 1.0);
    double dp = 1.0 + (a - 1.0) * xb; /* y*(xB) and its slope as alpha_query has them */
    tl3 typot = tl_seed(a * xb / dp, TL_XB, a / (dp * dp));
    tl3 txt = tl_div(tl_sub(typot, b), m);
    double xt = txt.v;
    if (!(xt > 0.0) || !(xt < xd) || !(a * xt / (1.0 + (a - 1.0) * xt) > m.v * xt + b.v))
        return 0;
    smoker_consts sc;
    if (smoker_setup(tl_const(a), m, b, &sc) != 0 || !(txt.v - sc.k.v > CLOSED_MARGIN))
        return 0;
    tl3 c = smoker_count_top(&sc, m, txd, txt);
    if (!(isfinite(c.v) && c.v >= 0.0 && c.v < cap))
        return 0;
    o->count = c.v;
    o->d[0] = c.d[TL_XD];
    o->d[1] = c.d[TL_XB];
    o->d[2] = c.d[TL_R];
    o->lv = m.v;
    o->x_target = xt;
    return 1;
}

/* alpha_closed_eval with the vector tl3, compiled for AVX2 (stages_avx2.c); call only where
 * stages_have_avx2() (0 when this build has no such path). */
int stages_alpha_closed_avx2(double a, double xd, double xb, double reflux, double cap,
                             alpha_closed_out *o);
int stages_have_avx2(void);
/* Four rows through the fast path at once (stages_avx2.c): row j is (xd[j], xb[j], reflux[j])
 * at α = a, with stages.c's fast-path input checks and, for want = 1, finite derivatives; bit
 * j of the result set when row j's o[j] is what alpha_closed_eval gives it (the same doubles),
 * 0 when row j needs the per-row path. Call only where stages_have_avx2(). */
unsigned stages_alpha_closed4_avx2(double a, const double *xd, const double *xb,
                                   const double *reflux, double cap, int want,
                                   alpha_closed_out o[4]);

/* ---- table rows in blocks (stages_tab.c, stages_tab_many)
 * ----------------------------------------- */

/* Between the phases of stages_invert_many's table rows, tangents travel as plain doubles, four
 * for a tl3: the value, then ∂/∂xD, ∂/∂xB, ∂/∂R (tl3 has another layout under TL_VECTOR). */

/* A row's start (tab_row_start, invert_begin at E = 1 with tangents): the line m = L/V, b, xD
 * and x_target. */
typedef struct {
    double m[4], b[4], txd[4], txt[4];
} tab_begin;

/* A row's mark in a block: done (res final, return value STAGECAL_OK), stepping, crossed (its
 * tab_cross filled), or to go through stages_invert. */
enum { TAB_DONE = 0, TAB_STEPS = 1, TAB_CROSSED = 2, TAB_REST = -1 };

/* A row that crossed x_target: its row in the block, whole steps n (the crossing one included)
 * and stepper_crossing's arguments; the row's column stages are n − 1 + the fraction. */
typedef struct {
    size_t i, n;
    double m[4], b[4], x_prev[4], xn[4], yn[4], x_target[4];
} tab_cross;

/* stepper_crossing of the four crossed rows c[0..3] (their arguments, plain doubles): f[j] its
 * value, ∂/∂xD, ∂/∂xB, ∂/∂R for c[j], the same doubles. With avx2 set (the caller's
 * stages_have_avx2(), checked once) the four rows in the AVX2 lanes (stages_crossing4_avx2),
 * else four stepper_crossing calls (stages_step.c). */
void stepper_crossing4(const tab_cross c[4], double f[4][4], int avx2);
/* The four-lane crossing (stages_avx2.c); call only where stages_have_avx2(). */
void stages_crossing4_avx2(const tab_cross c[4], double f[4][4]);

/* ---- stages_start_avx2.c: the start of table rows ------------------------------------- */

/* What the start of a batch's table rows needs of the model and the parameters, prepared once
 * (stages_start_prep) for a model stagecal_stages_invert_many steps side by side (a Hermite
 * table with its buckets, at E_MV = 1, with tangents). */
typedef struct {
    const stagecal_vle *vle;
    double x_max, az_lo, top_tol; /* stagecal_vle_x_max, the least azeotrope (or ∞), top_tol */
    long long nb, n2;             /* the table's buckets and nodes − 2 */
    int avx2;                     /* the four-lane path is taken */
} stages_start_ctx;

void stages_start_prep(const stagecal_vle *vle, const stagecal_stages_params *par,
                       stages_start_ctx *c);
/* One row: 1 when the row is plain and steps, with *o filled (invert_begin's doubles) and *res
 * as invert_begin leaves it (all zero but status ok, lv = m[0], x_target = txt[0]); 0 (*o and
 * *res untouched) when the row needs invert_begin (it may still step: R = ∞). */
int stages_start1(const stages_start_ctx *c, double xd, double xb, double reflux, tab_begin *o,
                  stagecal_stages_result *res);
/* Four rows (xd[j], xb[j], reflux[j]), j = 0..3, in the AVX2 lanes (four stages_start1 where
 * there is no AVX2): bit j set when row j steps, o[j] and res[j] then as stages_start1 fills
 * them; clear when row j needs invert_begin (o[j] then unspecified, res[j] untouched). Besides
 * stages_start1's rows, a lane also leaves for a table query on an uncommon branch (x at a node, a
 * bucket past the last, a search range of more than four nodes). */
unsigned stages_start4(const stages_start_ctx *c, const double *xd, const double *xb,
                       const double *reflux, tab_begin o[4], stagecal_stages_result res[4]);
/* invert_begin on a table at E = 1 with tangents (stages.c), for the rows stages_start1/4 leave
 * and as the tests' reference: 1 when the row steps, *o then filled; else 0 with res and *rc as
 * invert_begin leaves them. */
int stages_table_begin(const stagecal_vle *vle, double xd, double xb, double reflux,
                       const stagecal_stages_params *par, int quiet, stagecal_stages_result *res,
                       tab_begin *o, int *rc);

/* The interval of the table's first increasing branch holding y (y in [0, y_top]; buckets
 * built) as stages_tab.c's stepping locates it (tab_locate_y: vle_locate_y's answer). */
size_t stages_tab_locate_y(const stagecal_vle *v, double y);

/* The stepping phase four rows to a group of AVX2 lanes (stages_tab_avx2.c; call only where
 * stages_have_avx2()): the nb block rows marked TAB_STEPS, each row's start in beg, stepped as
 * stages_tab.c's tab_step steps them with the step cap min(max_stages, pinch_scan_after); a row
 * that crosses is marked TAB_CROSSED with its tab_cross appended to cr, one that tab_step would
 * give −1 TAB_REST. Returns the number of tab_cross written. A table it cannot take (2^30 buckets
 * or nodes) it leaves whole (0, the marks untouched), and so does a build without the path. */
size_t stages_tab_step4(const stagecal_vle *vle, size_t cap, size_t nb, const tab_begin *beg,
                        signed char *mark, tab_cross *cr);

#ifndef TL_VECTOR
/* Closed-form inverse: the liquid after n (real) stages from x0. */
double smoker_inverse(const smoker_consts *sc, double x0, double n);

/* A tl3 as four plain doubles (value, ∂/∂xD, ∂/∂xB, ∂/∂R) and back. */
static inline void tl_put(double *o, tl3 a)
{
    o[0] = a.v;
    for (int i = 0; i < TL_N; i++)
        o[1 + i] = a.d[i];
}

static inline tl3 tl_get(const double *o)
{
    tl3 r = {o[0], {o[1], o[2], o[3]}};
    return r;
}

/* stages_invert_many's rows on a table (stages_tab.c; stages.c's tab_applies holds): every row's
 * res, rc (may be NULL) and error what stages_invert gives it (quiet: stages_invert_quiet, else
 * stagecal_stages_invert). Returns the first row's error (err then its message), else
 * STAGECAL_OK. */
int stages_tab_many(const stagecal_vle *vle, size_t n, const double *xd, const double *xb,
                    const double *reflux, const stagecal_stages_params *par, int quiet,
                    stagecal_stages_result *res, int *rc, stagecal_error *err);

/* ---- stages_step.c -------------------------------------------------------------------- */

typedef struct {
    const stagecal_vle *vle;
    const stagecal_stages_params *par;
    double xd, m, b, e;  /* top composition, L/V, (1 − L/V)·xD, E_MV */
    double y;            /* vapour of the step being solved (pseudo-equilibrium target) */
    int vle_rc;          /* first vle failure inside the GSL callback */
    gsl_root_fsolver *s; /* Brent solver when E < 1, else NULL */
    stagecal_error *err;
    int table;      /* queries go to the Hermite table (vle_on_table) */
    int want_slope; /* keep y*'(x) of each x*(y) at E = 1 for the tangents (set by the caller) */
    int slope_ok;   /* slope is y*'(slope_x), the last x*(y) */
    double slope_x, slope;
} stepper;

static inline double op_line(const stepper *st, double x)
{
    return st->m * x + st->b;
}

int stepper_init(stepper *st, const stagecal_vle *vle, const stagecal_stages_params *par, double xd,
                 double reflux, double e, stagecal_error *err);
void stepper_free(stepper *st);
/* y*(x) and x*(y); a failure becomes EINTERNAL/ENOCONV with a message in st->err. */
int stepper_ystar(stepper *st, double x, double *y);
int stepper_xstar(stepper *st, double y, double *x);
/* y*'(x), the stagecal_vle_dydx double (kept from the last x*(y) when it was at x). */
int stepper_dydx(stepper *st, double x, double *dydx);
/* y*(x) and y*'(x) as stepper_ystar and stagecal_vle_dydx give them, the table located once;
 * 0 (nothing filled) when the model is not a table or x is outside it: ask separately. */
int stepper_ystar_slope(stepper *st, double x, double *y, double *dydx);
/* Vapour on the (pseudo-)equilibrium curve at liquid x. */
int stepper_pseudo_y(stepper *st, double x, double *y);
/* One step from x_prev: fills *x, *y. Returns STAGECAL_OK; *pinch = 1 when no progress. */
int stepper_step(stepper *st, double x_prev, double *x, double *y, int *pinch);
/* Is the operating line at or above the equilibrium curve somewhere on [lo, hi]? */
int stepper_scan_pinch(stepper *st, double lo, double hi, size_t npts, int *found);
/* Smoker's fraction of the crossing step: from x_prev to x_target with α_loc of (xn, yn),
 * on the line (m, b); in [0, 1]. */
tl3 stepper_crossing(tl3 m, tl3 b, tl3 x_prev, tl3 xn, tl3 yn, tl3 x_target);
/* First azeotrope at or below xd, or −1 when none. */
double stages_azeotrope_below(const stagecal_vle *vle, double xd);
/* The table's x*(y) and y*' there as the side-by-side stepping of stages_tab.c computes them (y in
 * [0, 1]; a table with buckets): vle_herm_invert_slope_inline's doubles (tests compare them). */
int stages_table_xstar_slope(const stagecal_vle *v, double y, double *x, double *slope);

#endif /* !TL_VECTOR */

#endif
