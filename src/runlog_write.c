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
#include <stdint.h>
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
    /* the repeated texts with their lengths (each read 16 bytes at a time where shorter) */
    char status[STAGECAL_RUNLOG_NSTATUS][24]; /* "ok," … */
    size_t status_len[STAGECAL_RUNLOG_NSTATUS];
    size_t note_len[STAGECAL_NOTE_COUNT], stage_note_len[3], esc_len[2];
} row_buf;

/* t escaped as a CSV cell into d (quoted, RFC 4180, when it holds a comma, quote or line
 * end); d holds 2·strlen(t) + 3 bytes. Returns the length. */
static size_t escape(char *d, const char *t)
{
    if (!strpbrk(t, ",\"\r\n")) {
        size_t n = strlen(t);
        memcpy(d, t, n + 1);
        return n;
    }
    char *d0 = d;
    *d++ = '"';
    for (; *t; t++) {
        if (*t == '"')
            *d++ = '"';
        *d++ = *t;
    }
    *d++ = '"';
    *d = '\0';
    return (size_t)(d - d0);
}

/* n bytes of s at p; s has at least 16 readable bytes and the row buffer room for 16 more
 * (ROW_MAX), so short texts are one fixed-size copy. */
static char *put(char *p, const char *s, size_t n)
{
    if (n <= 16)
        memcpy(p, s, 16);
    else
        memcpy(p, s, n);
    return p + n;
}

/* "00" … "99" */
static const char digits2[] = "00010203040506070809101112131415161718192021222324252627282930313233"
                              "34353637383940414243444546474849505152535455565758596061626364656667"
                              "6869707172737475767778798081828384858687888990919293949596979899";

/* The decimal digits of v, written backwards to end at q; returns where they start. */
static char *digits_back(char *q, unsigned long long v)
{
    while (v >= 100) {
        unsigned d = (unsigned)(v % 100);
        v /= 100;
        q -= 2;
        memcpy(q, digits2 + 2 * d, 2);
    }
    if (v >= 10) {
        q -= 2;
        memcpy(q, digits2 + 2 * v, 2);
    } else {
        *--q = (char)('0' + v);
    }
    return q;
}

static char *put_uint(char *p, unsigned long v)
{
    char buf[24], *q = digits_back(buf + sizeof buf, v);
    size_t n = (size_t)(buf + sizeof buf - q);
    memcpy(p, q, n);
    return p + n;
}

/* printf's %.9g of v into d for 1e-13 <= |v| < 1e13, without printf's exact multi-precision
 * conversion (a tenth of run-log mode's time at 10^6 rows). v·10^k (one correctly rounded
 * IEEE operation, 10^k exact for |k| <= 22) lies within 1.2e-7 of the exact value at the
 * scale of 1e9, so the nearest 9-digit integer is certain unless the fraction is within
 * 1e-6 of a half; then, and outside the range, -1 (the caller asks printf). The decimal
 * exponent is first estimated from the binary one (floor(e2·log10 2), low by at most one)
 * and corrected by the scaled value's range, which has one answer. Returns the length.
 * Checked against printf on 10^6 values (tests/test_runlog_stream.c). */
int runlog_format_g9(char *d, double v)
{
    static const double p10[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                 1e8,  1e9,  1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
                                 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
    double a = fabs(v);
    if (!(a >= 1e-13 && a < 1e13))
        return -1;
    uint64_t bits;
    memcpy(&bits, &a, sizeof bits);
    int e2 = (int)(bits >> 52) - 1023; /* a is normal */
    /* floor(e2·log10 2) for |e2| <= 44: 78913/2^18 is log10 2 to 8e-7 */
    int e = e2 >= 0 ? (e2 * 78913) >> 18 : -((-e2 * 78913 + (1 << 18) - 1) >> 18), k = 8 - e;
    double sc = k >= 0 ? a * p10[k] : a / p10[-k];
    while (sc >= 1e9 || sc < 1e8) {
        e += sc >= 1e9 ? 1 : -1;
        k = 8 - e;
        if (k < -22 || k > 22)
            return -1;
        double s2 = k >= 0 ? a * p10[k] : a / p10[-k];
        if ((sc >= 1e9 && s2 < 1e8) || (sc < 1e8 && s2 >= 1e9))
            return -1; /* no exponent puts it in range: leave it to printf */
        sc = s2;
    }
    long fl = (long)sc;
    double f = sc - (double)fl;
    if (fabs(f - 0.5) <= 1e-6)
        return -1;
    long m = fl + (f > 0.5);
    if (m >= 1000000000) { /* rounded up to the next power of ten */
        m /= 10;
        e++;
    }
    char dig[9]; /* m has nine digits; nd: without the trailing zeros */
#if defined(RUNLOG_DIGITS8)
    uint64_t t = runlog_digits8((uint32_t)(m % 100000000)), c = t + 0x3030303030303030ull;
    dig[0] = (char)('0' + m / 100000000);
    memcpy(dig + 1, &c, 8);
    int nd = t ? 9 - (__builtin_clzll(t) >> 3) : 1;
#else
    digits_back(dig + 9, (unsigned long long)m);
    int nd = 9;
    while (nd > 1 && dig[nd - 1] == '0')
        nd--;
#endif
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
static char *put_num(char *p, double v)
{
    if (!isfinite(v))
        return p;
    int k = runlog_format_g9(p, v);
    return p + (k >= 0 ? (size_t)k : (size_t)snprintf(p, 32, "%.9g", v));
}

/* runlog_format_fixed into d, which has room for 32 bytes more than the text; inlined where
 * decimals is a constant, so the digit loops unroll. */
static inline __attribute__((always_inline)) int fixed_at(char *d, double v, int decimals)
{
    static const double pow10[] = {1, 10, 100, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9};
    static const unsigned long long ipow10[] = {1,      10,      100,      1000,      10000,
                                                100000, 1000000, 10000000, 100000000, 1000000000};
    if (!isfinite(v))
        return 0;
    if (fabs(v) >= 1e9)
        return snprintf(d, 340, "%.*f", decimals, v);
    /* llround of y = |v|·10^decimals (< 1e18): trunc(y) is exact, and so is y − trunc(y)
     * (an integer y at and above 2^53 has none) */
    double y = fabs(v) * pow10[decimals];
    unsigned long long scaled = (unsigned long long)y;
    scaled += y - (double)scaled >= 0.5;
    unsigned long long ip = scaled / ipow10[decimals], fp = scaled % ipow10[decimals];
    char buf[64], *q = buf + 32; /* the text ends at buf + 32; 32 bytes are copied from q */
    int k = decimals;
#if defined(RUNLOG_DIGITS8)
    if (k >= 5) { /* fp < 10^decimals: its last eight digits in one store, any ninth before them
                     (for 3 decimals the loop below took fewer instructions: callgrind) */
        uint64_t c = runlog_digits8((uint32_t)(fp % 100000000)) + 0x3030303030303030ull;
        memcpy(q - 8, &c, 8);
        if (k == 9) {
            q -= 8;
            *--q = (char)('0' + fp / 100000000);
        } else {
            q -= k;
        }
        k = 0;
    }
#endif
    for (; k >= 2; k -= 2) {
        unsigned dd = (unsigned)(fp % 100);
        fp /= 100;
        q -= 2;
        memcpy(q, digits2 + 2 * dd, 2);
    }
    if (k == 1)
        *--q = (char)('0' + fp);
    if (decimals > 0)
        *--q = '.';
    q = digits_back(q, ip);
    if (v < 0 && scaled > 0)
        *--q = '-';
    memcpy(d, q, 32);
    return (int)(buf + 32 - q);
}

int runlog_format_fixed(char *d, double v, int decimals)
{
    char tmp[400];
    int n = fixed_at(tmp, v, decimals);
    memcpy(d, tmp, (size_t)n);
    return n;
}

/* v rounded to `decimals` (≤ 9) places (runlog_format_fixed), or nothing when it is not
 * finite. */
static inline __attribute__((always_inline)) char *put_fixed(char *p, double v, int decimals)
{
    return p + fixed_at(p, v, decimals);
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
static char *source_cells(char *p, double x, int cens, double u_inf)
{
    int inferred = !isnan(u_inf);
    *p++ = ',';
    p = put_fixed(p, x, 9);
    *p++ = ',';
    if (!isnan(x)) {
        const char *s = !inferred                      ? "analyser"
                        : cens != STAGECAL_CENSOR_NONE ? "inferred-censored"
                                                       : "inferred";
        size_t n = strlen(s);
        memcpy(p, s, n);
        p += n;
    }
    *p++ = ',';
    if (inferred && cens == STAGECAL_CENSOR_NONE)
        p = put_num(p, u_inf);
    return p;
}

/* Row i of log and res, at the end of r's block (the cells through a local cursor: writes
 * through a char pointer may alias anything, so a cursor kept in r would be stored and
 * reloaded at every byte). */
static void format_row(row_buf *r, const stagecal_runlog *log, stagecal_condenser cond,
                       const stagecal_runlog_result *res, size_t window_base, size_t i,
                       double *const fx[2], double *const fu[2], size_t j)
{
    char *p = r->b + r->n;
    int st = res->status[i];
    int ok = st == STAGECAL_STAGES_OK;
    p = put(p, r->esc[0], r->esc_len[0]);
    *p++ = ',';
    p = put_uint(p, (unsigned)log->line[i]);
    *p++ = ',';
    p = put(p, r->esc[1], r->esc_len[1]);
    *p++ = ',';
    p = put_fixed(p, log->t_s[i], 3);
    *p++ = ',';
    if (ok) {
        p = put_fixed(p, res->stages[i], 6);
        *p++ = ',';
        /* empty when below the pot (and partial condenser): no column count */
        p = put_fixed(p, stagecal_convention_column_stages(res->stages[i], cond), 6);
        *p++ = ',';
        p = put_num(p, res->u_stages[i]);
    } else {
        *p++ = ',';
        *p++ = ',';
    }
    *p++ = ',';
    if (st < STAGECAL_RUNLOG_NSTATUS) {
        p = put(p, r->status[st], r->status_len[st]); /* "ok," */
    } else {
        const char *name = stagecal_runlog_status_name(st);
        size_t n = strlen(name);
        memcpy(p, name, n);
        p += n;
        *p++ = ',';
    }
    int note = res->note[i];
    if (note == STAGECAL_NOTE_STAGES) {
        int k = st == STAGECAL_STAGES_PINCH ? 0 : st == STAGECAL_STAGES_AZEOTROPE ? 1 : 2;
        p = put(p, r->stage_note[k], r->stage_note_len[k]);
    } else if (note < STAGECAL_NOTE_COUNT) {
        p = put(p, r->note[note], r->note_len[note]);
    }
    *p++ = ',';
    p = put_fixed(p, res->lv[i], 9);
    *p++ = ',';
    p = put_fixed(p, res->f_factor[i], 6);
    unsigned fl = res->flags[i];
    p[0] = ',';
    p[1] = (fl & STAGECAL_SAMPLE_STEADY) ? '1' : '0';
    p[2] = ',';
    p[3] = (fl & STAGECAL_SAMPLE_TOTAL_REFLUX) ? '1' : '0';
    p[4] = ',';
    p[5] = (fl & STAGECAL_SAMPLE_OUTLIER) ? '1' : '0';
    p[6] = ',';
    p += 7;
    if (res->window[i] >= 0)
        p = put_uint(p, (unsigned long)res->window[i] + window_base);
    *p++ = ',';
    p = put_fixed(p, res->xb_rec[i], 9);
    /* the one-sided bound of a censored row, in the column of the end it gives */
    *p++ = ',';
    if (note == STAGECAL_NOTE_AT_LEAST)
        p = put_fixed(p, res->stages[i], 6);
    *p++ = ',';
    if (note == STAGECAL_NOTE_AT_MOST)
        p = put_fixed(p, res->stages[i], 6);
    if (log->u_xd_inf || log->u_xb_inf) { /* compositions, with where they came from */
        p = source_cells(p, log->xd[i], log->xd_cens[i], log->u_xd_inf ? log->u_xd_inf[i] : NAN);
        p = source_cells(p, log->xb[i], log->xb_cens[i], log->u_xb_inf ? log->u_xb_inf[i] : NAN);
        for (int k = 0; k < 2; k++) {
            *p++ = ',';
            p = put_fixed(p, fx[k][j], 9);
            *p++ = ',';
            p = put_num(p, fu[k][j]);
        }
    }
    *p++ = '\n';
    r->n = (size_t)(p - r->b);
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
    memset(r, 0, sizeof *r); /* (the texts are read 16 bytes at a time: no stale bytes) */
    r->b = b;
    r->out = out;
    for (int k = 0; k < STAGECAL_NOTE_COUNT; k++)
        r->note_len[k] = escape(r->note[k], stagecal_runlog_note_text(k));
    if (stagecal_runlog_no_load_reason(col)) { /* said once, by the caller */
        r->note[STAGECAL_NOTE_NO_LOAD][0] = '\0';
        r->note_len[STAGECAL_NOTE_NO_LOAD] = 0;
    }
    r->stage_note_len[0] =
        escape(r->stage_note[0],
               stagecal_runlog_row_note_text(STAGECAL_NOTE_STAGES, STAGECAL_STAGES_PINCH));
    r->stage_note_len[1] =
        escape(r->stage_note[1],
               stagecal_runlog_row_note_text(STAGECAL_NOTE_STAGES, STAGECAL_STAGES_AZEOTROPE));
    r->stage_note_len[2] =
        escape(r->stage_note[2],
               stagecal_runlog_row_note_text(STAGECAL_NOTE_STAGES, STAGECAL_STAGES_INVALID));
    for (int k = 0; k < STAGECAL_RUNLOG_NSTATUS; k++) {
        r->status_len[k] = escape(r->status[k], stagecal_runlog_status_name(k));
        r->status[k][r->status_len[k]++] = ',';
    }
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
        r->esc_len[0] = escape(r->esc[0], log->files[run->file]);
        r->esc_len[1] = escape(r->esc[1], run->name);
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
