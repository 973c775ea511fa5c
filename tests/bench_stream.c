/*
 * bench_stream.c — the run-log inversion as `stagecal invert --output` does it: the logs
 * read and inverted run by run (stagecal_runlog_invert_stream), the CSV written to
 * /dev/null. Prints rows/s (wall and CPU time of the process, which a loaded machine does
 * not inflate as much) and the peak resident set size, for each thread count asked.
 * Targets (issue 17): peak RSS independent of the number of rows (< 64 MB at 10^7 rows).
 *
 *   usage: bench_stream COLUMN.json LOG.csv [THREADS...]   (default: 0 1 2)
 *
 * Logs: tests/bench_invert.c writes them (`bench_invert alpha 10000000 LOG.csv`: 100 runs,
 * constant α = 2.5, datasets/columns/demo_alpha.json; `bench_invert nrtl ...`: NRTL
 * ethanol–water, datasets/columns/kestrel_c3_ethanol_water.json). Each thread count runs in
 * a child process so that its peak RSS is its own.
 */
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "stagecal/column.h"
#include "stagecal/runlog.h"

static double clock_s(clockid_t id)
{
    struct timespec ts;
    clock_gettime(id, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int one(const char *colpath, const char *logpath, size_t threads)
{
    stagecal_column col;
    stagecal_error err;
    memset(&col, 0, sizeof col);
    if (stagecal_column_load(colpath, &col, &err) != STAGECAL_OK) {
        fprintf(stderr, "bench_stream: %s\n", err.text);
        return 66;
    }
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    rp.sha256 = 0; /* as invert */
    stagecal_findings *f = stagecal_findings_alloc(rp.max_findings);
    stagecal_runlog_stream *s = stagecal_runlog_stream_alloc(&logpath, 1, &col, &rp, f);
    FILE *sink = fopen("/dev/null", "w");
    if (!f || !s || !sink) {
        fprintf(stderr, "bench_stream: out of memory\n");
        return 70;
    }
    stagecal_runlog_totals tot;
    double w0 = clock_s(CLOCK_MONOTONIC), c0 = clock_s(CLOCK_PROCESS_CPUTIME_ID);
    int rc = stagecal_runlog_invert_stream(s, &col, 1.0, NULL, threads, sink, &tot, &err);
    double wall = clock_s(CLOCK_MONOTONIC) - w0, cpu = clock_s(CLOCK_PROCESS_CPUTIME_ID) - c0;
    if (rc != STAGECAL_OK) {
        fprintf(stderr, "bench_stream: %s\n", err.text);
        return 65;
    }
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("threads %zu: %zu rows, %zu runs, %zu windows, %zu ok; %.2f s wall (%.0f rows/s), "
           "%.2f s CPU (%.0f rows/s); peak RSS %.1f MB\n",
           threads, tot.rows, tot.nruns, tot.nwindows, tot.count[0], wall, (double)tot.rows / wall,
           cpu, (double)tot.rows / cpu, ru.ru_maxrss / 1024.0);
    fclose(sink);
    stagecal_runlog_totals_free(&tot);
    stagecal_runlog_stream_free(s);
    stagecal_findings_free(f);
    stagecal_column_free(&col);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: %s COLUMN.json LOG.csv [THREADS...]\n", argv[0]);
        return 2;
    }
    gsl_set_error_handler_off();
    static const char *const dflt[] = {"0", "1", "2"};
    int n = argc > 3 ? argc - 3 : 3, rc;
    for (int i = 0; i < n; i++) {
        size_t threads = strtoul(argc > 3 ? argv[3 + i] : dflt[i], NULL, 10);
        fflush(stdout);
        pid_t pid = fork();
        if (pid == 0)
            _exit((rc = one(argv[1], argv[2], threads), fflush(stdout), rc));
        int st;
        if (pid < 0 || waitpid(pid, &st, 0) < 0 || !WIFEXITED(st) || WEXITSTATUS(st) != 0)
            return 1;
    }
    return 0;
}
