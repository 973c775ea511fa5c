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

#endif
