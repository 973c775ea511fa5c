/*
 * runlog_write.c — the per-row CSV of a run log's inversion (stagecal_runlog_write_csv;
 * columns in stagecal/runlog.h and docs/runlog.md).
 *
 * Rows are formatted into one 64 KiB block that is written when full (stdio calls per
 * cell were a third of run-log mode's time at 10^6 rows, tests/bench_runlog.c). The texts
 * that repeat — the file and run names, the notes — are escaped once per call, not per row;
 * the note that no F-factor can be computed is left out when the column file is the reason
 * (stagecal_runlog_no_load_reason: the caller says it once; it was 66 of the 168 bytes of a
 * row for the constant-α demo column);
 * numbers with a fixed number of decimals use an integer formatter (printf's
 * floating-point conversion dominated the cost), the rest printf.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "banned.h"
#include "internal.h"
#include "runlog_internal.h"
#include "stagecal/convention.h"
#include "stagecal/softsensor.h"
#include "stagecal/stages.h"

/* Longest row: two names of at most 2·1024 bytes when every character is quoted, a note of
 * at most 2·128 bytes, the rest numbers (at most 340 bytes for a fixed-point number beyond
 * 1e9) and fixed texts. */
#define ROW_MAX 8192
#define BLOCK (64 * 1024)

typedef struct {
    char *b;                             /* BLOCK + ROW_MAX bytes */
    size_t n;                            /* bytes pending */
    FILE *out;                           /* where full blocks go */
    int failed;                          /* a write failed */
    char esc[2][1100];                   /* the file and the run name, escaped */
    char note[STAGECAL_NOTE_COUNT][260]; /* every note, escaped */
    char stage_note[3][260]; /* STAGECAL_NOTE_STAGES by status: pinch, azeotrope, other */
} row_buf;

/* t escaped as a CSV cell into d (quoted, RFC 4180, when it holds a comma, quote or line
 * end); d holds 2·strlen(t) + 3 bytes. */
static void escape(char *d, const char *t)
{
    if (!strpbrk(t, ",\"\r\n")) {
        memcpy(d, t, strlen(t) + 1);
        return;
    }
    *d++ = '"';
    for (; *t; t++) {
        if (*t == '"')
            *d++ = '"';
        *d++ = *t;
    }
    *d++ = '"';
    *d = '\0';
}

static void rb_char(row_buf *r, char c)
{
    r->b[r->n++] = c;
}

static void rb_str(row_buf *r, const char *s)
{
    size_t k = strlen(s);
    memcpy(r->b + r->n, s, k);
    r->n += k;
}

static void rb_uint(row_buf *r, unsigned long v)
{
    char buf[24], *p = buf + sizeof buf;
    do {
        *--p = (char)('0' + v % 10);
        v /= 10;
    } while (v > 0);
    memcpy(r->b + r->n, p, (size_t)(buf + sizeof buf - p));
    r->n += (size_t)(buf + sizeof buf - p);
}

/* printf's %.9g of v into d for 1e-13 <= |v| < 1e13, without printf's exact multi-precision
 * conversion (a tenth of run-log mode's time at 10^6 rows). v·10^k (one correctly rounded
 * IEEE operation, 10^k exact for |k| <= 22) lies within 1.2e-7 of the exact value at the
 * scale of 1e9, so the nearest 9-digit integer is certain unless the fraction is within
 * 1e-6 of a half; then, and outside the range, -1 (the caller asks printf). Returns the
 * length. Checked against printf on 10^7 values (tests/test_runlog_stream.c). */
int runlog_format_g9(char *d, double v)
{
    static const double p10[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                 1e8,  1e9,  1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
                                 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
    double a = fabs(v);
    if (!(a >= 1e-13 && a < 1e13))
        return -1;
    int e = (int)floor(log10(a)), k = 8 - e;
    double sc = k >= 0 ? a * p10[k] : a / p10[-k];
    if (sc < 1e8 || sc >= 1e9) { /* the estimate of the exponent was one off */
        e += sc < 1e8 ? -1 : 1;
        k = 8 - e;
        sc = k >= 0 ? a * p10[k] : a / p10[-k];
    }
    double fl = floor(sc), f = sc - fl;
    if (fabs(f - 0.5) <= 1e-6)
        return -1;
    long m = (long)fl + (f > 0.5);
    if (m >= 1000000000) { /* rounded up to the next power of ten */
        m /= 10;
        e++;
    }
    char dig[9];
    for (int i = 8; i >= 0; i--, m /= 10)
        dig[i] = (char)('0' + m % 10);
    int nd = 9;
    while (nd > 1 && dig[nd - 1] == '0')
        nd--;
    char *p = d;
    if (v < 0)
        *p++ = '-';
    if (e < -4 || e >= 9) {
        *p++ = dig[0];
        if (nd > 1) {
            *p++ = '.';
            memcpy(p, dig + 1, (size_t)nd - 1);
            p += nd - 1;
        }
        *p++ = 'e';
        *p++ = e < 0 ? '-' : '+';
        int ae = e < 0 ? -e : e;
        *p++ = (char)('0' + ae / 10);
        *p++ = (char)('0' + ae % 10);
    } else if (e >= 0) {
        for (int i = 0; i <= e; i++)
            *p++ = i < nd ? dig[i] : '0';
        if (nd > e + 1) {
            *p++ = '.';
            memcpy(p, dig + e + 1, (size_t)(nd - e - 1));
            p += nd - e - 1;
        }
    } else {
        *p++ = '0';
        *p++ = '.';
        for (int i = 0; i < -e - 1; i++)
            *p++ = '0';
        memcpy(p, dig, (size_t)nd);
        p += nd;
    }
    return (int)(p - d);
}

const char *stagecal_runlog_no_load_reason(const stagecal_column *col)
{
    if (!col)
        return NULL;
    int m = col->system.m_light > 0 && col->system.m_heavy > 0;
    int d = col->diameter_m > 0 && isfinite(col->diameter_m);
    return m && d ? NULL
           : m    ? "the column file gives no inside diameter"
           : d    ? "the column file gives no molar masses"
                  : "the column file gives neither the inside diameter nor the molar masses";
}

/* v with %.9g, or nothing when it is not finite. */
static void rb_num(row_buf *r, double v)
{
    if (!isfinite(v))
        return;
    int k = runlog_format_g9(r->b + r->n, v);
    r->n += k >= 0 ? (size_t)k : (size_t)snprintf(r->b + r->n, 32, "%.9g", v);
}

/* v rounded to `decimals` (≤ 9) places, or nothing when it is not finite: a plain
 * integer formatter; printf for |v| ≥ 1e9. */
static void rb_fixed(row_buf *r, double v, int decimals)
{
    static const long long pow10[] = {1,      10,      100,      1000,      10000,
                                      100000, 1000000, 10000000, 100000000, 1000000000};
    if (!isfinite(v))
        return;
    if (fabs(v) >= 1e9) {
        r->n += (size_t)snprintf(r->b + r->n, 340, "%.*f", decimals, v);
        return;
    }
    char buf[40], *p = buf + sizeof buf;
    long long scaled = llround(fabs(v) * (double)pow10[decimals]);
    long long ip = scaled / pow10[decimals], fp = scaled % pow10[decimals];
    for (int k = 0; k < decimals; k++, fp /= 10)
        *--p = (char)('0' + fp % 10);
    if (decimals > 0)
        *--p = '.';
    do {
        *--p = (char)('0' + ip % 10);
        ip /= 10;
    } while (ip > 0);
    if (v < 0 && scaled > 0)
        *--p = '-';
    memcpy(r->b + r->n, p, (size_t)(buf + sizeof buf - p));
    r->n += (size_t)(buf + sizeof buf - p);
}

static void rb_flush(row_buf *r)
{
    if (r->n && !r->failed && fwrite(r->b, 1, r->n, r->out) != r->n)
        r->failed = 1;
    r->n = 0;
}

/* The fused compositions of one run (the Kalman smoother over its inferred and lab
 * readings, softsensor.h): fx/fu[k][j] for xD (k = 0) and xB (k = 1) at the run's row j; NaN
 * where the run has fewer than 2 readings. buf holds 6·n doubles. */
static void fuse_run(const stagecal_runlog *log, const stagecal_column *col,
                     const stagecal_runlog_run *run, double *buf, double *fx[2], double *fu[2])
{
    size_t n = run->n;
    double *z = buf, *u = buf + n;
    for (int k = 0; k < 2; k++) {
        fx[k] = buf + (size_t)(2 + 2 * k) * n, fu[k] = fx[k] + n;
        const double *x = k == 0 ? log->xd : log->xb;
        const unsigned char *c = k == 0 ? log->xd_cens : log->xb_cens;
        for (size_t j = 0; j < n; j++) {
            size_t i = run->first + j;
            z[j] = c[i] == STAGECAL_CENSOR_NONE ? x[i] : NAN; /* a bound is no value */
            u[j] = isfinite(z[j]) ? runlog_u_row(log, col, i, k == 0) : NAN;
        }
        if (stagecal_softsensor_smooth(log->t_s + run->first, z, u, n, 0, fx[k], fu[k], NULL,
                                       NULL) != STAGECAL_OK)
            for (size_t j = 0; j < n; j++)
                fx[k][j] = fu[k][j] = NAN;
    }
}

/* ",x,source,u" of one composition: the analyser's reading or one inferred from a
 * temperature (its u; inferred-censored: the limit, no u); empty cells when missing. */
static void source_cells(row_buf *r, double x, int cens, double u_inf)
{
    int inferred = !isnan(u_inf);
    rb_char(r, ',');
    rb_fixed(r, x, 9);
    rb_char(r, ',');
    if (!isnan(x))
        rb_str(r, !inferred                      ? "analyser"
                  : cens != STAGECAL_CENSOR_NONE ? "inferred-censored"
                                                 : "inferred");
    rb_char(r, ',');
    if (inferred && cens == STAGECAL_CENSOR_NONE)
        rb_num(r, u_inf);
}

/* Row i of log and res. */
static void format_row(row_buf *r, const stagecal_runlog *log, stagecal_condenser cond,
                       const stagecal_runlog_result *res, size_t window_base, size_t i,
                       double *const fx[2], double *const fu[2], size_t j)
{
    int ok = res->status[i] == STAGECAL_STAGES_OK;
    rb_str(r, r->esc[0]);
    rb_char(r, ',');
    rb_uint(r, (unsigned)log->line[i]);
    rb_char(r, ',');
    rb_str(r, r->esc[1]);
    rb_char(r, ',');
    rb_fixed(r, log->t_s[i], 3);
    rb_char(r, ',');
    if (ok) {
        rb_fixed(r, res->stages[i], 6);
        rb_char(r, ',');
        /* empty when below the pot (and partial condenser): no column count */
        rb_fixed(r, stagecal_convention_column_stages(res->stages[i], cond), 6);
        rb_char(r, ',');
        rb_num(r, res->u_stages[i]);
    } else {
        rb_str(r, ",,");
    }
    rb_char(r, ',');
    rb_str(r, stagecal_runlog_status_name(res->status[i]));
    rb_char(r, ',');
    if (res->note[i] == STAGECAL_NOTE_STAGES)
        rb_str(r, r->stage_note[res->status[i] == STAGECAL_STAGES_PINCH       ? 0
                                : res->status[i] == STAGECAL_STAGES_AZEOTROPE ? 1
                                                                              : 2]);
    else if (res->note[i] < STAGECAL_NOTE_COUNT)
        rb_str(r, r->note[res->note[i]]);
    rb_char(r, ',');
    rb_fixed(r, res->lv[i], 9);
    rb_char(r, ',');
    rb_fixed(r, res->f_factor[i], 6);
    unsigned fl = res->flags[i];
    rb_char(r, ',');
    rb_char(r, (fl & STAGECAL_SAMPLE_STEADY) ? '1' : '0');
    rb_char(r, ',');
    rb_char(r, (fl & STAGECAL_SAMPLE_TOTAL_REFLUX) ? '1' : '0');
    rb_char(r, ',');
    rb_char(r, (fl & STAGECAL_SAMPLE_OUTLIER) ? '1' : '0');
    rb_char(r, ',');
    if (res->window[i] >= 0)
        rb_uint(r, (unsigned long)res->window[i] + window_base);
    rb_char(r, ',');
    rb_fixed(r, res->xb_rec[i], 9);
    /* the one-sided bound of a censored row, in the column of the end it gives */
    rb_char(r, ',');
    if (res->note[i] == STAGECAL_NOTE_AT_LEAST)
        rb_fixed(r, res->stages[i], 6);
    rb_char(r, ',');
    if (res->note[i] == STAGECAL_NOTE_AT_MOST)
        rb_fixed(r, res->stages[i], 6);
    if (log->u_xd_inf || log->u_xb_inf) { /* compositions, with where they came from */
        source_cells(r, log->xd[i], log->xd_cens[i], log->u_xd_inf ? log->u_xd_inf[i] : NAN);
        source_cells(r, log->xb[i], log->xb_cens[i], log->u_xb_inf ? log->u_xb_inf[i] : NAN);
        for (int k = 0; k < 2; k++) {
            rb_char(r, ',');
            rb_fixed(r, fx[k][j], 9);
            rb_char(r, ',');
            rb_num(r, fu[k][j]);
        }
    }
    rb_char(r, '\n');
}

int runlog_write_rows(const stagecal_runlog *log, const stagecal_column *col,
                      const stagecal_runlog_result *res, size_t window_base, int header, FILE *out,
                      stagecal_error *err)
{
    stagecal_condenser cond = col ? col->condenser : STAGECAL_CONDENSER_TOTAL;
    row_buf *r = malloc(sizeof *r);
    char *b = malloc(BLOCK + ROW_MAX);
    if (!r || !b) {
        free(r), free(b);
        return error_set(err, STAGECAL_ENOMEM, "out of memory");
    }
    r->b = b;
    r->n = 0;
    r->out = out;
    r->failed = 0;
    for (int k = 0; k < STAGECAL_NOTE_COUNT; k++)
        escape(r->note[k], stagecal_runlog_note_text(k));
    if (stagecal_runlog_no_load_reason(col))
        r->note[STAGECAL_NOTE_NO_LOAD][0] = '\0'; /* said once, by the caller */
    escape(r->stage_note[0],
           stagecal_runlog_row_note_text(STAGECAL_NOTE_STAGES, STAGECAL_STAGES_PINCH));
    escape(r->stage_note[1],
           stagecal_runlog_row_note_text(STAGECAL_NOTE_STAGES, STAGECAL_STAGES_AZEOTROPE));
    escape(r->stage_note[2],
           stagecal_runlog_row_note_text(STAGECAL_NOTE_STAGES, STAGECAL_STAGES_INVALID));
    if (header)
        r->n += (size_t)snprintf(
            r->b, ROW_MAX,
            "source,line,run,time[s],stages,column_stages,u_stages,status,note,L/V,"
            "F[Pa^0.5],steady,total_reflux,outlier,window,xB_rec[mol/mol],stages_low,"
            "stages_high%s\n",
            log->u_xd_inf || log->u_xb_inf
                ? ",xD[mol/mol],xD_source,u_xD,xB[mol/mol],xB_source,u_xB,"
                  "xD_fused[mol/mol],u_xD_fused,xB_fused[mol/mol],u_xB_fused"
                : "");
    int fuse = log->u_xd_inf || log->u_xb_inf;
    double *fbuf = NULL, *fx[2] = {NULL, NULL}, *fu[2] = {NULL, NULL};
    for (size_t k = 0; k < log->nruns && !r->failed; k++) {
        const stagecal_runlog_run *run = &log->runs[k];
        escape(r->esc[0], log->files[run->file]);
        escape(r->esc[1], run->name);
        if (fuse) {
            double *nb = realloc(fbuf, 6 * (run->n ? run->n : 1) * sizeof *nb);
            if (!nb) {
                free(fbuf), free(b), free(r);
                return error_set(err, STAGECAL_ENOMEM, "out of memory");
            }
            fuse_run(log, col, run, fbuf = nb, fx, fu);
        }
        for (size_t i = run->first; i < run->first + run->n; i++) {
            format_row(r, log, cond, res, window_base, i, fx, fu, i - run->first);
            if (r->n >= BLOCK)
                rb_flush(r);
        }
    }
    rb_flush(r);
    free(fbuf);
    int failed = r->failed || ferror(out);
    free(b);
    free(r);
    if (failed)
        return error_set(err, STAGECAL_EWRITE, "cannot write the results");
    return STAGECAL_OK;
}

int stagecal_runlog_write_csv(const stagecal_runlog *log, const stagecal_column *col,
                              const stagecal_runlog_result *res, FILE *out, stagecal_error *err)
{
    return runlog_write_rows(log, col, res, 0, 1, out, err);
}
