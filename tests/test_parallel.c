/*
 * test_parallel.c — parallel_for (src/parallel.c): every item once, on threads numbered within
 * range, and after failures the status and message of the failed item with the smallest index,
 * as a serial loop stopping at its first failure gives them; GSL's process-wide error handler
 * left alone by the job's threads and restored after it (gsl_quiet_begin). No numerical
 * tolerance: counts and statuses are exact.
 */
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <pthread.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "parallel.h"
#include "testutil.h"

struct count_job {
    unsigned *calls;       /* per item */
    size_t nthreads;       /* workers beside the calling one */
    int bad_worker;        /* set when a worker number is out of range */
    size_t fail_a, fail_b; /* items that fail (SIZE_MAX: none) */
    pthread_mutex_t mu;
};

static int count_item(void *ctx, size_t item, size_t worker, stagecal_error *err)
{
    struct count_job *j = ctx;
    pthread_mutex_lock(&j->mu);
    j->calls[item]++;
    if (worker > j->nthreads)
        j->bad_worker = 1;
    pthread_mutex_unlock(&j->mu);
    if (item == j->fail_a)
        return error_set(err, STAGECAL_EDATA, "item %zu failed", item);
    if (item == j->fail_b)
        return error_set(err, STAGECAL_ENOMEM, "item %zu failed", item);
    return STAGECAL_OK;
}

static void parallel_every_item_once(void **state)
{
    (void)state;
    static const size_t ns[] = {0, 1, 2, 3, 1000};
    for (size_t a = 0; a < sizeof ns / sizeof ns[0]; a++)
        for (size_t t = 0; t <= 3; t++) {
            size_t n = ns[a];
            struct count_job j = {calloc(n ? n : 1, sizeof(unsigned)),
                                  t,
                                  0,
                                  SIZE_MAX,
                                  SIZE_MAX,
                                  PTHREAD_MUTEX_INITIALIZER};
            assert_non_null(j.calls);
            stagecal_error err;
            stagecal_error_clear(&err);
            assert_int_equal(parallel_for(n, t, count_item, &j, &err), STAGECAL_OK);
            for (size_t i = 0; i < n; i++)
                assert_int_equal(j.calls[i], 1);
            assert_int_equal(j.bad_worker, 0);
            free(j.calls);
        }
}

static void parallel_first_failure_wins(void **state)
{
    (void)state;
    enum { N = 5000 };
    for (size_t t = 0; t <= 3; t++)
        for (int rep = 0; rep < 20; rep++) {
            /* items 4000 (ENOMEM) and 4001 (EDATA) fail; the smaller index decides */
            struct count_job j = {calloc(N, sizeof(unsigned)), t, 0, 4001, 4000,
                                  PTHREAD_MUTEX_INITIALIZER};
            assert_non_null(j.calls);
            stagecal_error err;
            stagecal_error_clear(&err);
            assert_int_equal(parallel_for(N, t, count_item, &j, &err), STAGECAL_ENOMEM);
            assert_string_equal(err.text, "item 4000 failed");
            for (size_t i = 0; i <= 4000; i++) /* everything before the failure ran once */
                assert_int_equal(j.calls[i], 1);
            for (size_t i = 4001; i < N; i++)
                assert_true(j.calls[i] <= 1);
            free(j.calls);
        }
}

/* The handler a library caller installed: counts GSL's error reports. */
static unsigned long gsl_reports;
static void counting_handler(const char *reason, const char *file, int line, int gsl_errno)
{
    (void)reason, (void)file, (void)line, (void)gsl_errno;
    __atomic_add_fetch(&gsl_reports, 1, __ATOMIC_SEQ_CST);
}

struct quiet_job {
    int touched; /* set when gsl_quiet_begin changed the handler on a thread of the job */
    int failed;  /* set when the factorisation did not report a failure */
};

/* An item that factorises a matrix which is not positive definite (GSL reports GSL_EDOM through
 * the handler) inside gsl_quiet, as evidence_tobit.c, regress_bm.c and history_robust.c do. */
static int quiet_item(void *ctx, size_t item, size_t worker, stagecal_error *err)
{
    (void)item, (void)worker, (void)err;
    struct quiet_job *j = ctx;
    double a[4] = {1, 2, 2, 1}; /* eigenvalues 3 and −1 */
    gsl_matrix_view m = gsl_matrix_view_array(a, 2, 2);
    gsl_quiet q = gsl_quiet_begin();
    if (q.set)
        __atomic_store_n(&j->touched, 1, __ATOMIC_SEQ_CST);
    if (gsl_linalg_cholesky_decomp1(&m.matrix) == GSL_SUCCESS)
        __atomic_store_n(&j->failed, 1, __ATOMIC_SEQ_CST);
    gsl_quiet_end(q);
    return STAGECAL_OK;
}

static void parallel_keeps_gsl_handler(void **state)
{
    (void)state;
    gsl_error_handler_t *before = gsl_set_error_handler(counting_handler);
    /* outside a job gsl_quiet turns the handler off and puts the caller's back */
    struct quiet_job j = {0, 0};
    assert_int_equal(quiet_item(&j, 0, 0, NULL), STAGECAL_OK);
    assert_int_equal(j.touched, 1);
    assert_int_equal(j.failed, 0);
    assert_int_equal(gsl_reports, 0);
    for (size_t nthreads = 0; nthreads <= 3; nthreads++) {
        j = (struct quiet_job){0, 0};
        assert_int_equal(parallel_for(64, nthreads, quiet_item, &j, NULL), STAGECAL_OK);
        /* serial (0 threads): each item turns it off and back itself; with threads nobody on
         * the job's threads touches it (parallel_for holds it off) */
        assert_int_equal(j.touched, nthreads == 0);
        assert_int_equal(j.failed, 0);
        assert_int_equal(gsl_reports, 0);
        /* the caller's handler is back: it hears a failure after the job */
        double a[4] = {1, 2, 2, 1};
        gsl_matrix_view m = gsl_matrix_view_array(a, 2, 2);
        gsl_linalg_cholesky_decomp1(&m.matrix);
        assert_int_equal(gsl_reports, 1);
        gsl_reports = 0;
    }
    gsl_set_error_handler(before);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(parallel_every_item_once),
        cmocka_unit_test(parallel_first_failure_wins),
        cmocka_unit_test(parallel_keeps_gsl_handler),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
