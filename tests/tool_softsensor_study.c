/*
 * tool_softsensor_study.c — compositions from temperatures (the soft sensor, softsensor.h):
 * do calibrations of logs that carry temperatures every minute and two lab samples per batch
 * give 95 % intervals that cover the true stage count, how wide are they against the best any
 * soft sensor can do and against a full analyser log, and does the consistency check find a
 * 1 K sensor offset?
 *
 * Usage: tool_softsensor_study REPLICATIONS SEED [--check | --precise-analyser]
 *
 * Simulator (written for this study; the equilibrium is independent of src/vle*.c): benzene–
 * toluene, Raoult's law with the NIST WebBook Antoine sets (after Williamham, Taylor, Pignocco
 * & Rossini 1945; tests/synth_runlog.h), whole equilibrium stages stepped by its own dew-point
 * solver; a constant true count of 6 stages (the pot included), total condenser, constant
 * molar overflow, no column holdup, pot at the top pressure. Each data set is 4 batches, each
 * at a top pressure drawn uniformly from 99–104 kPa (logged in `P`), 50 rows a minute at each
 * of R = 1.2, 1.5, 2, 3 (xD 0.74–0.93); the pot follows the Rayleigh balance from 300 mol at
 * xB = 0.30 (Rayleigh 1902, one Euler step a minute). The true compositions give the true
 * temperatures: T_pot = T_bubble(xB, P), T_top = T_dew(xD, P) = T_bubble(x*(xD), P); the
 * sensors add white Gaussian noise of 0.1 K. Two lab samples per batch, at a random row of
 * each half, read both compositions with white noise u(xD) = 0.002, u(xB) = 0.003 (the
 * column file's uncertainties). Each data set is calibrated (form "constant", the model
 * file's fit, stagecal_calibrate_data) three ways from the same truth:
 *   soft      the log as a plant has it: T_top, T_pot every row, xD and xB only in the lab
 *             rows; the reader infers the rest (uncertainty.t_top = t_pot = 0.1 K);
 *   ideal     the same noisy temperatures converted to compositions by the TRUE model (the
 *             study's own Raoult inversion) in every row: the best any soft sensor can do;
 *   analyser  a full analyser log: xD, xB every row with the lab noise.
 * It prints per way the fits, the coverage of the 95 % interval of the constant with its
 * Wilson interval, the mean and median full width, and the median z = (estimate − 6)/se;
 * then the width ratios soft/ideal and soft/analyser (median over data sets of the per-set
 * ratio). Sensor check: every data set is read again with a +1 K offset on the pot sensor
 * (even data sets) or the top sensor (odd ones) in every batch; the fraction of batches whose
 * consistency check flags that sensor, and the fraction flagged without an offset (the false
 * alarms of the soft way).
 *
 * --precise-analyser: the full analyser log (the third way only) reads with a quarter of the
 * lab noise, u(xD) = 0.0005, u(xB) = 0.00075, and the column file states those (the lab
 * samples of the soft way keep theirs): how the soft sensor compares with a better analyser.
 *
 * --check (the reduced study ctest runs): exit 1 unless every data set calibrates the soft
 * way, the soft coverage is at least 0.85, the median width ratio soft/ideal is at most 1.5,
 * and at least 90 % of the offset batches are flagged. Exit 1 also on bad arguments or a
 * library failure.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "stagecal/calibrate.h"
#include "stagecal/column.h"
#include "synth_runlog.h"

#define TRUE_N 6
#define RUNS 4
#define ROWS_PER_SET 50
#define NSET 4
#define ROWS (NSET * ROWS_PER_SET)
#define U_T 0.1
#define U_XD 0.002
#define U_XB 0.003

static const double rset[NSET] = {1.2, 1.5, 2.0, 3.0};
static double an_scale =
    1; /* the full analyser's noise relative to the lab's (--precise-analyser) */

static double law(void *ctx, double r)
{
    (void)ctx, (void)r;
    return TRUE_N;
}

enum { WAY_SOFT, WAY_IDEAL, WAY_ANALYSER, NWAYS };
static const char *const way_name[NWAYS] = {"soft", "ideal", "analyser"};

struct way {
    long fits, hits;
    double *z, *width, sum_est;
};

/* One batch's truth, row by row. */
struct truth {
    double p, t_s[ROWS], w[ROWS], xd[ROWS], xb[ROWS], r[ROWS];
};

static double tbub(double p, double x)
{
    return srl_raoult_tbubble(&srl_benzene, &srl_toluene, p, x, NULL);
}

static double tdew(double p, double y)
{
    return tbub(p, srl_raoult_x(&srl_benzene, &srl_toluene, p, y));
}

/* The true model's inverse: the liquid whose bubble point at p is t (bisection on the
 * bubble point, which falls with x), clamped to [0, 1]. */
static double x_of_t(double p, double t)
{
    double lo = 0, hi = 1;
    if (t >= tbub(p, 0))
        return 0;
    if (t <= tbub(p, 1))
        return 1;
    for (int it = 0; it < 60; it++) {
        double mid = 0.5 * (lo + hi);
        if (tbub(p, mid) > t)
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi);
}

/* The vapour whose dew point at p is t: y = x·Psat_light(t)/P of the liquid boiling at t. */
static double y_of_t(double p, double t)
{
    double x = x_of_t(p, t);
    return fmin(1.0, x * srl_psat_pa(&srl_benzene, tbub(p, x)) / p);
}

static void simulate(gsl_rng *rng, struct truth *b)
{
    struct srl_spec sp = {srl_bt_pot, NULL, law, 1,     rset, NSET,  ROWS_PER_SET, 60.0,
                          0,          0,    0,   300.0, 0.30, 0.002, NULL};
    b->p = 99000 + 5000 * gsl_rng_uniform(rng);
    double w = sp.w0_mol, xb = sp.xb0, t = 0;
    for (size_t j = 0, i = 0; j < NSET; j++) {
        for (size_t k = 0; k < ROWS_PER_SET; k++, i++) {
            double xd = srl_xd_of(&sp, rset[j], xb, TRUE_N, b->p);
            b->t_s[i] = t, b->w[i] = w, b->xd[i] = xd, b->xb[i] = xb, b->r[i] = rset[j];
            double dd = sp.d_mol_s * sp.dt_s;
            xb = (w * xb - xd * dd) / (w - dd);
            w -= dd;
            t += sp.dt_s;
        }
    }
}

/* The noisy readings of one batch: sensor temperatures (with offsets), lab rows, analyser. */
struct reads {
    double ttop[ROWS], tpot[ROWS], axd[ROWS], axb[ROWS];
    int lab[2];
    double lxd[2], lxb[2];
};

static void read_batch(gsl_rng *rng, const struct truth *b, struct reads *m)
{
    for (size_t i = 0; i < ROWS; i++) {
        m->ttop[i] = tdew(b->p, b->xd[i]) + gsl_ran_gaussian(rng, U_T);
        m->tpot[i] = tbub(b->p, b->xb[i]) + gsl_ran_gaussian(rng, U_T);
        m->axd[i] = b->xd[i] + gsl_ran_gaussian(rng, U_XD * an_scale);
        m->axb[i] = b->xb[i] + gsl_ran_gaussian(rng, U_XB * an_scale);
    }
    m->lab[0] = (int)gsl_rng_uniform_int(rng, ROWS / 2);
    m->lab[1] = ROWS / 2 + (int)gsl_rng_uniform_int(rng, ROWS / 2);
    for (int k = 0; k < 2; k++) {
        m->lxd[k] = b->xd[m->lab[k]] + gsl_ran_gaussian(rng, U_XD);
        m->lxb[k] = b->xb[m->lab[k]] + gsl_ran_gaussian(rng, U_XB);
    }
}

/* Appends batch k as CSV rows of the given way to buf (n bytes so far, cap); offsets on the
 * sensors [K]. */
static size_t write_batch(char *buf, size_t n, size_t cap, int way, size_t k, const struct truth *b,
                          const struct reads *m, double off_top, double off_pot)
{
    for (size_t i = 0; i < ROWS; i++) {
        n += (size_t)snprintf(buf + n, cap - n, "B%zu,%.1f,%.6f,", k + 1, b->t_s[i], b->w[i]);
        double tt = m->ttop[i] + off_top, tp = m->tpot[i] + off_pot;
        if (way == WAY_SOFT) {
            int lab = (int)i == m->lab[0] ? 0 : (int)i == m->lab[1] ? 1 : -1;
            if (lab >= 0)
                n += (size_t)snprintf(buf + n, cap - n, "%.6f,%.6f,", fmin(m->lxd[lab], 0.999999),
                                      fmax(m->lxb[lab], 1e-6));
            else
                n += (size_t)snprintf(buf + n, cap - n, ",,");
            n += (size_t)snprintf(buf + n, cap - n, "%.6f,%.4f,%.4f,%.4f\n", b->r[i], b->p / 1000,
                                  tt, tp);
        } else {
            double xd = way == WAY_IDEAL ? y_of_t(b->p, tt) : m->axd[i];
            double xb = way == WAY_IDEAL ? x_of_t(b->p, tp) : m->axb[i];
            n += (size_t)snprintf(buf + n, cap - n, "%.6f,%.6f,%.6f,%.4f\n", fmin(xd, 0.999999),
                                  fmax(xb, 1e-6), b->r[i], b->p / 1000);
        }
    }
    return n;
}

static char *csv_of(int way, const struct truth *b, const struct reads *m, double off_top,
                    double off_pot, size_t *len)
{
    size_t cap = 256 + (size_t)RUNS * ROWS * 160, n = 0;
    char *buf = malloc(cap);
    if (!buf)
        return NULL;
    n += (size_t)snprintf(buf, cap, "run,time[s],W[mol],xD[mol/mol],xB[mol/mol],R[-],P[kPa]%s\n",
                          way == WAY_SOFT ? ",T_top[K],T_pot[K]" : "");
    for (size_t k = 0; k < RUNS; k++)
        n = write_batch(buf, n, cap, way, k, &b[k], &m[k], off_top, off_pot);
    *len = n;
    return buf;
}

#define COLUMN_FMT                                                                                 \
    "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"synthetic-soft\","                \
    " \"description\": \"INVENTED: a synthetic column for the soft-sensor study\","                \
    " \"condenser\": \"total\", \"pressure_pa\": 101325,"                                          \
    " \"system\": {\"light\": {\"name\": \"benzene\", \"molar_mass_kg_mol\": 0.078112,"            \
    "   \"antoine\": {\"a\": 4.01814, \"b\": 1203.835, \"c\": -53.226}},"                          \
    "  \"heavy\": {\"name\": \"toluene\", \"molar_mass_kg_mol\": 0.092138,"                        \
    "   \"antoine\": {\"a\": 4.07827, \"b\": 1343.943, \"c\": -53.773}},"                          \
    "  \"latent_heat_j_mol\": 32000, \"model\": {\"kind\": \"ideal\"}},"                           \
    " \"uncertainty\": {\"xd\": %g, \"xb\": %g, \"t_top\": 0.1, \"t_pot\": 0.1}}"

/* Reads csv; *log receives it (caller frees). 0, or the line of a failure. */
static int read_log(const char *csv, size_t len, const stagecal_column *col, stagecal_runlog **log)
{
    *log = stagecal_runlog_alloc();
    stagecal_findings *f = getenv("SOFT_STUDY_VERBOSE") ? stagecal_findings_alloc(100) : NULL;
    if (!*log || stagecal_runlog_read_buffer(*log, csv, len, "synthetic.csv", col, NULL, f, NULL))
        return __LINE__;
    for (size_t k = 0; f && k < f->n; k++)
        fprintf(stderr, "  %s\n", f->items[k].text);
    stagecal_findings_free(f);
    return 0;
}

/* Calibrates csv; adds the outcome to t; *width the interval's full width (NaN: no fit). */
static int score(const char *csv, size_t len, const stagecal_column *col, struct way *t,
                 double *width)
{
    stagecal_runlog *log;
    *width = NAN;
    if (read_log(csv, len, col, &log))
        return __LINE__;
    stagecal_calibrate_params par = stagecal_calibrate_default_params();
    par.form = "constant";
    par.evidence.holdup = STAGECAL_HOLDUP_COMP_NONE; /* no holdup simulated */
    stagecal_calibration cal;
    stagecal_error err;
    if (stagecal_calibrate_data(col, NULL, log, &par, &cal, &err) == STAGECAL_OK) {
        const stagecal_regress_result *res = stagecal_calibration_fit(&cal);
        double est = res->theta[0];
        t->z[t->fits] = (est - TRUE_N) / res->se[0];
        t->width[t->fits++] = *width = res->ci_high[0] - res->ci_low[0];
        t->hits += res->ci_low[0] <= TRUE_N && TRUE_N <= res->ci_high[0];
        t->sum_est += est;
    } else if (getenv("SOFT_STUDY_VERBOSE")) {
        fprintf(stderr, "  not fitted: %s\n", err.text);
    }
    stagecal_calibration_free(&cal);
    stagecal_runlog_free(log);
    return 0;
}

struct tally {
    long offset_batches, offset_flagged, clean_checks, clean_flagged;
    double *ratio_ideal, *ratio_analyser;
    long nratio_i, nratio_a;
};

static int one(long rep, gsl_rng *rng, const stagecal_column *col, const stagecal_column *col_an,
               struct way *w, struct tally *ty)
{
    struct truth b[RUNS];
    struct reads m[RUNS];
    for (int k = 0; k < RUNS; k++) {
        simulate(rng, &b[k]);
        read_batch(rng, &b[k], &m[k]);
    }
    double width[NWAYS];
    int line = 0;
    for (int way = 0; way < NWAYS && !line; way++) {
        size_t len;
        char *csv = csv_of(way, b, m, 0, 0, &len);
        line = csv ? score(csv, len, way == WAY_ANALYSER ? col_an : col, &w[way], &width[way])
                   : __LINE__;
        if (way == WAY_SOFT && !line) { /* false alarms of the check */
            stagecal_runlog *log;
            line = read_log(csv, len, col, &log);
            if (!line) {
                ty->clean_checks += (long)log->soft.checks;
                ty->clean_flagged += (long)log->soft.inconsistent;
            }
            stagecal_runlog_free(log);
        }
        free(csv);
    }
    if (line)
        return line;
    if (isfinite(width[WAY_SOFT]) && isfinite(width[WAY_IDEAL]))
        ty->ratio_ideal[ty->nratio_i++] = width[WAY_SOFT] / width[WAY_IDEAL];
    if (isfinite(width[WAY_SOFT]) && isfinite(width[WAY_ANALYSER]))
        ty->ratio_analyser[ty->nratio_a++] = width[WAY_SOFT] / width[WAY_ANALYSER];
    /* a +1 K offset on one sensor in every batch */
    int pot = rep % 2 == 0;
    size_t len;
    char *csv = csv_of(WAY_SOFT, b, m, pot ? 0 : 1.0, pot ? 1.0 : 0, &len);
    stagecal_runlog *log;
    if (!csv || read_log(csv, len, col, &log))
        line = __LINE__;
    if (!line) {
        ty->offset_batches += RUNS;
        /* the offset sensor's flags only (the other one's are false alarms) */
        ty->offset_flagged += (long)(pot ? log->soft.inconsistent - log->soft.inconsistent_top
                                         : log->soft.inconsistent_top);
        stagecal_runlog_free(log);
    }
    free(csv);
    return line;
}

static double median(double *v, long n)
{
    if (n <= 0)
        return NAN;
    gsl_sort(v, 1, (size_t)n);
    return gsl_stats_median_from_sorted_data(v, 1, (size_t)n);
}

int main(int argc, char **argv)
{
    char *end1 = NULL, *end2 = NULL;
    int check = argc == 4 && strcmp(argv[3], "--check") == 0;
    int precise = argc == 4 && strcmp(argv[3], "--precise-analyser") == 0;
    an_scale = precise ? 0.25 : 1.0;
    long reps = argc >= 3 ? strtol(argv[1], &end1, 10) : 0;
    unsigned long seed = argc >= 3 ? strtoul(argv[2], &end2, 10) : 0;
    if (argc < 3 || argc > 4 || (argc == 4 && !check && !precise) || *end1 || *end2 || reps < 10) {
        fprintf(stderr, "usage: tool_softsensor_study REPLICATIONS(>=10) SEED [--check | "
                        "--precise-analyser]\n");
        return 1;
    }
    gsl_set_error_handler_off();
    stagecal_column col, col_an;
    char text[2048];
    int len = snprintf(text, sizeof text, COLUMN_FMT, U_XD, U_XB);
    if (stagecal_column_parse(text, (size_t)len, "synthetic.json", &col, NULL))
        return 1;
    len = snprintf(text, sizeof text, COLUMN_FMT, U_XD * an_scale, U_XB * an_scale);
    if (stagecal_column_parse(text, (size_t)len, "synthetic.json", &col_an, NULL))
        return 1;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    struct way w[NWAYS];
    struct tally ty;
    memset(w, 0, sizeof w);
    memset(&ty, 0, sizeof ty);
    ty.ratio_ideal = malloc((size_t)reps * sizeof(double));
    ty.ratio_analyser = malloc((size_t)reps * sizeof(double));
    for (int k = 0; k < NWAYS; k++) {
        w[k].z = malloc((size_t)reps * sizeof(double));
        w[k].width = malloc((size_t)reps * sizeof(double));
        if (!w[k].z || !w[k].width)
            return 1;
    }
    if (!rng || !ty.ratio_ideal || !ty.ratio_analyser)
        return 1;
    gsl_rng_set(rng, seed);
    int rc = 0;
    for (long rep = 0; rep < reps && rc == 0; rep++) {
        int line = one(rep, rng, &col, &col_an, w, &ty);
        if (line) {
            fprintf(stderr, "tool_softsensor_study: replication %ld failed at line %d\n", rep,
                    line);
            rc = 1;
        }
        if (isatty(2) && rep % 5 == 4)
            fprintf(stderr, "\r%ld of %ld", rep + 1, reps);
    }
    if (isatty(2))
        fprintf(stderr, "\n");
    printf("benzene-toluene at 99-104 kPa, true count %d, %ld data sets of %d batches "
           "(%d rows a minute), 0.1 K sensors, 2 lab samples a batch, full analyser u(xD) %g, "
           "u(xB) %g, seed %lu\n",
           TRUE_N, reps, RUNS, ROWS, U_XD * an_scale, U_XB * an_scale, seed);
    printf("  %-9s %6s %9s  %-17s %9s %9s %9s %8s\n", "way", "fits", "coverage", "Wilson 95 %",
           "mean est", "mean wid", "med wid", "med z");
    double zq = gsl_cdf_ugaussian_Pinv(0.975), cov[NWAYS];
    for (int k = 0; k < NWAYS && rc == 0; k++) {
        long n = w[k].fits;
        cov[k] = n ? (double)w[k].hits / (double)n : 0;
        double mw = n ? gsl_stats_mean(w[k].width, 1, (size_t)n) : NAN;
        double medw = median(w[k].width, n), medz = median(w[k].z, n);
        /* Wilson score interval (Wilson 1927, JASA 22:209; citation from memory) */
        double z2n = n ? zq * zq / (double)n : 0, c = (cov[k] + z2n / 2) / (1 + z2n);
        double h =
            n ? zq / (1 + z2n) * sqrt(cov[k] * (1 - cov[k]) / (double)n + z2n / (4.0 * (double)n))
              : 0;
        printf("  %-9s %6ld %9.4f  [%.4f, %.4f] %9.4f %9.4f %9.4f %+8.3f\n", way_name[k], n, cov[k],
               c - h, c + h, n ? w[k].sum_est / (double)n : NAN, mw, medw, medz);
    }
    double ri = median(ty.ratio_ideal, ty.nratio_i), ra = median(ty.ratio_analyser, ty.nratio_a);
    double det = ty.offset_batches ? (double)ty.offset_flagged / (double)ty.offset_batches : 0;
    double fa = ty.clean_checks ? (double)ty.clean_flagged / (double)ty.clean_checks : 0;
    printf("width soft/ideal: median ratio %.3f over %ld data sets\n", ri, ty.nratio_i);
    printf("width soft/analyser: median ratio %.3f over %ld data sets\n", ra, ty.nratio_a);
    printf("1 K sensor offset: flagged in %ld of %ld batches (%.4f); no offset: %ld of %ld "
           "sensor checks flagged (%.4f)\n",
           ty.offset_flagged, ty.offset_batches, det, ty.clean_flagged, ty.clean_checks, fa);
    if (rc == 0 && check) {
        int ok = w[WAY_SOFT].fits == reps && cov[WAY_SOFT] >= 0.85 && ri <= 1.5 && det >= 0.90;
        printf("check: %s\n", ok ? "ok" : "FAILED");
        rc = !ok;
    }
    for (int k = 0; k < NWAYS; k++)
        free(w[k].z), free(w[k].width);
    free(ty.ratio_ideal);
    free(ty.ratio_analyser);
    stagecal_column_free(&col);
    stagecal_column_free(&col_an);
    gsl_rng_free(rng);
    return rc;
}
