/*
 * synth_runlog.h — a run-log simulator for the tests: whole production runs of a batch
 * column written as the CSV a plant historian gives (run, time, W, xD, xB, R, P), read by the
 * library's own reader. Used by tests/test_runlog_setpoint.c, the "measured R" regime of
 * tests/tool_coverage.c and tests/tool_vacuum_coverage.c.
 *
 * What it simulates: a quasi-steady batch column (no column holdup) with a total condenser.
 * At every moment the distillate is what the true stage count N(R) reaches from the pot:
 * xD solves xB = pot(R, xD, N) by bisection, where pot() is an oracle written for the tests
 * (Smoker's closed form for constant α, tests/oracle_smoker.h, or the whole-stage Raoult
 * stepper below at the run's top pressure). The pot follows the Rayleigh balance
 * dW = −D dt, d(W·xB) = −xD·D dt (Rayleigh 1902, "On the distillation of binary mixtures", Phil.
 * Mag. 4:521-537, citation from memory; one Euler step per sample), so the log closes. The column
 * sees its reflux set point exactly; the logged R is the set point plus white Gaussian reading
 * noise of sd r_noise (a flow-ratio measurement), or the set point itself (r_noise = 0). The
 * analysers add white Gaussian noise u_xd, u_xb.
 *
 * Nothing here asserts; the callers check.
 */
#ifndef STAGECAL_SYNTH_RUNLOG_H
#define STAGECAL_SYNTH_RUNLOG_H

#include <gsl/gsl_math.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "oracle_smoker.h"

/* ---- Raoult's law with Antoine vapour pressures, independent of src/vle*.c ---------- */

/* Antoine set log10(P/bar) = a − b/(T/K + c) (NIST Chemistry WebBook form). */
struct srl_antoine {
    double a, b, c;
};

static inline double srl_psat_pa(const struct srl_antoine *s, double t_k)
{
    return 1e5 * pow(10.0, s->a - s->b / (t_k + s->c));
}

/* Liquid in equilibrium with vapour y at pressure p: the dew temperature T solves
 * f(T) = y·P/Psat_light + (1 − y)·P/Psat_heavy − 1 = 0 (Newton's method from 350 K, to
 * 1e-10 K), then x = y·P/Psat_light(T). */
static inline double srl_raoult_x(const struct srl_antoine *l, const struct srl_antoine *h,
                                  double p, double y)
{
    double t = 350;
    for (int it = 0; it < 50; it++) {
        double il = p / srl_psat_pa(l, t), ih = p / srl_psat_pa(h, t);
        double f = y * il + (1 - y) * ih - 1;
        /* d(P/Psat)/dT = −(P/Psat)·ln 10·b/(T + c)² */
        double df = -M_LN10 * (y * il * l->b / ((t + l->c) * (t + l->c)) +
                               (1 - y) * ih * h->b / ((t + h->c) * (t + h->c)));
        double step = f / df;
        t -= fmax(-40.0, fmin(40.0, step));
        if (fabs(step) < 1e-10)
            break;
    }
    return y * p / srl_psat_pa(l, t);
}

/* Bubble point [K] of liquid x at pressure p: Newton on x·Psat_l(T) + (1 − x)·Psat_h(T) = P
 * from 360 K to a step of 1e-12 K; *dtdx (may be NULL) the slope by implicit
 * differentiation, −(Psat_l − Psat_h)/(x·Psat_l' + (1 − x)·Psat_h'). */
static inline double srl_raoult_tbubble(const struct srl_antoine *l, const struct srl_antoine *h,
                                        double p, double x, double *dtdx)
{
    double t = 360;
    for (int it = 0; it < 100; it++) {
        double pl = srl_psat_pa(l, t), ph = srl_psat_pa(h, t);
        double dl = pl * M_LN10 * l->b / ((t + l->c) * (t + l->c));
        double dh = ph * M_LN10 * h->b / ((t + h->c) * (t + h->c));
        double df = x * dl + (1 - x) * dh, step = (x * pl + (1 - x) * ph - p) / df;
        t -= fmax(-40.0, fmin(40.0, step));
        if (dtdx)
            *dtdx = -(pl - ph) / df;
        if (fabs(step) < 1e-12)
            break;
    }
    return t;
}

/* Pot composition after n whole equilibrium stages (pot included) below a total condenser
 * from xD at reflux r: y1 = xD, x_k from the dew point, y_{k+1} = (r·x_k + xD)/(r + 1)
 * (McCabe–Thiele, constant molar overflow), xB = x_n. */
static inline double srl_raoult_pot(const struct srl_antoine *l, const struct srl_antoine *h,
                                    double p, double r, double xd, int n)
{
    double y = xd, x = xd;
    for (int k = 1; k <= n; k++) {
        x = srl_raoult_x(l, h, p, y);
        y = isinf(r) ? x : (r * x + xd) / (r + 1);
    }
    return x;
}

/* ---- the simulator ------------------------------------------------------------------ */

/* Pot composition reached from xd at reflux r with n stages at top pressure p [Pa]. */
typedef double (*srl_pot_fn)(void *ctx, double r, double xd, double n, double p);

struct srl_spec {
    srl_pot_fn pot;
    void *ctx;
    double (*law)(void *ctx, double r); /* true stage count (pot included) at R */
    size_t nruns;
    const double *rset; /* nset set points, in the order of each run */
    size_t nset;
    size_t rows_per_set;
    double dt_s;    /* sample spacing */
    double r_noise; /* sd of the R reading about its set point (0: R logged as set point) */
    double u_xd;    /* analyser noise sd */
    double u_xb;
    double w0_mol;      /* pot charge */
    double xb0;         /* its composition */
    double d_mol_s;     /* distillate rate */
    const double *p_pa; /* nruns top pressures, or NULL (no P column; pot() gets NAN) */
};

/* xD with pot(r, xD, n) = xb (bisection: pot() rises with xD). */
static inline double srl_xd_of(const struct srl_spec *s, double r, double xb, double n, double p)
{
    double lo = xb, hi = 1 - 1e-15;
    for (int it = 0; it < 60; it++) {
        double mid = 0.5 * (lo + hi);
        if (s->pot(s->ctx, r, mid, n, p) < xb)
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi);
}

/* Diagnostics of tests/tool_coverage.c: when non-NULL, the true xD and xB of every row (room
 * for all rows of the log). */
static double *srl_truth_xd, *srl_truth_xb;

/* The actual errors of the mean xD and xB of rows first..last against the kept truth (the
 * logged columns xd, xb; NaN cells skipped). */
static inline void srl_window_mean_error(const double *xd, const double *xb, size_t first,
                                         size_t last, double *ed, double *eb)
{
    double sd = 0, sb = 0;
    size_t nd = 0, nb = 0;
    for (size_t i = first; i <= last; i++) {
        if (isfinite(xd[i]))
            sd += xd[i] - srl_truth_xd[i], nd++;
        if (isfinite(xb[i]))
            sb += xb[i] - srl_truth_xb[i], nb++;
    }
    *ed = sd / (double)nd, *eb = sb / (double)nb;
}

/* The whole log as CSV text (malloc'd; NULL on allocation failure); *len its length. */
static inline char *srl_csv(const struct srl_spec *s, gsl_rng *rng, size_t *len)
{
    size_t rows = s->nruns * s->nset * s->rows_per_set, cap = 128 + rows * 128, n = 0;
    char *buf = malloc(cap);
    if (!buf)
        return NULL;
    n += (size_t)snprintf(buf, cap, "run,time[s],W[mol],xD[mol/mol],xB[mol/mol],R[-]%s\n",
                          s->p_pa ? ",P[kPa]" : "");
    for (size_t k = 0; k < s->nruns; k++) {
        double w = s->w0_mol, xb = s->xb0, t = 0, p = s->p_pa ? s->p_pa[k] : NAN;
        for (size_t j = 0; j < s->nset; j++) {
            double r = s->rset[j], nst = s->law(s->ctx, r);
            for (size_t i = 0; i < s->rows_per_set; i++) {
                double xd = srl_xd_of(s, r, xb, nst, p);
                if (srl_truth_xd) {
                    size_t row = (k * s->nset + j) * s->rows_per_set + i;
                    srl_truth_xd[row] = xd, srl_truth_xb[row] = xb;
                }
                double rl = s->r_noise > 0 ? r + gsl_ran_gaussian(rng, s->r_noise) : r;
                double xdl = xd + gsl_ran_gaussian(rng, s->u_xd);
                double xbl = xb + gsl_ran_gaussian(rng, s->u_xb);
                int m = snprintf(buf + n, cap - n, "S%zu,%.1f,%.6f,%.6f,%.6f,%.6f", k + 1, t, w,
                                 fmin(xdl, 0.999999), fmax(xbl, 1e-6), rl);
                n += (size_t)m;
                if (s->p_pa)
                    n += (size_t)snprintf(buf + n, cap - n, ",%.4f", p / 1000);
                buf[n++] = '\n';
                /* Rayleigh balance over the next interval (distillate at the current xD) */
                double dd = s->d_mol_s * s->dt_s;
                xb = (w * xb - xd * dd) / (w - dd);
                w -= dd;
                t += s->dt_s;
            }
        }
    }
    buf[n] = '\0';
    *len = n;
    return buf;
}

/* Two callbacks the run-log tests share: the pot composition of a constant-α = 2 column by
 * Smoker's closed form (tests/oracle_smoker.h), and a saturating law N(R) = 8 (1 − e^(−0.45 R)). */
static inline double srl_smoker_pot_a2(void *ctx, double r, double xd, double n, double p)
{
    (void)ctx, (void)p;
    return oracle_smoker_xb(2.0, r, xd, n);
}

static inline double srl_sat_law(void *ctx, double r)
{
    (void)ctx;
    return 8.0 * (1 - exp(-0.45 * r));
}

/* The measured-reflux log of the set-point tests: nruns runs of the constant-α = 2 column
 * with the saturating law at five set points (1.5, 2.5, 4, 6, 10), 78 rows each a minute
 * apart, the R reading scattering by 0.02 about its set point, analysers 0.0015 (xD) and
 * 0.0025 (xB), a 200 mol charge at xB 0.35 drawn at 0.0015 mol/s; no pressure column.
 * The CSV as srl_csv gives it, from an MT19937 generator seeded with seed. */
static inline char *srl_measured_r_csv(size_t nruns, unsigned long seed, size_t *len)
{
    static const double rset[] = {1.5, 2.5, 4.0, 6.0, 10.0};
    const struct srl_spec s = {srl_smoker_pot_a2,
                               NULL,
                               srl_sat_law,
                               nruns,
                               rset,
                               5,
                               78,
                               60.0,
                               0.02,
                               0.0015,
                               0.0025,
                               200.0,
                               0.35,
                               0.0015,
                               NULL};
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    if (!rng)
        return NULL;
    gsl_rng_set(rng, seed);
    char *csv = srl_csv(&s, rng, len);
    gsl_rng_free(rng);
    return csv;
}

/* Benzene–toluene for the vacuum tests: NIST Chemistry WebBook Antoine sets, the same numbers
 * as datasets/columns/demo_benzene_toluene.json (after Williamham, Taylor, Pignocco & Rossini
 * 1945); a column file for them with its pressure as a printf %.3f (Pa); and the pot of an
 * n-stage Raoult column at top pressure p. */
static const struct srl_antoine srl_benzene = {4.01814, 1203.835, -53.226};
static const struct srl_antoine srl_toluene = {4.07827, 1343.943, -53.773};
#define SRL_BT_COLUMN_FMT                                                                          \
    "{\"format\": \"stagecal-column\", \"version\": 1, \"id\": \"synthetic-vacuum\","              \
    " \"description\": \"INVENTED: a synthetic vacuum column for the tests\","                     \
    " \"condenser\": \"total\", \"pressure_pa\": %.3f,"                                            \
    " \"system\": {\"light\": {\"name\": \"benzene\", \"molar_mass_kg_mol\": 0.078112,"            \
    "   \"antoine\": {\"a\": 4.01814, \"b\": 1203.835, \"c\": -53.226}},"                          \
    "  \"heavy\": {\"name\": \"toluene\", \"molar_mass_kg_mol\": 0.092138,"                        \
    "   \"antoine\": {\"a\": 4.07827, \"b\": 1343.943, \"c\": -53.773}},"                          \
    "  \"latent_heat_j_mol\": 32000, \"model\": {\"kind\": \"ideal\"}},"                           \
    " \"uncertainty\": {\"xd\": 0.002, \"xb\": 0.003}}"

static inline double srl_bt_pot(void *ctx, double r, double xd, double n, double p)
{
    (void)ctx;
    return srl_raoult_pot(&srl_benzene, &srl_toluene, p, r, xd, (int)lround(n));
}

#endif
