/*
 * testutil.h — double-precision checks for cmocka tests (cmocka 1.1.5's
 * assert_float_equal casts to float). Each check prints a labelled line on failure
 * (GSL's gsl_test_rel idea) and fails the test.
 */
#ifndef STAGECAL_TESTUTIL_H
#define STAGECAL_TESTUTIL_H

#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
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

#endif
