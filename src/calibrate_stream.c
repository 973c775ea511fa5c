/*
 * calibrate_stream.c — the calibration chain's reading, inversion and evidence run by run
 * (stagecal_calibrate_params.stream), so that memory holds a batch of runs and one summary
 * per window instead of the log: 10^7 rows had taken 1.5 GB (docs/performance.md).
 *
 * Every per-row result, window and piece of evidence is a function of its run alone, except
 * one number pooled over the runs: the distillate's start-up time constant (the holdup
 * compensation's: a run without its own takes the pool, and 'auto' chooses the compensation by
 * whether the pool exists). So the logs are read twice. The first pass validates (the
 * findings the whole log gives, and nothing is fitted when they hold an error), lists the runs
 * and fits each run's time constant; the second hands the runs in batches to the threads
 * (src/parallel.c), each run analysed, inverted, drift-checked and summarised into windows
 * with the first pass's pool, and appends the results in run order. What works on the windows
 * alone (the pooled autocorrelation, the noise, the stage counts, the fits) then runs as for a
 * held log, on the same numbers: the outputs are the same bytes (tests/compare_calibrate.sh).
 *
 * What needs more than that holds the log instead (calibrate_stream_possible): standard
 * input or another file that cannot be read twice; the STAGES compensation without a stated
 * holdup (each run's holdup from its start-up, pooled over the runs in three rounds that
 * each compensate the rows again); the QUAD noise options (the windows' means taken again at
 * the ρ pooled over the windows).
 */
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "calibrate_internal.h"
#include "evidence_internal.h"
#include "holdup_internal.h"
#include "internal.h"
#include "parallel.h"
#include "runlog_internal.h"

/* Runs in a batch: at least one per thread, then until the batch holds this many rows (or
 * BATCH_RUNS runs): a few MB of rows and per-sample results. */
#define BATCH_ROWS 32768
#define BATCH_RUNS 256

int calibrate_stream_possible(const stagecal_column *col, const char *const *logs, size_t nlogs,
                              const stagecal_calibrate_params *par)
{
    if (!par->stream)
        return 0;
    if (par->evidence.noise == STAGECAL_EVIDENCE_NOISE_QUAD_POOLED ||
        par->evidence.noise == STAGECAL_EVIDENCE_NOISE_QUAD_STATS)
        return 0;
    if (par->evidence.holdup == STAGECAL_HOLDUP_COMP_STAGES && !(col->holdup_column_mol > 0) &&
        !(col->holdup_drum_mol > 0))
        return 0;
    for (size_t k = 0; k < nlogs; k++) {
        struct stat st;
        if (strcmp(logs[k], "-") == 0 || stat(logs[k], &st) != 0 || !S_ISREG(st.st_mode))
            return 0; /* (a file that is missing fails in the first pass, as when held) */
    }
    return 1;
}

void calibrate_run_rows(const stagecal_runlog_run *r, const stagecal_runlog_result *res,
                        size_t row0, stagecal_cal_run_rows *out)
{
    size_t warm = 0, steady = 0, run = 0, longest = 0;
    for (size_t i = row0; i < row0 + r->n; i++) {
        warm += (res->flags[i] & STAGECAL_SAMPLE_WARMUP) != 0;
        run = res->flags[i] & STAGECAL_SAMPLE_STEADY ? run + 1 : 0;
        steady += run > 0;
        longest = run > longest ? run : longest;
    }
    out->warm = warm;
    out->steady = steady;
    out->longest = longest;
}

/* ---- first pass: findings, runs, each run's time constant ------------------------------- */

/* *censored: 1 when a reading of the logs is censored. */
static int first_pass(stagecal_calibration *cal, const char *const *logs, size_t nlogs,
                      const stagecal_calibrate_params *par, stagecal_holdup_tau *pooled,
                      int *censored, stagecal_error *err)
{
    stagecal_runlog *log = cal->own_log;
    stagecal_runlog_stream *s =
        stagecal_runlog_stream_alloc(logs, nlogs, cal->column, &par->read, cal->findings);
    stagecal_runlog *run = stagecal_runlog_alloc();
    stagecal_holdup_tau *tau = NULL;
    size_t cap = 0;
    int rc = s && run ? STAGECAL_OK : error_set(err, STAGECAL_ENOMEM, "out of memory");
    while (rc == STAGECAL_OK) {
        if ((rc = stagecal_runlog_stream_next(s, run, err)) != STAGECAL_OK || run->n == 0)
            break;
        if (log->nruns == cap) {
            cap = cap ? 2 * cap : 256;
            stagecal_runlog_run *runs = realloc(log->runs, cap * sizeof *runs);
            if (runs)
                log->runs = runs;
            stagecal_holdup_tau *t = runs ? realloc(tau, cap * sizeof *t) : NULL;
            if (!t) {
                rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
                break;
            }
            tau = t;
        }
        stagecal_holdup_tau one;
        if ((rc = stagecal_holdup_estimate(run, cal->column->u.xd, NULL, &tau[log->nruns], NULL,
                                           NULL, &one, err)) != STAGECAL_OK)
            break;
        for (size_t i = 0; i < run->n && !*censored; i++)
            *censored =
                run->xd_cens[i] != STAGECAL_CENSOR_NONE || run->xb_cens[i] != STAGECAL_CENSOR_NONE;
        log->runs[log->nruns] = run->runs[0];
        log->runs[log->nruns].first = log->n;
        log->nruns++;
        log->n += run->n;
    }
    /* the files as the stream leaves them at the end (or where it failed) */
    if (run && run->nfiles) {
        size_t nf = run->nfiles;
        log->files = malloc(nf * sizeof *log->files);
        log->sha256 = malloc(nf * sizeof *log->sha256);
        log->checksum = malloc(nf * sizeof *log->checksum);
        if (log->files && log->sha256 && log->checksum) {
            memcpy(log->files, run->files, nf * sizeof *log->files);
            memcpy(log->sha256, run->sha256, nf * sizeof *log->sha256);
            memcpy(log->checksum, run->checksum, nf * sizeof *log->checksum);
            log->nfiles = nf;
            log->nfiles_iso = run->nfiles_iso;
        } else if (rc == STAGECAL_OK) {
            rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
        }
    }
    log->soft = stagecal_runlog_stream_soft(s);
    if (rc == STAGECAL_OK)
        holdup_pool_tau(tau, log->nruns, pooled);
    free(tau);
    stagecal_runlog_free(run);
    stagecal_runlog_stream_free(s);
    return rc;
}

/* ---- second pass: the runs in batches on the threads ------------------------------------ */

struct slot {
    stagecal_runlog *log; /* one run (its arrays reused from batch to batch) */
    stagecal_runlog_result res;
    stagecal_evidence_set set;
    stagecal_cal_run_rows rows;
};

struct pass2 {
    stagecal_calibration *cal;
    const stagecal_calibrate_params *par;
    stagecal_runlog_analysis_params ap;
    stagecal_evidence_params ep;
    stagecal_physics **phs; /* one per thread */
    struct slot *slots;
    int cens; /* 1: the censored likelihood's windows are built (evidence_build_windows) */
    /* appending */
    size_t run, window_base, row_base, cap_windows, cap_closures;
    evidence_caps caps;
};

/* Run `item` of the batch: analysed, inverted, its windows summarised (slot alone). */
static int run_job(void *ctx, size_t item, size_t worker, stagecal_error *err)
{
    struct pass2 *p = ctx;
    struct slot *sl = &p->slots[item];
    const stagecal_column *col = p->cal->column;
    int rc = stagecal_runlog_analyse(sl->log, col, &p->ap, &sl->res, err);
    if (rc == STAGECAL_OK)
        rc = runlog_invert_threads(sl->log, col, p->par->murphree, &p->ap, p->phs[worker], 0,
                                   &sl->res, err);
    if (rc != STAGECAL_OK)
        return rc;
    const stagecal_runlog_closure *c = &sl->res.closures[0];
    unsigned char skip = (unsigned char)(!p->par->keep_flagged && (c->gross || c->drift));
    stagecal_evidence_params ep = p->ep;
    ep.skip_run = &skip;
    ep.threads = 0;
    calibrate_run_rows(&sl->log->runs[0], &sl->res, 0, &sl->rows);
    return evidence_build_windows(sl->log, &sl->res, col, &ep, p->cens, &sl->set, err);
}

/* Appends the run of sl to the calibration (in run order). */
static int append_run(struct pass2 *p, struct slot *sl, stagecal_error *err)
{
    stagecal_calibration *cal = p->cal;
    stagecal_runlog_result *res = &cal->res, *r1 = &sl->res;
    int rc;
    if (p->par->samples &&
        (rc = runlog_write_rows(sl->log, cal->column, r1, p->window_base, p->row_base == 0,
                                p->par->samples, err)) != STAGECAL_OK)
        return rc;
    if (res->nwindows + r1->nwindows > p->cap_windows) {
        size_t c = p->cap_windows ? p->cap_windows : 256;
        while (c < res->nwindows + r1->nwindows)
            c *= 2;
        stagecal_runlog_window *w = realloc(res->windows, c * sizeof *w);
        if (!w)
            return error_set(err, STAGECAL_ENOMEM, "out of memory");
        res->windows = w;
        p->cap_windows = c;
    }
    for (size_t k = 0; k < r1->nwindows; k++) {
        stagecal_runlog_window *w = &res->windows[res->nwindows++];
        *w = r1->windows[k];
        w->run = p->run;
        w->first += p->row_base;
        w->last += p->row_base;
    }
    res->closures[p->run] = r1->closures[0];
    res->closures[p->run].run = p->run;
    for (int k = 0; k < STAGECAL_RUNLOG_NSTATUS; k++)
        res->count[k] += r1->count[k];
    cal->run_rows[p->run] = sl->rows;
    rc = evidence_set_append(&cal->evidence, &p->caps, &sl->set, p->ep.max_samples, p->run,
                             p->window_base, p->row_base, err);
    p->window_base += r1->nwindows;
    p->row_base += sl->log->n;
    p->run++;
    return rc;
}

static void slot_clear(struct slot *sl)
{
    stagecal_runlog_result_free(&sl->res);
    stagecal_evidence_set_free(&sl->set);
}

/* One batch of runs being read from the stream (by the reading thread, while the workers
 * invert the batch before it). */
struct batch {
    stagecal_runlog_stream *s;
    const stagecal_runlog *seen; /* the first reading's files, byte counts and checksums */
    struct slot *slots;          /* nslots of them */
    size_t nslots, nt, nb;
    int end; /* 1: the stream is done (or failed: rc) */
    int rc;
    stagecal_error err;
};

/* The run logs changed between the two readings (the fit would mix the first reading's
 * findings, pool and provenance with the second's rows): EDATA. */
static int changed(stagecal_error *err, const char *file)
{
    return error_set(err, STAGECAL_EDATA,
                     "%s: the run log changed while calibrate read it (its bytes differ between "
                     "the two readings); nothing was fitted: calibrate again when it is complete",
                     file);
}

/* The last file a log has begun (the one being read), for a message. */
static const char *last_file(const stagecal_runlog *log)
{
    return log->nfiles ? log->files[log->nfiles - 1] : "the run logs";
}

/* STAGECAL_OK when the second reading's files (as the stream leaves them at its end) are the
 * first's, byte count and checksum for each; else changed(). */
static int same_bytes(const stagecal_runlog *seen, const stagecal_runlog *now, stagecal_error *err)
{
    for (size_t k = 0; k < seen->nfiles; k++)
        if (k >= now->nfiles || now->checksum[k][0] != seen->checksum[k][0] ||
            now->checksum[k][1] != seen->checksum[k][1])
            return changed(err, seen->files[k]);
    return now->nfiles == seen->nfiles ? STAGECAL_OK : changed(err, now->files[seen->nfiles]);
}

static void read_batch(struct batch *b)
{
    size_t rows = 0;
    b->nb = 0;
    stagecal_error_clear(&b->err);
    while (b->nb < b->nslots && (b->nb < b->nt || rows < BATCH_ROWS)) {
        stagecal_runlog *lg = b->slots[b->nb].log;
        if ((b->rc = stagecal_runlog_stream_next(b->s, lg, &b->err)) != STAGECAL_OK || lg->n == 0) {
            b->end = 1;
            if (b->rc == STAGECAL_OK) /* at the end the stream leaves every file's checksum */
                b->rc = same_bytes(b->seen, lg, &b->err);
            return;
        }
        rows += lg->n;
        b->nb++;
    }
}

static void *read_main(void *arg)
{
    read_batch(arg);
    return NULL;
}

/* The runs in batches: while the threads invert one batch, another thread reads the next (the
 * stream is only ever touched by one thread at a time); each batch is appended in run order. */
static int second_pass(struct pass2 *p, const char *const *logs, size_t nlogs,
                       const stagecal_calibrate_params *par, stagecal_error *err)
{
    stagecal_calibration *cal = p->cal;
    size_t nt = par->threads + 1, nslots = nt > BATCH_RUNS ? nt : BATCH_RUNS;
    stagecal_runlog_params rp = par->read;
    rp.sha256 = 0; /* the first pass hashed the bytes */
    /* the second reading's findings are the first's: not kept */
    stagecal_findings *f2 = stagecal_findings_alloc(1);
    stagecal_runlog_stream *s =
        f2 ? stagecal_runlog_stream_alloc(logs, nlogs, cal->column, &rp, f2) : NULL;
    struct slot *all = calloc(2 * nslots, sizeof *all);
    p->phs = calloc(nt, sizeof *p->phs);
    int rc = s && all && p->phs ? STAGECAL_OK : error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t i = 0; rc == STAGECAL_OK && i < 2 * nslots; i++)
        if (!(all[i].log = stagecal_runlog_alloc()))
            rc = error_set(err, STAGECAL_ENOMEM, "out of memory");
    for (size_t t = 0; rc == STAGECAL_OK && t < nt; t++)
        if (!(p->phs[t] = stagecal_physics_alloc(cal->column, NULL, err)))
            rc = err && err->code ? err->code : STAGECAL_ENOMEM;
    struct batch b[2];
    for (int k = 0; k < 2; k++)
        b[k] = (struct batch){.s = s,
                              .seen = cal->own_log,
                              .slots = all ? all + k * nslots : NULL,
                              .nslots = nslots,
                              .nt = nt,
                              .rc = STAGECAL_OK};
    int cur = 0;
    if (rc == STAGECAL_OK)
        read_batch(&b[0]);
    while (rc == STAGECAL_OK && b[cur].nb > 0) {
        struct batch *now = &b[cur], *next = &b[1 - cur];
        next->nb = 0;
        pthread_t th;
        int reading = 0;
        if (!now->end && now->rc == STAGECAL_OK && par->threads > 0) { /* (0: one thread) */
            next->end = 0;
            reading = pthread_create(&th, NULL, read_main, next) == 0;
        }
        if (p->run + now->nb > cal->own_log->nruns)
            rc = changed(err, last_file(now->slots[now->nb - 1].log));
        p->slots = now->slots;
        if (rc == STAGECAL_OK)
            rc = parallel_for(now->nb, par->threads, run_job, p, err);
        if (reading)
            pthread_join(th, NULL);
        for (size_t i = 0; i < now->nb; i++) {
            if (rc == STAGECAL_OK)
                rc = append_run(p, &now->slots[i], err);
            slot_clear(&now->slots[i]);
        }
        now->nb = 0;
        if (rc == STAGECAL_OK && now->rc != STAGECAL_OK) {
            rc = now->rc;
            if (err)
                *err = now->err;
        }
        if (par->progress && cal->own_log->n)
            par->progress(par->progress_ctx, "inverting",
                          0.2 + 0.3 * (double)p->row_base / (double)cal->own_log->n);
        if (rc == STAGECAL_OK && !reading && !now->end) /* no thread: read it here */
            read_batch(next);
        if (now->end)
            next->end = 1, next->nb = 0;
        else if (next->rc != STAGECAL_OK && next->nb == 0) {
            rc = next->rc;
            if (err)
                *err = next->err;
        }
        cur = 1 - cur;
    }
    if (rc == STAGECAL_OK && b[cur].rc != STAGECAL_OK) {
        rc = b[cur].rc;
        if (err)
            *err = b[cur].err;
    }
    if (rc == STAGECAL_OK && (p->run != cal->own_log->nruns || p->row_base != cal->own_log->n))
        rc = changed(err, last_file(cal->own_log));
    for (size_t t = 0; p->phs && t < nt; t++)
        stagecal_physics_free(p->phs[t]);
    for (size_t i = 0; all && i < 2 * nslots; i++) {
        slot_clear(&all[i]);
        stagecal_runlog_free(all[i].log);
    }
    free(p->phs);
    free(all);
    p->slots = NULL;
    stagecal_runlog_stream_free(s);
    stagecal_findings_free(f2);
    return rc;
}

int calibrate_stream(stagecal_calibration *cal, const char *const *logs, size_t nlogs,
                     const stagecal_calibrate_params *par, stagecal_error *err)
{
    stagecal_holdup_tau pooled;
    int censored = 0;
    cal->streamed = 1;
    int rc = first_pass(cal, logs, nlogs, par, &pooled, &censored, err);
    if (rc != STAGECAL_OK)
        return rc;
    if (cal->findings->n_errors > 0)
        return error_set(err, STAGECAL_EDATA, "%zu error(s) in the run logs, first: %s",
                         cal->findings->n_errors,
                         cal->findings->n ? cal->findings->items[0].text : "(not kept)");
    if (par->progress)
        par->progress(par->progress_ctx, "inverting", 0.2);
    size_t nr = cal->own_log->nruns;
    stagecal_runlog_result *res = &cal->res;
    res->nruns = nr;
    res->closures = calloc(nr ? nr : 1, sizeof *res->closures);
    cal->run_rows = calloc(nr ? nr : 1, sizeof *cal->run_rows);
    if (!res->closures || !cal->run_rows)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    struct pass2 p;
    memset(&p, 0, sizeof p);
    p.cal = cal;
    p.par = par;
    /* as run_chain (calibrate.c) sets them, with the pool of the first pass */
    p.ap = par->analysis;
    p.ap.holdup = par->evidence.holdup == STAGECAL_HOLDUP_COMP_NONE ? STAGECAL_EVIDENCE_HOLDUP_AUTO
                                                                    : par->evidence.holdup;
    p.ap.holdup_pooled = &pooled;
    p.ep = par->evidence;
    p.ep.holdup_pooled = &pooled;
    /* the censored likelihood's windows (a copy of each window's readings, as much again as the
     * evidence) only where something takes them */
    p.cens = censored || par->method == STAGECAL_CAL_CENSORED;
    if ((rc = second_pass(&p, logs, nlogs, par, err)) != STAGECAL_OK)
        return rc;
    res->nwindows = p.window_base;
    stagecal_evidence_set *set = &cal->evidence;
    set->tau_pooled = pooled;
    if ((rc = evidence_set_point(set, par->evidence.max_samples, err)) != STAGECAL_OK)
        return rc;
    if (par->progress)
        par->progress(par->progress_ctx, "windows", 0.5);
    unsigned char *skip = calloc(nr ? nr : 1, 1);
    if (!skip)
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    stagecal_evidence_params ep = par->evidence;
    ep.threads = par->threads;
    if ((rc = calibrate_flag_runs(cal, par, skip, err)) == STAGECAL_OK)
        rc = evidence_build_finish(cal->column, par->murphree, &ep, set, err);
    free(skip);
    return rc;
}
