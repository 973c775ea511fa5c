/*
 * test_runlog_stream.c — the run-log reader's number parsing and the stream that hands
 * out one run at a time (src/runlog_reading.c, src/runlog_stream.c).
 *
 * Oracles: glibc's strtod for the numbers (correctly rounded, as C11 7.22.1.3 recommends
 * and glibc documents); for the stream, the whole-file reader stagecal_runlog_read (the
 * same rows, values, lines, runs and findings, in the same order, on the demo logs and on
 * every bad input of tests/badinput/); for the reader's own cutting of plain lines, libcsv;
 * for the reading in chunks, the text read in one chunk and the rows as the test wrote them.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>
#include <dirent.h>
#include <errno.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "runlog_internal.h"
#include "synth_runlog.h"
#include "stagecal/column.h"
#include "stagecal/runlog.h"

/* What the reader did before its fast path: strtod, decimal only, finite, no ERANGE. */
static int reference_parse(const char *s, double *v)
{
    char *end;
    if (strpbrk(s, "xX"))
        return -1;
    errno = 0;
    double x = strtod(s, &end);
    if (end == s || *end != '\0' || errno == ERANGE || !isfinite(x))
        return -1;
    *v = x;
    return 0;
}

/* Random decimals as loggers write them (fixed and %g forms, 1–17 digits, signs,
 * exponents) and random strings of number characters: the parser returns exactly the
 * double strtod returns, bit for bit, and refuses what strtod refuses. Tolerance: none
 * (the fast path is exact by construction, Clinger 1990). */
static void runlog_numbers_match_strtod(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 17);
    const char al[] = "0123456789.eE+-";
    char b[64];
    size_t differ = 0, accepted = 0;
    for (int it = 0; it < 400000; it++) {
        int mode = it % 3;
        if (mode == 0) {
            double x =
                (gsl_rng_uniform(rng) - 0.2) * pow(10, (int)gsl_rng_uniform_int(rng, 12) - 6);
            snprintf(b, sizeof b, "%.*f", (int)gsl_rng_uniform_int(rng, 12), x);
        } else if (mode == 1) {
            double x = gsl_rng_uniform(rng) * pow(10, (int)gsl_rng_uniform_int(rng, 50) - 25);
            snprintf(b, sizeof b, "%.*g", 1 + (int)gsl_rng_uniform_int(rng, 18), x);
        } else {
            size_t len = 1 + gsl_rng_uniform_int(rng, 12);
            for (size_t i = 0; i < len; i++)
                b[i] = al[gsl_rng_uniform_int(rng, sizeof al - 1)];
            b[len] = '\0';
        }
        double got = NAN, want = NAN;
        int rg = runlog_parse_number(b, 0, &got), rw = reference_parse(b, &want);
        if (rg != rw || (rg == 0 && memcmp(&got, &want, sizeof got) != 0))
            differ++;
        accepted += rg == 0;
    }
    static const char *const edge[] = {"0",      "-0",
                                       "+1",     ".5",
                                       "5.",     ".",
                                       "",       "1e22",
                                       "1e23",   "9007199254740993",
                                       "1e-400", "123456789012345678901",
                                       "0.1e+1", "1e",
                                       " 1",     "1 ",
                                       "0x10",   "1.7976931348623157e308",
                                       "2e308"};
    for (size_t i = 0; i < sizeof edge / sizeof edge[0]; i++) {
        double got = NAN, want = NAN;
        int rg = runlog_parse_number(edge[i], 0, &got), rw = reference_parse(edge[i], &want);
        if (rg != rw || (rg == 0 && memcmp(&got, &want, sizeof got) != 0)) {
            print_error("'%s': %d %.17g, strtod %d %.17g\n", edge[i], rg, got, rw, want);
            differ++;
        }
    }
    gsl_rng_free(rng);
    assert_int_equal(differ, 0);
    assert_true(accepted > 250000); /* the realistic forms were accepted, not all refused */
}

/* The writer's %.9g (u_stages) against printf's on 10^6 values spread over 26 decades, both
 * signs, values a hair below powers of ten and exact 9-digit ties: the same text, or -1 (the
 * writer then calls printf). Tolerance: none. */
static void runlog_g9_matches_printf(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 5);
    size_t differ = 0, fast = 0, n = 1000000;
    char a[64], b[64];
    for (size_t it = 0; it < n; it++) {
        double v, scale = pow(10, (int)gsl_rng_uniform_int(rng, 28) - 14);
        switch (it % 4) {
        case 0:
            v = gsl_rng_uniform(rng) * scale;
            break;
        case 1:
            v = -gsl_rng_uniform(rng) * scale;
            break;
        case 2: /* a 9-digit decimal, a tie or close to one at the tenth digit */
            v = (double)gsl_rng_uniform_int(rng, 1000000000) * 1e-9 * scale;
            break;
        default:
            v = scale * (1 - 1e-10 * gsl_rng_uniform(rng));
        }
        int k = runlog_format_g9(a, v);
        if (k < 0)
            continue;
        fast++;
        a[k] = '\0';
        snprintf(b, sizeof b, "%.9g", v);
        if (strcmp(a, b) != 0) {
            if (differ < 5)
                print_error("%.17g: '%s', printf '%s'\n", v, a, b);
            differ++;
        }
    }
    gsl_rng_free(rng);
    assert_int_equal(differ, 0);
    assert_true(fast > n * 9 / 10); /* the fast path is the common one */
}

/* The writer's fixed decimals (time, stages, L/V, xB_rec …) against the rule docs/runlog.md
 * states, formed here another way: llround(|v|·10^d) printed by printf's "%lld", split at the
 * point, "-" for a negative v that does not round to zero; printf's "%.*f" from 1e9 on. On 10^6
 * values over 22 decades, both signs, each of 0–9 decimals, values on and near the rounding
 * ties. Tolerance: none (the same text). */
static void runlog_fixed_matches_rule(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 7);
    size_t differ = 0, n = 1000000;
    char a[400], b[400], ip[40];
    for (size_t it = 0; it < n; it++) {
        int d = (int)(it % 10);
        double scale = pow(10, (int)gsl_rng_uniform_int(rng, 22) - 12), v;
        switch (it / 10 % 4) {
        case 0:
            v = gsl_rng_uniform(rng) * scale;
            break;
        case 1:
            v = -gsl_rng_uniform(rng) * scale;
            break;
        case 2: /* a tie at the last decimal, or next to one */
            v = ((double)gsl_rng_uniform_int(rng, 100000) + 0.5) / pow(10, d) +
                (double)((int)gsl_rng_uniform_int(rng, 3) - 1) * 1e-12;
            break;
        default:
            v = scale * (1 - 1e-10 * gsl_rng_uniform(rng));
        }
        int k = runlog_format_fixed(a, v, d);
        a[k] = '\0';
        if (fabs(v) >= 1e9) {
            snprintf(b, sizeof b, "%.*f", d, v);
        } else {
            long long s = llround(fabs(v) * pow(10, d)), p = (long long)pow(10, d);
            snprintf(ip, sizeof ip, "%lld", s / p);
            if (d > 0)
                snprintf(b, sizeof b, "%s%s.%0*lld", v < 0 && s > 0 ? "-" : "", ip, d, s % p);
            else
                snprintf(b, sizeof b, "%s%s", v < 0 && s > 0 ? "-" : "", ip);
        }
        if (strcmp(a, b) != 0) {
            if (differ < 5)
                print_error("%.17g, %d decimals: '%s', rule '%s'\n", v, d, a, b);
            differ++;
        }
    }
    assert_int_equal(runlog_format_fixed(a, NAN, 3), 0); /* not finite: an empty cell */
    assert_int_equal(runlog_format_fixed(a, INFINITY, 3), 0);
    gsl_rng_free(rng);
    assert_int_equal(differ, 0);
}

/* Reads paths whole, and streamed run by run; everything the caller sees agrees. */
static void compare_whole_and_stream(const char *const *paths, size_t n, const stagecal_column *col)
{
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    rp.sha256 = 0;
    stagecal_runlog *whole = stagecal_runlog_alloc(), *run = stagecal_runlog_alloc();
    stagecal_findings *fw = stagecal_findings_alloc(1000), *fs = stagecal_findings_alloc(1000);
    int rcw[64];
    for (size_t i = 0; i < n; i++)
        rcw[i] = stagecal_runlog_read(whole, paths[i], col, &rp, fw, NULL);
    stagecal_runlog_stream *s = stagecal_runlog_stream_alloc(paths, n, col, &rp, fs);
    assert_non_null(s);
    size_t k = 0, row = 0, nerr = 0;
    for (;;) {
        int rc = stagecal_runlog_stream_next(s, run, NULL);
        if (rc != STAGECAL_OK) {
            nerr++;
            continue;
        }
        if (run->n == 0)
            break;
        assert_int_equal(run->nruns, 1);
        assert_true(k < whole->nruns);
        const stagecal_runlog_run *a = &whole->runs[k], *b = &run->runs[0];
        assert_string_equal(a->name, b->name);
        assert_int_equal(a->n, b->n);
        assert_int_equal(a->first_line, b->first_line);
        assert_string_equal(whole->files[a->file], run->files[b->file]);
        assert_int_equal(a->first, row);
        for (size_t i = 0; i < run->n; i++) {
            size_t w = row + i;
            double aw[] = {whole->t_s[w], whole->w_mol[w], whole->xd[w], whole->xb[w], whole->r[w]};
            double bw[] = {run->t_s[i], run->w_mol[i], run->xd[i], run->xb[i], run->r[i]};
            assert_memory_equal(aw, bw, sizeof aw);
            assert_int_equal(whole->line[w], run->line[i]);
            assert_int_equal(run->run[i], 0);
            assert_int_equal(whole->xd_cens[w], run->xd_cens[i]);
            assert_int_equal(whole->xb_cens[w], run->xb_cens[i]);
            assert_int_equal(!whole->v_mol_s, !run->v_mol_s);
            if (run->v_mol_s)
                assert_memory_equal(&whole->v_mol_s[w], &run->v_mol_s[i], sizeof(double));
        }
        row += run->n;
        k++;
    }
    assert_int_equal(k, whole->nruns);
    assert_int_equal(row, whole->n);
    size_t werr = 0;
    for (size_t i = 0; i < n; i++)
        werr += rcw[i] != STAGECAL_OK;
    assert_int_equal(nerr, werr);
    assert_int_equal(fw->n, fs->n);
    assert_int_equal(fw->n_errors, fs->n_errors);
    assert_int_equal(fw->n_warnings, fs->n_warnings);
    for (size_t i = 0; i < fw->n; i++)
        assert_string_equal(fw->items[i].text, fs->items[i].text);
    stagecal_runlog_stream_free(s);
    stagecal_runlog_free(whole);
    stagecal_runlog_free(run);
    stagecal_findings_free(fw);
    stagecal_findings_free(fs);
}

/* The demo column and the fourteen demo logs (2025-01 … 2026-02) in p. */
static void demo_setup(stagecal_column *col, const char *p[14])
{
    static char paths[14][512];
    memset(col, 0, sizeof *col);
    assert_int_equal(
        stagecal_column_load(STAGECAL_DATASETS "/columns/demo_benzene_toluene.json", col, NULL), 0);
    for (int i = 0; i < 14; i++) {
        snprintf(paths[i], sizeof paths[i], STAGECAL_DATASETS "/demo/logs/%d-%02d.csv",
                 i < 12 ? 2025 : 2026, i < 12 ? i + 1 : i - 11);
        p[i] = paths[i];
    }
}

/* The fourteen demo logs (84 runs) in one stream: the same runs and rows as read whole. */
static void runlog_stream_demo_logs_as_whole(void **state)
{
    (void)state;
    stagecal_column col;
    const char *p[14];
    demo_setup(&col, p);
    compare_whole_and_stream(p, 14, &col);
    /* a file given twice: found by the checksum without SHA-256 */
    const char *twice[] = {p[0], p[0]};
    compare_whole_and_stream(twice, 2, &col);
    stagecal_column_free(&col);
}

/* Every bad input of tests/badinput/ (and a missing file) in one stream: the same findings,
 * in the same order, and the same rows as the whole-file reader. */
static void runlog_stream_bad_inputs_as_whole(void **state)
{
    (void)state;
    DIR *d = opendir(STAGECAL_TESTS_DIR "/badinput");
    assert_non_null(d);
    static char paths[64][512];
    const char *p[64];
    size_t n = 0;
    struct dirent *e;
    while ((e = readdir(d)) && n < 63) {
        size_t len = strlen(e->d_name);
        if (len < 4 || strcmp(e->d_name + len - 4, ".csv") != 0)
            continue;
        snprintf(paths[n], sizeof paths[n], STAGECAL_TESTS_DIR "/badinput/%s", e->d_name);
        p[n] = paths[n];
        n++;
    }
    closedir(d);
    assert_true(n > 30);
    p[n++] = STAGECAL_TESTS_DIR "/badinput/no_such_file.csv";
    compare_whole_and_stream(p, n, NULL);
}

/* The whole log of paths through analyse + invert + write_csv (the reference), and streamed
 * with 0 to 3 worker threads: the same bytes, the same totals. */
static void check_stream_inversion(const char *const *p, size_t np, const stagecal_column *col,
                                   size_t min_windows)
{
    stagecal_runlog *log = stagecal_runlog_alloc();
    for (size_t i = 0; i < np; i++)
        assert_int_equal(stagecal_runlog_read(log, p[i], col, NULL, NULL, NULL), 0);
    stagecal_runlog_result res;
    char *want = NULL, *got = NULL;
    size_t nwant = 0, ngot = 0;
    FILE *out = open_memstream(&want, &nwant);
    assert_int_equal(stagecal_runlog_analyse(log, col, NULL, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_invert(log, col, 1.0, NULL, &res, NULL), 0);
    assert_int_equal(stagecal_runlog_write_csv(log, col, &res, out, NULL), 0);
    fclose(out);
    assert_true(res.nwindows >= min_windows && log->nruns > 1);
    for (size_t threads = 0; threads <= 3; threads++) {
        stagecal_runlog_stream *s = stagecal_runlog_stream_alloc(p, np, col, NULL, NULL);
        stagecal_runlog_totals tot;
        out = open_memstream(&got, &ngot);
        assert_int_equal(stagecal_runlog_invert_stream(s, col, 1.0, NULL, threads, out, &tot, NULL),
                         0);
        fclose(out);
        assert_int_equal(ngot, nwant);
        assert_memory_equal(got, want, nwant);
        assert_int_equal(tot.rows, log->n);
        assert_int_equal(tot.nruns, log->nruns);
        assert_int_equal(tot.nwindows, res.nwindows);
        assert_memory_equal(tot.count, res.count, sizeof tot.count);
        for (size_t k = 0; k < tot.nruns; k++) { /* the closure fields the CSV path sets */
            assert_memory_equal(&tot.closures[k].closure, &res.closures[k].closure, sizeof(double));
            assert_int_equal(tot.closures[k].gross, res.closures[k].gross);
            assert_int_equal(tot.closures[k].drift, res.closures[k].drift);
            assert_int_equal(tot.closures[k].drift_analyser, res.closures[k].drift_analyser);
            assert_int_equal(tot.closures[k].n_outliers, res.closures[k].n_outliers);
        }
        stagecal_runlog_totals_free(&tot);
        stagecal_runlog_stream_free(s);
        free(got);
        got = NULL;
    }
    free(want);
    stagecal_runlog_result_free(&res);
    stagecal_runlog_free(log);
}

/* The demo logs: 84 runs and 51 windows in 14 files, so the window numbers run across runs
 * and files. */
static void runlog_stream_inversion_as_whole(void **state)
{
    (void)state;
    stagecal_column col;
    const char *p[14];
    demo_setup(&col, p);
    check_stream_inversion(p, 14, &col, 40);
    stagecal_column_free(&col);
}

/* A column of constant α at atmospheric pressure with the analysers' standard uncertainties
 * (the caller frees col->system.vle). */
static void alpha_column(stagecal_column *col, double alpha, double u_xd, double u_xb)
{
    memset(col, 0, sizeof *col);
    col->system.vle = stagecal_vle_alloc_alpha(alpha, NULL);
    assert_non_null(col->system.vle);
    col->system.p_pa = 101325;
    col->u.xd = u_xd;
    col->u.xb = u_xb;
}

/* A measured R that scatters about its set points (tests/synth_runlog.h, 6 runs): the set
 * points (log->r_set, found at the end of each run) travel with the run. */
static void runlog_stream_measured_reflux_as_whole(void **state)
{
    (void)state;
    size_t len = 0;
    char *csv = srl_measured_r_csv(6, 3, &len);
    assert_non_null(csv);
    const char *path = STAGECAL_BUILD_DIR "/test_runlog_stream_measured.csv";
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    assert_int_equal(fwrite(csv, 1, len, f), len);
    fclose(f);
    stagecal_column col;
    alpha_column(&col, 2.0, 0.0015, 0.0025);
    col.u.r = 0.02;
    check_stream_inversion(&path, 1, &col, 12);
    stagecal_vle_free(col.system.vle);
    remove(path);
    free(csv);
}

/* Runs longer than the reader's read-ahead budget (src/runlog_pipeline.c, READ_AHEAD_ROWS =
 * 65536 rows) beside short ones, so the stream switches between reading ahead (and the reader
 * inverting runs itself) and keeping one run per worker: the same bytes as the whole log at 0
 * to 3 threads. Invented rows: constant α = 2.5, xD falling 0.95 → 0.88 through each run, xB
 * about 0.35, noise 0.002 and 0.005 (as tests/bench_invert.c). */
static void runlog_stream_long_runs_as_whole(void **state)
{
    (void)state;
    const size_t len[4] = {66000, 50, 66000, 300};
    const char *path = STAGECAL_BUILD_DIR "/test_runlog_stream_long.csv";
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs("run,time[s],W[kmol],xD[mol/mol],xB[mol/mol],R[-]\n", f);
    unsigned long u = 12345;
    for (size_t r = 0; r < 4; r++)
        for (size_t k = 0; k < len[r]; k++) {
            double a[2];
            for (int j = 0; j < 2; j++) { /* a uniform in [−1, 1) from a linear congruence */
                u = u * 6364136223846793005UL + 1442695040888963407UL;
                a[j] = (double)(u >> 11) / 4503599627370496.0 - 1.0;
            }
            double x = (double)k / (double)len[r];
            fprintf(f, "r%zu,%zu,%.4f,%.6f,%.6f,4\n", r, 10 * k, 10.0 - 2.0 * x,
                    0.95 - 0.07 * x + 0.002 * a[0], 0.35 + 0.005 * a[1]);
        }
    assert_int_equal(fclose(f), 0);
    stagecal_column col;
    alpha_column(&col, 2.5, 0.002, 0.005);
    check_stream_inversion(&path, 1, &col, 2);
    stagecal_vle_free(col.system.vle);
    remove(path);
}

/* A log without a run column (the runs of demo 2025-01 and 2025-02 with the column cut off):
 * the reader finds the runs by time gaps and pot recharges as it reads (runlog_split.c), and
 * the stream hands out the same runs, rows, findings and inverted bytes as the whole file. */
static void runlog_stream_found_runs_as_whole(void **state)
{
    (void)state;
    const char *path = STAGECAL_BUILD_DIR "/test_runlog_stream_norun.csv";
    FILE *out = fopen(path, "w");
    assert_non_null(out);
    for (int m = 1; m <= 2; m++) {
        char in_path[512], line[4096];
        snprintf(in_path, sizeof in_path, STAGECAL_DATASETS "/demo/logs/2025-%02d.csv", m);
        FILE *in = fopen(in_path, "r");
        assert_non_null(in);
        for (int k = 0; fgets(line, sizeof line, in); k++) {
            const char *rest = strchr(line, ',');
            assert_non_null(rest);
            if (k > 0 || m == 1)
                fputs(rest + 1, out);
        }
        fclose(in);
    }
    fclose(out);
    stagecal_column col;
    memset(&col, 0, sizeof col);
    assert_int_equal(
        stagecal_column_load(STAGECAL_DATASETS "/columns/demo_benzene_toluene.json", &col, NULL),
        0);
    compare_whole_and_stream(&path, 1, &col);
    check_stream_inversion(&path, 1, &col, 5);
    stagecal_column_free(&col);
    remove(path);
}

/* The reader cuts a plain line (no quote, CR, NUL, space or tab) at its separators itself
 * and gives every other line to libcsv (runlog_stream.c, plain_line). Oracle: libcsv — the
 * same demo logs with every line ended by CR LF, or with a space before every line end
 * (which libcsv trims), go through libcsv line by line, and must give the same rows, values,
 * runs, lines and findings as the plain file. */
static void read_text(const char *text, size_t len, const stagecal_column *col,
                      stagecal_runlog **log, stagecal_findings **f)
{
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    rp.sha256 = 0;
    *log = stagecal_runlog_alloc();
    *f = stagecal_findings_alloc(1000);
    assert_int_equal(stagecal_runlog_read_buffer(*log, text, len, "demo.csv", col, &rp, *f, NULL),
                     STAGECAL_OK);
}

static void runlog_plain_lines_as_libcsv(void **state)
{
    (void)state;
    stagecal_column col;
    const char *p[14];
    demo_setup(&col, p);
    for (int i = 0; i < 14; i += 3) {
        FILE *in = fopen(p[i], "rb");
        assert_non_null(in);
        static char text[1 << 20], alt[2][1 << 21];
        size_t len = fread(text, 1, sizeof text, in), na[2] = {0, 0};
        fclose(in);
        assert_true(len > 0 && len < sizeof text);
        for (size_t k = 0; k < len; k++) {
            if (text[k] == '\n') {
                alt[0][na[0]++] = '\r';
                alt[1][na[1]++] = ' ';
            }
            alt[0][na[0]++] = alt[1][na[1]++] = text[k];
        }
        stagecal_runlog *a, *b;
        stagecal_findings *fa, *fb;
        read_text(text, len, &col, &a, &fa);
        for (int v = 0; v < 2; v++) {
            read_text(alt[v], na[v], &col, &b, &fb);
            assert_true(a->n > 300);
            assert_int_equal(a->n, b->n);
            assert_int_equal(a->nruns, b->nruns);
            for (size_t k = 0; k < a->nruns; k++) {
                assert_string_equal(a->runs[k].name, b->runs[k].name);
                assert_int_equal(a->runs[k].n, b->runs[k].n);
            }
            for (size_t w = 0; w < a->n; w++) {
                double va[] = {a->t_s[w], a->w_mol[w], a->xd[w], a->xb[w], a->r[w]};
                double vb[] = {b->t_s[w], b->w_mol[w], b->xd[w], b->xb[w], b->r[w]};
                assert_memory_equal(va, vb, sizeof va);
                assert_int_equal(a->line[w], b->line[w]);
                assert_int_equal(a->xd_cens[w], b->xd_cens[w]);
                assert_int_equal(a->xb_cens[w], b->xb_cens[w]);
            }
            assert_int_equal(fa->n, fb->n);
            for (size_t k = 0; k < fa->n; k++)
                assert_string_equal(fa->items[k].text, fb->items[k].text);
            stagecal_runlog_free(b);
            stagecal_findings_free(fb);
        }
        stagecal_runlog_free(a);
        stagecal_findings_free(fa);
    }
    stagecal_column_free(&col);
}

/* The plain-line cutting against libcsv again, on invented logs that put the separators at
 * every offset within the eight-byte words the reader scans: cells of 0 to 14 characters
 * (numbers with 0–9 decimals, empty cells), ',' ';' and tab separators; the CR LF copy goes
 * through libcsv. Same rows, values (bit for bit), lines and findings. */
static void runlog_plain_lines_any_width(void **state)
{
    (void)state;
    stagecal_column col;
    alpha_column(&col, 2.5, 0.002, 0.004);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 11);
    static char text[1 << 19], alt[1 << 20];
    const char seps[] = {',', ';', '\t'};
    for (int si = 0; si < 3; si++) {
        char sep = seps[si];
        size_t len = (size_t)snprintf(text, sizeof text,
                                      "run%ctime[s]%cW[kmol]%cxD[mol/mol]%cxB[mol/mol]%cR\n", sep,
                                      sep, sep, sep, sep);
        for (int row = 0; row < 3000; row++) {
            int run = row / 300;
            double v[5] = {10.0 * (row % 300) + 1e-3 * (double)gsl_rng_uniform_int(rng, 1000),
                           20.0 - 0.01 * (row % 300), 0.9 + 0.09 * gsl_rng_uniform(rng),
                           0.1 + 0.3 * gsl_rng_uniform(rng), 1 + 9 * gsl_rng_uniform(rng)};
            len += (size_t)snprintf(text + len, sizeof text - len, "r%0*d", 1 + run % 7, run);
            for (int c = 0; c < 5; c++) {
                text[len++] = sep;
                if (c > 0 && gsl_rng_uniform_int(rng, 9) == 0)
                    continue; /* an empty cell */
                len += (size_t)snprintf(text + len, sizeof text - len, "%.*f",
                                        (int)gsl_rng_uniform_int(rng, 10), v[c]);
            }
            text[len++] = '\n';
        }
        size_t na = 0;
        for (size_t k = 0; k < len; k++) {
            if (text[k] == '\n')
                alt[na++] = '\r';
            alt[na++] = text[k];
        }
        stagecal_runlog *a, *b;
        stagecal_findings *fa, *fb;
        read_text(text, len, &col, &a, &fa);
        read_text(alt, na, &col, &b, &fb);
        assert_int_equal(a->n, 3000);
        assert_int_equal(a->n, b->n);
        assert_int_equal(a->nruns, b->nruns);
        for (size_t k = 0; k < a->nruns; k++)
            assert_string_equal(a->runs[k].name, b->runs[k].name);
        for (size_t w = 0; w < a->n; w++) {
            double va[] = {a->t_s[w], a->w_mol[w], a->xd[w], a->xb[w], a->r[w]};
            double vb[] = {b->t_s[w], b->w_mol[w], b->xd[w], b->xb[w], b->r[w]};
            assert_memory_equal(va, vb, sizeof va);
            assert_int_equal(a->line[w], b->line[w]);
        }
        assert_true(fa->n > 0); /* the empty cells are reported */
        assert_int_equal(fa->n, fb->n);
        for (size_t k = 0; k < fa->n; k++)
            assert_string_equal(fa->items[k].text, fb->items[k].text);
        stagecal_runlog_free(a);
        stagecal_findings_free(fa);
        stagecal_runlog_free(b);
        stagecal_findings_free(fb);
    }
    gsl_rng_free(rng);
    stagecal_column_free(&col);
}

/* ---- the reader's buffer: chunks, the cells parsed in place --------------------------- */

/* runlog_parse_padded (and its inline common case runlog_parse_short) against
 * runlog_parse_plain on the same cell, NUL-terminated (oracle: test 1 checks runlog_parse_plain
 * against strtod). The padded parse reads the cell in the reader's buffer, where the byte
 * after the cell is a separator or, not yet terminated, anything: with a byte that cannot go
 * on with a number (',' ';' tab NUL '/' ':') it must give runlog_parse_plain's answer, bit
 * for bit; with a digit, '.', 'e' after it, a 0 must still be runlog_parse_plain's. Cells:
 * decimals of 1–20 digits with the point anywhere and signs, random strings of number
 * characters with '/' and ':' (the bytes next to the digits), formatted numbers. Every
 * one-to-eight-byte cell of digits and at most one point must take the short path.
 * Tolerance: none. Fails when the short path's digit test takes ':' for a digit (ones * 6
 * -> ones * 5), when it accepts two points (the point & (point - 1) test removed), when it
 * divides by the wrong power (p10[nd - j] -> p10[nd - j - 1]) or when the eight-digit step of
 * the long path stops early (k == 8 -> k == 7). */
static void runlog_padded_parse_as_plain(void **state)
{
    (void)state;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 23);
    const char al[] = "0123456789.eE+-/:";
    const char stops[] = {',', ';', '\t', '\0', '/', ':'}, goes[] = {'5', '.', 'e', '0'};
    char cell[48], buf[80], term[48];
    size_t differ = 0, short_hits = 0, long_hits = 0, short_form = 0, short_missed = 0;
    for (int it = 0; it < 600000; it++) {
        int mode = it % 3;
        size_t len;
        if (mode == 0) {
            size_t nd = 1 + gsl_rng_uniform_int(rng, 20), k = 0;
            if (gsl_rng_uniform_int(rng, 3) == 0)
                cell[k++] = gsl_rng_uniform_int(rng, 2) ? '-' : '+';
            size_t point = gsl_rng_uniform_int(rng, nd + 2); /* nd + 1: none */
            for (size_t d = 0; d <= nd; d++) {
                if (d == point)
                    cell[k++] = '.';
                if (d < nd)
                    cell[k++] = (char)('0' + gsl_rng_uniform_int(rng, 10));
            }
            len = k;
        } else if (mode == 1) {
            len = 1 + gsl_rng_uniform_int(rng, 12);
            for (size_t i = 0; i < len; i++)
                cell[i] = al[gsl_rng_uniform_int(rng, sizeof al - 1)];
        } else {
            double x = gsl_rng_uniform(rng) * pow(10, (int)gsl_rng_uniform_int(rng, 16) - 8);
            len = (size_t)snprintf(cell, sizeof cell, "%.*f", (int)gsl_rng_uniform_int(rng, 9), x);
        }
        int stop = gsl_rng_uniform_int(rng, 4) != 0;
        char after = stop ? stops[gsl_rng_uniform_int(rng, sizeof stops)]
                          : goes[gsl_rng_uniform_int(rng, sizeof goes)];
        memcpy(buf, cell, len);
        buf[len] = after;
        for (size_t i = len + 1; i < sizeof buf; i++)
            buf[i] = al[gsl_rng_uniform_int(rng, sizeof al - 1)];
        memcpy(term, cell, len);
        term[len] = '\0';
        double want = NAN, got = NAN, got_short = NAN;
        int rw = runlog_parse_plain(term, len, &want), rg = runlog_parse_padded(buf, len, &got);
        int rs = runlog_parse_short(buf, len, &got_short);
        int bad = 0;
        if (stop)
            bad = rg != rw || (rg == 0 && memcmp(&got, &want, sizeof got) != 0);
        else
            bad = rg == 0 && (rw != 0 || memcmp(&got, &want, sizeof got) != 0);
        if (rs == 0 && (rw != 0 || memcmp(&got_short, &want, sizeof got) != 0))
            bad = 1;
        /* the short form: [+-] then one to eight bytes, digits and at most one point */
        size_t sign = cell[0] == '+' || cell[0] == '-', digits = 0, points = 0;
        for (size_t i = sign; i < len; i++) {
            digits += cell[i] >= '0' && cell[i] <= '9';
            points += cell[i] == '.';
        }
        if (len - sign >= 1 && len - sign <= 8 && digits >= 1 && digits + points == len - sign &&
            points <= 1) {
            short_form++;
            short_missed += rs != 0;
        }
        if (bad && differ++ < 5)
            print_error("'%.*s' then 0x%02x: padded %d %.17g short %d, plain %d %.17g\n", (int)len,
                        cell, (unsigned char)after, rg, got, rs, rw, want);
        short_hits += rs == 0;
        long_hits += rg == 0 && rs != 0;
    }
    gsl_rng_free(rng);
    assert_int_equal(differ, 0);
    assert_int_equal(short_missed, 0);
    assert_true(short_form > 100000 && short_hits > 100000); /* both paths taken, often */
    assert_true(long_hits > 50000);
}

/* Text of a log for the chunk tests: plain rows and, among them, a CR LF row, a row with
 * spaces (trimmed by libcsv), a quoted note that spans two lines, an empty line, a NUL byte
 * in a cell, a note longer than the small chunks, and a last line without a line feed. Per
 * complete row the line it ends on and its xD as written go to lines[] and xd[]. */
static size_t chunk_text(char *text, size_t cap, long *lines, char (*xd)[16], size_t *nrows)
{
    size_t len =
        (size_t)snprintf(text, cap, "run,time[s],W[kmol],xD[mol/mol],xB[mol/mol],R,note\n");
    long line = 1;
    *nrows = 0;
    for (int k = 0; k < 160; k++) {
        char xs[16];
        snprintf(xs, sizeof xs, "0.%d", 900000 + 613 * k);
        const char *note = "";
        char longnote[400];
        int lines_in_row = 1;
        switch (k % 23) {
        case 3:
            note = "\"spans\ntwo lines\"";
            lines_in_row = 2;
            break;
        case 7:
            memset(longnote, 'n', 300);
            longnote[300] = '\0';
            note = longnote;
            break;
        default:
            break;
        }
        const char *end = k % 23 == 5 ? "\r\n" : "\n";
        if (k == 159)
            end = ""; /* the last line: no line feed */
        if (k % 23 == 11) {
            text[len++] = '\n'; /* an empty line (libcsv skips it) */
            line++;
        }
        if (k % 23 == 13) { /* a NUL byte in the W cell: a finding, the row kept */
            len += (size_t)snprintf(text + len, cap - len, "r%d,%d,19.5", k / 40, 10 * k);
            text[len++] = '\0';
            len += (size_t)snprintf(text + len, cap - len, ",%s,0.3,4,\n", xs);
        } else {
            len += (size_t)snprintf(text + len, cap - len, "r%d,%d,%s%.4f,%s,0.%d,%d,%s%s", k / 40,
                                    10 * k, k % 23 == 17 ? " " : "", 20.0 - 0.01 * k, xs,
                                    300000 + 17 * k, 2 + k % 5, note, end);
        }
        line += lines_in_row;
        lines[*nrows] = line;
        snprintf(xd[*nrows], sizeof xd[0], "%s", xs);
        (*nrows)++;
    }
    return len;
}

/* Reads text with chunks of `chunk` bytes (SHA-256 on). */
static void read_chunked(const char *text, size_t len, size_t chunk, const stagecal_column *col,
                         stagecal_runlog **log, stagecal_findings **f)
{
    size_t keep = runlog_read_chunk;
    runlog_read_chunk = chunk;
    stagecal_runlog_params rp = stagecal_runlog_default_params();
    rp.sha256 = 1;
    *log = stagecal_runlog_alloc();
    *f = stagecal_findings_alloc(1000);
    int rc = stagecal_runlog_read_buffer(*log, text, len, "chunks.csv", col, &rp, *f, NULL);
    runlog_read_chunk = keep;
    assert_int_equal(rc, STAGECAL_OK);
}

/* Two reads of one text agree in everything the reader hands over. */
static void assert_same_read(const stagecal_runlog *a, const stagecal_findings *fa,
                             const stagecal_runlog *b, const stagecal_findings *fb)
{
    assert_int_equal(a->n, b->n);
    assert_int_equal(a->nruns, b->nruns);
    for (size_t k = 0; k < a->nruns; k++) {
        assert_string_equal(a->runs[k].name, b->runs[k].name);
        assert_int_equal(a->runs[k].n, b->runs[k].n);
        assert_int_equal(a->runs[k].first_line, b->runs[k].first_line);
    }
    for (size_t w = 0; w < a->n; w++) {
        double va[] = {a->t_s[w], a->w_mol[w], a->xd[w], a->xb[w], a->r[w]};
        double vb[] = {b->t_s[w], b->w_mol[w], b->xd[w], b->xb[w], b->r[w]};
        assert_memory_equal(va, vb, sizeof va);
        assert_int_equal(a->line[w], b->line[w]);
        assert_int_equal(a->xd_cens[w], b->xd_cens[w]);
        assert_int_equal(a->xb_cens[w], b->xb_cens[w]);
    }
    assert_int_equal(fa->n, fb->n);
    for (size_t k = 0; k < fa->n; k++)
        assert_string_equal(fa->items[k].text, fb->items[k].text);
    assert_int_equal(a->checksum[0][0], b->checksum[0][0]);
    assert_int_equal(a->checksum[0][1], b->checksum[0][1]);
    assert_string_equal(a->sha256[0], b->sha256[0]);
}

/* The file is read in chunks and cut into lines in the buffer (runlog_stream.c): a line cut
 * by a chunk boundary is carried over. Every chunk size from 1 to 130 bytes (the lines are
 * 40–330 bytes, so every boundary falls at every offset of the lines and of the eight-byte
 * words the reader scans), 1000, 4096 and the default, against the text read in one chunk:
 * the same rows, values (bit for bit), lines, runs, findings, byte count, checksum and
 * SHA-256. Oracles for the one-chunk read itself: the rows' count, the line each ends on and
 * its xD, as the test wrote them (xD by strtod), and the byte count. Fails when file_fill
 * does not carry the cut line over (memmove removed), when the checksum drops the bytes short
 * of a 32-byte block (ntail not kept) or when a line found at the buffer's end without its
 * line feed is taken before the next read. */
static void runlog_chunk_boundaries_anywhere(void **state)
{
    (void)state;
    stagecal_column col;
    alpha_column(&col, 2.5, 0.002, 0.004);
    static char text[1 << 16];
    static long lines[200];
    static char xd[200][16];
    size_t nrows, len = chunk_text(text, sizeof text, lines, xd, &nrows);
    assert_true(text[len - 1] != '\n');
    stagecal_runlog *a, *b;
    stagecal_findings *fa, *fb;
    read_chunked(text, len, (size_t)1 << 20, &col, &a, &fa);
    assert_int_equal(a->n, nrows);
    for (size_t w = 0; w < nrows; w++) {
        assert_int_equal(a->line[w], lines[w]);
        double want = strtod(xd[w], NULL);
        assert_memory_equal(&a->xd[w], &want, sizeof want);
    }
    assert_int_equal(a->checksum[0][0], len);
    int nul = 0;
    for (size_t k = 0; k < fa->n; k++)
        nul += strstr(fa->items[k].text, "NUL byte") != NULL;
    assert_int_equal(nul, 7); /* rows 13, 36, ..., 151 */
    size_t sizes[140], ns = 0;
    for (size_t c = 1; c <= 130; c++)
        sizes[ns++] = c;
    sizes[ns++] = 1000;
    sizes[ns++] = 4096;
    sizes[ns++] = runlog_read_chunk;
    for (size_t i = 0; i < ns; i++) {
        read_chunked(text, len, sizes[i], &col, &b, &fb);
        assert_same_read(a, fa, b, fb);
        stagecal_runlog_free(b);
        stagecal_findings_free(fb);
    }
    stagecal_runlog_free(a);
    stagecal_findings_free(fa);
    stagecal_column_free(&col);
}

/* A line as long as the buffer, one byte shorter or longer, and the same as the file's last
 * line without its line feed: the buffer (64 KiB by default) grows to hold a line, so a plain
 * row whose note fills it is read as a short one is, and the row after it keeps its line.
 * Oracle: the rows as written (xD by strtod, lines counted by the test) and the same text
 * with a short note. Fails when file_fill does not grow the buffer for a line that fills it
 * (2 * cap -> cap: the read ends as out of memory) or when the last line is dropped at the
 * end of the file (the break before the last line made unconditional). */
static void runlog_line_at_buffer_bound(void **state)
{
    (void)state;
    stagecal_column col;
    alpha_column(&col, 2.5, 0.002, 0.004);
    size_t chunk = runlog_read_chunk;
    static char text[3 << 17];
    const char *head = "run,time[s],W[kmol],xD[mol/mol],xB[mol/mol],R,note\n";
    const char *row = "r1,10,19.9,0.95,0.3,4,";
    for (int last = 0; last < 2; last++)
        for (long d = -1; d <= 1; d++) {
            /* line 2: the row with a note of chunk + d bytes in all (its line feed included) */
            size_t len = (size_t)snprintf(text, sizeof text, "%s%s", head, row);
            size_t fill = chunk + (size_t)d - strlen(row) - 1;
            memset(text + len, 'n', fill);
            len += fill;
            text[len++] = '\n';
            if (!last)
                len += (size_t)snprintf(text + len, sizeof text - len, "r1,20,19.8,0.94,0.3,4,x\n");
            else
                len--; /* the long line is the last, without its line feed */
            stagecal_runlog *a;
            stagecal_findings *fa;
            read_chunked(text, len, chunk, &col, &a, &fa);
            assert_int_equal(a->n, last ? 1 : 2);
            double want = 0.95;
            assert_memory_equal(&a->xd[0], &want, sizeof want);
            assert_int_equal(a->line[0], 2);
            if (!last) {
                want = 0.94;
                assert_memory_equal(&a->xd[1], &want, sizeof want);
                assert_int_equal(a->line[1], 3);
            }
            assert_int_equal(a->checksum[0][0], len);
            assert_int_equal(fa->n_errors, 1); /* the run's too few rows, nothing else */
            stagecal_runlog_free(a);
            stagecal_findings_free(fa);
        }
    stagecal_column_free(&col);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(runlog_numbers_match_strtod),
        cmocka_unit_test(runlog_g9_matches_printf),
        cmocka_unit_test(runlog_fixed_matches_rule),
        cmocka_unit_test(runlog_stream_demo_logs_as_whole),
        cmocka_unit_test(runlog_stream_bad_inputs_as_whole),
        cmocka_unit_test(runlog_stream_inversion_as_whole),
        cmocka_unit_test(runlog_stream_measured_reflux_as_whole),
        cmocka_unit_test(runlog_stream_long_runs_as_whole),
        cmocka_unit_test(runlog_stream_found_runs_as_whole),
        cmocka_unit_test(runlog_plain_lines_as_libcsv),
        cmocka_unit_test(runlog_plain_lines_any_width),
        cmocka_unit_test(runlog_padded_parse_as_plain),
        cmocka_unit_test(runlog_chunk_boundaries_anywhere),
        cmocka_unit_test(runlog_line_at_buffer_bound),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
