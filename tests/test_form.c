/*
 * test_form.c — correlation forms: parsing of the notation (docs/forms.md), values
 * against closed forms, gradients against GSL's numerical differentiation
 * (gsl_deriv_central), limits at total reflux and every domain error.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_deriv.h>
#include <gsl/gsl_errno.h>

#include "stagecal/form.h"
#include "testutil.h"

static int setup(void **state)
{
    (void)state;
    gsl_set_error_handler_off();
    return 0;
}

static void form_parse_names_and_canonical_order(void **state)
{
    (void)state;
    stagecal_form f;
    stagecal_error e;
    assert_int_equal(stagecal_form_parse("constant", &f, &e), STAGECAL_OK);
    assert_int_equal(f.kind, STAGECAL_FORM_CONSTANT);
    assert_int_equal(f.p, 1);
    assert_string_equal(f.param_names[0], "a");
    assert_true(stagecal_form_is_linear(&f));
    assert_int_equal(stagecal_form_parse("saturating", &f, &e), STAGECAL_OK);
    assert_int_equal(f.p, 2);
    assert_false(f.uses_load);
    assert_string_equal(f.param_names[1], "b");
    assert_false(stagecal_form_is_linear(&f));
    assert_int_equal(stagecal_form_parse("saturating-load", &f, &e), STAGECAL_OK);
    assert_int_equal(f.p, 4);
    assert_true(f.uses_load);
    assert_string_equal(f.param_names[3], "d");
    /* Terms are put in canonical order: the parameter order follows it. */
    assert_int_equal(stagecal_form_parse("linear:F^2+1/R+1", &f, &e), STAGECAL_OK);
    assert_string_equal(f.name, "linear:1+1/R+F^2");
    assert_int_equal(f.p, 3);
    assert_string_equal(f.param_names[0], "1");
    assert_string_equal(f.param_names[1], "1/R");
    assert_string_equal(f.param_names[2], "F^2");
    assert_int_equal(f.terms, STAGECAL_TERM_ONE | STAGECAL_TERM_INVR | STAGECAL_TERM_F2);
    assert_true(f.uses_load);
    assert_true(stagecal_form_is_linear(&f));
    assert_int_equal(stagecal_form_parse("linear:1+1/R+L/V+lnR+F+F^2+1/F", &f, &e), STAGECAL_OK);
    assert_int_equal(f.p, 7);
    assert_int_equal(stagecal_form_parse("linear:L/V", &f, &e), STAGECAL_OK);
    assert_false(f.uses_load);
}

static void expect_parse_error(const char *text, const char *needle)
{
    stagecal_form f;
    stagecal_error e;
    stagecal_error_clear(&e);
    int rc = stagecal_form_parse(text, &f, &e);
    if (rc != STAGECAL_EINVAL || !strstr(e.text, needle))
        fail_msg("'%s': got %d '%s', want EINVAL with '%s'", text ? text : "(null)", rc, e.text,
                 needle);
}

static void form_parse_rejects_bad_names(void **state)
{
    (void)state;
    expect_parse_error(NULL, "no form name");
    expect_parse_error("", "unknown form ''");
    expect_parse_error("quadratic", "unknown form 'quadratic' (expected 'constant'");
    expect_parse_error("Saturating", "unknown form");
    expect_parse_error("linear:", "has no terms");
    expect_parse_error("linear:1+R", "unknown term 'R'");
    expect_parse_error("linear:1++F", "unknown term ''");
    expect_parse_error("linear:1+1/R+1/R", "term '1/R' appears twice");
}

static void form_values_match_closed_forms(void **state)
{
    (void)state;
    stagecal_form f;
    double v, g[STAGECAL_FORM_MAXP];
    const double a = 11.7, b = 0.43, c = -1.25, d = 0.385, r = 2.385, fl = 1.37;
    stagecal_form_parse("saturating", &f, NULL);
    double th2[2] = {a, b};
    assert_int_equal(stagecal_form_eval(&f, th2, r, NAN, &v, g), STAGECAL_OK);
    /* Closed form of the form table in docs/forms.md; 1e-15 relative (a few roundings). */
    assert_rel(v, a * (1 - exp(-b * r)), 1e-15, "saturating value");
    assert_rel(g[0], 1 - exp(-b * r), 1e-15, "d/da");
    assert_rel(g[1], a * r * exp(-b * r), 1e-15, "d/db");
    /* Small b·R keeps relative accuracy: Taylor series x − x²/2 + x³/6 (closed form). */
    double th_small[2] = {1.0, 1e-9};
    assert_int_equal(stagecal_form_eval(&f, th_small, 1.0, 0, &v, NULL), STAGECAL_OK);
    assert_rel(v, 1e-9 - 0.5e-18 + 1e-27 / 6, 1e-15, "1 - exp(-x) for x = 1e-9");
    /* Total reflux: the plateau a, no dependence on b. */
    assert_int_equal(stagecal_form_eval(&f, th2, INFINITY, 0, &v, g), STAGECAL_OK);
    assert_rel(v, a, 0, "saturating at R = inf");
    assert_rel(g[0], 1, 0, "d/da at R = inf");
    assert_rel(g[1], 0, 0, "d/db at R = inf");

    stagecal_form_parse("saturating-load", &f, NULL);
    double th4[4] = {a, b, c, d};
    assert_int_equal(stagecal_form_eval(&f, th4, r, fl, &v, g), STAGECAL_OK);
    assert_rel(v, (a + c * fl + d * fl * fl) * (1 - exp(-b * r)), 1e-15, "saturating-load");

    stagecal_form_parse("linear:1+1/R+L/V+lnR+F+F^2+1/F", &f, NULL);
    double th7[7] = {2.5, -3.1, 4.2, 0.7, 1.9, -0.35, 0.12};
    double want =
        2.5 - 3.1 / r + 4.2 * r / (r + 1) + 0.7 * log(r) + 1.9 * fl - 0.35 * fl * fl + 0.12 / fl;
    assert_int_equal(stagecal_form_eval(&f, th7, r, fl, &v, g), STAGECAL_OK);
    assert_rel(v, want, 1e-14, "linear, every term");
    assert_rel(g[2], r / (r + 1), 1e-15, "L/V term = R/(R+1)");
    assert_rel(g[6], 1 / fl, 1e-15, "1/F term");
    /* Total reflux: 1/R = 0 and L/V = 1 (docs/methods.md, "Stage counting"). */
    stagecal_form_parse("linear:1+1/R+L/V", &f, NULL);
    assert_int_equal(stagecal_form_eval(&f, th7, INFINITY, NAN, &v, g), STAGECAL_OK);
    assert_rel(v, 2.5 + 4.2, 1e-15, "linear at R = inf");
    assert_rel(g[1], 0, 0, "1/R at inf");
    assert_rel(g[2], 1, 0, "L/V at inf");
    stagecal_form_parse("constant", &f, NULL);
    assert_int_equal(stagecal_form_eval(&f, th7, 3, NAN, &v, NULL), STAGECAL_OK);
    assert_rel(v, 2.5, 0, "constant");
}

typedef struct {
    const stagecal_form *f;
    double theta[STAGECAL_FORM_MAXP];
    size_t k;
    double r, fl;
} deriv_ctx;

static double eval_k(double x, void *p)
{
    deriv_ctx *c = p;
    double th[STAGECAL_FORM_MAXP], v = NAN;
    memcpy(th, c->theta, sizeof th);
    th[c->k] = x;
    stagecal_form_eval(c->f, th, c->r, c->fl, &v, NULL);
    return v;
}

static void form_gradient_matches_gsl_deriv(void **state)
{
    (void)state;
    const char *names[] = {"saturating", "saturating-load", "linear:1+1/R+L/V+lnR+F+F^2+1/F"};
    const double th[7] = {9.3, 0.61, 0.8, -0.23, 1.1, 0.4, 0.05};
    const double rs[3] = {0.77, 2.385, 14.2};
    for (size_t i = 0; i < 3; i++) {
        stagecal_form f;
        stagecal_form_parse(names[i], &f, NULL);
        for (size_t j = 0; j < 3; j++) {
            double v, g[STAGECAL_FORM_MAXP];
            deriv_ctx c = {&f, {0}, 0, rs[j], 1.43};
            memcpy(c.theta, th, sizeof th);
            assert_int_equal(stagecal_form_eval(&f, th, rs[j], 1.43, &v, g), STAGECAL_OK);
            for (size_t k = 0; k < f.p; k++) {
                gsl_function fn = {eval_k, &c};
                double num, abserr;
                c.k = k;
                gsl_deriv_central(&fn, th[k], 1e-4, &num, &abserr);
                /* GSL's central difference with error estimate; 1e-7 relative plus
                 * its own error estimate (5-point rule, h = 1e-4). */
                assert_abs(g[k], num, 1e-7 * fabs(num) + 10 * abserr + 1e-12, names[i]);
            }
        }
    }
}

static void form_eval_domain_errors(void **state)
{
    (void)state;
    stagecal_form f;
    double v = 2.385, th[4] = {10, 0.4, 0.1, 0.01};
    stagecal_form_parse("saturating", &f, NULL);
    assert_int_equal(stagecal_form_eval(&f, th, -1, 0, &v, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_form_eval(&f, th, NAN, 0, &v, NULL), STAGECAL_EINVAL);
    double neg_b[2] = {10, -0.4};
    assert_int_equal(stagecal_form_eval(&f, neg_b, INFINITY, 0, &v, NULL), STAGECAL_EINVAL);
    double huge_neg_b[2] = {10, -1e3};
    assert_int_equal(stagecal_form_eval(&f, huge_neg_b, 10, 0, &v, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_form_eval(NULL, th, 1, 0, &v, NULL), STAGECAL_EINVAL);
    assert_rel(v, 2.385, 0, "value untouched on error");
    stagecal_form_parse("saturating-load", &f, NULL);
    assert_int_equal(stagecal_form_eval(&f, th, 1, NAN, &v, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_form_eval(&f, th, 1, -0.1, &v, NULL), STAGECAL_EINVAL);
    stagecal_form_parse("linear:1+lnR", &f, NULL);
    assert_int_equal(stagecal_form_eval(&f, th, INFINITY, 0, &v, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_form_eval(&f, th, 0, 0, &v, NULL), STAGECAL_EINVAL);
    stagecal_form_parse("linear:1+1/R", &f, NULL);
    assert_int_equal(stagecal_form_eval(&f, th, 0, 0, &v, NULL), STAGECAL_EINVAL);
    stagecal_form_parse("linear:1+1/F", &f, NULL);
    assert_int_equal(stagecal_form_eval(&f, th, 1, 0, &v, NULL), STAGECAL_EINVAL);
    assert_int_equal(stagecal_form_eval(&f, th, 1, 2, &v, NULL), STAGECAL_OK);
    assert_rel(v, 10 + 0.4 / 2, 1e-15, "1/F at F = 2");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(form_parse_names_and_canonical_order),
        cmocka_unit_test(form_parse_rejects_bad_names),
        cmocka_unit_test(form_values_match_closed_forms),
        cmocka_unit_test(form_gradient_matches_gsl_deriv),
        cmocka_unit_test(form_eval_domain_errors),
    };
    return cmocka_run_group_tests(tests, setup, NULL);
}
