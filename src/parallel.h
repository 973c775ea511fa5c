/*
 * parallel.h — internal: independent items of one job on the calling thread and nthreads
 * more (pthreads). Items are handed out in increasing order, each to one thread; which
 * thread takes an item must not change what the item computes (each keeps its results at
 * its own index), so the caller's output does not depend on nthreads.
 */
#ifndef STAGECAL_PARALLEL_H
#define STAGECAL_PARALLEL_H

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

#endif
