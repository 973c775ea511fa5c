/*
 * parallel.h — internal: independent items of one job on the calling thread and nthreads
 * more (pthreads). Items are handed out in increasing order, each to one thread; which
 * thread takes an item must not change what the item computes (each keeps its results at
 * its own index), so the caller's output does not depend on nthreads.
 */
#ifndef STAGECAL_PARALLEL_H
#define STAGECAL_PARALLEL_H

#include <gsl/gsl_errno.h>
#include <stddef.h>

#include "stagecal/error.h"

/* Work on item `item` as thread `worker` (0: the calling thread, 1..nthreads the others; for
 * per-thread scratch). A status; err may be written on failure only. */
typedef int (*parallel_fn)(void *ctx, size_t item, size_t worker, stagecal_error *err);

/* Calls fn on every item of [0, n), on the calling thread and at most nthreads more (0: all
 * on the calling thread, in order). Threads that cannot be started leave their share to the
 * others. After a failure no new item is started; the status and message returned are those
 * of the failed item with the smallest index, as a serial loop stopping at its first failure
 * returns them. */
int parallel_for(size_t n, size_t nthreads, parallel_fn fn, void *ctx, stagecal_error *err);

/* GSL's error handler off around a call that may fail by design (a Cholesky factorisation of
 * a matrix that need not be positive definite), so that GSL's default handler cannot abort
 * the caller's process: q = gsl_quiet_begin(); …; gsl_quiet_end(q). The handler is
 * process-wide, and saving and restoring it on several threads at once would race (a thread
 * could restore the aborting handler while another is inside its call), so on the threads of a
 * parallel_for job both are no-ops: parallel_for turns the handler off on the calling thread
 * before it starts the others and restores it after they have ended. */
typedef struct {
    gsl_error_handler_t *old; /* the handler before */
    int set;                  /* 1 when begin changed it */
} gsl_quiet;
gsl_quiet gsl_quiet_begin(void);
void gsl_quiet_end(gsl_quiet q);

#endif
