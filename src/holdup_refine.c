/*
 * holdup_refine.c — the pseudo-steady test of the STAGES holdup compensation
 * (src/holdup_internal.h; docs/methods.md, "Column holdup").
 *
 * The compensation (src/holdup.c) is first order: it takes the stage liquids' time derivatives
 * as dx_j/dt = (∂x_j/∂xD)·dxD/dt, the sensitivities of the plain profile, so the profile is
 * assumed to move along the steady family of the logged xD. That fails where the column is not
 * pseudo-steady: after a reflux change the profile relaxes from the old steady profile (on the
 * stage-by-stage simulator, tests/sim_dynamic.h, 6 stages, 6 % holdup, R = 1.5, the first rows
 * after the settling time read −0.3 stages, decaying over hours), and late in a run near the
 * pinch. The summed component balances V·y(j+1) = L·x(j) + D·xD + h_d·dxD/dt + h·Σ(k≤j) dx_k/dt
 * hold for any profile, so stepping them with the derivatives of the profile the column really
 * has is exact: here those derivatives come from the corrected profiles of the neighbouring rows
 * (the same local quadratic over time as dxD/dt), the profiles are stepped again with them, and
 * once more (two Picard passes of the balances). All of it runs on the smoothed compositions
 * (the local quadratic's values), so the test is not a function of a row's own noise. A row
 * whose steady xD moves by more than quasi_tol_u·u(xD) between the first order and this second
 * order is not pseudo-steady: it is left out like a settling row. Used as a correction instead
 * of a test, the second-order term took out the free response but added a noise-dependent bias
 * of its own (measured in docs/methods.md).
 *
 * Workload: per row, the slope weights of its local quadratic once, then per pass one weighted
 * sum per stage liquid and one corrected count (a fixed point in the stage count), and one Brent
 * solve for the first order's steady xD; the second order's only from each end of a stretch up
 * to the first row that agrees.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_linalg.h>

#include "holdup_internal.h"
#include "internal.h"
#include "runlog_internal.h"

#define REFINE_STEPS 200 /* stage liquids kept per row (as the first-order correction) */
#define REFINE_PASSES 2

/* The corrected count (a fixed point in the count, which sets the holdup per stage
 * holdup/(n − 1)) and its step liquids xs at one row: with the stage derivatives der (nd of
 * them), or, der NULL, the plain profile's sensitivities times dxD/dt (the first order). */
static int row_profile(const stagecal_vle *vle, double xd, double xb, double m,
                       const stagecal_holdup_state *st, const double *der, size_t nd, double *count,
                       double *xs, size_t *nxs)
{
    double n, sens[REFINE_STEPS];
    int rc = holdup_count_corrected(vle, xd, xb, m, 0, 0, NULL, 0, &n, NULL, NULL, 0, NULL);
    if (rc != STAGECAL_OK)
        n = 10.0; /* a pinch of the plain line: start from a guess */
    double g0 = st->drum_mol * st->dxd_dt / st->v_mol_s;
    for (int it = 0; it < 20; it++) {
        const double *d = der;
        size_t ns = nd;
        if (!der) {
            if (holdup_sensitivities(vle, xd, xb, m, n, sens, &ns))
                return STAGECAL_ENOCONV;
            for (size_t j = 0; j < ns; j++)
                sens[j] *= st->dxd_dt;
            d = sens;
        }
        double gs = n > 1 ? st->holdup_mol / (n - 1) / st->v_mol_s : 0, c;
        if ((rc = holdup_count_corrected(vle, xd, xb, m, g0, gs, d, ns, &c, NULL, xs, REFINE_STEPS,
                                         nxs)))
            return rc;
        int done = fabs(c - n) < 1e-9 * n;
        n = c;
        if (done)
            break;
    }
    *count = n;
    return STAGECAL_OK;
}

/* Whether a compensated row (xd_ss finite) with a profile has its second-order steady xD (the
 * count cnt stepped on the smoothed xs, xbs) within tol of the first-order one. */
static int agrees(const stagecal_vle *vle, double reflux, double xd_ss, size_t np, double first,
                  double xs, double xbs, double cnt, double tol)
{
    double x;
    return isfinite(xd_ss) && np && isfinite(first) &&
           holdup_steady_xd_of_count(vle, xs, xbs, reflux, cnt, &x, NULL) == STAGECAL_OK &&
           fabs(x - first) <= tol;
}

int holdup_refine_stretch(const stagecal_runlog *log, size_t s, size_t e, const stagecal_vle *vle,
                          double holdup_mol, double drum_mol, const stagecal_holdup_params *par,
                          double u_xd, double *xd_ss, double *u2, double *gs)
{
    size_t rows = e - s;
    double reflux = runlog_rset(log, s), m = reflux / (reflux + 1);
    if (!(par->quasi_tol_u > 0) || !(u_xd > 0) || rows < 3 || !(reflux > 0) || isinf(reflux) ||
        !log->v_mol_s)
        return STAGECAL_OK;
    double *prof = malloc(rows * REFINE_STEPS * sizeof *prof);
    double *next = malloc(rows * REFINE_STEPS * sizeof *next);
    double *w = malloc(rows * sizeof *w), *dxd = malloc(rows * sizeof *dxd);
    double *xx = malloc(rows * sizeof *xx);
    double *xs = malloc(rows * sizeof *xs), *xbs = malloc(rows * sizeof *xbs);
    double *first = malloc(rows * sizeof *first), *cnt = malloc(rows * sizeof *cnt);
    size_t *np = calloc(rows, sizeof *np), *npn = calloc(rows, sizeof *npn);
    int rc = STAGECAL_OK;
    if (!prof || !next || !w || !xx || !dxd || !xs || !xbs || !first || !cnt || !np || !npn) {
        rc = STAGECAL_ENOMEM;
        goto out;
    }
    size_t half = par->half_window < 1 ? 1 : par->half_window;
    /* the smoothed compositions (the local quadratic's value at each row) and the first-order
     * profiles on them, for every row that has them (settling rows too: their neighbours'
     * derivatives need them) */
    for (size_t r = 0; r < rows; r++) {
        size_t i = s + r, a, b;
        double v = log->v_mol_s[i], se;
        first[r] = NAN;
        holdup_row_range(log, s, e, i, par->slope_half_s, half, &a, &b);
        dxd[r] = holdup_local_slope(log->t_s, log->xd, a, b, i, u_xd, &se, &xs[r]);
        if (!isfinite(dxd[r]) ||
            !isfinite(holdup_local_slope(log->t_s, log->xb, a, b, i, 0, &se, &xbs[r])) ||
            !(v > 0) || !(xs[r] > xbs[r]) || !(xs[r] < 1) || !(xbs[r] > 0))
            continue;
        stagecal_holdup_state st = {holdup_mol, drum_mol, v, dxd[r]};
        if (row_profile(vle, xs[r], xbs[r], m, &st, NULL, 0, &cnt[r], prof + r * REFINE_STEPS,
                        &np[r]) != STAGECAL_OK ||
            holdup_steady_xd_of_count(vle, xs[r], xbs[r], reflux, cnt[r], &first[r], NULL) !=
                STAGECAL_OK)
            np[r] = 0;
    }
    /* Picard passes: the liquids' derivatives from the neighbours' profiles, the profile
     * stepped again with them (a neighbour without the liquid: the row drops out) */
    for (int pass = 0; pass < REFINE_PASSES; pass++) {
        for (size_t r = 0; r < rows; r++) {
            size_t i = s + r, a, b;
            npn[r] = 0;
            if (!np[r])
                continue;
            holdup_row_range(log, s, e, i, par->slope_half_s, half, &a, &b);
            double der[REFINE_STEPS], se;
            size_t nd = np[r], nmin = nd, j;
            for (size_t k = a; k <= b; k++)
                nmin = np[k - s] < nmin ? np[k - s] : nmin;
            if (!holdup_slope_weights(log->t_s, NULL, a, b, i, w))
                continue;
            for (j = 0; j < nd; j++) {
                if (j < nmin) { /* every neighbour has this liquid */
                    der[j] = 0;
                    for (size_t k = a; k <= b; k++)
                        der[j] += w[k - a] * prof[(k - s) * REFINE_STEPS + j];
                    continue;
                }
                /* the deepest liquids: those neighbours that step that far */
                for (size_t k = a; k <= b; k++)
                    xx[k - a] = np[k - s] > j ? prof[(k - s) * REFINE_STEPS + j] : NAN;
                der[j] = holdup_local_slope(log->t_s + a, xx, 0, b - a, i - a, 0, &se, NULL);
                if (!isfinite(der[j]))
                    break;
            }
            if (j < nd)
                continue;
            stagecal_holdup_state st = {holdup_mol, drum_mol, log->v_mol_s[i], dxd[r]};
            if (row_profile(vle, xs[r], xbs[r], m, &st, der, nd, &cnt[r], next + r * REFINE_STEPS,
                            &npn[r]) != STAGECAL_OK)
                npn[r] = 0;
        }
        for (size_t r = 0; r < rows; r++)
            if (npn[r])
                memcpy(prof + r * REFINE_STEPS, next + r * REFINE_STEPS, npn[r] * sizeof *prof);
        memcpy(np, npn, rows * sizeof *np);
    }
    /* the test, as two boundaries: the stretch is pseudo-steady from the first row where the
     * second order agrees with the first to the last one; rows before and after are left out
     * (a row-by-row test would select on the smoothed compositions' noise) */
    double tol = par->quasi_tol_u * u_xd;
    size_t lead = 0, trail = rows;
    while (lead < rows && !agrees(vle, reflux, xd_ss[s + lead], np[lead], first[lead], xs[lead],
                                  xbs[lead], cnt[lead], tol))
        lead++;
    while (trail > lead + 1 &&
           !agrees(vle, reflux, xd_ss[s + trail - 1], np[trail - 1], first[trail - 1],
                   xs[trail - 1], xbs[trail - 1], cnt[trail - 1], tol))
        trail--;
    /* rows [lead, trail) are pseudo-steady (none when lead == rows) */
    for (size_t r = 0; r < rows; r++) {
        if ((r < lead || r >= trail) && isfinite(xd_ss[s + r])) {
            xd_ss[s + r] = NAN;
            if (u2)
                u2[s + r] = 0;
            if (gs)
                gs[s + r] = 0;
            continue;
        }
        /* a kept row takes the second order's increment over the first, both on the smoothed
         * compositions (so the increment carries no reading noise of its own): the first order's
         * sensitivities miss how fast the liquids really move by a few per cent of its shift
         * (the liquids' own derivatives in the balances do not), which read the counts high */
        double x2;
        if (isfinite(xd_ss[s + r]) && np[r] && isfinite(first[r]) &&
            holdup_steady_xd_of_count(vle, xs[r], xbs[r], reflux, cnt[r], &x2, NULL) == STAGECAL_OK)
            xd_ss[s + r] += x2 - first[r];
        /* its variance stays the first order's: rescaled by the row's own (noisy) increment, the
         * weights followed the errors (a row whose increment's noise enlarged the shift, and so
         * lowered its count, lost weight) and the 1/R coefficient rose by 0.03 (docs/methods.md) */
    }
out:
    free(prof), free(next), free(w), free(xx), free(dxd), free(xs), free(xbs), free(first),
        free(cnt), free(np), free(npn);
    return rc;
}
