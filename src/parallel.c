/*
 * parallel.c — parallel_for (parallel.h): a counter under a mutex hands out the items; the
 * failure with the smallest index wins, so the status does not depend on the timing.
 */
#include "parallel.h"

#include <pthread.h>
#include <stdlib.h>

#include "internal.h"

struct par_job {
    pthread_mutex_t mu;
    size_t n, next;
    parallel_fn fn;
    void *ctx;
    size_t fail_item; /* smallest failed item (n while none) */
    int rc;
    stagecal_error err;
};

struct par_arg {
    struct par_job *job;
    size_t worker;
};

static void run_items(struct par_job *j, size_t worker)
{
    stagecal_error err;
    for (;;) {
        pthread_mutex_lock(&j->mu);
        size_t item = j->next;
        if (item >= j->n || j->fail_item < j->n) {
            pthread_mutex_unlock(&j->mu);
            return;
        }
        j->next++;
        pthread_mutex_unlock(&j->mu);
        stagecal_error_clear(&err);
        int rc = j->fn(j->ctx, item, worker, &err);
        if (rc != STAGECAL_OK) {
            pthread_mutex_lock(&j->mu);
            if (item < j->fail_item) {
                j->fail_item = item;
                j->rc = rc;
                j->err = err;
            }
            pthread_mutex_unlock(&j->mu);
        }
    }
}

static void *thread_main(void *arg)
{
    struct par_arg *a = arg;
    run_items(a->job, a->worker);
    return NULL;
}

int parallel_for(size_t n, size_t nthreads, parallel_fn fn, void *ctx, stagecal_error *err)
{
    if (nthreads == 0 || n < 2) {
        for (size_t i = 0; i < n; i++) {
            int rc = fn(ctx, i, 0, err);
            if (rc != STAGECAL_OK)
                return rc;
        }
        return STAGECAL_OK;
    }
    if (nthreads > n - 1)
        nthreads = n - 1; /* no thread without an item */
    struct par_job j = {.n = n, .fn = fn, .ctx = ctx, .fail_item = n, .rc = STAGECAL_OK};
    pthread_t *th = malloc(nthreads * sizeof *th);
    struct par_arg *args = malloc((nthreads + 1) * sizeof *args);
    size_t started = 0;
    pthread_mutex_init(&j.mu, NULL);
    for (size_t t = 0; th && args && t <= nthreads; t++)
        args[t] = (struct par_arg){&j, t};
    while (th && args && started < nthreads &&
           pthread_create(&th[started], NULL, thread_main, &args[started + 1]) == 0)
        started++;
    run_items(&j, 0);
    for (size_t t = 0; t < started; t++)
        pthread_join(th[t], NULL);
    pthread_mutex_destroy(&j.mu);
    free(th);
    free(args);
    if (j.rc != STAGECAL_OK && err)
        *err = j.err;
    return j.rc;
}
