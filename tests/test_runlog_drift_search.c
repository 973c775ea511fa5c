/*
 * test_runlog_drift_search.c — the drift check's distillate searches (src/runlog_drift_search.c,
 * runlog_drift_xd_for_count) against a search written here from their description: for each row,
 * safeguarded Newton on N(x, xB, R) − N_s from the row's x0 in the bracket (xB, 1) (a pinch
 * lowers the top of the bracket, any other failure raises its bottom, each then bisected), the
 * counts by the per-row call stagecal_stages_invert, stopped at |N − N_s| < 1e-9 or a bracket
 * below 1e-14, at most 60 points. The library takes constant-α counts four rows at a time
 * through the closed form's AVX2 lanes (xd_alpha) and every count must be the per-row call's,
 * so X, ∂N/∂xB / ∂N/∂xD, 1/(∂N/∂xD) and the found flag are compared bit for bit (tolerance 0:
 * the same IEEE operations in the same order, docs/performance.md, fifteenth pass). The rule
 * is the library's own documented one (no outside source; common practice for Newton with a
 * bracket). Mutations of xd_alpha this test fails under (each tried): ∂N/∂xD and ∂N/∂xB taken
 * from the wrong lane members; the count without the pot stage (+ 1.0 dropped); a lane's next
 * point not handed to the kernel (x[j] not updated after a step); a lane the four-row path did
 * not take read as if it had (its per-row call skipped).
 */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/runlog.h"
#include "stagecal/stages.h"
#include "stagecal/vle.h"
#include "testutil.h"
/* after the system headers: banned.h (in internal.h) renames libc names */
#include "internal.h"
#include "runlog_internal.h"

/* The kinds of point a search met, counted over the test (every kind must be hit). */
typedef struct {
    long fast, slow_ok, pinch, other, own;
} kinds;

/* The search of one row from the description at the top; *k counts the points by kind (fast:
 * the four-row path takes the point, stages_invert4_fast with the point in every lane). */
static void ref_search(const stagecal_vle *vle, double r, const stagecal_stages_params *sp,
                       double xb, double x0, int own, const stagecal_stages_result *own_res,
                       double target, xd_row *o, kinds *k)
{
    double lo = xb, hi = 1.0, x = x0 > lo && x0 < hi ? x0 : 0.5 * (lo + hi);
    o->ok = 0;
    for (int it = 0; it < 60; it++) {
        stagecal_stages_result sr;
        int rc;
        if (it == 0 && own && x == x0) {
            sr = *own_res, rc = STAGECAL_OK;
            k->own++;
        } else {
            rc = stagecal_stages_invert(vle, x, xb, r, 1.0, sp, &sr, NULL);
            double xs[4] = {x, x, x, x}, bs[4] = {xb, xb, xb, xb}, rs[4] = {r, r, r, r};
            stagecal_stages_result four[4];
            if (stages_invert4_fast(vle, xs, bs, rs, 1.0, sp, four) == 15u)
                k->fast++;
            else if (rc == STAGECAL_OK && sr.status == STAGECAL_STAGES_OK)
                k->slow_ok++;
            else if (rc == STAGECAL_OK && sr.status == STAGECAL_STAGES_PINCH)
                k->pinch++;
            else
                k->other++;
        }
        double xn;
        if (rc != STAGECAL_OK || sr.status != STAGECAL_STAGES_OK) {
            if (rc == STAGECAL_OK && sr.status == STAGECAL_STAGES_PINCH)
                hi = x;
            else
                lo = x;
            xn = 0.5 * (lo + hi);
        } else {
            double f = sr.stages - target, dxd = sr.dstages_dxd;
            if (fabs(f) < 1e-9 || hi - lo < 1e-14) {
                o->x = x;
                o->sens = dxd > 0 ? sr.dstages_dxb / dxd : NAN;
                o->dxdn = dxd > 0 ? 1.0 / dxd : NAN;
                o->ok = isfinite(o->sens) && isfinite(o->dxdn);
                return;
            }
            if (f > 0)
                hi = x;
            else
                lo = x;
            xn = dxd > 0 ? x - f / dxd : NAN;
            if (!(xn > lo && xn < hi))
                xn = 0.5 * (lo + hi);
        }
        x = xn;
    }
}

static int same_bits(double a, double b)
{
    return memcmp(&a, &b, sizeof a) == 0;
}

/* Stretches of 0–9 and 64 rows at several α, R and target counts (from 1.5 stages to beyond
 * the pinch scan, where the closed form gives way to stepping), rows with x0 their own count's
 * point or not, against ref_search. */
static void drift_search_alpha_same_bits(void **state)
{
    (void)state;
    enum { NMAX = 64 };
    static const double alphas[] = {2.5, 1.6, 1.15};
    static const double refl[] = {0.8, 2.0, 4.0, 12.0};
    static const double targets[] = {1.5, 3.0, 5.5, 9.0, 16.0, 40.0, 250.0};
    static const size_t sizes[] = {0, 1, 2, 3, 4, 5, 6, 7, 9, NMAX};
    stagecal_stages_params sp = stagecal_stages_default_params();
    sp.want_sensitivities = 1;
    double xb[NMAX], xd[NMAX], st[NMAX], dd[NMAX], db[NMAX];
    stagecal_stages_result own_res[NMAX];
    stagecal_runlog log;
    memset(&log, 0, sizeof log);
    log.xb = xb;
    stagecal_runlog_result res;
    memset(&res, 0, sizeof res);
    res.stages = st, res.dn_dxd = dd, res.dn_dxb = db;
    uint64_t seed = 20261205;
    kinds k = {0, 0, 0, 0, 0};
    long rows = 0, found = 0;
    int four = 0; /* the four-row path is there (AVX2) */
    for (size_t ia = 0; ia < sizeof alphas / sizeof *alphas; ia++) {
        stagecal_vle *vle = stagecal_vle_alloc_alpha(alphas[ia], NULL);
        assert_non_null(vle);
        double al, cap;
        four |= stages_fast4_applies(vle, 1.0, &sp, &al, &cap);
        for (size_t ir = 0; ir < sizeof refl / sizeof *refl; ir++)
            for (size_t it = 0; it < sizeof targets / sizeof *targets; it++)
                for (size_t is = 0; is < sizeof sizes / sizeof *sizes; is++) {
                    size_t n = sizes[is];
                    double r = refl[ir], target = targets[it];
                    xd_row rows_lib[NMAX], rows_ref[NMAX];
                    for (size_t a = 0; a < n; a++) {
                        /* xorshift64: xB in (0.01, 0.61), x0 in (xB, 1) or outside it */
                        double u[2];
                        for (int q = 0; q < 2; q++) {
                            seed ^= seed << 13, seed ^= seed >> 7, seed ^= seed << 17;
                            u[q] = (double)(seed >> 11) / 9007199254740992.0;
                        }
                        xb[a] = 0.01 + 0.6 * u[0];
                        xd[a] = a % 11 == 10 ? xb[a] * u[1] : xb[a] + (1 - xb[a]) * u[1];
                        int own = a % 3 != 2;
                        if (own) { /* the row's own count, as run-log mode stores it */
                            int rc = stagecal_stages_invert(vle, xd[a], xb[a], r, 1.0, &sp,
                                                            &own_res[a], NULL);
                            own = rc == STAGECAL_OK && own_res[a].status == STAGECAL_STAGES_OK;
                        }
                        st[a] = own ? own_res[a].stages : 0;
                        dd[a] = own ? own_res[a].dstages_dxd : 0;
                        db[a] = own ? own_res[a].dstages_dxb : 0;
                        rows_lib[a].a = a, rows_lib[a].own = own;
                        rows_lib[a].x = rows_lib[a].sens = rows_lib[a].dxdn = -1;
                        rows_lib[a].ok = -1;
                        ref_search(vle, r, &sp, xb[a], xd[a], own, &own_res[a], target,
                                   &rows_ref[a], &k);
                    }
                    runlog_drift_xd_for_count(vle, NULL, 1.0, &sp, &log, &res, xd, r, target,
                                              rows_lib, n);
                    for (size_t a = 0; a < n; a++) {
                        rows++;
                        assert_int_equal(rows_lib[a].ok, rows_ref[a].ok);
                        if (!rows_ref[a].ok)
                            continue;
                        found++;
                        if (!same_bits(rows_lib[a].x, rows_ref[a].x) ||
                            !same_bits(rows_lib[a].sens, rows_ref[a].sens) ||
                            !same_bits(rows_lib[a].dxdn, rows_ref[a].dxdn)) {
                            print_error("alpha %g R %g target %g n %zu row %zu: X %.17g/%.17g "
                                        "sens %.17g/%.17g dxdn %.17g/%.17g\n",
                                        alphas[ia], r, target, n, a, rows_lib[a].x, rows_ref[a].x,
                                        rows_lib[a].sens, rows_ref[a].sens, rows_lib[a].dxdn,
                                        rows_ref[a].dxdn);
                            fail();
                        }
                    }
                }
        stagecal_vle_free(vle);
    }
    print_message("%ld rows (%ld found); points: four-row path %ld, per-row ok %ld, pinch %ld, "
                  "other %ld, own %ld\n",
                  rows, found, k.fast, k.slow_ok, k.pinch, k.other, k.own);
    /* every way a point can go was taken */
    assert_true(found > 1000);
    assert_true((k.fast > 0) == (four != 0));
    assert_true(k.slow_ok > 0 && k.pinch > 0 && k.other > 0 && k.own > 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(drift_search_alpha_same_bits),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
