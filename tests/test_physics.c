/*
 * test_physics.c — logged pressure, pot pressure drop and subcooled reflux
 * (src/physics.c), each against a computation written here from first principles:
 * the internal-reflux relation by hand, a top stage's energy balance stepped with
 * explicit flows, bubble points by bisection on Raoult's law with the Antoine sets.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_errno.h>

#include "stagecal/column.h"
#include "stagecal/physics.h"
#include "stagecal/runlog.h"
#include "stagecal/softsensor.h"
#include "stagecal/stages.h"
#include "testutil.h"

/* Benzene–toluene, Raoult's law, Antoine sets of the NIST Chemistry WebBook (after
 * Williamham, Taylor, Pignocco & Rossini 1945), as in datasets/columns. */
#define BT_COLUMN(extra_root, extra_sys)                                                           \
    "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"t\",\"condenser\":\"total\","          \
    "\"pressure_pa\":101325," extra_root "\"system\":{\"light\":{\"name\":\"benzene\","            \
    "\"antoine\":{\"a\":4.01814,\"b\":1203.835,\"c\":-53.226}},"                                   \
    "\"heavy\":{\"name\":\"toluene\",\"antoine\":{\"a\":4.07827,\"b\":1343.943,"                   \
    "\"c\":-53.773}}," extra_sys "\"model\":{\"kind\":\"ideal\"}}}"

static double psat_pa(double a, double b, double c, double t)
{
    return 1e5 * pow(10.0, a - b / (t + c));
}

/* Bubble point [K] of benzene–toluene at x, p by bisection (independent of vle.c). */
static double bt_tbubble(double x, double p)
{
    double lo = 300, hi = 420;
    for (int i = 0; i < 200; i++) {
        double t = 0.5 * (lo + hi);
        double f = x * psat_pa(4.01814, 1203.835, -53.226, t) +
                   (1 - x) * psat_pa(4.07827, 1343.943, -53.773, t) - p;
        if (f > 0)
            hi = t;
        else
            lo = t;
    }
    return 0.5 * (lo + hi);
}

static stagecal_column load(const char *json)
{
    stagecal_column col;
    stagecal_error e;
    int rc = stagecal_column_parse(json, strlen(json), "t.json", &col, &e);
    if (rc)
        print_error("%s\n", e.text);
    assert_int_equal(rc, 0);
    return col;
}

/* Hand-computed case (common practice in the McCabe–Thiele chapters; Wankat, P. C. (2012),
 * Separation Process Engineering, 3rd ed., Prentice Hall, ch. 4, from memory): R = 3,
 * cp = 145 J/(mol K), 20 K subcooling, λ = 32 000 J/mol: 145·20/32000 = 0.090625, so
 * R_int = 3·1.090625 = 3.271875 exactly. */
static void physics_internal_reflux_hand_case(void **state)
{
    (void)state;
    double r;
    assert_int_equal(stagecal_internal_reflux(3.0, 145.0, 20.0, 32000.0, &r, NULL), 0);
    assert_rel(r, 3.271875, 1e-15, "R_int hand case");
    assert_int_equal(stagecal_internal_reflux(3.0, 145.0, -1.0, 32000.0, &r, NULL), 0);
    assert_rel(r, 3.0, 0, "no subcooling");
    assert_int_equal(stagecal_internal_reflux(INFINITY, 145.0, 20.0, 32000.0, &r, NULL), 0);
    assert_true(isinf(r));
    assert_int_equal(stagecal_internal_reflux(3.0, 145.0, 20.0, 0.0, &r, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_internal_reflux(NAN, 145.0, 20.0, 1e4, &r, NULL), STAGECAL_EINVAL);
}

/* Stepping with R_int against explicit flows: D = 1, external reflux L = R at T_R, the
 * vapour condensed on the top stage by the subcooled reflux is ΔV = L·cp·ΔT/λ, so the
 * liquid leaving the top stage is L + ΔV and the vapour entering it V1 + ΔV; below, the
 * component balance V2·y(n+1) = L1·x(n) + D·xD. Constant α = 2.4, 7 whole stages
 * (6 column stages + pot). Tolerance 1e-12: both are a few dozen flops of rounding. */
static void physics_subcooled_step_matches_energy_balance(void **state)
{
    (void)state;
    const double alpha = 2.4, xd = 0.96, r = 1.7, cp = 150, dt = 25, lam = 31000;
    double d = 1, l = r * d, dv = l * cp * dt / lam;
    double l1 = l + dv, v2 = l + d + dv;
    double y = xd, x = 0;
    for (int n = 1; n <= 7; n++) {
        x = y / (alpha - (alpha - 1) * y); /* equilibrium liquid of stage n */
        y = (l1 * x + d * xd) / v2;        /* vapour from stage n + 1 */
    }
    stagecal_vle *v = stagecal_vle_alloc_alpha(alpha, NULL);
    double r_int, xb;
    assert_int_equal(stagecal_internal_reflux(r, cp, dt, lam, &r_int, NULL), 0);
    size_t len;
    int st;
    assert_int_equal(
        stagecal_stages_step(v, xd, r_int, 7.0, 1.0, NULL, &xb, NULL, 0, &len, &st, NULL), 0);
    assert_int_equal(st, STAGECAL_STAGES_OK);
    assert_abs(xb, x, 1e-12, "xB with subcooled reflux vs energy balance");
    stagecal_stages_result res;
    assert_int_equal(stagecal_stages_invert(v, xd, x, r_int, 1.0, NULL, &res, NULL), 0);
    assert_abs(res.stages, 7.0, 1e-9, "stages back from the energy-balance xB");
    stagecal_vle_free(v);
}

/* The condition object: R_int from T_bubble(xD) at the top pressure (bisection here). */
static void physics_cond_uses_bubble_point(void **state)
{
    (void)state;
    stagecal_column col = load(BT_COLUMN("", "\"latent_heat_j_mol\":32000,"
                                             "\"cp_liquid_j_mol_k\":145,"));
    stagecal_physics *ph = stagecal_physics_alloc(&col, NULL, NULL);
    assert_non_null(ph);
    stagecal_physics_cond c;
    const double xd = 0.95, tr = 300.0; /* below both bubble points */
    assert_int_equal(stagecal_physics_cond_at(ph, NAN, xd, 2.0, tr, &c, NULL), 0);
    double want = 2.0 * (1 + 145.0 * (bt_tbubble(xd, 101325) - tr) / 32000.0);
    assert_rel(c.r_int, want, 1e-9, "R_int at 101.325 kPa");
    assert_true(c.flags & STAGECAL_PHYS_SUBCOOLED);
    assert_int_equal(stagecal_physics_cond_at(ph, 20000, xd, 2.0, tr, &c, NULL), 0);
    want = 2.0 * (1 + 145.0 * (bt_tbubble(xd, 20000) - tr) / 32000.0);
    assert_rel(c.r_int, want, 1e-9, "R_int at 20 kPa");
    assert_rel(c.p_top_pa, 20000, 0, "top pressure");
    /* no T_reflux: the plain model */
    assert_int_equal(stagecal_physics_cond_at(ph, NAN, xd, 2.0, NAN, &c, NULL), 0);
    assert_rel(c.r_int, 2.0, 0, "no reflux temperature");
    assert_int_equal(c.flags, 0);
    stagecal_physics_free(ph);
    stagecal_column_free(&col);
}

/* A row logged at 20 kPa inverts to the count that stepping at 20 kPa started from
 * (1e-9, the round-trip tolerance of the stepping itself), and not to the count at
 * 101.325 kPa. */
static void physics_logged_pressure_roundtrip(void **state)
{
    (void)state;
    stagecal_column col = load(BT_COLUMN("", ""));
    stagecal_vle *v20 = stagecal_vle_at_pressure(col.system.vle, 20000, NULL);
    assert_non_null(v20);
    const double xd = 0.97, n = 6.37, r = 2.5;
    double xb;
    size_t len;
    int st;
    assert_int_equal(stagecal_stages_step(v20, xd, r, n, 1.0, NULL, &xb, NULL, 0, &len, &st, NULL),
                     0);
    assert_int_equal(st, STAGECAL_STAGES_OK);
    char csv[512];
    snprintf(csv, sizeof csv,
             "time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-],P[kPa]\n"
             "0,10,%.17g,%.17g,%.17g,20\n0.1,9.9,%.17g,%.17g,%.17g,101.325\n",
             xd, xb, r, xd, xb, r);
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(10);
    assert_int_equal(
        stagecal_runlog_read_buffer(log, csv, strlen(csv), "p.csv", &col, NULL, f, NULL), 0);
    assert_int_equal(f->n_warnings, 0);
    stagecal_runlog_result res;
    assert_int_equal(stagecal_runlog_analyse(log, &col, NULL, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, &col, 1.0, NULL, &res, NULL), 0);
    assert_int_equal(res.status[0], STAGECAL_STAGES_OK);
    assert_abs(res.stages[0], n, 1e-9, "row at 20 kPa");
    assert_true(res.status[1] != STAGECAL_STAGES_OK || fabs(res.stages[1] - n) > 0.5);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
    stagecal_findings_free(f);
    stagecal_vle_free(v20);
    stagecal_column_free(&col);
}

/* Pot at top + pressure_drop_pa: 5 column stages stepped here at 20 kPa with the models'
 * own y*, x* (exact stepping, whole stages), then the pot's liquid from the model at
 * 26 kPa; the inversion must count 6 stages (1e-9) and the forward step give xB back. */
static void physics_pot_pressure_drop(void **state)
{
    (void)state;
    stagecal_column col = load(BT_COLUMN("\"pressure_drop_pa\":6000,", ""));
    stagecal_vle *vt = stagecal_vle_at_pressure(col.system.vle, 20000, NULL);
    stagecal_vle *vp = stagecal_vle_at_pressure(col.system.vle, 26000, NULL);
    const double xd = 0.98, r = 3.0, m = r / (r + 1);
    double y = xd, x = xd;
    for (int k = 1; k <= 5; k++) {
        assert_int_equal(stagecal_vle_xstar(vt, y, &x), 0);
        y = m * x + (1 - m) * xd;
    }
    double xb;
    assert_int_equal(stagecal_vle_xstar(vp, y, &xb), 0);
    stagecal_physics *ph = stagecal_physics_alloc(&col, NULL, NULL);
    stagecal_physics_cond c;
    assert_int_equal(stagecal_physics_cond_at(ph, 20000, xd, r, NAN, &c, NULL), 0);
    assert_true(c.flags & STAGECAL_PHYS_POT_DROP);
    stagecal_stages_result res;
    assert_int_equal(stagecal_physics_invert(&c, xd, xb, 1.0, NULL, &res, NULL), 0);
    assert_int_equal(res.status, STAGECAL_STAGES_OK);
    assert_abs(res.stages, 6.0, 1e-9, "stages with the pot at 26 kPa");
    double xb2;
    int st;
    assert_int_equal(stagecal_physics_step(&c, xd, 6.0, 1.0, NULL, &xb2, &st, NULL), 0);
    assert_abs(xb2, xb, 1e-12, "forward step with the pot at 26 kPa");
    stagecal_physics_free(ph);
    stagecal_vle_free(vt);
    stagecal_vle_free(vp);
    stagecal_column_free(&col);
}

/* params.exact (the soft sensor's physics): models at logged pressures built on the coarse
 * table that answer by solving the model. Against Raoult's law solved here by bisection
 * (bt_tbubble): the bubble point to 1e-8 K (bisection and the model's Brent solve both
 * converge to ~1e-12 K; the margin is for the Antoine evaluation order), y* = x·Psat_L(T)/P
 * to 1e-10, and x*(y*(x)) = x to 1e-10 (the exact inverse, not the 129-node table, whose
 * cubic would miss by ~1e-7). 300 distinct pressures through a cache of 8 models: every
 * answer from the model at its own pressure after evictions. */
static void physics_exact_models_match_raoult(void **state)
{
    (void)state;
    stagecal_column col = load(BT_COLUMN("", ""));
    stagecal_physics_params pp = stagecal_physics_default_params();
    pp.exact = 1;
    pp.cache_size = 8;
    stagecal_physics *ph = stagecal_physics_alloc(&col, &pp, NULL);
    assert_non_null(ph);
    for (int k = 0; k < 300; k++) {
        double p = 20000.0 + 271.0 * (double)((k * 37) % 300); /* 300 pressures, shuffled */
        const stagecal_vle *v;
        assert_int_equal(stagecal_physics_vle_at(ph, p, 0, &v, NULL), 0);
        assert_abs(stagecal_vle_pressure(v), p, 0.0, "model pressure");
        for (int i = 0; i <= 10; i++) {
            double x = 0.003 + 0.0994 * i, t, y, xi;
            assert_int_equal(stagecal_vle_tbubble(v, x, &t), 0);
            double tb = bt_tbubble(x, p);
            assert_abs(t, tb, 1e-8, "bubble point");
            assert_int_equal(stagecal_vle_ystar(v, x, &y), 0);
            assert_abs(y, x * psat_pa(4.01814, 1203.835, -53.226, tb) / p, 1e-10, "y*");
            assert_int_equal(stagecal_vle_xstar(v, y, &xi), 0);
            assert_abs(xi, x, 1e-10, "x*(y*(x))");
        }
    }
    stagecal_physics_free(ph);
    stagecal_column_free(&col);
}

/* Ethanol–water, NRTL (set A of datasets/columns/kestrel_c3_ethanol_water.json, attributed to
 * a regression of the DECHEMA VLE collection, Gmehling & Onken 1977) with the NIST WebBook
 * Antoine sets (after Ambrose & Sprake 1970; Bridgeman & Aldrich 1964). */
#define EW_COLUMN                                                                                  \
    "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"t\",\"condenser\":\"total\","          \
    "\"pressure_pa\":101325,\"system\":{\"light\":{\"name\":\"ethanol\",\"antoine\":{\"a\":"       \
    "5.24677,\"b\":1598.673,\"c\":-46.424}},\"heavy\":{\"name\":\"water\",\"antoine\":{\"a\":"     \
    "5.08354,\"b\":1663.125,\"c\":-45.622}},\"model\":{\"kind\":\"nrtl\",\"tau12_a\":-0.8009,"     \
    "\"tau12_b_k\":246.18,\"tau21_a\":3.4578,\"tau21_b_k\":-586.0809,\"alpha12\":0.3}}}"

/* The soft sensor's models (params.exact) at a logged pressure: their coarse table (the guide of
 * the exact solves: T guesses, x* brackets, the branch end and the azeotrope search) interpolated
 * in ln P from coarse exact models on the pressure grid, as the dense tables are, instead of
 * built at each pressure (129 bubble solves). Against the model built at P (p_grid_rel = 0),
 * 60 pressures shuffled over 8–200 kPa (benzene–toluene) and 20–150 kPa (ethanol–water, an
 * azeotrope at every one of them), through caches of 4 models:
 * - the branch end x_max identical and the azeotropes to 1e-12 (both found by Brent on the
 *   model solved at P, from the same sign change of the table's y* − x);
 * - T_bubble and y* to 1e-9 K and 1e-12 (both solve the model at P to the bubble solve's
 *   relative tolerance 1e-14; only the first guess differs), x*(y) to 1e-12 (Brent to 4 ulp);
 * - the soft sensor's reading at the bubble point of x = 0.3, 0.6 (pot) and the dew point of
 *   y = 0.95 (top): the composition to 1e-10, its uncertainty to 1e-5 relative (u(T)/|dT/dx|
 *   with the slope by GSL's adaptive central difference, h = 1e-4, whose own error estimate is
 *   ~1e-6 relative: a last-bit change of T moves it within that). */
static void exact_grid_check(const char *json, double p_lo, double p_hi)
{
    stagecal_column col = load(json);
    stagecal_physics_params pg = stagecal_physics_default_params(), pd;
    pg.exact = 1;
    pg.cache_size = 4;
    pd = pg;
    pd.p_grid_rel = 0;
    stagecal_physics *grid = stagecal_physics_alloc(&col, &pg, NULL);
    stagecal_physics *direct = stagecal_physics_alloc(&col, &pd, NULL);
    assert_non_null(grid);
    assert_non_null(direct);
    for (int k = 0; k < 60; k++) {
        double p = nearbyint(p_lo * pow(p_hi / p_lo, (double)((k * 23) % 60) / 59.0));
        const stagecal_vle *v, *w;
        assert_int_equal(stagecal_physics_vle_at(grid, p, 0, &v, NULL), 0);
        assert_int_equal(stagecal_physics_vle_at(direct, p, 0, &w, NULL), 0);
        assert_abs(stagecal_vle_pressure(v), p, 0.0, "model pressure");
        assert_abs(stagecal_vle_x_max(v), stagecal_vle_x_max(w), 0.0, "branch end");
        double az[4], azw[4];
        size_t na = stagecal_vle_azeotropes(v, az, 4);
        assert_int_equal(na, stagecal_vle_azeotropes(w, azw, 4));
        for (size_t i = 0; i < na && i < 4; i++)
            assert_abs(az[i], azw[i], 1e-12, "azeotrope");
        for (int i = 0; i <= 40; i++) {
            double x = stagecal_vle_x_max(v) * i / 40.0, t, tw, y, yw, xi, xw;
            assert_int_equal(stagecal_vle_tbubble(v, x, &t), 0);
            assert_int_equal(stagecal_vle_tbubble(w, x, &tw), 0);
            assert_abs(t, tw, 1e-9, "bubble point");
            assert_int_equal(stagecal_vle_ystar(v, x, &y), 0);
            assert_int_equal(stagecal_vle_ystar(w, x, &yw), 0);
            assert_abs(y, yw, 1e-12, "y*");
            assert_int_equal(stagecal_vle_xstar(v, x, &xi), 0);
            assert_int_equal(stagecal_vle_xstar(w, x, &xw), 0);
            assert_abs(xi, xw, 1e-12, "x*");
        }
        const double at[3] = {0.3, 0.6, 0.95};
        for (int j = 0; j < 3; j++) {
            int top = j == 2, st, stw;
            double t;
            if (top)
                assert_int_equal(stagecal_softsensor_dew_t(w, at[j], &t, NULL, NULL), 0);
            else
                assert_int_equal(stagecal_softsensor_bubble_t(w, at[j], &t, NULL, NULL), 0);
            stagecal_reading r, rw;
            assert_int_equal(stagecal_softsensor_infer(v, t, 0.1, top, NULL, &r, &st, NULL), 0);
            assert_int_equal(stagecal_softsensor_infer(w, t, 0.1, top, NULL, &rw, &stw, NULL), 0);
            assert_int_equal(st, stw);
            assert_abs(r.value, rw.value, 1e-10, "inferred composition");
            assert_rel(r.u, rw.u, 1e-5, "its uncertainty");
        }
    }
    stagecal_physics_free(grid);
    stagecal_physics_free(direct);
    stagecal_column_free(&col);
}

static void physics_exact_grid_matches_models_at_pressure(void **state)
{
    (void)state;
    exact_grid_check(BT_COLUMN("", ""), 8000, 200000);
    exact_grid_check(EW_COLUMN, 20000, 150000);
}

/* The caches find a model by a hash of its pressure (grid models by their grid index) and evict
 * the least recently used: 100 pressures over 1–1000 kPa (~350 grid cells, more than the 128
 * dense grid models kept), visited twice in two shuffled orders through a cache of 8 models:
 * the second visit (after evictions from both caches, every model rebuilt) gives y* and
 * T_bubble bit for bit as the first (a model at a pressure does not depend on what came
 * before), and every fifth model is the one built at its pressure to the grid's 1e-10 (above). */
static void physics_caches_survive_evictions(void **state)
{
    (void)state;
    stagecal_column col = load(BT_COLUMN("", ""));
    stagecal_physics_params pp = stagecal_physics_default_params();
    pp.cache_size = 8;
    stagecal_physics *ph = stagecal_physics_alloc(&col, &pp, NULL);
    assert_non_null(ph);
    enum { NP = 100, NX = 5 };
    static double first[NP][2 * NX];
    for (int pass = 0; pass < 2; pass++)
        for (int k = 0; k < NP; k++) {
            int q = pass ? (k * 37) % NP : (k * 61) % NP;
            double p = 1000.0 * pow(1000.0, q / (NP - 1.0));
            const stagecal_vle *v;
            assert_int_equal(stagecal_physics_vle_at(ph, p, 0, &v, NULL), 0);
            assert_abs(stagecal_vle_pressure(v), p, 0.0, "model pressure");
            stagecal_vle *d =
                pass == 0 && q % 5 == 0 ? stagecal_vle_at_pressure(col.system.vle, p, NULL) : NULL;
            for (int i = 0; i < NX; i++) {
                double x = 0.1 + 0.2 * i, y, t, yd;
                assert_int_equal(stagecal_vle_ystar(v, x, &y), 0);
                assert_int_equal(stagecal_vle_tbubble(v, x, &t), 0);
                if (pass == 0) {
                    first[q][2 * i] = y, first[q][2 * i + 1] = t;
                } else {
                    assert_abs(y, first[q][2 * i], 0.0, "y* after evictions");
                    assert_abs(t, first[q][2 * i + 1], 0.0, "T_bubble after evictions");
                }
                if (d) {
                    assert_int_equal(stagecal_vle_ystar(d, x, &yd), 0);
                    assert_abs(y, yd, 1e-10, "y* against the model built at P");
                }
            }
            stagecal_vle_free(d);
        }
    stagecal_physics_free(ph);
    stagecal_column_free(&col);
}

/* The pressure grid (params.p_grid_rel, default h = 0.02 in ln P): the model at a logged P
 * interpolates, with cubic Lagrange weights in ln P, the dense tables of the four grid models
 * around P. Against the dense model built at P itself (stagecal_vle_at_pressure), 60
 * pressures shuffled over 8–200 kPa (benzene–toluene) and 20–150 kPa (ethanol–water,
 * azeotropic), through the physics' caches (evictions included):
 * - y*(x) within the remainder of 4-point interpolation, (9/16)/4!·h⁴·max|∂⁴(y*)/∂(ln P)⁴|
 *   (Lagrange's remainder; e.g. Burden & Faires, Numerical Analysis, ch. 3, from memory;
 *   9/16 = max |s(s+1)(s−1)(s−2)| on [0, 1]), the fourth derivative taken at P by a central
 *   fourth difference of exact models 0.05 apart in ln P; factor 4 for its variation over
 *   the four cells and the difference's own error, 1e-12 for the tables' rounding;
 * - T_bubble identical to 1e-9 K (it is solved at P in both);
 * - x*(y) to 1e-7 (|Δx*| = |Δy*|/slope);
 * - the count of rows at R = 1.5–6, xD = 0.9–0.99 (benzene–toluene) within 1e-4·u(N), u(N)
 *   from the tangent-linear sensitivities and the demo column's u(xD) = 0.002, u(xB) = 0.003,
 *   u(R) = 5 % (datasets/columns/demo_benzene_toluene.json): far below any stated u(N).
 * Measured (printed): the worst y* error, its ratio to the bound, the worst |ΔN|/u(N). */
static void grid_check(const char *json, double p_lo, double p_hi, int rows)
{
    stagecal_column col = load(json);
    stagecal_physics_params pp = stagecal_physics_default_params();
    pp.cache_size = 8;
    assert_rel(pp.p_grid_rel, 0.02, 0, "default grid");
    const double h = pp.p_grid_rel, hd = 0.05;
    stagecal_physics *ph = stagecal_physics_alloc(&col, &pp, NULL);
    assert_non_null(ph);
    const stagecal_vle *base = col.system.vle;
    double worst_y = 0, worst_n = 0, worst_err = 0;
    stagecal_stages_params sp = stagecal_stages_default_params();
    sp.want_sensitivities = 1;
    for (int k = 0; k < 40; k++) {
        double p = p_lo * pow(p_hi / p_lo, (double)((k * 23) % 40) / 39.0);
        const stagecal_vle *v;
        assert_int_equal(stagecal_physics_vle_at(ph, p, 0, &v, NULL), 0);
        assert_abs(stagecal_vle_pressure(v), p, 0.0, "model pressure");
        stagecal_vle *ex[5];
        for (int j = 0; j < 5; j++)
            assert_non_null(ex[j] = stagecal_vle_at_pressure(base, p * exp((j - 2) * hd), NULL));
        double m4 = 0;
        for (int i = 0; i <= 200; i++) {
            double x = i / 200.0, y[5];
            for (int j = 0; j < 5; j++)
                assert_int_equal(stagecal_vle_ystar(ex[j], x, &y[j]), 0);
            m4 = fmax(m4, fabs(y[0] - 4 * y[1] + 6 * y[2] - 4 * y[3] + y[4]) / pow(hd, 4));
        }
        double bound = 4 * (9.0 / 16.0) / 24.0 * pow(h, 4) * m4 + 1e-12;
        for (int i = 0; i <= 200; i++) {
            double x = i / 200.0, y, ye, t, te, xi, xe;
            assert_int_equal(stagecal_vle_ystar(v, x, &y), 0);
            assert_int_equal(stagecal_vle_ystar(ex[2], x, &ye), 0);
            assert_abs(y, ye, bound, "interpolated y* against the model at P");
            worst_y = fmax(worst_y, fabs(y - ye) / bound);
            worst_err = fmax(worst_err, fabs(y - ye));
            assert_int_equal(stagecal_vle_tbubble(v, x, &t), 0);
            assert_int_equal(stagecal_vle_tbubble(ex[2], x, &te), 0);
            assert_abs(t, te, 1e-9, "bubble point solved at P");
            if (x > 0.02 && x < 0.98 && stagecal_vle_xstar(ex[2], x, &xe) == 0) {
                assert_int_equal(stagecal_vle_xstar(v, x, &xi), 0);
                assert_abs(xi, xe, 1e-7, "x*");
            }
        }
        for (int j = 0; j < rows; j++) {
            double xd = 0.9 + 0.01 * (j % 10), r = 1.5 + 0.5 * (j % 10), n0 = 4.37 + (j % 7);
            double xb;
            size_t len;
            int st;
            assert_int_equal(
                stagecal_stages_step(ex[2], xd, r, n0, 1.0, NULL, &xb, NULL, 0, &len, &st, NULL),
                0);
            if (st != STAGECAL_STAGES_OK)
                continue;
            stagecal_physics_cond c;
            assert_int_equal(stagecal_physics_cond_at(ph, p, xd, r, NAN, &c, NULL), 0);
            stagecal_stages_result rg, re;
            assert_int_equal(stagecal_physics_invert(&c, xd, xb, 1.0, &sp, &rg, NULL), 0);
            assert_int_equal(stagecal_stages_invert(ex[2], xd, xb, r, 1.0, &sp, &re, NULL), 0);
            assert_int_equal(rg.status, re.status);
            if (re.status != STAGECAL_STAGES_OK)
                continue;
            double un = hypot(hypot(re.dstages_dxd * 0.002, re.dstages_dxb * 0.003),
                              re.dstages_dr * 0.05 * r);
            assert_true(un > 0);
            assert_abs(rg.stages, re.stages, 1e-4 * un, "count against stepping at P");
            worst_n = fmax(worst_n, fabs(rg.stages - re.stages) / un);
        }
        for (int j = 0; j < 5; j++)
            stagecal_vle_free(ex[j]);
    }
    print_message("grid %g-%g kPa: worst |dy*| %.3g (%.3g of the bound), worst |dN|/u(N) %.3g\n",
                  p_lo / 1e3, p_hi / 1e3, worst_err, worst_y, worst_n);
    stagecal_physics_free(ph);
    stagecal_column_free(&col);
}

static void physics_grid_matches_models_at_pressure(void **state)
{
    (void)state;
    grid_check(BT_COLUMN("", ""), 8000, 200000, 10);
    grid_check(EW_COLUMN, 20000, 150000, 0);
}

/* A pressure logged for a model without pressure dependence is named in a warning; so is
 * a reflux temperature the column cannot use. */
static void physics_unused_inputs_warn(void **state)
{
    (void)state;
    const char *json = "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"a\",\"condenser\":"
                       "\"total\",\"system\":{\"light\":{\"name\":\"l\"},\"heavy\":{\"name\":"
                       "\"h\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.5}}}";
    stagecal_column col = load(json);
    const char *csv = "time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-],P[kPa],T_reflux[C]\n"
                      "0,10,0.9,0.3,2,20,40\n";
    stagecal_runlog *log = stagecal_runlog_alloc();
    stagecal_findings *f = stagecal_findings_alloc(10);
    assert_int_equal(
        stagecal_runlog_read_buffer(log, csv, strlen(csv), "a.csv", &col, NULL, f, NULL), 0);
    assert_int_equal(f->n_warnings, 2);
    assert_non_null(strstr(f->items[0].text, "no temperature dependence"));
    assert_non_null(strstr(f->items[1].text, "reflux temperature is not used"));
    assert_rel(log->t_reflux_k[0], 313.15, 1e-15, "T_reflux in K");
    stagecal_physics *ph = stagecal_physics_alloc(&col, NULL, NULL);
    stagecal_physics_cond c;
    assert_int_equal(stagecal_physics_cond_at(ph, 20000, 0.9, 2.0, 313.15, &c, NULL), 0);
    assert_int_equal(c.flags, STAGECAL_PHYS_PRESSURE_UNUSED | STAGECAL_PHYS_SUBCOOL_UNUSED);
    assert_null(stagecal_vle_at_pressure(col.system.vle, 2e4, NULL));
    stagecal_physics_free(ph);
    stagecal_runlog_free(log);
    stagecal_findings_free(f);
    stagecal_column_free(&col);
}

/* The column file's new members and their errors. */
static void physics_column_members(void **state)
{
    (void)state;
    stagecal_column col =
        load("{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"a\",\"condenser\":\"total\","
             "\"packed_height_m\":4,\"pressure_drop_pa\":1500,\"holdup\":{\"per_metre_mol\":2.5,"
             "\"reflux_drum_mol\":3,\"u_rel\":0.15},\"system\":{\"light\":{\"name\":\"l\",\"latent_"
             "heat_j_mol\":35000},"
             "\"heavy\":{\"name\":\"h\",\"latent_heat_j_mol\":40000},\"cp_liquid_j_mol_k\":120,"
             "\"model\":{\"kind\":\"alpha\",\"alpha\":2.5}}}");
    assert_rel(col.pressure_drop_pa, 1500, 0, "pressure drop");
    assert_rel(col.holdup_column_mol, 10, 1e-15, "holdup 2.5 mol/m x 4 m");
    assert_rel(col.holdup_drum_mol, 3, 0, "drum");
    assert_rel(col.holdup_u_rel, 0.15, 0, "holdup relative uncertainty");
    assert_rel(col.system.latent_light_j_mol, 35000, 0, "light latent heat");
    assert_rel(col.system.latent_heavy_j_mol, 40000, 0, "heavy latent heat");
    assert_rel(col.system.cp_liquid_j_mol_k, 120, 0, "cp");
    stagecal_column_free(&col);
    const char *bad[] = {
        "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"a\",\"condenser\":\"total\","
        "\"system\":{\"light\":{\"name\":\"l\",\"latent_heat_j_mol\":35000},"
        "\"heavy\":{\"name\":\"h\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.5}}}",
        "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"a\",\"condenser\":\"total\","
        "\"holdup\":{\"per_tray_mol\":1},"
        "\"system\":{\"light\":{\"name\":\"l\"},"
        "\"heavy\":{\"name\":\"h\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.5}}}",
        "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"a\",\"condenser\":\"total\","
        "\"holdup\":{\"column_mol\":1,\"per_metre_mol\":1},\"packed_height_m\":3,"
        "\"system\":{\"light\":{\"name\":\"l\"},"
        "\"heavy\":{\"name\":\"h\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.5}}}",
        "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"a\",\"condenser\":\"total\","
        "\"holdup\":{\"column_mol\":1,\"u_rel\":1.5},"
        "\"system\":{\"light\":{\"name\":\"l\"},"
        "\"heavy\":{\"name\":\"h\"},\"model\":{\"kind\":\"alpha\",\"alpha\":2.5}}}",
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        stagecal_error e;
        assert_int_equal(stagecal_column_parse(bad[i], strlen(bad[i]), "b.json", &col, &e),
                         STAGECAL_EDATA);
    }
}

/* A column without constant molar overflow, simulated here stage by stage: constant
 * per-component latent heats λL, λH, saturated liquids of equal enthalpy and no heat of
 * mixing, so every stage's energy balance reads V(j+1)·λ(y(j+1)) = V(j)·λ(y(j)) with
 * λ(y) = y·λL + (1 − y)·λH; with the rectifying balances V(j+1) = L(j) + D and
 * V(j+1)·y(j+1) = L(j)·x(j) + D·xD that gives L(j) in closed form at each stage. Constant
 * α = 2.2 between stages, D = 1, R = 2.5, N = 8 (7 column stages + pot). The inversion with
 * both latent heats in the column file (pseudo-moles) counts 8 stages to 1e-9 (the brief's
 * bound is 1e-6; the transform is exact, what remains is the stepping's own round trip);
 * the plain (equal-latent-heat) inversion does not. */
static void physics_unequal_latent_heats_exact(void **state)
{
    (void)state;
    const double alpha = 2.2, xd = 0.96, r = 2.5, ll = 38000, lh = 44000, d = 1;
    double e = (r + 1) * d * (xd * ll + (1 - xd) * lh); /* V1·λ(y1), y1 = xD */
    double y = xd, x = 0;
    for (int n = 1; n <= 8; n++) {
        x = y / (alpha - (alpha - 1) * y); /* equilibrium liquid of stage n (n = 8: the pot) */
        double l = (e - d * lh - (ll - lh) * d * xd) / (lh + (ll - lh) * x);
        y = (l * x + d * xd) / (l + d);
    }
    const char *json =
        "{\"format\":\"stagecal-column\",\"version\":1,\"id\":\"a\",\"condenser\":\"total\","
        "\"system\":{\"light\":{\"name\":\"l\",\"latent_heat_j_mol\":38000},"
        "\"heavy\":{\"name\":\"h\",\"latent_heat_j_mol\":44000},"
        "\"model\":{\"kind\":\"alpha\",\"alpha\":2.2}}}";
    stagecal_column col = load(json);
    stagecal_physics *ph = stagecal_physics_alloc(&col, NULL, NULL);
    stagecal_physics_cond c;
    assert_int_equal(stagecal_physics_cond_at(ph, NAN, xd, r, NAN, &c, NULL), 0);
    assert_true(c.flags & STAGECAL_PHYS_PSEUDO);
    stagecal_stages_result res;
    assert_int_equal(stagecal_physics_invert(&c, xd, x, 1.0, NULL, &res, NULL), 0);
    assert_int_equal(res.status, STAGECAL_STAGES_OK);
    assert_abs(res.stages, 8.0, 1e-9, "non-CMO column in pseudo-moles");
    double xb;
    int st;
    assert_int_equal(stagecal_physics_step(&c, xd, 8.0, 1.0, NULL, &xb, &st, NULL), 0);
    assert_abs(xb, x, 1e-12, "forward step back in true moles");
    stagecal_stages_result plain;
    assert_int_equal(stagecal_stages_invert(col.system.vle, xd, x, r, 1.0, NULL, &plain, NULL), 0);
    assert_true(fabs(plain.stages - 8.0) > 0.05);
    stagecal_physics_free(ph);
    stagecal_column_free(&col);
}

int main(void)
{
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(physics_internal_reflux_hand_case),
        cmocka_unit_test(physics_subcooled_step_matches_energy_balance),
        cmocka_unit_test(physics_cond_uses_bubble_point),
        cmocka_unit_test(physics_logged_pressure_roundtrip),
        cmocka_unit_test(physics_pot_pressure_drop),
        cmocka_unit_test(physics_unused_inputs_warn),
        cmocka_unit_test(physics_column_members),
        cmocka_unit_test(physics_unequal_latent_heats_exact),
        cmocka_unit_test(physics_exact_models_match_raoult),
        cmocka_unit_test(physics_grid_matches_models_at_pressure),
        cmocka_unit_test(physics_exact_grid_matches_models_at_pressure),
        cmocka_unit_test(physics_caches_survive_evictions),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
