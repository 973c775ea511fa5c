/*
 * runlog_pipeline.c — run-log inversion run by run (stagecal_runlog_invert_stream): one
 * thread reads the runs from a stagecal_runlog_stream, nthreads workers analyse and invert
 * them, and each worker writes its run when the run before it has been written.
 *
 * Why run by run: every step of the per-row output — the closure, the no-distillate
 * stretches, the inversion, the steady flags and the windows (runlog_analysis.c) — works
 * inside one run, so a run inverted on its own gives the bytes the whole log gives, with
 * its window numbers offset by the windows before it. Memory then holds a few runs
 * instead of the log. The workers take the runs in order and write in order (a sequence
 * number and one condition variable), so the output is the same for any nthreads. A thread
 * whose run must wait for an earlier one to be written leaves it done and takes other work;
 * the thread that writes the earlier run writes it next. The reader, with every slot full,
 * inverts the next run itself rather than wait.
 *
 * Workload: runs of 10^3–10^5 rows; reading is about half of the time, so two cores give
 * close to two-fold (docs/performance.md).
 */
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "runlog_internal.h"

enum { SLOT_FREE = 0, SLOT_READING, SLOT_READY, SLOT_BUSY, SLOT_DONE, SLOT_WRITING };

struct slot {
    stagecal_runlog *log;       /* one run (its arrays are reused from run to run) */
    stagecal_runlog_result res; /* its analysis and inversion (SLOT_DONE: waiting to be written) */
    int rc;                     /* the status of that work */
    stagecal_error err;
    size_t seq; /* its place in the output */
    int state;  /* SLOT_* */
};

struct pipe {
    pthread_mutex_t mu;
    pthread_cond_t cv;
    struct slot *slots;
    size_t nslots;
    size_t nthreads;   /* workers beside the reader */
    size_t next_take;  /* sequence number the next worker takes */
    size_t next_write; /* sequence number whose turn it is to write */
    int done;          /* the reader has handed out every run */
    int writing;       /* a thread is writing (one at a time, in sequence order) */
    int rc;            /* first failure (STAGECAL_OK while none) */
    stagecal_error err;
    /* the job */
    const stagecal_column *col;
    double murphree;
    stagecal_runlog_analysis_params par;
    FILE *out;
    stagecal_runlog_totals *tot;
    size_t window_base; /* windows written so far (only the writer in turn touches it) */
};

void stagecal_runlog_totals_free(stagecal_runlog_totals *t)
{
    if (!t)
        return;
    free(t->runs);
    free(t->closures);
    free(t->files);
    memset(t, 0, sizeof *t);
}

/* Writes the inverted run of log (the writer in turn) and adds it to the totals. */
static int write_run(struct pipe *p, const stagecal_runlog *log, const stagecal_runlog_result *res,
                     stagecal_error *err)
{
    stagecal_runlog_totals *t = p->tot;
    stagecal_runlog_run *runs = realloc(t->runs, (t->nruns + 1) * sizeof *runs);
    if (runs)
        t->runs = runs;
    stagecal_runlog_closure *cl = runs ? realloc(t->closures, (t->nruns + 1) * sizeof *cl) : NULL;
    if (cl)
        t->closures = cl;
    char(*files)[160] = cl ? realloc(t->files, log->nfiles * sizeof *files) : NULL;
    if (!files)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    t->files = files;
    memcpy(files, log->files, log->nfiles * sizeof *files);
    t->nfiles = log->nfiles;
    int rc = runlog_write_rows(log, p->col, res, p->window_base, t->rows == 0, p->out, err);
    if (rc != STAGECAL_OK)
        return rc;
    runs[t->nruns] = log->runs[0];
    runs[t->nruns].first = t->rows;
    cl[t->nruns] = res->closures[0];
    cl[t->nruns].run = t->nruns;
    t->nruns++;
    t->rows += log->n;
    t->nwindows += res->nwindows;
    for (int k = 0; k < STAGECAL_RUNLOG_NSTATUS; k++)
        t->count[k] += res->count[k];
    p->window_base += res->nwindows;
    return STAGECAL_OK;
}

/* Analyses and inverts the run of sl into sl->res, sl->rc, sl->err. Called without the lock. */
static void work_run(struct pipe *p, struct slot *sl, stagecal_physics *ph)
{
    memset(&sl->res, 0, sizeof sl->res);
    stagecal_error_clear(&sl->err);
    int rc = stagecal_runlog_analyse(sl->log, p->col, &p->par, &sl->res, &sl->err);
    if (rc == STAGECAL_OK)
        rc = runlog_invert_with(sl->log, p->col, p->murphree, &p->par, ph, &sl->res, &sl->err);
    sl->rc = rc;
}

/* Records the first failure and wakes everyone; under the lock. */
static void note_failure(struct pipe *p, int rc, const stagecal_error *err)
{
    if (rc != STAGECAL_OK && p->rc == STAGECAL_OK) {
        p->rc = rc;
        p->err = *err;
        pthread_cond_broadcast(&p->cv);
    }
}

/* The slot ready to be taken in sequence order, or NULL; under the lock. */
static struct slot *slot_to_take(struct pipe *p)
{
    for (size_t i = 0; i < p->nslots; i++)
        if (p->slots[i].state == SLOT_READY && p->slots[i].seq == p->next_take)
            return &p->slots[i];
    return NULL;
}

/* Takes the work of sl (SLOT_READY, next in turn), does it without the lock, and marks it
 * done; under the lock. */
static void take_and_work(struct pipe *p, struct slot *sl, stagecal_physics *ph)
{
    sl->state = SLOT_BUSY;
    p->next_take++;
    pthread_mutex_unlock(&p->mu);
    work_run(p, sl, ph);
    pthread_mutex_lock(&p->mu);
    sl->state = SLOT_DONE;
    note_failure(p, sl->rc, &sl->err);
}

/* Writes the runs whose work is done, in sequence order, while the next one in turn is done
 * and no other thread is writing: a thread whose run must wait for an earlier one leaves it
 * done and goes on with other work; the thread that writes the earlier run writes it next.
 * Under the lock (released while writing). */
static void write_ready(struct pipe *p)
{
    while (!p->writing) {
        struct slot *sl = NULL;
        for (size_t i = 0; i < p->nslots && !sl; i++)
            if (p->slots[i].state == SLOT_DONE && p->slots[i].seq == p->next_write)
                sl = &p->slots[i];
        if (!sl)
            return;
        int go = p->rc == STAGECAL_OK, rc = STAGECAL_OK;
        sl->state = SLOT_WRITING;
        p->writing = 1;
        pthread_mutex_unlock(&p->mu);
        if (go)
            rc = write_run(p, sl->log, &sl->res, &sl->err);
        stagecal_runlog_result_free(&sl->res);
        pthread_mutex_lock(&p->mu);
        note_failure(p, rc, &sl->err);
        p->writing = 0;
        p->next_write++;
        sl->state = SLOT_FREE;
        pthread_cond_broadcast(&p->cv);
    }
}

static void *worker(void *arg)
{
    struct pipe *p = arg;
    stagecal_error err;
    stagecal_error_clear(&err);
    stagecal_physics *ph = stagecal_physics_alloc(p->col, NULL, &err);
    pthread_mutex_lock(&p->mu);
    if (!ph)
        note_failure(p, err.code ? err.code : STAGECAL_ENOMEM, &err);
    while (ph) {
        struct slot *sl = slot_to_take(p);
        if (!sl) {
            if (p->done || p->rc != STAGECAL_OK)
                break;
            pthread_cond_wait(&p->cv, &p->mu);
            continue;
        }
        take_and_work(p, sl, ph);
        write_ready(p);
    }
    pthread_mutex_unlock(&p->mu);
    stagecal_physics_free(ph);
    return NULL;
}

/* Everything in the calling thread. */
static int run_inline(struct pipe *p, stagecal_runlog_stream *s, stagecal_error *err)
{
    stagecal_physics *ph = stagecal_physics_alloc(p->col, NULL, err);
    if (!ph)
        return err ? err->code : STAGECAL_ENOMEM;
    struct slot *sl = &p->slots[0];
    int rc;
    for (;;) {
        if ((rc = stagecal_runlog_stream_next(s, sl->log, err)) != STAGECAL_OK || sl->log->n == 0)
            break;
        work_run(p, sl, ph);
        if ((rc = sl->rc) == STAGECAL_OK)
            rc = write_run(p, sl->log, &sl->res, &sl->err);
        stagecal_runlog_result_free(&sl->res);
        if (rc != STAGECAL_OK) {
            if (err)
                *err = sl->err;
            break;
        }
    }
    stagecal_physics_free(ph);
    return rc;
}

/* Rows the runs in the slots may hold before the reader stops reading ahead and stops
 * inverting runs itself: long runs (10^5 rows each) are then kept to one per worker and the one
 * being read, as many as one worker keeps busy, so memory stays that of short runs. */
#define READ_AHEAD_ROWS 65536

/* Slots beyond 2·threads + 1 for short runs read ahead. With runs of 10^4 rows (the α bench
 * log, tests/bench_invert.c), 2 more took `invert` of 10^6 rows from 0.43-0.45 s to
 * 0.37-0.38 s wall on 2 cores (idle, 3 runs each; 1 and 3 more gave the same): read runs
 * then wait for the worker, where before the reader, with every slot taken, inverted a run of
 * its own while the worker ran dry. Not more: with 4 more the runs held reached
 * READ_AHEAD_ROWS, where the reader stops inverting runs, and it took 0.47-0.49 s. */
#define READ_AHEAD_SLOTS 2

/* Rows of the runs in the slots, and *used the slots in use; under the lock, no slot being
 * read. */
static size_t rows_held(const struct pipe *p, size_t *used)
{
    size_t rows = 0;
    *used = 0;
    for (size_t i = 0; i < p->nslots; i++)
        if (p->slots[i].state != SLOT_FREE) {
            (*used)++;
            rows += p->slots[i].log->n;
        }
    return rows;
}

/* The reader's side: fills free slots in order until the stream ends or the work fails. With
 * every slot filled it does not wait: it inverts the next run in turn itself (and writes what
 * is due), so the core it runs on stays busy while the workers catch up. Both only while the
 * runs held are short (READ_AHEAD_ROWS). */
static int feed(struct pipe *p, stagecal_runlog_stream *s, stagecal_error *err)
{
    size_t seq = 0;
    int rc = STAGECAL_OK;
    stagecal_physics *ph = stagecal_physics_alloc(p->col, NULL, NULL); /* NULL: only reads */
    pthread_mutex_lock(&p->mu);
    for (;;) {
        struct slot *sl = NULL, *t;
        for (size_t i = 0; i < p->nslots && !sl; i++)
            if (p->slots[i].state == SLOT_FREE)
                sl = &p->slots[i];
        if (p->rc != STAGECAL_OK)
            break;
        size_t used, rows = rows_held(p, &used);
        int few = rows < READ_AHEAD_ROWS; /* short runs: read ahead, help invert */
        if (!sl || (used >= p->nthreads + 1 && !few)) {
            if (few && ph && (t = slot_to_take(p)) != NULL) {
                take_and_work(p, t, ph);
                write_ready(p);
            } else {
                pthread_cond_wait(&p->cv, &p->mu);
            }
            continue;
        }
        sl->state = SLOT_READING;
        pthread_mutex_unlock(&p->mu);
        rc = stagecal_runlog_stream_next(s, sl->log, err);
        pthread_mutex_lock(&p->mu);
        if (rc != STAGECAL_OK || sl->log->n == 0) {
            sl->state = SLOT_FREE;
            break;
        }
        sl->seq = seq++;
        sl->state = SLOT_READY;
        pthread_cond_broadcast(&p->cv);
    }
    p->done = 1;
    pthread_cond_broadcast(&p->cv);
    /* the stream has ended: the runs read ahead are inverted on this core too, not left to the
     * workers alone */
    for (struct slot *t;
         ph && rc == STAGECAL_OK && p->rc == STAGECAL_OK && (t = slot_to_take(p)) != NULL;) {
        take_and_work(p, t, ph);
        write_ready(p);
    }
    pthread_mutex_unlock(&p->mu);
    stagecal_physics_free(ph);
    return rc;
}

int stagecal_runlog_invert_stream(stagecal_runlog_stream *s, const stagecal_column *col,
                                  double murphree, const stagecal_runlog_analysis_params *params,
                                  size_t nthreads, FILE *out, stagecal_runlog_totals *tot,
                                  stagecal_error *err)
{
    memset(tot, 0, sizeof *tot);
    if (!col || !col->system.vle)
        return error_set(err, STAGECAL_EINVAL, "the inversion needs a column with a VLE model");
    struct pipe *p = calloc(1, sizeof *p);
    /* one being read, and for each worker one being inverted and one waiting (read ahead, or
     * inverted and waiting for its turn to be written), and READ_AHEAD_SLOTS more read ahead of
     * short runs; runs that hold many rows are not read ahead, nor inverted by the reader
     * (READ_AHEAD_ROWS) */
    size_t nslots = 2 * nthreads + 1 + (nthreads ? READ_AHEAD_SLOTS : 0);
    if (p)
        p->slots = calloc(nslots, sizeof *p->slots);
    int rc = p && p->slots ? STAGECAL_OK : STAGECAL_ENOMEM;
    for (size_t i = 0; rc == STAGECAL_OK && i < nslots; i++)
        if (!(p->slots[i].log = stagecal_runlog_alloc()))
            rc = STAGECAL_ENOMEM;
    if (rc != STAGECAL_OK) {
        for (size_t i = 0; p && p->slots && i < nslots; i++)
            stagecal_runlog_free(p->slots[i].log);
        free(p ? p->slots : NULL);
        free(p);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    p->nslots = nslots;
    p->nthreads = nthreads;
    p->col = col;
    p->murphree = murphree;
    p->par = params ? *params : stagecal_runlog_analysis_default_params();
    p->out = out;
    p->tot = tot;
    stagecal_error_clear(err);
    pthread_mutex_init(&p->mu, NULL);
    pthread_cond_init(&p->cv, NULL);
    if (nthreads == 0) {
        rc = run_inline(p, s, err);
    } else {
        pthread_t *th = calloc(nthreads, sizeof *th);
        size_t started = 0;
        while (th && started < nthreads && pthread_create(&th[started], NULL, worker, p) == 0)
            started++;
        rc = started ? feed(p, s, err) : error_set(err, STAGECAL_ENOMEM, "cannot start a thread");
        if (!started)
            p->done = 1;
        for (size_t i = 0; i < started; i++)
            pthread_join(th[i], NULL);
        free(th);
        if (rc == STAGECAL_OK && p->rc != STAGECAL_OK) {
            rc = p->rc;
            if (err)
                *err = p->err;
        }
    }
    tot->soft = stagecal_runlog_stream_soft(s);
    pthread_cond_destroy(&p->cv);
    pthread_mutex_destroy(&p->mu);
    for (size_t i = 0; i < nslots; i++) {
        stagecal_runlog_result_free(&p->slots[i].res); /* (work done, never written: a failure) */
        stagecal_runlog_free(p->slots[i].log);
    }
    free(p->slots);
    free(p);
    return rc;
}
