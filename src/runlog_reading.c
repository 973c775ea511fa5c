/*
 * runlog_reading.c — composition readings of a run log: the cell syntax (a number,
 * "<v", ">v"), censoring at the physical bound, and each reading's standard
 * uncertainty u² = u_abs² + (u_rel·c)² (see stagecal/runlog.h, docs/runlog.md).
 */
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "runlog_internal.h"

/* The powers of ten that are exact doubles (10^22 is the last): the fast paths' scale. */
static const double p10[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,  1e9,  1e10, 1e11,
                             1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};

/* An exponent at *p ('e' or 'E', a sign, one to three digits) added to *e, *p moved past
 * it; −1 (strtod decides) when it has no digit or more than three. */
static inline __attribute__((always_inline)) int parse_exponent(const char **pp, int *e)
{
    const char *p = *pp + 1;
    int eneg = 0, ex = 0, ne = 0;
    if (*p == '-' || *p == '+')
        eneg = *p++ == '-';
    for (; *p >= '0' && *p <= '9' && ne < 4; p++, ne++)
        ex = ex * 10 + (*p - '0');
    if (ne == 0 || ne == 4)
        return -1;
    *e += eneg ? -ex : ex;
    *pp = p;
    return 0;
}

/* Clinger's fast path (Clinger 1990, "How to read floating point numbers accurately",
 * PLDI '90): a decimal of at most 19 digits whose integer mantissa m is below 2^53 and whose
 * power of ten e has |e| <= 22 is m·10^e or m/10^−e rounded once, and since both m and 10^|e|
 * are exact doubles that single IEEE operation is the correctly rounded value, the same
 * double strtod returns. Returns 0 with *v, or -1 when the text is not of the plain form
 * [+-]digits[.digits][(e|E)[+-]digits] or falls outside the fast path (the caller then asks
 * strtod). */
static inline __attribute__((always_inline)) int parse_fast(const char *s, const char **endp,
                                                            double *v)
{
    const char *p = s;
    int neg = 0;
    if (*p == '-' || *p == '+')
        neg = *p++ == '-';
    /* the digits' count and the point's place from the pointers: one test a digit
     * ((unsigned)(c − '0') < 10 is '0' <= c <= '9') */
    uint64_t m = 0;
    const char *d0 = p;
    for (; (unsigned)(*p - '0') < 10; p++)
        m = m * 10 + (uint64_t)(*p - '0');
    int nd = (int)(p - d0), e = 0;
    if (*p == '.') {
        const char *f0 = ++p;
        for (; (unsigned)(*p - '0') < 10; p++)
            m = m * 10 + (uint64_t)(*p - '0');
        e = -(int)(p - f0);
        nd -= e;
    }
    if (nd == 0 || nd > 19)
        return -1; /* no digits, or the mantissa may have overflowed: strtod decides */
    if ((*p == 'e' || *p == 'E') && parse_exponent(&p, &e))
        return -1;
    *endp = p;
    if (*p != '\0' || m > ((uint64_t)1 << 53) || e < -22 || e > 22)
        return -1;
    double x = (double)m;
    x = e < 0 ? x / p10[-e] : x * p10[e];
    *v = neg ? -x : x;
    return 0;
}

int runlog_parse_plain(const char *s, size_t len, double *v)
{
    const char *end = s;
    return parse_fast(s, &end, v) == 0 && end == s + len ? 0 : -1;
}

/* The digits at the start of the eight bytes w (the first byte the lowest, little-endian):
 * their count k (0–8), and with k > 0 their value. Per byte, exactly: x = byte ^ '0' is a
 * digit's value when its high nibble is 0 and its low nibble plus 6 does not carry into the
 * high one; the digits are moved to the word's top bytes (zero bytes, leading zeros, below
 * them) and summed in pairs, fours and eights by three multiplications (the eight-digit
 * conversion of common SIMD-within-a-register practice, no source). */
static inline unsigned swar_digits(uint64_t w, uint64_t *value)
{
    const uint64_t lo4 = 0x0F0F0F0F0F0F0F0Fu, hi4 = 0xF0F0F0F0F0F0F0F0u;
    uint64_t x = w ^ 0x3030303030303030u;
    uint64_t bad = (x | ((x & lo4) + 0x0606060606060606u)) & hi4;
    unsigned k = bad ? (unsigned)__builtin_ctzll(bad) >> 3 : 8;
    if (k) {
        x <<= 8 * (8 - k);
        x = (x * 10) + (x >> 8);
        x = (((x & 0x000000FF000000FFu) * (100 + (1000000ull << 32))) +
             (((x >> 16) & 0x000000FF000000FFu) * (1 + (10000ull << 32)))) >>
            32;
        *value = x;
    }
    return k;
}

/* The digits at *p, eight bytes at a time, appended to *m (exact while the digits so far,
 * `before` of them ahead of these, stay at most 19; reading stops past 19); *p moved past
 * them. Returns how many. */
static inline __attribute__((always_inline)) int swar_run(const char **pp, uint64_t *m, int before)
{
    static const uint64_t pow10[] = {1, 10, 100, 1000, 10000, 100000, 1000000, 10000000, 100000000};
    const char *p = *pp;
    uint64_t d = 0, w;
    unsigned k;
    int n = 0;
    do {
        memcpy(&w, p, 8);
        k = swar_digits(w, &d);
        if (k)
            *m = *m * pow10[k] + d;
        p += k;
        n += (int)k;
    } while (k == 8 && before + n <= 19);
    *pp = p;
    return n;
}

int runlog_parse_padded(const char *s, size_t len, double *v)
{
#if defined(__GNUC__) && defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    const char *p = s; /* (the reader tries runlog_parse_short first: not again here) */
    int neg = 0;
    if (*p == '-' || *p == '+')
        neg = *p++ == '-';
    /* the integer digits, then those after a point, eight bytes at a time: m and the counts
     * as parse_fast's digit loops give them (m exact while nd <= 19; more digits: -1) */
    uint64_t m = 0;
    int nd = swar_run(&p, &m, 0), e = 0;
    if (*p == '.') {
        p++;
        int nf = swar_run(&p, &m, nd);
        nd += nf;
        e = -nf;
    }
    if (nd == 0 || nd > 19)
        return -1;
    if ((*p == 'e' || *p == 'E') && parse_exponent(&p, &e))
        return -1;
    if (p != s + len || m > ((uint64_t)1 << 53) || e < -22 || e > 22)
        return -1;
    double x = (double)m;
    x = e < 0 ? x / p10[-e] : x * p10[e];
    *v = neg ? -x : x;
    return 0;
#else
    return runlog_parse_plain(s, len, v);
#endif
}

int runlog_parse_number(const char *s, int allow_inf, double *v)
{
    const char *fast_end;
    if (parse_fast(s, &fast_end, v) == 0)
        return 0;
    if (allow_inf && (strcmp(s, "inf") == 0 || strcmp(s, "Inf") == 0 || strcmp(s, "INF") == 0 ||
                      strcmp(s, "infinity") == 0)) {
        *v = INFINITY;
        return 0;
    }
    char *end;
    /* decimal only: strtod would also take hexadecimal floats ("0x1p-1") */
    if (strpbrk(s, "xX"))
        return -1;
    errno = 0;
    double x = strtod(s, &end);
    if (end == s || *end != '\0' || errno == ERANGE || !isfinite(x))
        return -1;
    *v = x;
    return 0;
}

int runlog_parse_fraction(const char *s, const stagecal_unit *u, int parsed, double *v, int *censor,
                          char *why, size_t why_len)
{
    int c = STAGECAL_CENSOR_NONE;
    const char *num = s;
    if (*s == '<' || *s == '>') {
        c = *s == '<' ? STAGECAL_CENSOR_BELOW : STAGECAL_CENSOR_ABOVE;
        num = s + 1;
    }
    double x = *v;
    if (!parsed && runlog_parse_number(num, 0, &x) != 0) {
        if (c == STAGECAL_CENSOR_NONE)
            snprintf(why, why_len, "value '%s' is not a number", s);
        else
            snprintf(why, why_len,
                     "value '%s' is not a censored reading (expected <v or >v with v a number "
                     "in [0, %g])",
                     s, u->hi);
        return -1;
    }
    if (!(x >= u->lo && x <= u->hi)) {
        snprintf(why, why_len, "value '%s' outside [0, %g]", s, u->hi);
        return -1;
    }
    if (c == STAGECAL_CENSOR_BELOW && x == u->lo) {
        snprintf(why, why_len,
                 "value '%s' is below the physical bound 0 (no reading can be; expected <v with "
                 "v > 0)",
                 s);
        return -1;
    }
    if (c == STAGECAL_CENSOR_ABOVE && x == u->hi) {
        snprintf(why, why_len,
                 "value '%s' is above the physical bound %g (no reading can be; expected >v with "
                 "v < %g)",
                 s, u->hi, u->hi);
        return -1;
    }
    /* a reading exactly at the physical bound is censored there */
    if (c == STAGECAL_CENSOR_NONE && x == u->lo)
        c = STAGECAL_CENSOR_BELOW;
    else if (c == STAGECAL_CENSOR_NONE && x == u->hi)
        c = STAGECAL_CENSOR_ABOVE;
    *v = x;
    *censor = c;
    return 0;
}

void runlog_reading_range(double v, int censor, double *lo, double *hi)
{
    *lo = censor == STAGECAL_CENSOR_BELOW ? 0.0 : v;
    *hi = censor == STAGECAL_CENSOR_ABOVE ? 1.0 : v;
}

double stagecal_runlog_u_xd(const stagecal_column *col, double xd)
{
    if (!col)
        return 0.0;
    double rel = col->u.xd_heavy_rel * (1.0 - xd);
    return sqrt(col->u.xd * col->u.xd + rel * rel);
}

double stagecal_runlog_u_xb(const stagecal_column *col, double xb)
{
    if (!col)
        return 0.0;
    double rel = col->u.xb_rel * xb;
    return sqrt(col->u.xb * col->u.xb + rel * rel);
}

stagecal_reading stagecal_runlog_reading(const stagecal_runlog *log, const stagecal_column *col,
                                         size_t row, int role)
{
    stagecal_reading r = {NAN, STAGECAL_CENSOR_NONE, 0.0};
    if (row >= log->n || (role != STAGECAL_RL_XD && role != STAGECAL_RL_XB))
        return r;
    int xd = role == STAGECAL_RL_XD;
    r.value = xd ? log->xd[row] : log->xb[row];
    const unsigned char *cens = xd ? log->xd_cens : log->xb_cens;
    r.censor = cens ? cens[row] : STAGECAL_CENSOR_NONE;
    if (!isnan(r.value))
        r.u = runlog_u_row(log, col, row, xd);
    return r;
}

double runlog_u_row(const stagecal_runlog *log, const stagecal_column *col, size_t i, int xd)
{
    const double *inf = xd ? log->u_xd_inf : log->u_xb_inf;
    if (inf && inf[i] > 0) /* (NaN: the analyser's) */
        return inf[i];
    return xd ? stagecal_runlog_u_xd(col, log->xd[i]) : stagecal_runlog_u_xb(col, log->xb[i]);
}
