/*
 * synth_history.h — a simulator of a column's window evidence over months, for the
 * history-fit tests and studies (tests/test_history.c, tests/tool_history.c).
 *
 * What it simulates: one packed column whose true stages (the pot included) follow
 *     N(R, t) = a·(1 − exp(−b·R))·(1 − k·τ(t)),
 * τ the months since the last repack (the first segment starts at month 0 with a fresh
 * bed); the bed is repacked in the middle of the history (back to a fresh bed). The
 * history lasts `months` months; each month holds runs_lo..runs_hi production runs at
 * random days; each run gives 1..max_windows quasi-steady windows at distinct reflux
 * ratios drawn from {1.5, 2, 2.5, 3, 4}, a few hours apart. A window's stage count is
 * the truth plus a run effect (normal, sd run_sd, shared by the run's windows: feed lot,
 * charge, crew) plus the window's own error (normal, sd se_i with se_i uniform in
 * [se_lo, se_hi]); the stated standard error is se_i·se_misstate (1 = honest).
 * Defaults follow the invented demo column: a = 9.5, b = 0.9, k = 0.012 a month.
 * Everything is seeded through the caller's GSL generator.
 */
#ifndef STAGECAL_SYNTH_HISTORY_H
#define STAGECAL_SYNTH_HISTORY_H

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stagecal/history.h"

#define SYNTH_T0 1735689600.0 /* 2025-01-01T00:00:00Z */

typedef struct {
    double a, b, k;       /* true law */
    int months;           /* length of the history */
    int runs_lo, runs_hi; /* runs a month */
    int max_windows;      /* windows a run, 1..max */
    double run_sd;        /* run effect sd [stages] */
    double se_lo, se_hi;  /* window errors [stages] */
    double se_misstate;   /* stated se / true se */
} synth_history_cfg;

static inline synth_history_cfg synth_history_default(void)
{
    synth_history_cfg c = {9.5, 0.9, 0.012, 18, 2, 4, 3, 0.15, 0.1, 0.4, 1.0};
    return c;
}

typedef struct {
    double repack_s; /* time of the repack */
    double last_s;   /* time of the last window */
} synth_history_truth;

/* True stages at R, time t (repack at repack_s). */
static inline double synth_history_stages(const synth_history_cfg *c, double r, double t,
                                          double repack_s)
{
    double origin = t >= repack_s ? repack_s : SYNTH_T0;
    double tau = (t - origin) / STAGECAL_TREND_MONTH_S;
    return c->a * (1 - exp(-c->b * r)) * (1 - c->k * tau);
}

/* Fills pts (capacity cap) and returns the number of windows. */
static inline size_t synth_history_make(gsl_rng *rng, const synth_history_cfg *c,
                                        stagecal_history_point *pts, size_t cap,
                                        synth_history_truth *truth)
{
    static const double rs[] = {1.5, 2, 2.5, 3, 4};
    const double M = STAGECAL_TREND_MONTH_S;
    truth->repack_s = SYNTH_T0 + floor(c->months / 2.0 * M / 86400.0) * 86400.0;
    truth->last_s = SYNTH_T0;
    size_t n = 0;
    long run = 0;
    for (int mo = 0; mo < c->months; mo++) {
        int nr = c->runs_lo +
                 (int)gsl_rng_uniform_int(rng, (unsigned long)(c->runs_hi - c->runs_lo + 1));
        for (int q = 0; q < nr; q++) {
            double t = SYNTH_T0 + (mo + gsl_rng_uniform(rng)) * M;
            double u = gsl_ran_gaussian(rng, c->run_sd);
            int nw = 1 + (int)gsl_rng_uniform_int(rng, (unsigned long)c->max_windows);
            int used[5] = {0, 0, 0, 0, 0};
            run++;
            for (int w = 0; w < nw && n < cap; w++) {
                size_t j;
                do
                    j = gsl_rng_uniform_int(rng, 5);
                while (used[j]);
                used[j] = 1;
                double tw = t + 3600.0 * (2 + 3 * w);
                double se = c->se_lo + (c->se_hi - c->se_lo) * gsl_rng_uniform(rng);
                stagecal_history_point *p = &pts[n++];
                p->t_s = tw;
                p->run = run;
                p->r = rs[j];
                p->f_load = NAN;
                p->stages = synth_history_stages(c, rs[j], tw, truth->repack_s) + u +
                            gsl_ran_gaussian(rng, se);
                p->se = se * c->se_misstate;
                if (tw > truth->last_s)
                    truth->last_s = tw;
            }
        }
    }
    return n;
}

/* The repack as an events-file entry of column "sim". */
static inline stagecal_trend_event synth_history_repack(const synth_history_truth *tr)
{
    stagecal_trend_event ev;
    memset(&ev, 0, sizeof ev);
    ev.t_s = tr->repack_s;
    ev.kind = STAGECAL_EVENT_REPACK;
    snprintf(ev.column_id, sizeof ev.column_id, "sim");
    return ev;
}

#endif
