/*
 * runlog_split.c — runs of a run log: starting and closing them while the file is read,
 * finding them by themselves in a file without a run column, and the CSV dialect of a file.
 *
 * A historian export often holds several batches in one file with no run label. Read as one
 * run, a recharged pot makes the Rayleigh balance fail (a closure of tens of per cent, a gross
 * error, an analyser drift), so such a file is cut where a new batch must have begun: after a
 * time gap much longer than the logging interval, or where the pot holdup rises by more than
 * load-cell noise can explain (W cannot rise by itself: at total reflux it is constant,
 * while distillate is drawn it falls). Each cut is a warning naming its line, so the user can
 * check it and add a run column. Thresholds: stagecal_runlog_params, docs/runlog.md "Runs".
 */
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "runlog_internal.h"

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* The gap threshold [s]: the fixed floor, or that many typical spacings when longer. */
static double gap_threshold(const struct runlog_split *s, const stagecal_runlog_params *par)
{
    double g = par->split_gap_s;
    if (s->nspacing >= 5 && par->split_gap_samples > 0) {
        double tmp[SPLIT_PROBE];
        memcpy(tmp, s->spacing, s->nspacing * sizeof *tmp);
        qsort(tmp, s->nspacing, sizeof *tmp, cmp_double);
        double med = s->nspacing % 2 ? tmp[s->nspacing / 2]
                                     : 0.5 * (tmp[s->nspacing / 2 - 1] + tmp[s->nspacing / 2]);
        if (par->split_gap_samples * med > g)
            g = par->split_gap_samples * med;
    }
    return g;
}

/* A duration for people: "45 min", "3.5 h", "6.9 d". */
static void format_span(double s, char *buf, size_t len)
{
    if (s < 5400)
        snprintf(buf, len, "%.0f min", s / 60);
    else if (s < 2 * 86400.0)
        snprintf(buf, len, "%.1f h", s / 3600);
    else
        snprintf(buf, len, "%.1f d", s / 86400);
}

int runlog_split_row(struct reader *rd, double t, double w, double w_raw)
{
    struct runlog_split *s = &rd->split;
    const stagecal_runlog_params *par = &rd->par;
    char why[160] = "";
    if (s->nruns == 0)
        s->nruns = 1;
    if (s->prev_t_ok && isfinite(t)) {
        double dt = t - s->prev_t;
        if (dt > 0 && (par->split_gap_s > 0 || par->split_gap_samples > 0)) {
            double g = gap_threshold(s, par);
            if (g > 0 && dt > g) {
                char span[32];
                format_span(dt, span, sizeof span);
                snprintf(why, sizeof why, "after a time gap of %s since line %ld", span,
                         s->prev_line);
            } else if (s->nspacing < SPLIT_PROBE) {
                s->spacing[s->nspacing++] = dt;
            }
        }
    }
    if (!why[0] && s->prev_w_ok && isfinite(w) && par->split_rise_frac > 0) {
        double uw = rd->col ? rd->col->u.w_mol : 0.0;
        double lim = par->split_rise_frac * s->prev_w;
        if (par->split_rise_sigmas * sqrt(2.0) * uw > lim)
            lim = par->split_rise_sigmas * sqrt(2.0) * uw;
        if (w - s->prev_w > lim && lim > 0)
            snprintf(why, sizeof why, "where W rose from %g to %g since line %ld (a pot recharge)",
                     s->prev_w_raw, w_raw, s->prev_line);
    }
    if (isfinite(t))
        s->prev_t = t, s->prev_t_ok = 1;
    if (isfinite(w))
        s->prev_w = w, s->prev_w_raw = w_raw, s->prev_w_ok = 1;
    s->prev_line = rd->line;
    if (!why[0] || !rd->have_run)
        return 0;
    stagecal_runlog *log = rd->log;
    /* "<file name>#k" (the name without its folders, the end of a long one) */
    const char *base = strrchr(rd->source, '/') ? strrchr(rd->source, '/') + 1 : rd->source;
    if (strlen(base) > 48)
        base += strlen(base) - 48;
    if (s->nruns == 1) /* the file's first run gets a number too */
        snprintf(log->runs[rd->cur_run].name, sizeof log->runs[0].name, "%s#1", base);
    char name[sizeof log->runs[0].name];
    snprintf(name, sizeof name, "%s#%zu", base, ++s->nruns);
    reader_close_run(rd);
    if (reader_start_run(rd, name) != 0)
        return -1;
    const char *hw = rd->hdr[rd->field_of[STAGECAL_RL_W]];
    reader_finding(rd, STAGECAL_FINDING_WARNING, rd->line, strstr(why, "W rose") ? hw : NULL,
                   "no 'run' column: run '%s' starts here, %s (expected a 'run' column naming "
                   "the runs; runs are found by time gaps and pot recharges, docs/runlog.md)",
                   name, why);
    return 1;
}

char runlog_detect_separator(const char *line, size_t len, int par_sep)
{
    if (par_sep)
        return (char)par_sep;
    size_t comma = 0, semi = 0, tab = 0;
    int quoted = 0;
    for (size_t i = 0; i < len; i++) {
        if (line[i] == '"')
            quoted = !quoted;
        else if (!quoted)
            comma += line[i] == ',', semi += line[i] == ';', tab += line[i] == '\t';
    }
    if (semi > comma && semi >= tab)
        return ';';
    if (tab > comma)
        return '\t';
    return ',';
}

int runlog_keep_raw_w(struct reader *rd, size_t n, double w_raw)
{
    size_t i = n - rd->log->runs[rd->cur_run].first;
    if (i >= rd->w_raw_cap) {
        size_t cap = rd->w_raw_cap ? 2 * rd->w_raw_cap : 1024;
        while (cap <= i)
            cap *= 2;
        double *a = realloc(rd->w_raw, cap * sizeof *a);
        if (!a)
            return -1;
        rd->w_raw = a;
        rd->w_raw_cap = cap;
    }
    rd->w_raw[i] = w_raw;
    return 0;
}

/* 1 when a[0..n) holds a −0. */
static int has_negative_zero(const double *a, size_t n)
{
    int neg = 0;
    for (size_t i = 0; i < n; i++)
        neg |= a[i] == 0 && signbit(a[i]);
    return neg;
}

double runlog_median(double *a, size_t n)
{
    size_t lhs = n ? (n - 1) / 2 : 0, rhs = n / 2;
    if (lhs == rhs) /* n odd (or 0): GSL's one selection */
        return gsl_stats_median(a, 1, n);
    /* a NaN makes the sum NaN (four partial sums: a scan at about an instruction a value) */
    double s0 = 0, s1 = 0, s2 = 0, s3 = 0;
    size_t i = 0;
    for (; i + 4 <= n; i += 4)
        s0 += a[i], s1 += a[i + 1], s2 += a[i + 2], s3 += a[i + 3];
    for (; i < n; i++)
        s0 += a[i];
    if (isnan(s0 + s1 + s2 + s3)) /* (or infinities of both signs) GSL's two selections */
        return gsl_stats_median(a, 1, n);
    double lo = gsl_stats_select(a, 1, n, lhs);
    double m0 = a[lhs + 1], m1 = m0, m2 = m0, m3 = m0; /* the least of a[lhs + 1 ..] */
    for (i = lhs + 2; i + 4 <= n; i += 4) {
        m0 = a[i] < m0 ? a[i] : m0;
        m1 = a[i + 1] < m1 ? a[i + 1] : m1;
        m2 = a[i + 2] < m2 ? a[i + 2] : m2;
        m3 = a[i + 3] < m3 ? a[i + 3] : m3;
    }
    for (; i < n; i++)
        m0 = a[i] < m0 ? a[i] : m0;
    m0 = m1 < m0 ? m1 : m0;
    m2 = m3 < m2 ? m3 : m2;
    double hi = m2 < m0 ? m2 : m0;
    /* equal values are the same double but for ±0: with a −0 among zeros, which one the
     * selection returns is its own */
    if (hi == 0 && has_negative_zero(a, n))
        hi = gsl_stats_select(a, 1, n, rhs);
    return (lo + hi) / 2.0;
}

double runlog_noise_sd(const double *x, size_t n, double *tmp)
{
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
        if (isfinite(x[i]))
            tmp[m++] = x[i];
    if (m < 7)
        return 0.0;
    for (size_t i = 0; i + 2 < m; i++) /* tmp[i] is read before it is overwritten */
        tmp[i] = tmp[i] - 2 * tmp[i + 1] + tmp[i + 2];
    m -= 2;
    /* medians by GSL's selection (linear time): the same doubles as sorting and taking the
     * middle (or the mean of the two middle values), up to the sign of a zero median, which
     * the absolute deviations below do not see; two sorts here were 8 % of run-log inversion
     * at 10^6 rows */
    double med = runlog_median(tmp, m);
    for (size_t i = 0; i < m; i++)
        tmp[i] = fabs(tmp[i] - med);
    double mad = runlog_median(tmp, m);
    /* 1.4826·MAD estimates a normal standard deviation (Hampel 1974, "The influence curve and
     * its role in robust estimation", JASA 69:383-393); a second difference of white noise
     * has variance (1 + 4 + 1)·σ² = 6σ², and removes a straight or slowly curving draw. */
    return 1.4826 * mad / sqrt(6.0);
}

void runlog_w_rise_findings(struct reader *rd)
{
    const stagecal_runlog *log = rd->log;
    const stagecal_runlog_run *run = &log->runs[rd->cur_run];
    if (rd->field_of[STAGECAL_RL_W] < 0 || run->n < 2 || !rd->w_raw)
        return;
    const char *hw = rd->hdr[rd->field_of[STAGECAL_RL_W]];
    double uw = rd->col ? rd->col->u.w_mol : 0.0, k = rd->par.w_rise_sigmas * sqrt(2.0);
    const double *raw = rd->w_raw;
    double u_raw = 0.0;
    if (!(uw > 0)) {
        double *tmp = malloc(run->n * sizeof *tmp);
        if (!tmp)
            return; /* (a warning only) */
        u_raw = runlog_noise_sd(raw, run->n, tmp);
        free(tmp);
    }
    size_t prev = SIZE_MAX;
    for (size_t a = 0; a < run->n; a++) {
        size_t i = run->first + a;
        double w = log->w_mol[i], r = log->r[i];
        if (isnan(w))
            continue;
        if (prev != SIZE_MAX && isfinite(r) && r > 0 && w > log->w_mol[run->first + prev]) {
            double rise = raw[a] - raw[prev];
            int big = uw > 0 ? w - log->w_mol[run->first + prev] > k * uw : rise > k * u_raw;
            if (big && u_raw > 0)
                reader_finding(rd, STAGECAL_FINDING_WARNING, (long)log->line[i], hw,
                               "column '%s': holdup rose from %g to %g while distillate was "
                               "drawn (expected W to fall during production; the load-cell "
                               "noise of the run, estimated from W, is %.3g)",
                               hw, raw[prev], raw[a], u_raw);
            else if (big)
                reader_finding(rd, STAGECAL_FINDING_WARNING, (long)log->line[i], hw,
                               "column '%s': holdup rose from %g to %g while distillate was "
                               "drawn (expected W to fall during production)",
                               hw, raw[prev], raw[a]);
        }
        prev = a;
    }
}
