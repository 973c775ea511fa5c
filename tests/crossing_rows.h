/*
 * crossing_rows.h — the arguments of the crossing step (stepper_crossing, stages_step.c) that
 * a row's inversion produces: the line (m, b) and x_target with their tangents as the
 * inversion seeds them, then whole steps down the equilibrium curve (x*(y) and y*' of the
 * model's public queries, the tangent of each step as stages.c carries it at E_MV = 1) until
 * the liquid reaches x_target. For tests/test_stages_cross.c and tests/bench_crossing.c: the
 * crossing of real rows (the demo logs, the NRTL benchmark's rows) without the library's own
 * stepping loop. Include after stages_internal.h.
 */
#ifndef STAGECAL_TESTS_CROSSING_ROWS_H
#define STAGECAL_TESTS_CROSSING_ROWS_H

typedef struct {
    tl3 m, b, x_prev, xn, yn, x_target;
} crossing_args;

/* The crossing of the row (xd, xb, r) on vle (0 < xB < xD < 1, 0 < R < ∞): 1 with *a filled
 * when the row steps to x_target within 200 steps with every query answered, else 0. */
static int crossing_of_row(const stagecal_vle *v, double xd, double xb, double r, crossing_args *a)
{
    if (!(xb > 0.0 && xb < xd && xd < 1.0 && r > 0.0 && r < HUGE_VAL))
        return 0;
    double q = 1.0 / (r + 1.0), yb, sb;
    tl3 m = tl_seed(r / (r + 1.0), TL_R, q * q);
    tl3 b = tl_add(tl_seed(xd / (r + 1.0), TL_XD, q), tl_seed(0.0, TL_R, -xd * q * q));
    if (stagecal_vle_ystar(v, xb, &yb) || stagecal_vle_dydx(v, xb, &sb))
        return 0;
    tl3 txt = tl_div(tl_sub(tl_seed(yb, TL_XB, sb), b), m);
    tl3 tprev = tl_seed(xd, TL_XD, 1.0);
    for (int n = 0; n < 200; n++) {
        double y = m.v * tprev.v + b.v, xn, s;
        if (!(y >= 0.0 && y <= 1.0) || stagecal_vle_xstar(v, y, &xn) ||
            stagecal_vle_dydx(v, xn, &s) || !(xn < tprev.v))
            return 0;
        tl3 tyn = tl_add(tl_mul(m, tprev), b), txn = tl_const(xn);
        for (int i = 0; i < TL_N; i++)
            txn.d[i] = tyn.d[i] / s;
        if (xn <= txt.v) {
            a->m = m, a->b = b, a->x_prev = tprev, a->xn = txn, a->yn = tyn, a->x_target = txt;
            return 1;
        }
        tprev = txn;
    }
    return 0;
}

static void crossing_tl_put(double *o, tl3 x)
{
    o[0] = x.v;
    for (int i = 0; i < TL_N; i++)
        o[1 + i] = x.d[i];
}

/* The plain-double record (stages_internal.h, tab_cross) of a's arguments. */
static void crossing_put(tab_cross *c, const crossing_args *a)
{
    crossing_tl_put(c->m, a->m);
    crossing_tl_put(c->b, a->b);
    crossing_tl_put(c->x_prev, a->x_prev);
    crossing_tl_put(c->xn, a->xn);
    crossing_tl_put(c->yn, a->yn);
    crossing_tl_put(c->x_target, a->x_target);
}

#endif
