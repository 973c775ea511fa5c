/*
 * tool_hetp.c — study of the HETP equivalence tests (stagecal_hetp_equiv_design and
 * stagecal_hetp_equiv_pair): type I error at the margin and power when a repack truly
 * restores the design HETP.
 *
 * Simulator (what it simulates): a packed bed of H = 4.5 m with design HETP 0.6 m
 * (7.5 column stages). One "fit" is n_w quasi-steady windows at reflux ratios cycling
 * through {1.5, 2, 2.5, 3, 4}, each window's stage count the truth
 * a·(1 − exp(−0.9·R)) plus normal scatter of sd 0.2 stages (the residual sd of the
 * invented demo column's one-month fits, 0.18–0.20 stages on 3–6 windows); the form
 * "saturating" is fitted (regress.h, unweighted, covariance scaled by the residual
 * variance) and evaluated at R = 3 (column stages = stages − 1, se of the mean, the
 * fit's dof). The true HETP at R = 3 is set per case; for the pair test the old bed is
 * at the design HETP and the new bed at the case's value. The fits' covariance is the
 * model's unless STUDY_COV names another (study_cov.h; hc2-bm: the stage count's own
 * Bell–McCaffrey dof, as calibrate's model files give hetp).
 *
 * usage: tool_hetp [REPS [SEED]]   (defaults 4000, 1)
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "stagecal/hetp.h"
#include "stagecal/regress.h"
#include "study_cov.h"

#define H 4.5
#define DESIGN 0.6
#define SD 0.2

/* One simulated fit of a bed whose HETP at R = 3 is hetp_true; 0 on success. */
static int sim_fit(gsl_rng *rng, double hetp_true, int nw, stagecal_hetp_stages *s)
{
    static const double rs[] = {1.5, 2, 2.5, 3, 4};
    double r[64], y[64];
    double a = (H / hetp_true + 1) / (1 - exp(-2.7));
    for (int i = 0; i < nw; i++) {
        r[i] = rs[i % 5];
        y[i] = a * (1 - exp(-0.9 * r[i])) + gsl_ran_gaussian(rng, SD);
    }
    stagecal_regress_data d = {(size_t)nw, r, NULL, y, NULL};
    stagecal_form form;
    stagecal_form_parse("saturating", &form, NULL);
    stagecal_regress_params rp = stagecal_regress_default_params();
    rp.band_points = 0;
    if (getenv("STUDY_COV"))
        rp.cov_kind = synth_cov_kind();
    stagecal_regress_result res;
    if (stagecal_regress_fit(&d, &form, &rp, &res, NULL) != 0) {
        stagecal_regress_result_free(&res);
        return -1;
    }
    stagecal_band b;
    int rc = stagecal_regress_band_design(&form, res.theta, res.cov, res.sigma_obs, 1.0, res.dof,
                                          res.design, res.n, 0.95, 3.0, NAN, &b, NULL);
    s->column_stages = b.value - 1;
    s->lower_only = 0; /* a two-sided fit (the field was left unset: garbage read as "at least") */
    s->se = b.se_fit;
    s->dof = b.dof_fit; /* res.dof, or the count's Bell-McCaffrey dof */
    stagecal_regress_result_free(&res);
    return rc == 0 && s->column_stages > 0 ? 0 : -1;
}

/* Fractions declared equivalent and not determined over reps; pair: against an old bed
 * at the design HETP with the same evidence. */
static void run(gsl_rng *rng, int reps, double hetp_true, int nw, int pair, double *eq, double *nd)
{
    int n = 0, ne = 0, nn = 0;
    for (int i = 0; i < reps; i++) {
        stagecal_hetp_stages s, old;
        stagecal_hetp_equiv e;
        if (sim_fit(rng, hetp_true, nw, &s) != 0 || (pair && sim_fit(rng, DESIGN, nw, &old) != 0))
            continue;
        int rc = pair ? stagecal_hetp_equiv_pair(H, &old, H, &s, STAGECAL_HETP_EQUIV_MARGIN, 0.05,
                                                 &e, NULL)
                      : stagecal_hetp_equiv_design(H, &s, DESIGN, STAGECAL_HETP_EQUIV_MARGIN, 0.05,
                                                   &e, NULL);
        if (rc != 0)
            continue;
        n++;
        ne += e.verdict == STAGECAL_EQUIV_EQUIVALENT;
        nn += e.verdict == STAGECAL_EQUIV_NOT_DETERMINED;
    }
    *eq = (double)ne / n;
    *nd = (double)nn / n;
}

int main(int argc, char **argv)
{
    int reps = argc > 1 ? atoi(argv[1]) : 4000;
    unsigned long seed = argc > 2 ? strtoul(argv[2], NULL, 10) : 1;
    gsl_set_error_handler_off();
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, seed);
    const double m = 1 + STAGECAL_HETP_EQUIV_MARGIN;
    const int nws[] = {5, 10, 15, 30};
    printf("HETP equivalence study: %d simulated fits per cell, seed %lu, margin %.0f %%, "
           "alpha 0.05, window sd %.2f stages\n",
           reps, seed, 100 * STAGECAL_HETP_EQUIV_MARGIN, SD);
    printf("| test | windows per fit (dof) | type I at ratio 1.1 | type I at ratio 1/1.1 | power "
           "at ratio 1 | not determined at ratio 1 |\n|---|---|---|---|---|---|\n");
    for (int pair = 0; pair < 2; pair++)
        for (size_t k = 0; k < 4; k++) {
            double t1, t2, pw, nd, dummy;
            run(rng, reps, DESIGN * m, nws[k], pair, &t1, &dummy);
            run(rng, reps, DESIGN / m, nws[k], pair, &t2, &dummy);
            run(rng, reps, DESIGN, nws[k], pair, &pw, &nd);
            printf("| %s | %d (%d) | %.4f | %.4f | %.3f | %.3f |\n",
                   pair ? "as good as the old bed" : "as good as the design figure", nws[k],
                   nws[k] - 2, t1, t2, pw, nd);
        }
    gsl_rng_free(rng);
    return 0;
}
