/*
 * test_censor.c — identifiability of fits (src/regress_ident.c) and the censored
 * errors-in-variables likelihood (src/censor.c).
 *
 * Outside references: the condition number of a 2×2 symmetric matrix from its
 * closed-form eigenvalues (λ = m ± √(m² − det), m = trace/2: textbook algebra, written
 * out here, not GSL's SVD under test); the pot compositions of the synthetic windows from
 * Smoker's closed form (tests/oracle_smoker.h), not the stepping code the fit uses.
 * The coverage of the censored fit's intervals is a study (tests/tool_censor_study.c,
 * docs/calibration.md), not a unit test.
 */
#include <gsl/gsl_errno.h>
#include <math.h>
#include <string.h>

#include <stdlib.h>
#include <unistd.h>

#include "oracle_smoker.h"
#include "stagecal/calibrate.h"
#include "stagecal/censor.h"
#include "stagecal/regress.h"
#include "synth_censor.h"
#include "testutil.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

/* Points that lie where exp(−b·R) ≈ 0 cannot tell b: refused with the reason. */
static void ident_refuses_undetermined_b(void **state)
{
    (void)state;
    double r[] = {4, 5, 6, 8, 10}, st[] = {8.1, 8.0, 7.9, 8.05, 8.0};
    stagecal_regress_data d = {5, r, NULL, st, NULL};
    stagecal_form form;
    stagecal_regress_result res;
    stagecal_error e;
    assert_int_equal(stagecal_form_parse("saturating", &form, NULL), 0);
    stagecal_regress_params prm = stagecal_regress_default_params();
    prm.band_points = 0;
    assert_int_equal(stagecal_regress_fit(&d, &form, &prm, &res, &e), STAGECAL_EDATA);
    assert_non_null(strstr(e.text, "parameter 'b' of form 'saturating' is not determined by "
                                   "the evidence (95 % interval +-"));
    assert_non_null(strstr(e.text, "what would determine it: points at reflux ratios low enough "
                                   "that exp(-b R) is not near 0"));
    /* asked for: the fit is kept and b flagged, a determined (the mean of the points,
     * 8.01, within the 1e-6 of the solver) */
    prm.allow_undetermined = 1;
    assert_int_equal(stagecal_regress_fit(&d, &form, &prm, &res, &e), 0);
    assert_int_equal(res.undetermined, 2u);
    assert_abs(res.theta[0], 8.01, 1e-6, "a");
    assert_true(res.se[1] > 0); /* never se = 0 */
    stagecal_regress_result_free(&res);
}

/* A determined fit: nothing flagged; the condition number equals the closed-form ratio of
 * the eigenvalues of the relative covariance D⁻¹CD⁻¹ (D_j = max(|θ_j|, 1)). */
static void ident_condition_number_closed_form(void **state)
{
    (void)state;
    double r[] = {1, 1.5, 2, 3, 4, 6}, st[] = {4.1, 5.6, 6.4, 7.0, 7.6, 8.1};
    stagecal_regress_data d = {6, r, NULL, st, NULL};
    stagecal_form form;
    stagecal_regress_result res;
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &form, NULL), 0);
    stagecal_regress_params prm = stagecal_regress_default_params();
    prm.band_points = 0;
    assert_int_equal(stagecal_regress_fit(&d, &form, &prm, &res, NULL), 0);
    assert_int_equal(res.undetermined, 0);
    double d0 = fmax(fabs(res.theta[0]), 1), d1 = fmax(fabs(res.theta[1]), 1);
    double a = res.cov[0] / (d0 * d0), b = res.cov[1] / (d0 * d1), c = res.cov[3] / (d1 * d1);
    double m = 0.5 * (a + c), det = a * c - b * b, q = sqrt(m * m - det);
    /* 1e-9 relative: two roundings of a well-conditioned 2×2 problem */
    assert_rel(res.condition, (m + q) / (m - q), 1e-9, "condition number");
    stagecal_regress_result_free(&res);
}

/* ---- the censored likelihood ---------------------------------------------------------- */

#define ALPHA 2.0
#define NTRUE 26.0

static stagecal_column col;
static double sxd[3][6], sxb[3][6];
static unsigned char scens[3][6];
static stagecal_evidence ev[3];

/* Three windows at R = 6, 10, 15 of a 26-stage column with xD = 1 − 1e-6; readings at
 * the truth (no noise), or the distillate reported as ">0.9999" (censored). */
static void windows(int censored)
{
    static const double rr[3] = {6, 10, 15};
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(ALPHA, NULL);
    col.u.xd = 1e-9;
    col.u.xd_heavy_rel = 0.05;
    col.u.xb = 0.003;
    for (int w = 0; w < 3; w++) {
        double xd = 1 - 1e-6, xb = oracle_smoker_xb(ALPHA, rr[w], xd, NTRUE);
        for (int j = 0; j < 6; j++) {
            sxd[w][j] = censored ? 0.9999 : xd;
            scens[w][j] = censored ? STAGECAL_EVIDENCE_XD_ABOVE : 0;
            sxb[w][j] = xb;
        }
        memset(&ev[w], 0, sizeof ev[w]);
        ev[w].r = rr[w];
        ev[w].m = 6;
        ev[w].s_xd = sxd[w];
        ev[w].s_xb = sxb[w];
        ev[w].s_cens = scens[w];
    }
}

static void censor_exact_readings_give_the_truth(void **state)
{
    (void)state;
    windows(0);
    stagecal_form form;
    stagecal_censored_fit fit;
    assert_int_equal(stagecal_form_parse("constant", &form, NULL), 0);
    assert_int_equal(stagecal_fit_censored(&col, 1.0, ev, 3, &form, NULL, 0.95, 1, 200, &fit, NULL),
                     0);
    /* readings at the truth: the likelihood peaks at the truth but for the O(u_rel²) shift
     * of a heteroscedastic normal likelihood (−log u(x) moves the latent impurity h by
     * −u_rel²·h, i.e. the count by u_rel²/ln α = 0.0036 stages): tolerance 0.01 stages.
     * Both ends are bounded. */
    assert_abs(fit.theta[0], NTRUE, 0.01, "maximum-likelihood stages");
    assert_int_equal(fit.par[0].low_bounded, 1);
    assert_int_equal(fit.par[0].high_bounded, 1);
    assert_true(fit.par[0].low < NTRUE && NTRUE < fit.par[0].high);
    assert_int_equal(fit.n_windows, 3);
    assert_int_equal(fit.n_readings, 36);
    assert_int_equal(fit.n_censored, 0);
    stagecal_vle_free(col.system.vle);
}

static void censor_clipped_analyser_gives_at_least(void **state)
{
    (void)state;
    windows(1);
    stagecal_form form;
    stagecal_censored_fit fit;
    stagecal_error e;
    assert_int_equal(stagecal_form_parse("constant", &form, NULL), 0);
    assert_int_equal(stagecal_fit_censored(&col, 1.0, ev, 3, &form, NULL, 0.95, 1, 200, &fit, &e),
                     0);
    /* every distillate reading at full scale: more stages fit as well, so only a lower
     * bound, and it holds */
    assert_int_equal(fit.par[0].high_bounded, 0);
    assert_true(isnan(fit.par[0].high));
    assert_int_equal(fit.par[0].low_bounded, 1);
    assert_true(fit.par[0].low < NTRUE);
    assert_int_equal(fit.n_censored, 18);
    /* refusals */
    stagecal_form sat;
    assert_int_equal(stagecal_form_parse("saturating", &sat, NULL), 0);
    assert_int_equal(stagecal_fit_censored(&col, 1.0, ev, 3, &sat, NULL, 0.95, 1, 200, &fit, &e),
                     STAGECAL_EINVAL);
    assert_string_equal(e.text, "censored fit: form 'saturating' needs a start");
    col.u.xb = 0;
    assert_int_equal(stagecal_fit_censored(&col, 1.0, ev, 3, &form, NULL, 0.95, 1, 200, &fit, &e),
                     STAGECAL_EINVAL);
    assert_non_null(strstr(e.text, "has no stated uncertainty"));
    stagecal_vle_free(col.system.vle);
}

/* A two-parameter form, stages = a + b/R, on readings at the truth (a = 20, b = 30; four
 * windows at R = 3, 5, 8, 15, xD = 1 − 1e-4, pot from Smoker's closed form): the
 * maximum-likelihood θ is the truth but for the O(u_rel²) shift of the heteroscedastic
 * likelihood (0.0036 stages per window, see above; 0.05 on a and b, which the four
 * conditions amplify); both ends of both parameters and of the stage count at R = 6 are
 * determined and contain the truth; the observed-information covariance is positive. */
static void censor_two_parameters_exact(void **state)
{
    (void)state;
    static const double rr[4] = {3, 5, 8, 15};
    static double xd4[4][6], xb4[4][6];
    stagecal_evidence e4[4];
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(ALPHA, NULL);
    col.u.xd = 1e-9;
    col.u.xd_heavy_rel = 0.05;
    col.u.xb = 0.003;
    for (int w = 0; w < 4; w++) {
        double xd = 1 - 1e-4, xb = oracle_smoker_xb(ALPHA, rr[w], xd, 20 + 30 / rr[w]);
        for (int j = 0; j < 6; j++) {
            xd4[w][j] = xd;
            xb4[w][j] = xb;
        }
        memset(&e4[w], 0, sizeof e4[w]);
        e4[w].r = rr[w];
        e4[w].m = 6;
        e4[w].s_xd = xd4[w];
        e4[w].s_xb = xb4[w];
    }
    stagecal_form form;
    stagecal_censored_fit fit;
    stagecal_error e;
    const double theta0[2] = {18, 20};
    assert_int_equal(stagecal_form_parse("linear:1+1/R", &form, NULL), 0);
    assert_int_equal(stagecal_fit_censored(&col, 1.0, e4, 4, &form, theta0, 0.95, 1, 200, &fit, &e),
                     0);
    assert_abs(fit.theta[0], 20, 0.05, "a");
    assert_abs(fit.theta[1], 30, 0.05 * 30 / 3, "b");
    assert_int_equal(fit.one_sided, 0);
    for (int j = 0; j < 2; j++) {
        assert_int_equal(fit.par[j].low_bounded, 1);
        assert_int_equal(fit.par[j].high_bounded, 1);
        assert_true(fit.par[j].low < fit.theta[j] && fit.theta[j] < fit.par[j].high);
    }
    assert_true(fit.par[0].low < 20 && 20 < fit.par[0].high);
    assert_true(fit.par[1].low < 30 && 30 < fit.par[1].high);
    assert_int_equal(fit.has_cov, 1);
    assert_true(fit.cov[0] > 0 && fit.cov[3] > 0);
    stagecal_censored_interval at6;
    assert_int_equal(
        stagecal_censored_stages_at(&col, 1.0, e4, 4, &form, &fit, 6, NAN, 0.95, &at6, &e), 0);
    assert_abs(at6.value, 25, 0.05, "stages at R = 6");
    assert_true(at6.low_bounded && at6.high_bounded && at6.low < 25 && 25 < at6.high);
    /* the profile interval of the count lies inside the box of the parameters' ends */
    assert_true(at6.low > fit.par[0].low + fit.par[1].low / 6 - 1e-6);
    stagecal_vle_free(col.system.vle);
}

/* The profile log-likelihood against an independent implementation: python3 with its
 * standard library only (math.erfc for log Φ, a 20001-point grid and golden-section search
 * for the latent xD, the pot from Smoker's closed form; python3-scipy was not installed
 * where this was written). One window at R = 10, α = 2, readings xD 0.99955, ">0.9999"
 * (censored above), 0.99948 and xB 0.512, 0.508, 0.515; u(xD) = 0.0002, u(xB) = 0.003:
 *   def nll(z, n):  xd = 1/(1+exp(-z)); xb = smoker_xb(2, 10, xd, n)
 *       return -(sum(logcdf((xd-y)/u_d) if censored else logpdf(y, xd, u_d) for y in yd)
 *                + sum(logpdf(y, xb, u_b) for y in yb))
 *   ℓ(14) = 25.279155980575922, ℓ(16) = 23.426435698882145, ℓ(18) = 22.60780666459776
 * (maximisers xD = 0.99979768, 0.99993877, 0.99998147, inside the range). Tolerance 1e-6:
 * the two latent searches stop at 1e-9 in logit xD, and stepping equals Smoker's closed form
 * to ~1e-9 stages. */
static void censor_loglik_matches_python(void **state)
{
    (void)state;
    static double yd[3] = {0.99955, 0.9999, 0.99948}, yb[3] = {0.512, 0.508, 0.515};
    static unsigned char fl[3] = {0, STAGECAL_EVIDENCE_XD_ABOVE, 0};
    static const double want[3] = {25.279155980575922, 23.426435698882145, 22.60780666459776};
    stagecal_evidence e1;
    memset(&e1, 0, sizeof e1);
    e1.r = 10;
    e1.m = 3;
    e1.s_xd = yd;
    e1.s_xb = yb;
    e1.s_cens = fl;
    memset(&col, 0, sizeof col);
    col.system.vle = stagecal_vle_alloc_alpha(ALPHA, NULL);
    col.u.xd = 0.0002;
    col.u.xb = 0.003;
    stagecal_form form;
    assert_int_equal(stagecal_form_parse("constant", &form, NULL), 0);
    for (int k = 0; k < 3; k++) {
        double th = 14 + 2 * k, ll;
        assert_int_equal(stagecal_censored_loglik(&col, 1.0, &e1, 1, &form, &th, &ll, NULL), 0);
        assert_abs(ll, want[k], 1e-6, "profile log-likelihood vs python");
    }
    stagecal_vle_free(col.system.vle);
}

/* ---- through the calibration chain -------------------------------------------------- */

/* One synthetic data set (tests/synth_censor.h, seed 3) of a regime, calibrated. */
static int calibrate_synth(int reg, const char *form, stagecal_cal_method method,
                           stagecal_column *c, stagecal_runlog **log, stagecal_calibration *cal,
                           stagecal_error *e)
{
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 3);
    size_t len = 0;
    char *csv = sc_log(rng, reg, &len);
    assert_non_null(csv);
    const char *ct = sc_column(reg);
    assert_int_equal(stagecal_column_parse(ct, strlen(ct), "synth", c, e), 0);
    *log = stagecal_runlog_alloc();
    assert_int_equal(stagecal_runlog_read_buffer(*log, csv, len, "synth.csv", c, NULL, NULL, e), 0);
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = form;
    par.method = method;
    int rc = stagecal_calibrate_data(c, NULL, *log, &par, cal, e);
    free(csv);
    gsl_rng_free(rng);
    return rc;
}

static void release(stagecal_column *c, stagecal_runlog *log, stagecal_calibration *cal)
{
    stagecal_calibration_free(cal);
    stagecal_runlog_free(log);
    stagecal_column_free(c);
}

/* A distillate analyser clipped at ">0.9999": `calibrate --method censored` answers "at
 * least N stages" with a bound below the true 26; the model carries the bound, says so,
 * evaluates to it without a standard error, and survives the file (format version 2). */
static void calibrate_clipped_gives_at_least(void **state)
{
    (void)state;
    stagecal_column c;
    stagecal_runlog *log;
    stagecal_calibration cal;
    stagecal_error e;
    assert_int_equal(
        calibrate_synth(SC_CLIP_FS, "constant", STAGECAL_CAL_CENSORED, &c, &log, &cal, &e), 0);
    const stagecal_model *mo = &cal.model;
    assert_int_equal(cal.used, STAGECAL_MODEL_CENSORED);
    assert_int_equal(mo->method, STAGECAL_MODEL_CENSORED);
    assert_int_equal(mo->one_sided, 1);
    assert_int_equal(cal.cens.par[0].high_bounded, 0);
    assert_true(mo->theta[0] == cal.cens.par[0].low && mo->theta[0] < SC_NTRUE);
    assert_true(mo->theta_ml[0] >= mo->theta[0]);
    assert_true(cal.cens_at.low_bounded && !cal.cens_at.high_bounded);
    assert_true(isnan(cal.cens_fit.ci_high[0]) && isnan(cal.cens_fit.se[0]));
    assert_non_null(strstr(mo->warnings[mo->n_warnings - 1], "AT LEAST ") ? "" : NULL);
    stagecal_model_point pt;
    assert_int_equal(stagecal_model_eval(mo, 10, NAN, 0.99, &pt, &e), 0);
    assert_int_equal(pt.lower_only, 1);
    assert_true(pt.stages == mo->theta[0] && pt.ci_low == pt.stages && isinf(pt.ci_high) &&
                isinf(pt.pi_high) && isnan(pt.se_fit) && isnan(pt.se_pred));
    assert_true(pt.level == mo->level); /* the bound's own level, whatever was asked */
    /* through a file */
    char dir[] = "/tmp/stagecal-censor-XXXXXX", path[512];
    assert_non_null(mkdtemp(dir));
    assert_int_equal(stagecal_model_write(mo, dir, path, sizeof path, &e), 0);
    FILE *f = fopen(path, "rb");
    char text[65536];
    size_t n = fread(text, 1, sizeof text - 1, f);
    fclose(f);
    text[n] = '\0';
    assert_non_null(strstr(text, "\"version\": 2"));
    assert_non_null(strstr(text, "\"method\": \"censored-likelihood\""));
    stagecal_model back;
    stagecal_model_init(&back);
    assert_int_equal(stagecal_model_load(path, &back, &e), 0);
    assert_int_equal(back.one_sided, 1);
    assert_true(back.theta[0] == mo->theta[0] && back.theta_ml[0] == mo->theta_ml[0]);
    stagecal_model_free(&back);
    unlink(path);
    rmdir(dir);
    release(&c, log, &cal);
    /* a two-parameter form cannot carry a one-sided answer: refused with the reason */
    assert_int_equal(
        calibrate_synth(SC_CLIP_FS, "linear:1+1/R", STAGECAL_CAL_CENSORED, &c, &log, &cal, &e),
        STAGECAL_EDATA);
    assert_non_null(strstr(e.text, "censored-likelihood fit: the evidence bounds the stage count "
                                   "from one side only ("));
    assert_non_null(strstr(e.text, "form 'linear:1+1/R' has 2 parameters, which a one-sided "
                                   "answer cannot carry; what would help: --form constant"));
    release(&c, log, &cal);
    /* auto leaves the censored readings out, and says so */
    assert_int_equal(calibrate_synth(SC_CLIP_FS, "constant", STAGECAL_CAL_AUTO, &c, &log, &cal, &e),
                     0);
    assert_int_not_equal(cal.used, STAGECAL_MODEL_CENSORED);
    int said = 0;
    for (size_t i = 0; i < cal.model.n_warnings; i++)
        said |= strstr(cal.model.warnings[i], "censored reading(s) in the windows were left out "
                                              "of the fit") != NULL;
    assert_true(said);
    release(&c, log, &cal);
}

/* Impurity readings in ppm (5 % relative, detection limit 0.6 ppm): two-sided, with the
 * observed-information covariance in the model, version 2 and no one-sided member. */
static void calibrate_ppm_is_two_sided(void **state)
{
    (void)state;
    stagecal_column c;
    stagecal_runlog *log;
    stagecal_calibration cal;
    stagecal_error e;
    assert_int_equal(calibrate_synth(SC_PPM, "constant", STAGECAL_CAL_CENSORED, &c, &log, &cal, &e),
                     0);
    const stagecal_model *mo = &cal.model;
    assert_int_equal(mo->one_sided, 0);
    assert_true(cal.cens.has_cov && mo->cov[0] > 0);
    assert_true(cal.cens.par[0].low_bounded && cal.cens.par[0].high_bounded);
    /* one data set: within 4 standard errors of the truth (the study measures coverage) */
    assert_abs(mo->theta[0], SC_NTRUE, 4 * sqrt(mo->cov[0]), "ppm stages");
    stagecal_model_point pt;
    assert_int_equal(stagecal_model_eval(mo, 10, NAN, 0, &pt, &e), 0);
    assert_int_equal(pt.lower_only, 0);
    assert_true(pt.se_fit > 0);
    release(&c, log, &cal);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(ident_refuses_undetermined_b),
        cmocka_unit_test(ident_condition_number_closed_form),
        cmocka_unit_test(censor_exact_readings_give_the_truth),
        cmocka_unit_test(censor_clipped_analyser_gives_at_least),
        cmocka_unit_test(censor_two_parameters_exact),
        cmocka_unit_test(censor_loglik_matches_python),
        cmocka_unit_test(calibrate_clipped_gives_at_least),
        cmocka_unit_test(calibrate_ppm_is_two_sided),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
