/*
 * testutil.h — double-precision checks for cmocka tests (cmocka 1.1.5's
 * assert_float_equal casts to float). Each check prints a labelled line on failure
 * (GSL's gsl_test_rel idea) and fails the test. And the numbers of a Python cross-check
 * (scipy, statsmodels) read back (testutil_python_numbers).
 */
#ifndef STAGECAL_TESTUTIL_H
#define STAGECAL_TESTUTIL_H

#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

/* |got − want| ≤ tol·|want| (relative); want = 0 falls back to absolute. */
#define assert_rel(got, want, tol, label)                                                          \
    testutil_check_rel((got), (want), (tol), (label), __FILE__, __LINE__)
/* |got − want| ≤ tol (absolute). */
#define assert_abs(got, want, tol, label)                                                          \
    testutil_check_abs((got), (want), (tol), (label), __FILE__, __LINE__)

static inline void testutil_check_rel(double got, double want, double tol, const char *label,
                                      const char *file, int line)
{
    double scale = fabs(want) > 0 ? fabs(want) : 1.0;
    double e = fabs(got - want) / scale;
    if (!(e <= tol)) {
        print_error("%s:%d: %s: got %.17g, want %.17g, rel. error %.3g > %.3g\n", file, line, label,
                    got, want, e, tol);
        _fail(file, line);
    }
}

static inline void testutil_check_abs(double got, double want, double tol, const char *label,
                                      const char *file, int line)
{
    double e = fabs(got - want);
    if (!(e <= tol)) {
        print_error("%s:%d: %s: got %.17g, want %.17g, abs. error %.3g > %.3g\n", file, line, label,
                    got, want, e, tol);
        _fail(file, line);
    }
}

/* Reads one "key v1 v2 ..." line of a cross-check script from fp into v (at most max
 * numbers); fails the test when the line is missing or has another key. Returns the count. */
static inline size_t testutil_line_values(FILE *fp, const char *key, double *v, size_t max)
{
    char line[4096], *s, *end;
    size_t k = 0;
    assert_non_null(fgets(line, sizeof line, fp));
    size_t kl = strlen(key);
    if (strncmp(line, key, kl) != 0 || line[kl] != ' ')
        fail_msg("crosscheck: expected '%s', got '%s'", key, line);
    s = line + kl;
    while (k < max) {
        double x = strtod(s, &end);
        if (end == s)
            break;
        v[k++] = x;
        s = end;
    }
    return k;
}

/* Writes code to STAGECAL_BUILD_DIR/script, runs it with STAGECAL_PYTHON and reads n
 * numbers from its standard output into out; fails the test if any step fails. */
static inline void testutil_python_numbers(const char *script, const char *code, double *out,
                                           size_t n)
{
    char path[512], cmd[1024];
    snprintf(path, sizeof path, "%s/%s", STAGECAL_BUILD_DIR, script);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    assert_true(fputs(code, f) >= 0);
    assert_int_equal(fclose(f), 0);
    snprintf(cmd, sizeof cmd, "%s %s", STAGECAL_PYTHON, path);
    FILE *pp = popen(cmd, "r");
    assert_non_null(pp);
    for (size_t i = 0; i < n; i++)
        assert_int_equal(fscanf(pp, "%lf", &out[i]), 1);
    assert_int_equal(pclose(pp), 0);
}

/* The run-clustered (CR2) Bell–McCaffrey dof of the design rows (1, 1/r_i), unweighted,
 * row i in run run[i], from tests/cr2_crosscheck.py (numpy: the Satterthwaite dof over
 * the eigenvalues of the G×G matrix of Pustejovsky & Tipton 2018, "Small-sample methods
 * for cluster-robust variance estimation and hypothesis testing in fixed effects models",
 * J. Bus. Econ. Stat. 36, 672–683; the script checks its own CR0 against statsmodels):
 * dof[0], dof[1] those of the two parameters, dof[2] that of the fitted value at R = 3.
 * The dof does not depend on the stage counts; the script is given 8 − 3/r_i plus a run
 * offset. */
static inline void testutil_cr2_dof(const double *r, const size_t *run, size_t n, double *dof)
{
    char cmd[8192], line[4096];
    size_t len = (size_t)snprintf(cmd, sizeof cmd, "%s %s/cr2_crosscheck.py", STAGECAL_PYTHON,
                                  STAGECAL_TESTS_DIR);
    for (size_t i = 0; i < n && len < sizeof cmd; i++)
        len += (size_t)snprintf(cmd + len, sizeof cmd - len, " %.17g %.17g 1 %zu", r[i],
                                8 - 3 / r[i] + 0.05 * sin(1.3 * (double)run[i] + 0.7 * (double)i),
                                run[i]);
    assert_true(len < sizeof cmd);
    FILE *py = popen(cmd, "r");
    assert_non_null(py);
    for (int k = 0; k < 4; k++) /* params, cr2_cov, cr0_cov, sm_cr0 */
        assert_non_null(fgets(line, sizeof line, py));
    assert_int_equal(testutil_line_values(py, "cr2_dof", dof, 3), 3);
    assert_int_equal(pclose(py), 0);
}

#endif
