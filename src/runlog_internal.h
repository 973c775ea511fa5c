/*
 * runlog_internal.h — helpers shared by the runlog_*.c files; not installed.
 */
#ifndef STAGECAL_RUNLOG_INTERNAL_H
#define STAGECAL_RUNLOG_INTERNAL_H

#include <stdarg.h>
#include <stdint.h>
#include <string.h>

#include "internal.h"
#include "stagecal/physics.h"
#include "stagecal/runlog.h"

/* ---- the reader (runlog.c: cells and rows; runlog_stream.c: files and runs) ---- */

#define DISAGREE_SIGMAS 3.0 /* xD and xD_heavy differ by more: named in a warning */
#define DISAGREE_LINES 8    /* lines named in that warning */

#define HDR_MAX 48
#define MAX_FIELDS 256
#define SPLIT_PROBE 21 /* sample spacings kept at the start of a file for its typical spacing */

/* State of the run finder of a file without a run column (runlog_split.c; docs/runlog.md,
 * "Runs found by themselves"). */
struct runlog_split {
    double spacing[SPLIT_PROBE]; /* the file's first sample spacings [s] */
    size_t nspacing;
    int prev_t_ok, prev_w_ok; /* the previous row (of the file, any run) had t / W */
    double prev_t, prev_w;    /* its time [s] and holdup [mol] */
    double prev_w_raw;        /* its holdup as logged */
    long prev_line;           /* its line */
    size_t nruns;             /* runs found so far in the file (1 before any split) */
};

struct reader {
    stagecal_runlog *log;
    const stagecal_column *col;
    stagecal_runlog_params par;
    stagecal_findings *f;
    stagecal_error *err;
    const char *source;
    size_t file;
    long line; /* current physical line */
    int header_done;
    int fatal; /* header unusable: rows are skipped */
    int oom;
    size_t nhdr;
    char hdr[MAX_FIELDS][HDR_MAX];  /* header cells as written */
    int role[MAX_FIELDS];           /* role of each field, −1 = ignored */
    int field_of[STAGECAL_RL_NCOL]; /* field of each role, −1 = absent */
    stagecal_unit unit[STAGECAL_RL_NCOL];
    /* the row being read */
    size_t field;
    double val[STAGECAL_RL_NCOL]; /* converted (mass basis: still in kg units) */
    double raw[STAGECAL_RL_NCOL]; /* as logged */
    int cens[STAGECAL_RL_NCOL];   /* stagecal_censor of composition cells */
    char time_text[2][40]; /* the time cell as logged: [tcur] this row, [!tcur] the previous */
    int tcur;
    char run_text[64];
    /* the previous row of the current run */
    int have_run;
    size_t cur_run;
    int prev_t_ok;
    double prev_t;
    /* W as logged of the current run's rows (row runs[cur_run].first + i at i), for the
     * W-rise warnings at the run's end (runlog_split.c) */
    double *w_raw;
    size_t w_raw_cap;
    /* runs found by themselves (no run column) */
    struct runlog_split split;
    /* the CSV dialect: the separator, and whether a comma may be the decimal mark */
    char sep;
    int decimal_comma;
    /* missing-value bookkeeping */
    size_t nmissing[STAGECAL_RL_NCOL];
    long first_missing[STAGECAL_RL_NCOL];
    size_t file_rows;
    size_t complete_rows; /* rows with time, W, xD, xB and R all present */
    /* rows where xD and xD_heavy disagree */
    size_t ndisagree;
    long disagree_line[DISAGREE_LINES];
    /* names of the runs this file has started (a run may not resume) */
    char (*names)[64];
    size_t nnames, names_cap;
    /* the soft sensor (runlog_soft.c): equilibrium models at the logged pressures, the
     * caller's (par.soft_physics) or the reader's own (ph_own, freed with the reader) */
    stagecal_physics *ph, *ph_own;
    int soft_unstated; /* 1 once the missing u(T) warning was given for this file */
};

/* runlog_stream.c reads a file in chunks of runlog_read_chunk bytes (tests set it small, to
 * put chunk boundaries at every place in a line); RL_READ_PAD zero bytes follow the bytes
 * read, so that a cell's parse may load eight bytes at a time past its end. */
extern size_t runlog_read_chunk;
#define RL_READ_PAD 16

/* A finding about the file being read (rd->source, line; 0 = the file as a whole). */
void reader_finding(struct reader *rd, int sev, long line, const char *column, const char *fmt, ...)
    SC_PRINTF(5, 6);
/* A header failure that makes the file unusable: a finding and the call's error. */
void reader_fatal(struct reader *rd, long line, const char *column, const char *fmt, ...)
    SC_PRINTF(4, 5);
/* libcsv callbacks (data: the reader). */
void reader_on_field(void *s, size_t len, void *data);
void reader_on_row(int c, void *data);
/* A plain line s[0, n) (runlog_stream.c, plain_line: no quote, NUL, space, CR or tab other
 * than the separator; s[n] its line feed, RL_READ_PAD readable bytes after it) cut in place
 * at its separators and handed over as libcsv would: every cell (NUL-terminated), then the
 * row's end. */
void reader_plain_line(struct reader *rd, char *s, size_t n);
/* Starts run `name` at the current row; -1 on allocation failure. */
int reader_start_run(struct reader *rd, const char *name);
/* The end of the current run: too few rows is an error; W rising while distillate is drawn
 * is a warning (runlog_w_rise_findings). */
void reader_close_run(struct reader *rd);

/* For a file without a run column: does the row at time t (s, NaN when missing) with
 * holdup w (mol; w_raw as logged) start a new run? A time gap longer than
 * max(par->split_gap_s, par->split_gap_samples x the file's typical spacing) or a rise of
 * W by more than max(par->split_rise_frac x W, par->split_rise_sigmas x sqrt(2) x u(W))
 * does. Then it closes the current run, starts the new one (renaming the file's first run
 * "<file>#1" at the first cut), names the line in a warning and returns 1; 0 when the row
 * stays in its run, -1 on allocation failure. Called for every row before it joins a run. */
int runlog_split_row(struct reader *rd, double t, double w, double w_raw);
/* Keeps W as logged of the current run's row n (a log row index); -1 on allocation failure. */
int runlog_keep_raw_w(struct reader *rd, size_t n, double w_raw);
/* A warning for every rise of W in the current run while distillate is drawn (finite
 * R > 0) by more than par->w_rise_sigmas x sqrt(2) x u(W): u(W) from the column file, else
 * the run's load-cell noise estimated from its logged W (runlog_noise_sd), else any rise. */
void runlog_w_rise_findings(struct reader *rd);
/* The separator of a file from its header line (the first line, as read): par_sep when it
 * is not 0, else ';' or a tab when either occurs outside quotes more often than ',' (a
 * European spreadsheet export, or a tab-separated one), else ','. */
char runlog_detect_separator(const char *line, size_t len, int par_sep);
/* The warning naming rows where xD and xD_heavy disagree (none when they agree). */
void reader_disagree_warning(struct reader *rd);

/* Frees the arrays of res and zeroes it. */
void result_free_members(stagecal_runlog_result *res);

/* Flags STAGECAL_SAMPLE_TOTAL_REFLUX on every stretch of a run at one finite R, at
 * least par->min_window rows long, in which W does not fall (straight-line fit of W
 * on t, slope within par->no_distillate_t standard errors of 0): no distillate is
 * drawn, so the column is at total reflux whatever R says. t and w are scratch of
 * the longest run's length. */
void runlog_mark_no_distillate(const stagecal_runlog *log,
                               const stagecal_runlog_analysis_params *par,
                               stagecal_runlog_result *res, double *t, double *w);

/* Run k's warm-up and shortest window in samples from par (the time settings by the run's
 * median sample spacing, else the sample counts capped for short runs; runlog.h). tmp is
 * scratch of the run's length. */
void runlog_run_samples(const stagecal_runlog *log, const stagecal_runlog_analysis_params *par,
                        size_t k, double *tmp, size_t *warmup, size_t *min_window);

/* Flags steady samples and builds the windows from the per-sample stages (after
 * the inversion filled res->status/stages/u_stages). ENOMEM. */
int runlog_windows(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   stagecal_error *err);

/* stagecal_runlog_invert with the physics models of ph (physics.h), which keeps the models it
 * builds for logged pressures from one call to the next (one per thread); NULL: its own. */
int runlog_invert_with(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                       const stagecal_runlog_analysis_params *params, stagecal_physics *ph,
                       stagecal_runlog_result *res, stagecal_error *err);
/* runlog_invert_with on the calling thread and nthreads more (parallel.h): the rows' inversions
 * in blocks of rows, the drift checks run by run, each thread with physics models of its own
 * (ph, or NULL, for the calling one). The same result for any nthreads: every row's and every
 * run's numbers are computed from that row or run alone, in the same operations. */
int runlog_invert_threads(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                          const stagecal_runlog_analysis_params *params, stagecal_physics *ph,
                          size_t nthreads, stagecal_runlog_result *res, stagecal_error *err);

/* Writes the CSV rows of log and res (stagecal_runlog_write_csv), the window column offset
 * by window_base (the windows of the runs written before), the header row first when
 * header is 1. EWRITE, ENOMEM. */
int runlog_write_rows(const stagecal_runlog *log, const stagecal_column *col,
                      const stagecal_runlog_result *res, size_t window_base, int header, FILE *out,
                      stagecal_error *err);

/* The boil-up/reflux consistency of run k (closure fields has_boilup … boilup_mismatch);
 * rows flagged TOTAL_REFLUX are left out (runlog_drift.c). */
void runlog_boilup(const stagecal_runlog *log, const stagecal_column *col,
                   const stagecal_runlog_analysis_params *par, stagecal_runlog_result *res,
                   size_t k);
/* The two drift signatures of every run and the decision (after the inversion and the
 * windows; col has an equilibrium model), and the boil-up check again without the rows
 * counted at total reflux; ph: the physics models to use (shared with the inversion), NULL:
 * its own. ENOMEM, or the holdup compensation's status. */
int runlog_drift(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                 const stagecal_runlog_analysis_params *par, stagecal_physics *ph,
                 stagecal_runlog_result *res, stagecal_error *err);
/* runlog_drift with the runs shared among the calling thread and nthreads more; phs[t] the
 * physics models of thread t (nthreads + 1 of them, none NULL). The same result for any
 * nthreads (each run's signatures and decision are its own). */
int runlog_drift_threads(const stagecal_runlog *log, const stagecal_column *col, double murphree,
                         const stagecal_runlog_analysis_params *par, stagecal_physics *const *phs,
                         size_t nthreads, stagecal_runlog_result *res, stagecal_error *err);
/* The light component held up in the column and the reflux drum when the column file
 * states them [mol]: column_mol·½(xD + xB) (a straight profile between the ends) +
 * drum_mol·xD (a well-mixed drum is the distillate). It belongs to the Rayleigh balance's
 * conserved holdup: without it the column's light inventory, released as the pot
 * depletes, reads as a closure error and a pot-analyser drift. 0 without a holdup. */
double runlog_holdup_light(const stagecal_column *col, double xd, double xb);
/* The drift signatures of c set to "not computed" (NaN, 0). */
void runlog_drift_clear(stagecal_runlog_closure *c);

/* ---- the stage relation's drift fits (runlog_drift_fit.c) ----
 * Rows a < m are grouped by stretches (equal, consecutive win[a]); y the residual, g the drift
 * regressor, w the weights (1/variance), hx = ∂X/∂N. Each returns 0 with the slope d of y on g
 * and its se (scaled up by √(χ²/dof) when that exceeds 1), −1 when the fit is not defined. */
/* One intercept per stretch. */
int runlog_drift_within_fit(const double *y, const double *g, const double *w, const int32_t *win,
                            size_t m, double *d, double *se);
/* One intercept and one slope on hx per stretch (the stretch's count free; a stretch of fewer
 * than 3 rows, or with hx constant, keeps the intercept only). Scratch dgs, es: m each. */
int runlog_drift_free_fit(const double *y, const double *g, const double *hx, const double *w,
                          const int32_t *win, size_t m, double *d, double *se, double *dgs,
                          double *es);
/* √(S_gg / S_gg|hx) of the within-stretch sums of squares (INFINITY when nothing is left). */
double runlog_drift_collinear_factor(const double *g, const double *hx, const double *w,
                                     const int32_t *win, size_t m);
/* A row of a stretch whose distillate X is searched (xd_for_count), with the result. */
typedef struct {
    size_t a;             /* the row */
    int own;              /* 1: Newton's first point is the row's own count (res) */
    double x, sens, dxdn; /* X, ∂N/∂xB / ∂N/∂xD and ∂X/∂N = 1/(∂N/∂xD) at X */
    int ok;               /* 1: found */
} xd_row;
/* For each row rows[0..n) of a stretch at reflux r (its a set, own 1 when Newton's first point
 * is the row's own count in res), the distillate X at which the count at (log->xb[a], r) equals
 * target, from xd_ss[a], under the conditions cond (NULL: none): rows[i].ok and the results
 * (runlog_drift_search.c). */
void runlog_drift_xd_for_count(const stagecal_vle *vle, const stagecal_physics_cond *cond,
                               double murphree, const stagecal_stages_params *sp,
                               const stagecal_runlog *log, const stagecal_runlog_result *res,
                               const double *xd_ss, double r, double target, xd_row *rows,
                               size_t n);
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__ &&                        \
    (defined(__GNUC__) || defined(__clang__))
#define RUNLOG_DIGITS8 1
/* The eight decimal digits of n < 10^8, leading zeros included, as byte values 0–9, the most
 * significant in the lowest byte (first in memory on this little-endian target): n split into
 * 4-digit halves in 32-bit lanes, each into 2-digit quarters in 16-bit lanes, each into digits
 * in bytes, each split one multiply and shift for the whole word (q·10486 >> 20 is q/100
 * rounded down for q < 10^4, q·103 >> 10 is q/10 for q < 100; no lane carries into the next).
 * A zero byte below the lowest nonzero one is a leading zero: __builtin_ctzll(d)/8 of them.
 * Checked against division digit by digit for every n (tests/test_runlog_write.c). */
static inline uint64_t runlog_digits8(uint32_t n)
{
    uint64_t x = (uint64_t)(n / 10000) | (uint64_t)(n % 10000) << 32;
    uint64_t h = ((x * 10486) >> 20) & 0x0000007F0000007Full;
    x = h | (x - h * 100) << 16;
    h = ((x * 103) >> 10) & 0x000F000F000F000Full;
    return h | (x - h * 10) << 8;
}
#endif
/* printf's "%.9g" of v into d (at most 16 bytes, no NUL) for 1e-13 <= |v| < 1e13, or -1
 * (outside that range, or too close to a rounding tie to be sure: ask printf). */
int runlog_format_g9(char *d, double v);
/* v rounded to decimals (0–9) places into d, no NUL: |v|·10^decimals rounded half away
 * from zero (llround) and printed with the point, "-" when negative and not zero; for
 * |v| >= 1e9 printf's "%.*f" (d holds 340 bytes then); nothing (0) when v is not finite.
 * Returns the length. */
int runlog_format_fixed(char *d, double v, int decimals);

/* Grows every row array of log (×2, 4096 at first; optional signals only when present).
 * -1 on allocation failure. */
int runlog_grow_rows(stagecal_runlog *log);
/* Shrinks every row array to the rows stored (cap = n), releasing the doubling's unused
 * tail; a shrink that fails keeps the larger block. */
void runlog_shrink_rows(stagecal_runlog *log);
/* Allocates an optional signal's array, NaN for the rows already stored; -1 on failure. */
int runlog_ensure_optional(stagecal_runlog *log, double **a);

/* stagecal_runlog_setpoints for run k only; -1 on allocation failure. */
int runlog_setpoints_run(stagecal_runlog *log, size_t k, const stagecal_column *col);

/* runlog_soft.c: the soft sensor in the reader. 1 when the file's compositions may come from
 * its temperatures (params.infer, a column whose model has temperatures). */
int runlog_soft_enabled(const struct reader *rd);
/* 1 when a read with par of a log for col runs the soft sensor. */
int runlog_soft_wanted(const stagecal_column *col, const stagecal_runlog_params *par);
/* For a caller that reads several logs of col with par: when the soft sensor will run and
 * par has no soft_physics yet, builds one and puts it in par, so the reads share the models
 * at the pressures they meet. Returns what it built, for the caller to free after the last
 * read (NULL: nothing built; if building failed, each read builds its own and reports). */
stagecal_physics *runlog_soft_share(const stagecal_column *col, stagecal_runlog_params *par);
/* At the end of a run: rows without an xD (xB) reading get one from T_top (T_pot), and the
 * rows with both check the sensor (a warning finding when it disagrees). Sets rd->oom on
 * allocation failure. */
void runlog_soft_run(struct reader *rd);
/* Standard uncertainty of row i's xD (xd = 1) or xB reading: the inferred one's own, else
 * the column's (stagecal_runlog_u_xd, _u_xb). */
double runlog_u_row(const stagecal_runlog *log, const stagecal_column *col, size_t i, int xd);
/* The set point of row i (log->r_set, or the logged R before it is set). */
static inline double runlog_rset(const stagecal_runlog *log, size_t i)
{
    return log->r_set ? log->r_set[i] : log->r[i];
}

/* Parses a decimal number (no hexadecimal; "inf" only with allow_inf); 0 or -1. */
int runlog_parse_number(const char *s, int allow_inf, double *v);
/* The fast path alone: 0 when s[0..len) is a plain decimal ([+-]d[.d][e[+-]d]) that ends at
 * s + len (so it holds no NUL byte), with *v exactly strtod's value; else -1. */
int runlog_parse_plain(const char *s, size_t len, double *v);
/* runlog_parse_plain for a cell s[0, len) that holds no NUL byte and has at least seven
 * readable bytes after s[len] (a plain line's cell in the reader's buffer, RL_READ_PAD), the
 * digits read eight at a time. s[len] need not be '\0' yet: 0 means runlog_parse_plain's 0
 * and value with s[len] = '\0' (the parse stops at s[len] either way); -1 means its -1, or a
 * byte s[len] that would continue the number (then the cell is not plain for the caller). */
int runlog_parse_padded(const char *s, size_t len, double *v);

/* runlog_parse_padded's common case, inline: one to eight bytes after the sign, all digits
 * but at most one point (the cells of most logs). Those bytes are taken in one word; per
 * byte, exactly, x = byte ^ '0' is a digit's value when its high nibble is 0 and its low
 * nibble plus 6 does not carry into the high one, and a byte is '.' when that of w ^ '.'·ones
 * is zero (common bit-twiddling practice, no source); the point is taken out, the digits are
 * moved to the word's top bytes (zero bytes, leading zeros, below them) and summed in pairs,
 * fours and eights by three multiplications (the eight-digit conversion of common
 * SIMD-within-a-register practice, no source). The digit loops of runlog_parse_plain give the
 * same integer m (fewer than 2^53) and the same power of ten, so the same one IEEE operation
 * gives the same double. -1: not of this form (runlog_parse_padded decides). */
static inline int runlog_parse_short(const char *s, size_t len, double *v)
{
#if defined(__GNUC__) && defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    static const double p10[] = {1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8};
    const char *p = s;
    int neg = 0;
    if (*p == '-' || *p == '+')
        neg = *p++ == '-';
    size_t n = len - (size_t)(p - s);
    if (n - 1 >= 8)
        return -1;
    const uint64_t lo4 = 0x0F0F0F0F0F0F0F0Fu, hi4 = 0xF0F0F0F0F0F0F0F0u, low7 = 0x7F7F7F7F7F7F7F7Fu,
                   ones = 0x0101010101010101u;
    uint64_t w, x, y, keep = n == 8 ? ~(uint64_t)0 : ((uint64_t)1 << (8 * n)) - 1;
    memcpy(&w, p, 8);
    x = (w ^ ones * '0') & keep;
    y = w ^ ones * '.';
    uint64_t point = ~(((y & low7) + low7) | y | low7) & keep; /* 0x80 in a '.' byte */
    uint64_t other = (x | ((x & lo4) + ones * 6)) & hi4 & keep & ~((point >> 7) * 0xF0);
    if (other != 0 || (point & (point - 1)) != 0 || (point && n == 1))
        return -1;
    unsigned nd = (unsigned)n, j = 0;
    if (point) {
        j = (unsigned)__builtin_ctzll(point) >> 3;
        uint64_t below = ((uint64_t)1 << (8 * j)) - 1;
        x = (x & below) | ((x >> 8) & ~below);
        nd--;
    }
    x <<= 8 * (8 - nd);
    x = (x * 10) + (x >> 8);
    x = (((x & 0x000000FF000000FFu) * (100 + (1000000ull << 32))) +
         (((x >> 16) & 0x000000FF000000FFu) * (1 + (10000ull << 32)))) >>
        32;
    /* (double)x, exactly (x < 2^27), as 2^52 + x less 2^52: a conversion instruction would
     * write half a register and so wait for the last value in it, the cell before's quotient,
     * chaining every cell's division to the one before */
    uint64_t bits = x | 0x4330000000000000u;
    double r;
    memcpy(&r, &bits, sizeof r);
    r -= 4503599627370496.0;
    r = point ? r / p10[nd - j] : r * p10[0];
    *v = neg ? -r : r;
    return 0;
#else
    (void)s, (void)len, (void)v;
    return -1;
#endif
}

/* Parses a composition cell as logged in unit u: a number in [u->lo, u->hi], "<v" or
 * ">v". A number at u->lo or u->hi is censored there; "<lo" and ">hi" are refused.
 * parsed: s is a plain number whose value is already in *v (runlog_parse_plain).
 * Returns 0 with *v (as logged, not converted) and *censor, or -1 with why ("value '<'
 * is not a censored reading (expected ...)", without the column prefix). */
int runlog_parse_fraction(const char *s, const stagecal_unit *u, int parsed, double *v, int *censor,
                          char *why, size_t why_len);

/* The range of mole fractions a reading allows: [v, v], [0, v] or [v, 1]. */
void runlog_reading_range(double v, int censor, double *lo, double *hi);

/* gsl_stats_median(a, 1, n), the same double (a is reordered, not necessarily as GSL
 * leaves it). For even n GSL selects the two middle values, each by a selection over the
 * whole array; GSL's selection leaves a[lhs + 1 ..] at or above the lower middle value, so
 * the upper one is their least: one selection and two scans. A NaN in a, or a zero upper
 * value with a −0 in a, takes GSL's selections as before (runlog_split.c). */
double runlog_median(double *a, size_t n);

/* A robust standard deviation of the noise on a slowly varying signal x[0..n−1] (NaN
 * skipped): 1.4826·MAD of its second differences / sqrt(6). 0 with fewer than 7 finite
 * values. tmp is scratch of n. Used for the load-cell noise u(W) when the column file
 * does not state it (runlog_split.c). */
double runlog_noise_sd(const double *x, size_t n, double *tmp);

#endif
