/*
 * parallel.c — parallel_for (parallel.h): a counter under a mutex hands out the items; the
 * failure with the smallest index wins, so the status does not depend on the timing. GSL's
 * process-wide error handler is off for the whole job (gsl_quiet_begin).
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

/* Nonzero on a thread inside a parallel_for job: GSL's handler is off already and must not be
 * touched there. */
static _Thread_local int quiet_held;

gsl_quiet gsl_quiet_begin(void)
{
    gsl_quiet q = {NULL, 0};
    if (!quiet_held) {
        q.old = gsl_set_error_handler_off();
        q.set = 1;
    }
    return q;
}

void gsl_quiet_end(gsl_quiet q)
{
    if (q.set)
        gsl_set_error_handler(q.old);
}

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
    quiet_held = 1; /* parallel_for turned the handler off before starting this thread */
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
    gsl_quiet q = gsl_quiet_begin(); /* before any other thread can look at the handler */
    quiet_held++;
    for (size_t t = 0; th && args && t <= nthreads; t++)
        args[t] = (struct par_arg){&j, t};
    while (th && args && started < nthreads &&
           pthread_create(&th[started], NULL, thread_main, &args[started + 1]) == 0)
        started++;
    run_items(&j, 0);
    for (size_t t = 0; t < started; t++)
        pthread_join(th[t], NULL);
    quiet_held--;
    gsl_quiet_end(q); /* the other threads have ended */
    pthread_mutex_destroy(&j.mu);
    free(th);
    free(args);
    if (j.rc != STAGECAL_OK && err)
        *err = j.err;
    return j.rc;
}
