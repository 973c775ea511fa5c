/*
 * stagecal/chart.h — control charts that hold their false-alarm rate when the baseline
 * and the scale of the errors are estimated: self-starting EWMA and CUSUM charts on
 * Quesenberry's Q statistics.
 *
 * Method (docs/hetp-trend.md §6). Points x_1, x_2, … with stated standard errors s_i,
 * in control x_i = μ + e_i, e_i ~ N(0, φ·s_i²), μ and φ unknown (φ = 1 when the stated
 * errors are right). For point n ≥ 3 the weighted mean x̄ and the scale φ̂ of the
 * points before it (n − 2 degrees of freedom) give the studentised deviation
 *     T_n = (x_n − x̄_(n−1)) / sqrt(φ̂_(n−1)·(s_n² + 1/Σ_(j<n) w_j)),   w_j = 1/s_j²,
 * which is exactly Student t with n − 2 dof in control; its normal score
 *     Q_n = Φ⁻¹(F_t(T_n; n − 2))
 * is exactly N(0, 1), and the Q_n are independent (Quesenberry 1991, J. Quality
 * Technology 23, 213–224; the self-starting CUSUM of Hawkins 1987, Applied Statistics
 * 36, 10–19; the recursive residuals of Brown, Durbin & Evans 1975, JRSS B 37, 149–192,
 * for the weighted form). So the EWMA and CUSUM of the Q_n have the in-control run
 * lengths of their known-parameter designs, whatever μ and φ are.
 *
 * Designs: EWMA λ = 0.2, L = 2.962 (in-control ARL 500, Lucas & Saccucci 1990); CUSUM
 * k = 0.5, h = 5.0 (two-sided in-control ARL ≈ 465). ARLs by Brook & Evans (1972)
 * Markov chains (trend.h for the EWMA, stagecal_chart_cusum_arl here).
 *
 * The price of self-starting: a shift is slowly absorbed into the running mean, so a
 * shift that has gone on for many points is detected later than with known parameters;
 * the study (tests/tool_chart.c) gives the ARLs at 1σ and 2σ shifts.
 */
#ifndef STAGECAL_CHART_H
#define STAGECAL_CHART_H

#include <stddef.h>

#include "stagecal/error.h"
#include "stagecal/trend.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct {
    double lambda, L; /* EWMA weight in (0, 1] and limit width (asymptotic limits) */
    double k, h;      /* CUSUM reference value and decision interval, in σ of Q */
} stagecal_chart_params;

/* λ = 0.2, L = 2.962, k = 0.5, h = 5. */
stagecal_chart_params stagecal_chart_default_params(void);

typedef struct {
    int started;     /* 0 for the first two points (they only start the estimates) */
    double t_stat;   /* T_n (NAN during start-up) */
    double dof;      /* n − 2 */
    double q;        /* Q_n, the normal score */
    double ewma;     /* EWMA of the Q (0 during start-up) */
    double cusum_hi; /* upper CUSUM (gains) */
    double cusum_lo; /* lower CUSUM (losses), ≥ 0 */
    int ewma_alarm;  /* −1 loss (below the lower limit), +1 gain, 0 none */
    int cusum_alarm; /* −1 loss (cusum_lo > h), +1 gain, 0 none */
} stagecal_chart_point;

/* Runs both charts over n points in time order; out holds n entries. *n_alarms (may be
 * NULL) counts points where either chart alarms. The charts keep running after an
 * alarm (no reset). EINVAL for bad parameters, se ≤ 0 or non-finite values. */
int stagecal_chart_selfstart(const stagecal_trend_point *pts, size_t n,
                             const stagecal_chart_params *par, stagecal_chart_point *out,
                             size_t *n_alarms, stagecal_error *err);

/* The two-sided CUSUM's average run length for a mean shift of `shift` σ: the one-sided
 * ARLs by the Brook & Evans (1972) chain with m_states states (odd, 11..2001), combined
 * as 1/ARL = 1/ARL⁺ + 1/ARL⁻ (Lucas & Crosier 1982, Technometrics 24, 199–205).
 * EINVAL for bad arguments; ENOMEM; EINTERNAL when the solve fails. */
int stagecal_chart_cusum_arl(double k, double h, double shift, size_t m_states, double *arl,
                             stagecal_error *err);

#ifdef __cplusplus
}
#endif
#endif
